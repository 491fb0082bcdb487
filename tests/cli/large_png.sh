# A large PNG is packed row by row: memory follows what the resampler keeps (output width x
# picture height samples), not the picture. A 16000x10000 RGB PNG (480 MB decoded) of 64 x 40
# constant tiles, 250 pixels square, is packed to 64x40 with the box filter: each output pixel
# is the mean of exactly one tile, so the record holds the tile colours exactly (the mean of
# equal values). pack's peak RSS stays far below the decoded size. Orientation that needs a
# transpose, and build (whose scan needs every pixel for its digests), decode whole.
. "$(dirname "$0")/lib.sh"
need_python
mkdir -p "$work/big/tiles"
"$PYTHON" - "$work/big/tiles/large.png" <<'PY'
import struct, sys, zlib
W, H, T = 16000, 10000, 250

def colour(tx, ty):
    return ((tx * 37 + ty * 11) % 256, (tx * 5 + ty * 71) % 256, (tx * ty + 13) % 256)

def chunk(kind, body):
    return (struct.pack(">I", len(body)) + kind + body +
            struct.pack(">I", zlib.crc32(kind + body) & 0xffffffff))

z = zlib.compressobj(1)
idat = []
for ty in range(H // T):
    row = b"\0" + b"".join(bytes(colour(tx, ty)) * T for tx in range(W // T))
    for _ in range(T):
        idat.append(z.compress(row))
idat.append(z.flush())
data = b"".join(idat)
with open(sys.argv[1], "wb") as f:
    f.write(b"\x89PNG\r\n\x1a\n")
    f.write(chunk(b"IHDR", struct.pack(">IIBBBBB", W, H, 8, 2, 0, 0, 0)))
    for i in range(0, len(data), 1 << 20):
        f.write(chunk(b"IDAT", data[i:i + (1 << 20)]))
    f.write(chunk(b"IEND", b""))
PY
expect_exit 0 "$KILN" scan "$work/big" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 1 --ratios 100:0 -q
peak_rss "$KILN" pack "$work/c.csv" -o "$work/out" --size 64x40 --filter box --jobs 1 -q
[ "$status" = 0 ] || fail "pack of the large PNG exited $status: $(cat "$work/stderr")"
# 480 MB decoded whole; row by row: the compressed file (a few MB), 64 x 10000 x 3 intermediate
# samples, one row, and the program.
[ "$rss_kib" -lt 98304 ] || fail "pack of a 480 MB picture peaked at $rss_kib KiB"
"$PYTHON" - "$work/out/train.kten" <<'PY'
import json, struct, sys
b = open(sys.argv[1], "rb").read()
off, length = struct.unpack_from("<QQ", b, 24 + 0)  # metadata (docs/format.md)
entry = 128  # first array: images [N, H, W, C]
dims = struct.unpack_from("<4Q", b, entry + 24)
aoff, alen = struct.unpack_from("<QQ", b, entry + 56)
assert dims == (1, 40, 64, 3), dims
img = b[aoff:aoff + alen]
for ty in range(40):
    for tx in range(64):
        want = ((tx * 37 + ty * 11) % 256, (tx * 5 + ty * 71) % 256, (tx * ty + 13) % 256)
        got = tuple(img[(ty * 64 + tx) * 3:(ty * 64 + tx) * 3 + 3])
        assert got == want, (tx, ty, got, want)
print("tiles exact")
PY
echo ok
