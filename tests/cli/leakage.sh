# Splits that cannot leak, proved by audit on the output: shots of one tile (group), an exact
# duplicate across class folders and a planted near duplicate (a re-encoded copy) never span
# two splits; copies filed under another class are refused by the unit rule, named, and
# reported by the audit as possible near duplicates; a hand-made leak is found and named (exit
# 6); --keep holds old splits, refuses a unit that would join two old splits, and resolves it
# toward test when asked.
. "$(dirname "$0")/lib.sh"
need_python
demo_data_copy "$work/data"
# Near duplicates: three shots re-encoded at another quality under new tile numbers.
"$PYTHON" - "$work/data" <<'PY'
import sys
from PIL import Image
d = sys.argv[1]
for src, dst in (("crazing/T0121_b.jpg", "sound/T0901_a.jpg"),
                 ("sound/T0107_a.jpg", "crawling/T0902_a.jpg"),
                 ("pinholing/T0102_b.jpg", "pinholing/T0903_a.jpg")):
    Image.open(f"{d}/{src}").convert("RGB").save(f"{d}/{dst}", quality=70)
PY
G='/(T[0-9]+)_'
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" --group-regex "$G" -q
# Near duplicates are checked by default. The copy filed under the same class joins its
# original's unit; the two copies filed under another class are checked links the unit rule
# refuses (docs/near-duplicates.md, section 4): split names them, and the audit reports them
# as possible near duplicates, with their evidence, exactly when they land in two splits.
expect_exit 0 "$KILN" split "$work/c.csv" --seed 11 --ratios 70:15:15
grep -q "near-duplicate links passed the pixel check but would join different labels" \
    "$work/stderr" || fail "refused links not named: $(cat "$work/stderr")"
grep -Eq "crazing/T0121_b.jpg \(crazing\) ~ .*sound/T0901_a.jpg \(sound\)|sound/T0901_a.jpg \(sound\) ~ .*crazing/T0121_b.jpg \(crazing\)" \
    "$work/stderr" || fail "refused link not shown: $(cat "$work/stderr")"
audit_rc=0
"$KILN" audit "$work/c.csv" >"$work/audit.out" 2>&1 || audit_rc=$?
"$PYTHON" - "$work/c.csv" "$work/c.json" "$work/audit.out" "$audit_rc" <<'PY' || fail "kept-together check"
import csv, json, sys, collections
rows = [r for r in csv.DictReader(open(sys.argv[1], newline="")) if r["status"] == "ok"]
by = {r["path"]: r for r in rows}
near = json.load(open(sys.argv[2]))["split"]["near_duplicates"]
audit, rc = open(sys.argv[3]).read(), int(sys.argv[4])
# Same label: one unit. The demo's byte-identical copy across classes: one unit (exact rule).
for a, b in [("pinholing/T0102_b.jpg", "pinholing/T0903_a.jpg"),
             ("pinholing/T0103_a.jpg", "sound/T0191_a.jpg")]:
    assert by[a]["unit"] == by[b]["unit"], (a, b)
# Different labels: refused, units apart, listed with the reason.
refused = {tuple(sorted(i["name"] for i in l["items"])): l for l in near["refused"]}
spanning = []
for a, b in [("crazing/T0121_b.jpg", "sound/T0901_a.jpg"),
             ("sound/T0107_a.jpg", "crawling/T0902_a.jpg")]:
    assert by[a]["unit"] != by[b]["unit"], (a, b)
    l = refused[tuple(sorted((a, b)))]
    assert l["unit_rule"] == "refused: different labels" and l["similarity"] >= 0.93, l
    if by[a]["split"] != by[b]["split"]:
        spanning.append((a, b))
assert near["refused_different_labels"] == 2 and near["refused_too_many_pictures"] == 0, near
# The audit: exit 6 with one finding per spanning link, worded as possible, with evidence;
# never LEAK (nothing else spans splits).
assert rc == (6 if spanning else 0), (rc, spanning, audit)
assert "LEAK" not in audit, audit
assert audit.count("possible near duplicate (distance ") == len(spanning), audit
assert audit.count("evidence: hash distance") == len(spanning), audit
for a, b in spanning:
    assert a in audit and b in audit, (a, b, audit)
groups = collections.defaultdict(set)
for r in rows:
    groups[r["group"]].add(r["split"])
assert all(len(s) == 1 for s in groups.values()), "a tile spans splits"
print("ok:", len(groups), "tiles, each in one split;", len(spanning), "refused links span splits")
PY
# A leak made by hand: move one shot of a multi-shot tile to another split.
"$PYTHON" - "$work/c.csv" "$work/leak.csv" <<'PY'
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1], newline="")))
seen = {}
for r in rows:
    if r["status"] == "ok" and r["group"]:
        if r["group"] in seen:
            r["split"] = "test" if r["split"] != "test" else "train"
            print(r["path"])
            break
        seen[r["group"]] = r
w = csv.DictWriter(open(sys.argv[2], "w", newline=""), fieldnames=rows[0].keys(), lineterminator="\r\n")
w.writeheader(); w.writerows(rows)
PY
expect_exit 6 "$KILN" audit "$work/leak.csv" --no-near
grep -q "LEAK group" "$work/stdout" || fail "audit did not report the group: $(cat "$work/stdout")"
# --keep: pack version 1, add new data, split again keeping the old assignment.
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$work/v1" --size 32
mkdir -p "$work/data/sound"
"$PYTHON" - "$work/data" <<'PY'
import sys
from PIL import Image
for i in range(12):
    Image.new("RGB", (64, 48), (20 * i, 200 - 10 * i, 90)).save(f"{sys.argv[1]}/sound/T095{i:02d}_a.png")
PY
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c2.csv" --group-regex "$G" -q
expect_exit 0 "$KILN" split "$work/c2.csv" --seed 999 --mode exact --ratios 50:25:25 \
    --keep "$work/v1/manifest.json"
grep -q "kept from" "$work/stdout" || fail "split did not report kept items"
"$PYTHON" - "$work/v1/items.csv" "$work/c2.csv" <<'PY' || fail "old items moved"
import csv, sys
old = {r["sha256"]: r["split"] for r in csv.DictReader(open(sys.argv[1], newline="")) if r["split"]}
new = [r for r in csv.DictReader(open(sys.argv[2], newline="")) if r["status"] == "ok"]
kept = [r for r in new if r["sha256"] in old]
assert kept and all(old[r["sha256"]] == r["split"] for r in kept), "an old item changed split"
assert len(new) > len(kept), "no new items"
print("ok:", len(kept), "old items kept,", len(new) - len(kept), "new")
PY
# A new file named into one tile but holding another tile's picture joins two units. Pick two
# tiles that v1 put in different splits.
pick=$("$PYTHON" - "$work/v1/items.csv" <<'PY'
import csv, sys, re
rows = [r for r in csv.DictReader(open(sys.argv[1], newline="")) if r["split"]]
train = next(r for r in rows if r["split"] == "train" and r["group"])
test = next(r for r in rows if r["split"] == "test" and r["group"])
print(train["path"], test["group"], test["path"].split("/")[0])
PY
)
set -- $pick
cp "$work/data/$1" "$work/data/$3/$2_z.jpg"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c3.csv" --group-regex "$G" -q
expect_exit 3 "$KILN" split "$work/c3.csv" --seed 999 --keep "$work/v1/manifest.json"
grep -q "old split train" "$work/stderr" && grep -q "old split test" "$work/stderr" ||
    fail "conflict message: $(cat "$work/stderr")"
expect_exit 0 "$KILN" split "$work/c3.csv" --seed 999 --keep "$work/v1/manifest.json" \
    --keep-conflicts test
grep -q "train -> test" "$work/stderr" || fail "moved items not reported: $(cat "$work/stderr")"
# A damaged old items.csv is refused rather than trusted.
printf 'x' >> "$work/v1/items.csv"
expect_exit 3 "$KILN" split "$work/c2.csv" --seed 1 --keep "$work/v1/manifest.json"
grep -q "does not match the SHA-256" "$work/stderr" || fail "tampered items.csv accepted"
echo ok
