# Labels and groups from a CSV file (path,label,group): rows without a file and files without
# a row are both reported; groups from the CSV keep items together like --group-regex. Files
# saved by spreadsheet programs start with a UTF-8 byte-order mark: labels CSV and catalogue
# are read with it; paths spelt ./a/x.png match; a labels CSV with only its header row is
# valid (every file unlabelled).
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
# The same labels saved with a byte-order mark and ./ paths give the same catalogue.
{
    printf '\357\273\277'
    sed -e 's|^crazing/|./crazing/|' -e 's|^"sound/|"./sound//|' "$work/labels.csv"
} > "$work/labels-bom.csv"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c-bom.csv" --labels "csv:$work/labels-bom.csv"
"$PYTHON" - "$work/c.csv" "$work/c-bom.csv" <<'PY' || fail "BOM or ./ paths in the labels CSV"
import csv, sys
a, b = (list(csv.DictReader(open(p, newline=""))) for p in sys.argv[1:])
key = lambda rows: [(r["path"], r["label"], r["group"], r["status"]) for r in rows]
assert key(a) == key(b), [x for x in zip(key(a), key(b)) if x[0] != x[1]][:3]
PY
# A catalogue saved back with a byte-order mark still splits.
{ printf '\357\273\277'; cat "$work/c-bom.csv"; } > "$work/c-bom2.csv"
expect_exit 0 "$KILN" split "$work/c-bom2.csv" --seed 3 --ratios 50:50
# Only the header row: every file is unlabelled, nothing else happens.
printf 'path,label,group\r\n' > "$work/header-only.csv"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/h.csv" --labels "csv:$work/header-only.csv"
[ "$(grep -c ',ok,' "$work/h.csv" || true)" = 0 ] || fail "rows labelled by an empty labels CSV"
grep -q "unlabelled" "$work/stdout" || fail "header-only labels CSV: $(cat "$work/stdout")"
expect_exit 3 "$KILN" scan "$work/data" -o "$work/x.csv" --labels "csv:$work/none.csv"
printf 'file,klass\r\n' > "$work/bad.csv"
expect_exit 3 "$KILN" scan "$work/data" -o "$work/x.csv" --labels "csv:$work/bad.csv"
grep -q "path,label" "$work/stderr" || fail "bad labels CSV message: $(cat "$work/stderr")"
echo ok
