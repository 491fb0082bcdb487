# kiln report in a real browser: Debian's chromium, headless, opens the page of the demo output
# from a file: no console message, no network request made by the page (its NetLog records
# Chromium's own start-up requests too; a request the page causes names something in it),
# every embedded image decoded by the browser (a copy of the page with a probe script appended
# counts them), the balance table's numbers as manifest.json's in the DOM the browser built,
# and a screenshot of a sensible size. KILN_REPORT_SCREENSHOT=FILE keeps the screenshot
# (docs/report.png is made so). Skipped, with the reason, where chromium is not installed.
. "$(dirname "$0")/lib.sh"
need_python
browser=$(command -v chromium || true)
[ -n "$browser" ] || skip "chromium is not installed (Debian: apt-get install chromium)"
demo_data "$work/data"

expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --group-regex '/(T[0-9]+)_' \
    --ratios 70:15:15 --stratify --size 128x128 --fit pad --seed 2026 --jobs 2 -q
# From the folder that holds it, so the page names the output "demo-out" as the demo does.
mv "$work/out" "$work/demo-out"
ln -s demo-out "$work/out"
(cd "$work" && expect_exit 0 "$KILN" report demo-out -o report.html)

# The flags a closed network needs (no background requests, no first-run pages).
chrome() {
    timeout 120 "$browser" --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
        --disable-background-networking --disable-component-update --disable-sync \
        --disable-default-apps --user-data-dir="$work/profile-$1" "${@:2}"
}

# 1. The page as it is: console messages and network requests.
chrome a --enable-logging=stderr --v=0 --log-net-log="$work/net.json" \
    --virtual-time-budget=5000 --dump-dom "file://$work/report.html" \
    >"$work/dom.html" 2>"$work/console.txt" || fail "chromium failed: $(tail -n 5 "$work/console.txt")"
if grep -q 'CONSOLE' "$work/console.txt"; then
    fail "console messages: $(grep 'CONSOLE' "$work/console.txt")"
fi
"$PYTHON" - "$work/net.json" "file://$work/report.html" "$work/report.html" <<'EOF' ||
import json, sys
from urllib.parse import unquote
net, page, html = sys.argv[1], sys.argv[2], open(sys.argv[3], encoding="utf-8").read()
# Chromium makes requests of its own at start-up (updates, sign-in) whatever it opens, even
# with background networking off. A request the page causes names something the page refers
# to (the page has no script to build a URL; report_check.py makes sure): any such URL fails
# (checked: an <img> of an http address added to the page is caught here). Files next to the
# page are not network requests and do not show in the NetLog; report_check.py's static check
# of every src and href covers them.
events = json.load(open(net, encoding="utf-8"))["events"]
bad = set()
for e in events:
    url = str(e.get("params", {}).get("url", ""))
    if not url or url == page or url.startswith("data:"):
        continue
    if url.startswith("file:") or unquote(url) in html or url in html:
        bad.add(url[:120])
for u in sorted(bad):
    print("request:", u)
sys.exit(1 if bad else 0)
EOF
    fail "the page made requests"
# The DOM chromium built holds the balance table: its numbers against the manifest.
"$PYTHON" "$KILN_SRC/tests/ref/report_check.py" "$work/dom.html" "$work/out" ||
    fail "the DOM chromium built from the page"

# 2. Every embedded image decoded by the browser.
sed 's#</body>#<script>var n=0,bad=0;for(const i of document.images){n++;if(!i.complete||i.naturalWidth==0)bad++;}document.title="images "+n+" undecoded "+bad;</script></body>#' \
    "$work/report.html" >"$work/probe.html"
chrome b --virtual-time-budget=5000 --dump-dom "file://$work/probe.html" >"$work/probe_dom.html" \
    2>/dev/null || fail "chromium failed on the probe page"
want=$(grep -o '<img ' "$work/report.html" | wc -l)
grep -q "<title>images $want undecoded 0</title>" "$work/probe_dom.html" ||
    fail "images: want $want decoded, got '$(grep -o '<title>images[^<]*' "$work/probe_dom.html")'"

# 3. A screenshot: a PNG of the window's size, not blank.
chrome c --hide-scrollbars --window-size=1100,1500 --screenshot="$work/report.png" \
    "file://$work/report.html" >/dev/null 2>&1 || fail "no screenshot"
"$PYTHON" - "$work/report.png" <<'EOF' || fail "screenshot"
import sys
from PIL import Image, ImageStat
im = Image.open(sys.argv[1]).convert("L")
assert im.size == (1100, 1500), im.size
assert ImageStat.Stat(im).stddev[0] > 10, "blank screenshot"
EOF
if [ -n "${KILN_REPORT_SCREENSHOT:-}" ]; then
    cp "$work/report.png" "$KILN_REPORT_SCREENSHOT"
fi
echo "ok: report in chromium ($want images)"
