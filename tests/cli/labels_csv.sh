# Labels and groups from a CSV file (path,label,group): rows without a file and files without
# a row are both reported; groups from the CSV keep items together like --group-regex.
. "$(dirname "$0")/lib.sh"
demo_data "$work/data"
{
    printf 'path,label,group\r\n'
    printf 'crazing/T0111_a.jpg,cracked,tile-111\r\n'
    printf 'crazing/T0111_b.png,cracked,tile-111\r\n'
    printf '"sound/T0106_a.jpg",clean,tile-106\r\n'
    printf 'sound/T0106_b.jpg,clean,tile-106\r\n'
    printf 'sound/no-such-file.jpg,clean,\r\n'
} > "$work/labels.csv"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" --labels "csv:$work/labels.csv"
grep -q "labels CSV: 1 of 5 rows match no file (first: sound/no-such-file.jpg)" "$work/stdout" ||
    fail "unused rows not reported: $(cat "$work/stdout")"
grep -q "unlabelled" "$work/stdout" || fail "files without a row not reported"
n_ok=$(grep -c ',ok,' "$work/c.csv" || true)
[ "$n_ok" = 4 ] || fail "$n_ok ok rows, expected the 4 labelled files"
# classes sort byte-wise: clean = 0, cracked = 1
grep -q 'crazing/T0111_a.jpg,.*,cracked,1,tile-111,ok,' "$work/c.csv" || fail "label or group not applied"
expect_exit 0 "$KILN" split "$work/c.csv" --seed 3 --ratios 50:50
"$PYTHON" - "$work/c.csv" <<'PY' || fail "CSV groups split apart"
import csv, sys
rows = [r for r in csv.DictReader(open(sys.argv[1], newline="")) if r["status"] == "ok"]
g = {}
for r in rows:
    g.setdefault(r["group"], set()).add(r["split"])
assert all(len(s) == 1 for s in g.values()), g
PY
expect_exit 3 "$KILN" scan "$work/data" -o "$work/x.csv" --labels "csv:$work/none.csv"
printf 'file,klass\r\n' > "$work/bad.csv"
expect_exit 3 "$KILN" scan "$work/data" -o "$work/x.csv" --labels "csv:$work/bad.csv"
grep -q "path,label" "$work/stderr" || fail "bad labels CSV message: $(cat "$work/stderr")"
echo ok
