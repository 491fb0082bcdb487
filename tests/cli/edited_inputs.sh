# Stage files edited by hand or mixed up get a clear refusal, never a crash or a wrong read:
# a split record whose "parts" disagrees with the rows; catalogue rows whose path leaves its
# source (absolute, "..": scan never writes them); a UTF-8 byte-order mark in front of a
# catalogue (a spreadsheet's save), which changes nothing; catalogues with a header and no row;
# and a .kten whose metadata holds a class that is not a string and terminal control codes,
# which inspect shows escaped.
. "$(dirname "$0")/lib.sh"
demo_data "$work/data"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 3 -q

# edit_json FILE PYTHON: runs PYTHON with the JSON document of FILE as d, and writes d back.
edit_json() {
    "$PYTHON" - "$1" "$2" <<'PY'
import json, sys
path, code = sys.argv[1], sys.argv[2]
d = json.load(open(path))
exec(code)
json.dump(d, open(path, "w"))
PY
}

# 1. "parts": a three-way split recorded as two-way, and a value that is no number of parts.
cp "$work/c.csv" "$work/p.csv"
cp "$work/c.json" "$work/p.json"
edit_json "$work/p.json" 'd["split"]["parts"] = 2'
expect_exit 3 "$KILN" pack "$work/p.csv" -o "$work/p" --size 8
grep -Eq "catalogue row [0-9]+ \(.*\) is in val, but the catalogue's split record says the split has 2 parts" \
    "$work/stderr" || fail "parts 2 with val rows: $(cat "$work/stderr")"
[ ! -e "$work/p" ] || [ -z "$(ls -A "$work/p")" ] || fail "a refused pack wrote into its folder"
edit_json "$work/p.json" 'd["split"]["parts"] = 1'
expect_exit 3 "$KILN" pack "$work/p.csv" -o "$work/p" --size 8
grep -q "the catalogue's split record says the split has 1 parts; a split has 2 (train:test) or 3" \
    "$work/stderr" || fail "parts 1: $(cat "$work/stderr")"
# A record that cannot be read at all is left out, with a warning that says why.
edit_json "$work/p.json" 'd["split"]["parts"] = "three"'
expect_exit 0 "$KILN" pack "$work/p.csv" -o "$work/p" --size 8 -q
grep -q "p.json: the split record has no number 'parts'" "$work/stderr" ||
    fail "parts \"three\": $(cat "$work/stderr")"

# 2. A byte-order mark before the header changes nothing: the same tensor bytes.
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$work/plain" --size 8 -q
printf '\xef\xbb\xbf' >"$work/bom.csv"
cat "$work/c.csv" >>"$work/bom.csv"
cp "$work/c.json" "$work/bom.json"
expect_exit 0 "$KILN" pack "$work/bom.csv" -o "$work/bom" --size 8 -q
for f in train.kten val.kten test.kten items.csv; do
    cmp -s "$work/plain/$f" "$work/bom/$f" || fail "a byte-order mark changed $f"
done

# 3. A catalogue with its header and no row: documented refusals, no crash (the sanitizer build
# runs this too: no qsort of an empty, NULL table).
"$PYTHON" -c 'import sys; sys.stdout.write(open(sys.argv[1], newline="").readline())' \
    "$work/c.csv" >"$work/empty.csv"
expect_exit 0 "$KILN" split "$work/empty.csv" --seed 1 -o "$work/empty-split.csv" -q
expect_exit 3 "$KILN" pack "$work/empty-split.csv" -o "$work/empty" --size 8
expect_exit 3 "$KILN" pack "$work/empty.csv" -o "$work/empty" --size 8
expect_exit 3 "$KILN" audit "$work/empty.csv"

# 4. Paths that leave their source. The catalogue is rewritten with Python's csv module:
# one packed row of class crawling is moved to source DATA/crawling with path
# ../crazing/<name> (a real file with the recorded content), another gets an absolute path.
"$PYTHON" - "$work/c.csv" "$work/data" <<'PY'
import csv, os, sys
src, data = sys.argv[1], sys.argv[2]
rows = list(csv.reader(open(src, newline="")))
head, body = rows[0], rows[1:]
col = {n: i for i, n in enumerate(head)}
packed = [r for r in body if r[col["split"]] and r[col["member"]] == ""]
a = next(r for r in packed if r[col["path"]].startswith("crazing/"))
a[col["source"]] = os.path.join(data, "crawling")
a[col["path"]] = "../" + a[col["path"]]
with open(src.replace("c.csv", "up.csv"), "w", newline="") as f:
    csv.writer(f, lineterminator="\r\n").writerows([head] + body)
rows = list(csv.reader(open(src, newline="")))
b = next(r for r in rows[1:] if r[col["split"]] and r[col["member"]] == "")
b[col["path"]] = "/etc/hostname"
with open(src.replace("c.csv", "abs.csv"), "w", newline="") as f:
    csv.writer(f, lineterminator="\r\n").writerows(rows)
PY
cp "$work/c.json" "$work/up.json"
cp "$work/c.json" "$work/abs.json"
expect_exit 3 "$KILN" pack "$work/up.csv" -o "$work/up" --size 8
grep -Eq "catalogue row [0-9]+ names the path '\.\./crazing/[^']+', which leaves its source .*/crawling; scan never writes such rows" \
    "$work/stderr" || fail "a '..' path: $(cat "$work/stderr")"
expect_exit 3 "$KILN" pack "$work/abs.csv" -o "$work/abs" --size 8
grep -q "names the path '/etc/hostname', which leaves its source" "$work/stderr" ||
    fail "an absolute path: $(cat "$work/stderr")"
# Allowed on request: the '..' row holds the recorded content, so the pack succeeds.
expect_exit 0 "$KILN" pack "$work/up.csv" -o "$work/up" --size 8 --allow-outside-paths -q
expect_exit 0 "$KILN" verify "$work/up"

# 5. inspect: a class that is not a string and control codes in the metadata (an OSC sequence
# that would retitle the terminal, a CSI that would clear it, a C1 control) are shown escaped.
"$PYTHON" - "$work/plain/train.kten" "$work/odd.kten" <<'PY'
import hashlib, json, struct, sys
src, dst = sys.argv[1], sys.argv[2]
b = bytearray(open(src, "rb").read())
off, length = struct.unpack_from("<QQ", b, 24)          # docs/format.md: metadata offset, length
meta = json.loads(b[off:off + length])
meta["classes"] = [7, "tile\x1b]0;owned\x07", "x\x1b[2Jy", "c1\u009bz"] + meta["classes"][4:]
meta["split"] = "train\x1b[31m"
text = json.dumps(meta, ensure_ascii=False).encode()
b = b[:off] + text
struct.pack_into("<QQ", b, 24, off, len(text))
b[40:72] = hashlib.sha256(text).digest()                   # metadata SHA-256
struct.pack_into("<Q", b, 72, off + len(text))              # file size
open(dst, "wb").write(b)
PY
expect_exit 0 "$KILN" inspect "$work/odd.kten"
if grep -q '(null)' "$work/stdout"; then fail "inspect printed (null): $(cat "$work/stdout")"; fi
if LC_ALL=C grep -q $'[\x01-\x08\x0b-\x1f\x7f]' "$work/stdout" ||
    LC_ALL=C grep -q $'\xc2[\x80-\x9f]' "$work/stdout"; then
    fail "inspect printed raw control codes"
fi
grep -q 'classes: 0=(not a string: 7) 1=tile\\x1b]0;owned\\x07 2=x\\x1b\[2Jy 3=c1\\u009bz' \
    "$work/stdout" || fail "classes shown: $(grep classes "$work/stdout")"
grep -q '^split train\\x1b\[31m, layout' "$work/stdout" || fail "split shown: $(cat "$work/stdout")"
echo ok
