# A full disk is a failure of the output, not of an input: exit status 1, and the message names
# the output file that could not be written (the record pool of build, a tensor file, items.csv,
# catalog.csv, manifest.json, SHA256SUMS) -- never a source image. Nothing is left that claims
# to be complete (verify fails), and no temporary file stays behind.
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

# no_debris DIR: nothing of a failed run claims to be complete (verify fails), and no temporary
# file stays.
no_debris() {
    local left got=0
    "$KILN" verify "$1" >/dev/null 2>&1 || got=$?
    [ "$got" != 0 ] || fail "a failed run left an output that verifies in $1: $(ls -A "$1" | tr '\n' ' ')"
    left=$(ls -A "$1" 2>/dev/null || true)
    [[ $left != *.tmp-* ]] || fail "temporary files left in $1: $left"
}

# not_blamed: the message blames no source image.
not_blamed() {
    if grep -Eq '\.(png|jpg|jpeg|tif|tiff|pgm|ppm)\b' "$work/stderr"; then
        fail "a full disk was blamed on a source image: $(cat "$work/stderr")"
    fi
}

# 1. build: the record pool fills the disk during the scan.
leave_free 64
expect_exit 1 "$KILN" build "$work/data" -o "$disk/b" --seed 5 --size 256 -q
grep -q "cannot write $disk/b/records.pool: No space left on device" "$work/stderr" ||
    fail "build on a full disk: $(cat "$work/stderr")"
not_blamed
no_debris "$disk/b"

# 2. pack, failing at each output in turn. A run with room measures what each file takes.
rm -f "$disk/filler"
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$disk/ref" --size 64 -q
r="$disk/ref"
tensors=$(pages "$r/train.kten" "$r/val.kten" "$r/test.kten")
items=$(pages "$r/items.csv")
catalog=$(pages "$r/catalog.csv")
manifest=$(pages "$r/manifest.json")
rm -rf "$r"
# free pages, then the file whose writing must fail, as the message names it
# (no room for the tensor files at all: section 3)
for case in "$tensors items.csv" \
    "$((tensors + items)) catalog.csv" \
    "$((tensors + items + catalog)) manifest.json" \
    "$((tensors + items + catalog + manifest)) SHA256SUMS"; do
    read -r free file <<<"$case"
    leave_free "$free"
    expect_exit 1 "$KILN" pack "$work/c.csv" -o "$disk/out" --size 64 -q
    grep -q "cannot write $disk/out/$file: No space left on device" \
        "$work/stderr" || fail "with $free pages free, expected $file to be named: $(cat "$work/stderr")"
    not_blamed
    no_debris "$disk/out"
    rm -rf "$disk/out"
done

# 3. Tensor files that cannot fit are refused before anything is reserved, in those terms.
rm -f "$disk/filler"
expect_exit 1 "$KILN" pack "$work/c.csv" -o "$disk/big" --size 1024 -q
grep -Eq "cannot write the tensor files into $disk/big: they need [0-9.]+ MB \([0-9]+ bytes\) and its file system has [0-9.]+ MB free" \
    "$work/stderr" || fail "outputs larger than the free space: $(cat "$work/stderr")"
[ -z "$(ls -A "$disk/big")" ] || fail "a pack that cannot fit wrote: $(ls -A "$disk/big")"

# 4. Room again: the same runs succeed and verify.
rm -f "$disk/filler"
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$disk/out" --size 64 -q
expect_exit 0 "$KILN" verify "$disk/out"
echo ok
