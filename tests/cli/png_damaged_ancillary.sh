# A PNG whose tRNS chunk fails its CRC (found by tests/fuzz, png harness): libpng drops a
# damaged ancillary chunk with a warning (ISO/IEC 15948 leaves ignoring it to the decoder), so
# scan catalogues a grey image without alpha. pack, which skips the checksums once the file's
# SHA-256 matches, must see the same image: it used to apply the tRNS, find an alpha channel
# and stop with "PNG header changed between reads".
. "$(dirname "$0")/lib.sh"
need_python
mkdir -p "$work/src/a"
"$PYTHON" - "$work/src/a/key.png" <<'PY'
import struct, sys, zlib
def chunk(kind, data, crc=None):
    crc = zlib.crc32(kind + data) if crc is None else crc
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", crc & 0xFFFFFFFF)
raw = b"\0\0\x07" + b"\0\x07\0"  # two rows, filter 0: samples 0 7 / 7 0
png = (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", 2, 2, 8, 0, 0, 0, 0)) +
       chunk(b"tRNS", b"\0\0", crc=zlib.crc32(b"tRNS\0\0") ^ 1) +  # colour key 0, bad CRC
       chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b""))
open(sys.argv[1], "wb").write(png)
PY
expect_exit 0 "$KILN" scan "$work/src" -o "$work/c.csv"
grep -q '^[^,]*,a/key.png,,[0-9]*,[0-9a-f]*,png,2,2,1,8,8,1,1,.*,ok,' "$work/c.csv" ||
    fail "expected an ok grey row without alpha: $(cat "$work/c.csv")"
expect_exit 0 "$KILN" split "$work/c.csv" --seed 1 --ratios 100:0:0
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$work/out" --size 2x2 --channels 1
# The record holds the stored samples: with the key applied, 0 would be composited to white.
"$PYTHON" - "$work/out/train.kten" <<'PY' || fail "packed record differs from the stored samples"
import struct, sys
d = open(sys.argv[1], "rb").read()
off, length = struct.unpack_from("<QQ", d, 128 + 56)  # first array table entry (docs/format.md)
got = list(d[off:off + length])
print("record", got)
sys.exit(0 if got == [0, 7, 7, 0] else 1)
PY
echo ok
