# Bounded cost per item: an output record larger than the documented limit (256 MiB,
# docs/cli.md "Limits") is a bad --size, refused before any work -- --size 65535x65535 used to
# reserve 64 GB for five images.
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
echo ok
