# The shortcut check (docs/shortcuts.md) and the class x split table, on generated sets:
# - two classes where the file format gives the label away (every 'rough' picture a PNG, every
#   'smooth' one a JPEG): build warns, audit lists a SHORTCUT finding, exit statuses unchanged;
# - the same pictures with formats mixed within each class: no warning;
# - kiln report says the same in its summary and attribute section (flagged, or nothing);
# - the demo set: no warning;
# - the class x split table printed by build and pack equals manifest.json's counts.
. "$(dirname "$0")/lib.sh"
need_python
"$PYTHON" - "$work/tied" "$work/mixed" <<'PY'
import os, random, sys
from PIL import Image
tied, mixed = sys.argv[1:]
rnd = random.Random(16)
def picture(w, h):
    return Image.frombytes("RGB", (w, h), bytes(rnd.randrange(256) for _ in range(w * h * 3)))
for root in (tied, mixed):
    for c in ("rough", "smooth"):
        os.makedirs(os.path.join(root, c))
for i in range(60):
    for k, c in enumerate(("rough", "smooth")):
        im = picture(19 + i % 5, 13 + i % 3)
        fmt = ("PNG", "JPEG")[k]
        im.save(os.path.join(tied, c, f"s{i:03d}.{fmt.lower()}"), fmt)
        fmt = ("PNG", "JPEG")[(i // 2) % 2]
        im.save(os.path.join(mixed, c, f"s{i:03d}.{fmt.lower()}"), fmt)
PY
expect_exit 0 "$KILN" build "$work/tied" -o "$work/tied.out" --seed 3 --size 16
grep -q "^kiln: warning: shortcut: the file format alone predicts the label: guessing each value's majority class (learnt on train) is right for \([0-9]*\) of \1 test items, against [0-9]* for the most common class; Cramér's V 1.00" "$work/stderr" ||
    fail "no shortcut warning for format = class: $(cat "$work/stderr")"
grep -q "^    jpeg: [0-9]* training items, 100% 'smooth'" "$work/stderr" ||
    fail "the warning does not show the values: $(cat "$work/stderr")"
# JPEG coding covers the JPEGs only (all one class here): it must not fire beside format.
[ "$(grep -c "warning: shortcut" "$work/stderr")" = 1 ] || fail "more than one shortcut: $(cat "$work/stderr")"
expect_exit 0 "$KILN" audit "$work/tied.out"
grep -q "^SHORTCUT format: the file format alone predicts the label" "$work/stdout" ||
    fail "audit does not list the shortcut: $(cat "$work/stdout")"
expect_exit 0 "$KILN" audit -q "$work/tied.out"
grep -q "^SHORTCUT format:" "$work/stdout" || fail "audit -q hides the shortcut finding"

# The HTML report (kiln report) carries the same verdict: in its summary and on the attribute.
expect_exit 0 "$KILN" report "$work/tied.out" -o "$work/tied.html" -q
grep -q '<li class="bad">shortcut check: 1 attribute predicts the label' "$work/tied.html" ||
    fail "the report's summary does not flag the shortcut"
grep -q 'class="bad">shortcut: predicts the label: V 1.00 on train' "$work/tied.html" ||
    fail "the report's attribute section does not flag format"
[ "$(grep -c 'class="bad">shortcut: predicts the label' "$work/tied.html")" = 1 ] ||
    fail "the report flags more than one attribute"
"$PYTHON" "$KILN_SRC/tests/ref/report_check.py" "$work/tied.html" "$work/tied.out" ||
    fail "report of the tied set"

expect_exit 0 "$KILN" build "$work/mixed" -o "$work/mixed.out" --seed 3 --size 16
[ ! -s "$work/stderr" ] || fail "mixed formats warned: $(cat "$work/stderr")"
grep -q "^shortcut check: no attribute besides the picture predicts the label (strongest: " \
    "$work/stdout" || fail "no shortcut line: $(cat "$work/stdout")"
expect_exit 0 "$KILN" audit "$work/mixed.out"
! grep -q "SHORTCUT" "$work/stdout" || fail "audit flags a shortcut on mixed formats"
expect_exit 0 "$KILN" report "$work/mixed.out" -o "$work/mixed.html" -q
grep -q '<li class="ok">shortcut check: no attribute besides the picture predicts' "$work/mixed.html" ||
    fail "the report's summary of the mixed set"
! grep -q 'class="bad">shortcut' "$work/mixed.html" || fail "the report flags a shortcut on mixed formats"

# The class x split table of build (split's summary) and pack against manifest.json.
"$KILN" build "$work/mixed" -o "$work/mixed2" --seed 3 --size 16 --ratios 60:20:20 >"$work/build.txt" 2>&1
"$KILN" pack "$work/mixed2/catalog.csv" -o "$work/packed" --size 16 >"$work/pack.txt" 2>&1 ||
    fail "pack: $(cat "$work/pack.txt")"
"$PYTHON" - "$work/mixed2/manifest.json" "$work/build.txt" "$work/pack.txt" <<'PY' || fail "class x split table"
import json, re, sys
m = json.load(open(sys.argv[1]))
for path in sys.argv[2:]:
    text = open(path).read()
    rows = {l.split()[0]: l.split()[1:] for l in text.splitlines()
            if re.match(r"^  \S+ +\d+ +\d+ +\d+ +\d+$", l)}
    for c in m["classes"]:
        want = [m["counts"][s]["per_class"].get(c, 0) for s in ("train", "val", "test")]
        got = [int(x) for x in rows[c]]
        assert got == want + [sum(want)], (path, c, got, want)
    assert "  share " in text, path
assert "(asked 60:20:20)" in open(sys.argv[2]).read()
PY

demo_data "$work/demo"
expect_exit 0 "$KILN" build "$work/demo" -o "$work/demo.out" --group-regex '/(T[0-9]+)_' \
    --seed 2026 --ratios 70:15:15 --stratify --size 32
! grep -q "shortcut" "$work/stderr" || fail "the demo set warns of a shortcut: $(cat "$work/stderr")"
echo "shortcut check: fires on format = class, quiet on mixed formats and on the demo"
