# kiln report: the HTML page of an output folder, checked with Python's html.parser, base64
# and PIL (tests/ref/report_check.py): well-formed, nothing fetched, every thumbnail decodes,
# the balance table equals manifest.json. Also: the same folder gives the same bytes; names
# holding markup stay text; an audit finding shows its pictures; a damaged output is reported
# (exit 4) but the page is still written; with --source, a missing source file is named (exit
# 5); many classes stay within the thumbnail bound; the
# errors name the file. The browser run is tests/cli/report_browser.sh.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
check="$KILN_SRC/tests/ref/report_check.py"
common=(--seed 5 --jobs 2 -q)

# The demo, as the README builds it.
expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --group-regex '/(T[0-9]+)_' \
    --ratios 70:15:15 --stratify --size 64x48 --fit pad "${common[@]}"
expect_exit 0 "$KILN" report "$work/out" -o "$work/r.html"
grep -q '^report: .*r.html.*thumbnails' "$work/stdout" || fail "no summary line: $(cat "$work/stdout")"
"$PYTHON" "$check" "$work/r.html" "$work/out" || fail "demo report"
grep -q 'class="ok">checksums: all 6 files' "$work/r.html" || fail "verify's verdict missing"
grep -q 'not-image: 1' "$work/r.html" || fail "the not-image row is not listed"
grep -q 'truncated: 1' "$work/r.html" || fail "the truncated row is not listed"
expect_exit 0 "$KILN" report "$work/out" -o "$work/again.html" -q
[ ! -s "$work/stdout" ] || fail "-q printed: $(cat "$work/stdout")"
cmp "$work/r.html" "$work/again.html" || fail "two reports of one folder differ"

# With --source: every recorded file found (exit 0); one moved out of the sources is missing
# (exit 5), named on the page, and the page is complete.
expect_exit 0 "$KILN" report "$work/out" -o "$work/s.html" --source "$work/data"
grep -q 'class="ok">sources: all 196 recorded files found' "$work/s.html" ||
    fail "sources not reported: $(grep -o '<li[^>]*>sources[^<]*' "$work/s.html")"
demo_data_copy "$work/datacopy"
gone=$(first_file "$work/datacopy/crazing/" -name '*.jpg')
mv "$gone" "$work/gone.jpg"
expect_exit 5 "$KILN" report "$work/out" -o "$work/s2.html" --source "$work/datacopy"
grep -q "1 source files missing" "$work/stderr" || fail "missing source not said: $(cat "$work/stderr")"
grep -q "source missing: crazing/$(basename "$gone")" "$work/s2.html" ||
    fail "the missing file is not named on the page"
grep -q '</html>' "$work/s2.html" || fail "the page is incomplete"

# Names that hold markup, and a group spread over two splits by hand: pack records the
# finding, the report shows both pictures and the names as text.
mkdir -p "$work/h/<i>glaze&amp;" "$work/h/plain"
n=0
for f in $(find "$work/data/crawling" -name 'T01[0-2]*.jpg' | sort); do
    n=$((n + 1))
    cp "$f" "$work/h/<i>glaze&amp;/$(basename "$f")"
done
for f in $(find "$work/data/sound" -name 'T01[0-2]*.jpg' | sort); do
    cp "$f" "$work/h/plain/$(basename "$f")"
done
hostile='"><img src=x onerror=alert(1)>.jpg'
printf 'not a picture' >"$work/h/plain/$hostile" # listed under "Not packed"
expect_exit 0 "$KILN" scan "$work/h" -o "$work/h.csv" --group-regex '/(T[0-9]+)_' -q
expect_exit 0 "$KILN" split "$work/h.csv" --seed 1 --ratios 50:50 -q
# Move one file of a group whose members are all in train to test.
"$PYTHON" - "$work/h.csv" <<'EOF' || fail "could not edit the split"
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1], newline="", encoding="utf-8")))
groups = {}
for r in rows:
    if r["split"] == "train" and r["group"]:
        groups.setdefault(r["group"], []).append(r)
g = next(v for v in groups.values() if len(v) > 1)
g[0]["split"] = "test"
with open(sys.argv[1], "w", newline="", encoding="utf-8") as f:
    w = csv.DictWriter(f, fieldnames=list(rows[0].keys()), lineterminator="\r\n")
    w.writeheader()
    w.writerows(rows)
EOF
expect_exit 0 "$KILN" pack "$work/h.csv" -o "$work/hout" --size 32 -q
expect_exit 0 "$KILN" report "$work/hout" -o "$work/h.html"
"$PYTHON" "$check" "$work/h.html" "$work/hout" "<i>glaze&amp;" "$hostile" || fail "hostile names"
"$PYTHON" - "$work/h.html" <<'EOF' || fail "the group finding is not shown with its pictures"
import re, sys
s = open(sys.argv[1], encoding="utf-8").read()
f = re.findall(r'<div class="finding"><p><b>group</b>.*?</div>\n</div>', s, re.S)
assert len(f) == 1, f"{len(f)} group findings"
assert f[0].count("<img ") >= 2, "fewer than two pictures"
assert "train" in f[0] and "test" in f[0], "splits not named"
assert 'class="bad">audit: 1 finding' in s
EOF

# A possible near duplicate in two splits (a resized copy filed under another class, so the
# unit rule keeps it apart): the finding shows both pictures and the evidence.
mkdir -p "$work/nd/a" "$work/nd/b"
for f in $(find "$work/data/crawling" -name 'T010*_a.jpg' | sort); do cp "$f" "$work/nd/a/"; done
for f in $(find "$work/data/sound" -name 'T016*_a.jpg' | sort); do cp "$f" "$work/nd/b/"; done
orig=$(first_file "$work/nd/a/" -name '*.jpg')
"$PYTHON" -c "
import sys
from PIL import Image
im = Image.open(sys.argv[1])
im.resize((im.width * 3 // 4, im.height * 3 // 4)).save(sys.argv[2], quality=90)" \
    "$orig" "$work/nd/b/copy.jpg"
expect_exit 0 "$KILN" scan "$work/nd" -o "$work/nd.csv" -q
expect_exit 0 "$KILN" split "$work/nd.csv" --seed 3 --ratios 50:50 -q
expect_exit 0 "$KILN" pack "$work/nd.csv" -o "$work/ndout" --size 32 -q
expect_exit 0 "$KILN" report "$work/ndout" -o "$work/nd.html"
"$PYTHON" "$check" "$work/nd.html" "$work/ndout" || fail "near-duplicate report"
"$PYTHON" - "$work/nd.html" "$work/ndout/manifest.json" <<'EOF' || fail "the near-duplicate finding"
import json, re, sys
s = open(sys.argv[1], encoding="utf-8").read()
m = json.load(open(sys.argv[2], encoding="utf-8"))
kinds = [f["kind"] for f in m["audit"]["findings"]]
f = re.findall(r'<div class="finding"><p><b>near-duplicate</b>.*?</table>\n</div>', s, re.S)
assert len(f) == kinds.count("near-duplicate") >= 1, (len(f), kinds)
assert f[0].count("<img ") == 2, "not both pictures"
link = m["audit"]["findings"][kinds.index("near-duplicate")]["link"]
for key in ("similarity", "distance", "unit_rule"):
    assert f"<th>{key}</th>" in f[0], f"evidence {key} missing"
assert str(link["distance"]) in f[0]
# The same link, refused by the unit rule (different labels), among the copies kept apart.
refused = m["split"]["near_duplicates"]["refused"]
kept = re.findall(r'<div class="finding"><p><b>refused: different labels</b>.*?</table>\n</div>',
                  s, re.S)
assert len(refused) >= 1 and len(kept) == len(refused), (len(kept), len(refused))
assert kept[0].count("<img ") == 2 and 'id="kept-apart"' in s
assert "possible copy kept apart" in s or "possible copies kept apart" in s
EOF

# A damaged output: verify's problem is in the page, exit 4; the page is still complete.
cp -r "$work/out" "$work/bad"
printf '\x01' | dd of="$work/bad/test.kten" bs=1 seek=5000 conv=notrunc status=none
expect_exit 4 "$KILN" report "$work/bad" -o "$work/bad.html"
grep -q "problems\? with verify" "$work/stderr" || fail "the damage is not said: $(cat "$work/stderr")"
grep -q "damaged: .*test.kten" "$work/bad.html" || fail "the damaged file is not named on the page"
grep -q 'class="bad">checksums: ' "$work/bad.html" || fail "the page does not show the damage"
grep -q '</html>' "$work/bad.html" || fail "the page of a damaged folder is incomplete"

# Many classes: at most 1200 thumbnails in all, one per class and split here.
"$PYTHON" - "$work/many" <<'EOF' || fail "could not write the many-class set"
import os, sys
from PIL import Image
for c in range(250):
    d = os.path.join(sys.argv[1], f"c{c:03d}")
    os.makedirs(d)
    for k in range(3):
        Image.new("L", (9, 7), (c * 7 + k * 50) % 256).save(os.path.join(d, f"{k}.png"))
EOF
expect_exit 0 "$KILN" build "$work/many" -o "$work/mout" --size 8 --ratios 34:33:33 \
    --near-duplicates off "${common[@]}"
expect_exit 0 "$KILN" report "$work/mout" -o "$work/m.html" --sample 32
grep -q '(1 per class and split)' "$work/stdout" || fail "bound not applied: $(cat "$work/stdout")"
"$PYTHON" "$check" "$work/m.html" "$work/mout" || fail "many-class report"

# Errors: usage (exit 2), a folder that is not an output (3, naming manifest.json), an output
# file in a missing folder (1, before any work).
expect_exit 2 "$KILN" report "$work/out"
expect_exit 2 "$KILN" report "$work/out" -o "$work/x.html" --sample 0
grep -q -- "--sample" "$work/stderr" || fail "bad --sample not named"
expect_exit 3 "$KILN" report "$work/data" -o "$work/x.html"
grep -q "manifest.json" "$work/stderr" || fail "the missing manifest is not named: $(cat "$work/stderr")"
expect_exit 1 "$KILN" report "$work/out" -o "$work/no/such/x.html"
[ ! -e "$work/x.html" ] || fail "a failed report left a file"
echo "ok: report"
