# Replace, never destroy: a run writes its whole new output beside the old one and replaces the
# old files only when every new one is complete. A run that fails -- a mistyped source, a source
# file that changed or went away since the scan (exit 5) -- leaves the
# earlier output exactly as it was (same files, same inodes, same bytes) and `kiln verify`
# passes; no temporary file stays. A run that succeeds replaces the earlier output's files and
# takes away those it no longer writes (val.kten after a two-way split), and never touches the
# user's own files in the folder. Full disks are tests/cli/disk_full.sh, signals
# tests/cli/interrupt.sh, kills tests/cli/kill_points.sh.
. "$(dirname "$0")/lib.sh"
demo_data_copy "$work/data"

# unchanged WHAT: the output is exactly as the snapshot, verifies, and holds no debris.
unchanged() {
    snapshot "$work/out" >"$work/now"
    diff "$work/before" "$work/now" >&2 || fail "$1 changed the earlier output"
    expect_exit 0 "$KILN" verify "$work/out"
}

expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --seed 1 --size 16 -q
printf 'my notes\n' >"$work/out/notes.txt" # the user's file in the output folder
snapshot "$work/out" >"$work/before"

# 1. A mistyped source.
expect_exit 3 "$KILN" build "$work/data" "$work/nonexistent" -o "$work/out" --seed 1 --size 16
grep -q "$work/nonexistent" "$work/stderr" || fail "the missing source is not named: $(cat "$work/stderr")"
unchanged "a build with a missing source"

# 2. A source file that changed after the scan: pack stops with exit 5, naming it.
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 1 -q
victim=$(first_file "$work/data" -name '*.png')
printf 'y' >>"$victim"
expect_exit 5 "$KILN" pack "$work/c.csv" -o "$work/out" --size 16
grep -q "$(basename "$victim").*changed since it was scanned" "$work/stderr" ||
    fail "the changed file is not named: $(cat "$work/stderr")"
unchanged "a pack that found a changed source"
# ... and the same with one worker, where the reader is further ahead when it stops.
expect_exit 5 "$KILN" pack "$work/c.csv" -o "$work/out" --size 16 --jobs 1
unchanged "a one-worker pack that found a changed source"
truncate -s -1 "$victim" # the file as scanned again

# 3. A source file deleted after the scan: exit 5, naming it.
mv "$victim" "$work/aside"
expect_exit 5 "$KILN" pack "$work/c.csv" -o "$work/out" --size 16
grep -q "cannot read .*$(basename "$victim") since it was scanned" "$work/stderr" ||
    fail "the missing file is not named: $(cat "$work/stderr")"
unchanged "a pack that found a source file gone"
mv "$work/aside" "$victim"

# 4. A run that succeeds replaces the files: a two-way split takes val.kten away; the user's
# file stays; nothing temporary or journalled is left.
expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --seed 1 --size 16 --ratios 70:30 -q
[ ! -e "$work/out/val.kten" ] || fail "the earlier output's val.kten survived a two-way run"
[ "$(cat "$work/out/notes.txt")" = "my notes" ] || fail "the user's file was touched"
left=$(ls -A "$work/out" | LC_ALL=C sort | tr '\n' ' ')
[ "$left" = "SHA256SUMS catalog.csv items.csv manifest.json notes.txt test.kten train.kten " ] ||
    fail "unexpected files after the replace: $left"
expect_exit 0 "$KILN" verify "$work/out"
(cd "$work/out" && sha256sum --quiet -c SHA256SUMS) || fail "sha256sum -c disagrees"
echo ok
