# The split depends on content and seed only: shuffling catalogue rows or renaming every file
# leaves each file's split unchanged; ratios are met within one item per split per stratum.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/a.csv" --jobs 2
# Shuffle the rows (header kept) and rename every file by reversing its path characters.
"$PYTHON" - "$work/a.csv" "$work/b.csv" <<'PY'
import csv, random, sys
rows = list(csv.reader(open(sys.argv[1], newline="")))
head, body = rows[0], rows[1:]
random.Random(5).shuffle(body)
p = head.index("path")
for r in body:
    r[p] = "renamed/" + r[p][::-1]
w = csv.writer(open(sys.argv[2], "w", newline=""), lineterminator="\r\n")
w.writerow(head); w.writerows(body)
PY
cp "$work/a.json" "$work/b.json"
for c in a b; do
    expect_exit 0 "$KILN" split "$work/$c.csv" --seed 99 --ratios 60:20:20 --stratify
done
"$PYTHON" - "$work/a.csv" "$work/b.csv" <<'PY' || fail "split changed with row order or names"
import csv, sys, collections
def load(p):
    return {(r["sha256"], r["source"]): (r["split"], r["unit"]) for r in csv.DictReader(open(p, newline=""))
            if r["status"] == "ok"}
a, b = load(sys.argv[1]), load(sys.argv[2])
assert a == b, "assignments differ"
# Exact mode, stratified, units of one item except duplicates: within one unit of 60:20:20.
rows = [r for r in csv.DictReader(open(sys.argv[1], newline="")) if r["status"] == "ok"]
by = collections.defaultdict(collections.Counter)
units = collections.defaultdict(set)
for r in rows:
    by[r["class"]][r["split"]] += 1
    units[r["unit"]].add(r["sha256"])
for cls, c in by.items():
    n = sum(c.values())
    for s, share in (("train", .6), ("val", .2), ("test", .2)):
        assert abs(c[s] - share * n) <= 2, (cls, dict(c), n)
print("ok:", len(a), "items,", len(units), "units")
PY
echo ok
