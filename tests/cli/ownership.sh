# Ownership by content (docs/cli.md, "Output folders"): a folder is kiln's only when its
# manifest.json begins with kiln's format identifier. A web project's own manifest.json and
# SHA256SUMS, or a folder holding only a user's catalog.csv, are refused with what was found
# and left exactly as they were; a file of a kiln name that a kiln output's SHA256SUMS does not
# list is someone else's; verify and --keep refuse a manifest that is not kiln's; an output
# written by kiln 0.1.0 (no identifier yet) is still kiln's; and scan does not catalogue a kiln
# output folder that sits inside a source.
. "$(dirname "$0")/lib.sh"
demo_data "$work/data"

# refused DIR WHAT-PATTERN: a build into DIR is refused (exit 1) with a message matching the
# pattern, and DIR is untouched.
refused() {
    snapshot "$1" >"$work/before"
    expect_exit 1 "$KILN" build "$work/data" -o "$1" --seed 1 --size 8 -q
    grep -Eq "$2" "$work/stderr" || fail "refusal for $1: $(cat "$work/stderr")"
    snapshot "$1" >"$work/after"
    diff "$work/before" "$work/after" >&2 || fail "a refused build changed $1"
}

# 1. A web project: its manifest.json (a browser extension's, manifest_version 3) and checksums.
mkdir "$work/web"
printf '{\n  "manifest_version": 3,\n  "name": "lab viewer",\n  "version": "1.2"\n}\n' \
    >"$work/web/manifest.json"
printf '<html></html>\n' >"$work/web/index.html"
(cd "$work/web" && sha256sum manifest.json index.html >SHA256SUMS)
refused "$work/web" "cannot write into $work/web: its manifest.json is not a kiln manifest \(its first member is \"manifest_version\": 3, not \"format\": \"kiln output manifest\"\)"
expect_exit 4 "$KILN" verify "$work/web"
grep -q "is not a kiln manifest: it has no \"format\": \"kiln output manifest\" (its keys: manifest_version, name, version)" \
    "$work/stderr" || fail "verify of the web folder: $(cat "$work/stderr")"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 3 "$KILN" split "$work/c.csv" --seed 1 --keep "$work/web/manifest.json"
grep -q "is not a kiln manifest" "$work/stderr" || fail "--keep of the web manifest: $(cat "$work/stderr")"

# 2. A folder holding only a user's catalog.csv (a name kiln writes): not kiln's.
mkdir "$work/mine"
printf 'specimen,weight\nA1,3.2\n' >"$work/mine/catalog.csv"
refused "$work/mine" "cannot write into $work/mine: it holds 'catalog.csv' and no kiln manifest"
# A manifest that is not JSON at all, and a folder named manifest.json, likewise.
mkdir "$work/text" "$work/dir" "$work/dir/manifest.json"
printf 'shopping list\n' >"$work/text/manifest.json"
refused "$work/text" "its manifest.json is not a kiln manifest \(it is not a JSON object \(it begins 'shopping list'\)\)"
refused "$work/dir" "its manifest.json is not a kiln manifest \(it is not a regular file\)"
# A journal kiln did not write (a hidden file of that name) is neither read as one nor touched.
mkdir "$work/jour"
printf 'my own journal\n' >"$work/jour/.kiln-journal"
refused "$work/jour" "cannot write into $work/jour: $work/jour/.kiln-journal is not a journal kiln wrote"

# 3. A kiln output: rebuilt in place, the user's files beside it kept; but a file of a kiln
# name its SHA256SUMS does not list is someone else's.
expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --seed 1 --size 8 --ratios 70:30 -q
first=$(head -c 60 "$work/out/manifest.json")
[[ ${first//$'\n'/} =~ ^\{\ *\"format\":\ \"kiln\ output\ manifest\" ]] ||
    fail "the manifest does not begin with the identifier: $first"
mkdir "$work/out/plots"
printf 'user\n' >"$work/out/plots/loss.csv"
printf 'user\n' >"$work/out/README"
expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --seed 2 --size 8 --ratios 70:30 -q
[ "$(cat "$work/out/plots/loss.csv")" = user ] && [ "$(cat "$work/out/README")" = user ] ||
    fail "the user's files in a kiln output were touched"
printf 'not kiln\n' >"$work/out/val.kten"
refused "$work/out" "cannot write into $work/out: it holds val.kten, which its SHA256SUMS does not list as kiln's"
rm "$work/out/val.kten"

# 4. An output of kiln 0.1.0, before the identifier: manifest_version 1 first, then
# kiln_version. Made from a current one by dropping the identifier (and fixing SHA256SUMS).
"$PYTHON" - "$work/out" <<'PY'
import hashlib, json, os, sys
d = sys.argv[1]
path = os.path.join(d, "manifest.json")
m = json.load(open(path))
assert next(iter(m)) == "format"
del m["format"]
data = (json.dumps(m, indent=2) + "\n").encode()
open(path, "wb").write(data)
sums = os.path.join(d, "SHA256SUMS")
lines = [l for l in open(sums).read().splitlines() if not l.endswith("  manifest.json")]
lines.append(hashlib.sha256(data).hexdigest() + "  manifest.json")
open(sums, "w").write("\n".join(lines) + "\n")
PY
expect_exit 0 "$KILN" verify "$work/out"
expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --seed 1 --size 8 -q
expect_exit 0 "$KILN" verify "$work/out"

# 5. An output inside a source is not catalogued by the next scan: counted, named, skipped.
mkdir "$work/src"
cp -r "$work/data/." "$work/src/"
expect_exit 0 "$KILN" build "$work/src" -o "$work/src/crawling/out" --seed 1 --size 8 -q
expect_exit 0 "$KILN" scan "$work/src" -o "$work/again.csv"
grep -q "skipped without a row: 1 kiln output folder inside the sources ($work/src/crawling/out)" \
    "$work/stdout" || fail "the output folder was not reported: $(cat "$work/stdout")"
if grep -q "crawling/out/" "$work/again.csv"; then fail "the output folder was catalogued"; fi
rows_src=$(grep -c . "$work/again.csv")
rows_data=$(grep -c . "$work/c.csv")
[ "$rows_src" = "$rows_data" ] || fail "scan found $rows_src rows with the output inside, $rows_data without"
grep -q '"kiln_outputs_skipped": 1' "$work/again.json" || fail "the skip is not recorded"
echo ok
