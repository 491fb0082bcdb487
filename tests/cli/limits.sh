# Bounded cost per item (docs/cli.md, "Limits" and scan's --max-file-size): a file or archive
# member larger than the limit is a too-large row and is never read -- a 9 MB zip holding a
# 2 GB member and a sparse 3 GB file used to cost 2-3 GB of memory in scan; an output record
# larger than 256 MiB is a bad --size, refused before any work -- --size 65535x65535 used to
# reserve 64 GB for five images; pack reads no more of a file than scan recorded.
. "$(dirname "$0")/lib.sh"
demo_data "$work/data"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 5 -q

for cmd in "pack $work/c.csv" "build $work/data --seed 5"; do
    # 65535 x 65535 x 3 bytes = 12884.5 MB a record
    expect_exit 2 "$KILN" $cmd -o "$work/out" --size 65535x65535
    grep -q -- "--size 65535x65535 gives records of 65535x65535x3 u8 samples, 12884.5 MB each, more than the limit of 256 MiB a record" \
        "$work/stderr" || fail "$cmd --size 65535x65535: $(cat "$work/stderr")"
    [ ! -e "$work/out" ] || fail "$cmd made its output folder before refusing the size"
done
# The limit counts the output type: 8192 x 8192 x 4 f32 is 1 GiB, the same in u8 256 MiB.
expect_exit 2 "$KILN" pack "$work/c.csv" -o "$work/out" --size 8192 --channels 4 --dtype f32
grep -q "more than the limit of 256 MiB a record" "$work/stderr" || fail "f32: $(cat "$work/stderr")"
expect_exit 2 "$KILN" pack "$work/c.csv" -o "$work/out" --size 8193x8192 --channels 4
grep -q "more than the limit" "$work/stderr" || fail "just over: $(cat "$work/stderr")"

# pack reads no more of a file than scan recorded: a file that grew -- here into a sparse 3 GB
# file -- has changed (exit 5) and is not read into memory; something that is no longer a
# regular file (a FIFO, which would block a read) has changed too.
demo_data_copy "$work/copy"
expect_exit 0 "$KILN" scan "$work/copy" -o "$work/k.csv" -q
expect_exit 0 "$KILN" split "$work/k.csv" --seed 5 -q
grown=$(first_file "$work/copy" -name '*.png')
rm "$grown"
truncate -s 3G "$grown"
peak_rss "$KILN" pack "$work/k.csv" -o "$work/grown" --size 16 --jobs 1
[ "$status" = 5 ] || fail "pack of a grown file exited $status: $(cat "$work/stderr")"
grep -q "$(basename "$grown") changed since it was scanned (it is larger than the [0-9]* bytes recorded)" \
    "$work/stderr" || fail "grown file: $(cat "$work/stderr")"
[ "$rss_kib" -lt 262144 ] || fail "pack took $rss_kib KiB for a 3 GB file it should not read"
rm "$grown"
mkfifo "$grown"
expect_exit 5 timeout 120 "$KILN" pack "$work/k.csv" -o "$work/fifo" --size 16
grep -q "$(basename "$grown") since it was scanned: it is no longer a regular file" "$work/stderr" ||
    fail "FIFO: $(cat "$work/stderr")"

# scan: the default limit (1 GiB), a lower one given, and a bad value.
mkdir -p "$work/bombs/big"
"$PYTHON" - "$work/bombs/bomb.zip" <<'PY'
import sys, zipfile
# 2 GiB of zeros, deflated: a 9 MB zip (the sizes go in the central directory).
with zipfile.ZipFile(sys.argv[1], "w", zipfile.ZIP_DEFLATED, compresslevel=1) as z:
    with z.open("big/huge.png", "w", force_zip64=True) as f:
        block = bytes(1 << 24)
        for _ in range(128):
            f.write(block)
PY
truncate -s 3G "$work/bombs/big/sparse.png"
cp "$(first_file "$work/data/" -name '*.png')" "$work/bombs/big/small.png"
peak_rss "$KILN" scan "$work/bombs" -o "$work/bombs.csv" --jobs 2
[ "$status" = 0 ] || fail "scan of the bombs exited $status: $(cat "$work/stderr")"
grep -q "too-large: .*bomb.zip/big/huge.png: member of 2147483648 bytes exceeds the 1073741824-byte limit" \
    "$work/stdout" || fail "zip member: $(cat "$work/stdout")"
grep -q "too-large: .*big/sparse.png: file of 3221225472 bytes exceeds the 1073741824-byte limit" \
    "$work/stdout" || fail "sparse file: $(cat "$work/stdout")"
[ "$rss_kib" -lt 65536 ] || fail "scan took $rss_kib KiB for files it should not read"
grep -q '"max_file_bytes": *1073741824' "$work/bombs.json" || fail "limit not recorded"
size=$(stat -c %s "$work/bombs/big/small.png")
expect_exit 0 "$KILN" scan "$work/bombs" -o "$work/small.csv" --max-file-size "$((size - 1))"
grep -q "too-large: .*big/small.png: file of $size bytes exceeds the $((size - 1))-byte limit" \
    "$work/stdout" || fail "a lower --max-file-size: $(cat "$work/stdout")"
expect_exit 0 "$KILN" scan "$work/bombs" -o "$work/k4.csv" --max-file-size 4G -q
grep -q '"max_file_bytes": *4294967296' "$work/k4.json" || fail "4G is not 2^32 bytes"
echo ok
