# A run that fails leaves nothing that claims to be complete: when a source changes after scan,
# pack stops (exit 5, naming the file), removes its temporary files, and the output folder holds
# no manifest and no checksum list -- even where an earlier complete output was being replaced.
. "$(dirname "$0")/lib.sh"
demo_data_copy "$work/data"
expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --seed 1 --size 32 -q
[ -f "$work/out/manifest.json" ] || fail "first build wrote no manifest"
victim=$(first_file "$work/data" -name '*.png')
printf 'x' >> "$victim"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 1 -q
printf 'y' >> "$victim"   # changed again after the scan
expect_exit 5 "$KILN" pack "$work/c.csv" -o "$work/out" --size 32
grep -q "$(basename "$victim")" "$work/stderr" || fail "the error does not name the changed file"
grep -q "changed since it was scanned" "$work/stderr" || fail "message: $(cat "$work/stderr")"
for f in manifest.json SHA256SUMS; do
    [ ! -e "$work/out/$f" ] || fail "$f survived a failed run"
done
left=$(ls -A "$work/out")
[[ $left != *.tmp-* ]] || fail "temporary files left: $left"
expect_exit 4 "$KILN" verify "$work/out"
echo ok
