# A full disk is a failure of the output, not of an input: exit status 1, and the message names
# the output file that could not be written (the record pool of build, items.csv, catalog.csv,
# manifest.json, SHA256SUMS, the replace's journal) -- never a source image. The earlier output
# the run was to replace is exactly as it was and verifies, and no temporary file stays behind.
#
# Runs on a small tmpfs, which needs mount (root, and a container that allows it; CI runs as
# root). The test re-runs itself in a private mount namespace when unshare works, so the mount
# goes with it; elsewhere it skips with the reason.
if [ -z "${KILN_DISK_FULL_NS:-}" ] && [ "$(id -u)" = 0 ] &&
    unshare -m --propagation private true 2>/dev/null; then
    KILN_DISK_FULL_NS=1 exec unshare -m --propagation private bash "$0"
fi
. "$(dirname "$0")/lib.sh"
disk="$work/disk"
mkdir "$disk"
mount -t tmpfs -o size=64m kiln-test "$disk" 2>"$work/mount.err" ||
    skip "cannot mount a tmpfs to fill (needs root and a container that allows mount): $(cat "$work/mount.err")"
trap 'umount "$disk" 2>/dev/null; rm -rf "$work"' EXIT
demo_data "$work/data"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 5 -q

# leave_free PAGES: fills the tmpfs with a filler file so that exactly PAGES pages stay free.
leave_free() {
    rm -f "$disk/filler"
    local free size
    read -r free size < <(stat -f -c '%a %S' "$disk")
    [ "$free" -ge "$1" ] || fail "the tmpfs has only $free free pages, $1 wanted"
    [ "$free" = "$1" ] || fallocate -l $(((free - $1) * size)) "$disk/filler"
    read -r free size < <(stat -f -c '%a %S' "$disk")
    [ "$free" = "$1" ] || fail "could not leave exactly $1 pages free (got $free)"
}

# pages FILE...: the pages (of the file system's block size) the files take.
pages() {
    local n=0 f s bs
    bs=$(stat -f -c %S "$disk")
    for f in "$@"; do
        s=$(stat -c %s "$f")
        n=$((n + (s + bs - 1) / bs))
    done
    echo "$n"
}

# with_old DIR: DIR becomes a copy of an earlier output (snapshotted), which a failing run must
# leave exactly as it was.
with_old() {
    rm -rf "$1"
    cp -a "$disk/old" "$1"
    snapshot "$1" >"$work/before"
}

# old_intact DIR: the earlier output is exactly as it was and verifies; no temporary file stays.
old_intact() {
    snapshot "$1" >"$work/after"
    diff "$work/before" "$work/after" >&2 || fail "a failed run changed the earlier output in $1"
    expect_exit 0 "$KILN" verify "$1"
}

# not_blamed: the message blames no source image.
not_blamed() {
    if grep -Eq '\.(png|jpg|jpeg|tif|tiff|pgm|ppm)\b' "$work/stderr"; then
        fail "a full disk was blamed on a source image: $(cat "$work/stderr")"
    fi
}

expect_exit 0 "$KILN" pack "$work/c.csv" -o "$disk/old" --size 8 -q

# 1. build: the record pool fills the disk during the scan.
with_old "$disk/b"
leave_free 64
expect_exit 1 "$KILN" build "$work/data" -o "$disk/b" --seed 5 --size 256 -q
grep -q "cannot write $disk/b/records.pool: No space left on device" "$work/stderr" ||
    fail "build on a full disk: $(cat "$work/stderr")"
not_blamed
old_intact "$disk/b"

# 2. pack, failing at each output in turn. A run with room measures what each file takes.
rm -f "$disk/filler"
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$disk/ref" --size 64 -q
r="$disk/ref"
tensors=$(pages "$r/train.kten" "$r/val.kten" "$r/test.kten")
items=$(pages "$r/items.csv")
catalog=$(pages "$r/catalog.csv")
manifest=$(pages "$r/manifest.json")
sums=$(pages "$r/SHA256SUMS")
rm -rf "$r"
# free pages, then the file whose writing must fail, as the message names it
# (no room for the tensor files at all: section 3)
for case in "$tensors items.csv" \
    "$((tensors + items)) catalog.csv" \
    "$((tensors + items + catalog)) manifest.json" \
    "$((tensors + items + catalog + manifest)) SHA256SUMS" \
    "$((tensors + items + catalog + manifest + sums)) .kiln-journal"; do
    read -r free file <<<"$case"
    with_old "$disk/out"
    leave_free "$free"
    expect_exit 1 "$KILN" pack "$work/c.csv" -o "$disk/out" --size 64 -q
    grep -q "cannot write $disk/out/$file: No space left on device" \
        "$work/stderr" || fail "with $free pages free, expected $file to be named: $(cat "$work/stderr")"
    not_blamed
    rm -f "$disk/filler"
    old_intact "$disk/out"
done

# 3. Tensor files that cannot fit are refused before anything is reserved, in those terms.
rm -f "$disk/filler"
with_old "$disk/big"
expect_exit 1 "$KILN" pack "$work/c.csv" -o "$disk/big" --size 1024 -q
grep -Eq "cannot write the tensor files into $disk/big: they need [0-9.]+ MB \([0-9]+ bytes\) and its file system has [0-9.]+ MB free" \
    "$work/stderr" || fail "outputs larger than the free space: $(cat "$work/stderr")"
old_intact "$disk/big"

# 4. Room again: the same runs succeed and verify.
rm -f "$disk/filler"
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$disk/out" --size 64 -q
expect_exit 0 "$KILN" verify "$disk/out"
echo ok
