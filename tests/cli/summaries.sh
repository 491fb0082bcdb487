# What scan, split and build tell the user (issue 11, item 5 and the summary items of "Messages
# and exit codes"):
# - a clean delivery (class folders, several shots per specimen, a group rule that fits) builds
#   without a single warning;
# - a group rule with a case typo (t[0-9]+ for T[0-9]+) matches nothing: scan and build warn
#   and name a relative name the rule was tried on; a rule matching under half the files, and
#   one that gives every file its own group, warn too;
# - units holding two labels, units larger than their split's share and classes missing from
#   a split are named by build exactly as split names them (one printer);
# - the scan summary lists 10 unusable rows and says how many more there are, says when a
#   multi-page TIFF was reduced to its first page, and writes "1 class", "1 file".
. "$(dirname "$0")/lib.sh"
need_python
"$PYTHON" - "$work/clean" "$work/odd" "$work/extra" <<'PY'
import os, random, sys
from PIL import Image
clean, odd, extra = sys.argv[1:]
rnd = random.Random(4)
def noise(w, h):
    return Image.frombytes("RGB", (w, h), bytes(rnd.randrange(256) for _ in range(w * h * 3)))
# 4 classes x 10 specimens x 2-3 shots, distinct pictures, odd sizes.
for k, c in enumerate(("basalt", "chalk", "granite", "shale")):
    os.makedirs(os.path.join(clean, c))
    for s in range(10):
        for shot in "abc"[: 2 + s % 2]:
            noise(23 + s, 17 + s % 3).save(os.path.join(clean, c, f"T{100 * k + s:03d}_{shot}.png"))
# Ten more shots of specimen T300, for the oversized unit below.
os.makedirs(extra)
for i in range(10):
    noise(21, 15).save(os.path.join(extra, f"T300_x{i}.png"))
# One class, a multi-page TIFF (3 pages) and 12 files that are not images.
os.makedirs(os.path.join(odd, "only"))
pages = [noise(19, 11) for _ in range(3)]
pages[0].save(os.path.join(odd, "only", "stack.tif"), save_all=True, append_images=pages[1:])
noise(9, 7).save(os.path.join(odd, "only", "one.png"))
for i in range(12):
    open(os.path.join(odd, "only", f"note{i:02d}.txt"), "w").write("not an image\n")
PY
right='/(T[0-9]+)_'
# A clean run: no warning at all, from scan, split or build.
expect_exit 0 "$KILN" scan "$work/clean" -o "$work/c.csv" --group-regex "$right"
[ ! -s "$work/stderr" ] || fail "clean scan warned: $(cat "$work/stderr")"
grep -q "group rule matched 100 of 100 usable files (40 groups, 40 of them" "$work/stdout" ||
    fail "group rule count: $(cat "$work/stdout")"
expect_exit 0 "$KILN" split "$work/c.csv" --seed 5 --stratify
[ ! -s "$work/stderr" ] || fail "clean split warned: $(cat "$work/stderr")"
expect_exit 0 "$KILN" build "$work/clean" -o "$work/out" --seed 5 --stratify --size 16 \
    --group-regex "$right"
[ ! -s "$work/stderr" ] || fail "clean build warned: $(cat "$work/stderr")"
# The typo: warned by scan and by build, exit 0 (the run itself is fine).
for cmd in scan build; do
    if [ $cmd = scan ]; then
        expect_exit 0 "$KILN" scan "$work/clean" -o "$work/t.csv" --group-regex '/(t[0-9]+)_'
    else
        expect_exit 0 "$KILN" build "$work/clean" -o "$work/t" --seed 5 --size 16 \
            --group-regex '/(t[0-9]+)_'
    fi
    grep -q "warning: the group rule '/(t\[0-9\]+)_' matches none of the 100 usable files.*names like 'basalt/T000_a.png'" \
        "$work/stderr" || fail "$cmd: no warning for a rule that matches nothing: $(cat "$work/stderr")"
done
# Matching a minority, and matching without grouping anything.
expect_exit 0 "$KILN" scan "$work/clean" -o "$work/t.csv" --group-regex '/(T0[0-9][0-9])_'
grep -q "warning: the group rule .* matches only 25 of the 100 usable files; the other 75" \
    "$work/stderr" || fail "minority rule: $(cat "$work/stderr")"
expect_exit 0 "$KILN" scan "$work/clean" -o "$work/t.csv" --group-regex '/(T[0-9]+_[a-c])'
grep -q "gives each of the 100 files it matches a group of its own" "$work/stderr" ||
    fail "rule that keeps nothing together: $(cat "$work/stderr")"
# A shot of granite T201 filed under basalt (a mixed-label unit); shale's specimen T300 shot
# 12 times, which seed 10 deals to val, more than twice val's 5.5-item share (oversized), so
# val has no basalt (a class missing from a split).
cp -r "$work/clean" "$work/mixed"
mv "$work/mixed/granite/T201_b.png" "$work/mixed/basalt/T201_b.png"
cp "$work"/extra/*.png "$work/mixed/shale/"
expect_exit 0 "$KILN" scan "$work/mixed" -o "$work/m.csv" --group-regex "$right"
expect_exit 0 "$KILN" split "$work/m.csv" --seed 10 --ratios 90:5:5
cp "$work/stderr" "$work/split.err"
expect_exit 0 "$KILN" build "$work/mixed" -o "$work/mo" --seed 10 --ratios 90:5:5 \
    --size 16 --group-regex "$right"
# Build adds the pack stage's summary lines; everything split said must be there, in order.
grep -v -e 'the audit found' -e 'classes are missing from a split (manifest' "$work/stderr" \
    > "$work/build.err"
diff "$work/split.err" "$work/build.err" || fail "build and split name different things"
grep -q "^kiln: warning: 1 unit holds items of more than one label" "$work/split.err" &&
    grep -q "^  group 'T201' (3 items" "$work/split.err" &&
    grep -q "mixed/basalt/T201_b.png (basalt)" "$work/split.err" &&
    grep -q "^kiln: warning: 1 unit is more than twice as large as its split's share" "$work/split.err" &&
    grep -q "^  group 'T300': 12 items in val, whose share is 5.5 items" "$work/split.err" &&
    grep -q "^kiln: warning: class 'basalt' has no item in the val split" "$work/split.err" ||
    fail "split warnings do not name the units and classes: $(cat "$work/split.err")"
# Scan summary: plurals, "and N more", multi-page TIFF.
expect_exit 0 "$KILN" scan "$work/odd" -o "$work/o.csv"
grep -q "^14 files catalogued (.*), 1 class$" "$work/stdout" || fail "plurals: $(cat "$work/stdout")"
[ "$(grep -c '^  not-image: ' "$work/stdout")" = 10 ] || fail "not 10 rows listed"
grep -q "^  ... and 2 more (catalog.csv gives every row its status and reason)" "$work/stdout" ||
    fail "no 'and N more': $(cat "$work/stdout")"
grep -q "^1 multi-page file: only the first page of each is used" "$work/stdout" ||
    fail "multi-page TIFF not mentioned: $(cat "$work/stdout")"
"$PYTHON" -c 'import csv, sys
r = [r for r in csv.DictReader(open(sys.argv[1])) if r["path"].endswith("stack.tif")]
assert r and r[0]["pages"] == "3" and r[0]["status"] == "ok", r' "$work/o.csv" || fail "pages column"
echo ok
