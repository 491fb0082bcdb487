# Names as deliveries spell them (issue 11, items 1 and 2). One tree of class folders with
# ASCII, UTF-8 and (tar only) non-UTF-8 names is scanned as a folder and as every archive form
# tests/ref/archive_forms.py makes: zip with and without the UTF-8 flag, ustar, GNU and pax
# tar, `tar -C tree -cf x.tar .` (members ./class/file) plain and with gzip, bzip2, xz, zstd,
# tar without ./, odd spellings (a//b, a/./b), 7z and cpio. Every form must give every file
# the label and group of the builder's ground truth and the same split, under LC_ALL=C and
# C.UTF-8 alike (the catalogues must be byte-identical between the locales). A zip that flags
# a non-UTF-8 name as UTF-8 keeps the member as a row with a status. Members with UTF-8 and
# raw names are packed, found again by verify --source and rebuilt by reproduce, also when two
# identical recorded files are now one archive member.
. "$(dirname "$0")/lib.sh"
need_python
for t in tar gzip bzip2 xz zstd; do command -v $t >/dev/null || skip "$t is needed"; done
ref="$KILN_SRC/tests/ref/archive_forms.py"
"$PYTHON" "$ref" build "$work" || fail "building the forms"
regex=$("$PYTHON" -c 'import json,sys; print(json.load(open(sys.argv[1]))["group_regex"])' "$work/truth.json")
for loc in C C.UTF-8; do
    mkdir -p "$work/$loc"
    cats=()
    for src in "$work/tree" "$work/tree-utf8" "$work"/forms/*; do
        name=$(basename "$src")
        c="$work/$loc/$name.csv"
        expect_exit 0 env LC_ALL=$loc "$KILN" scan "$src" -o "$c" --group-regex "$regex" --jobs 2
        grep -q "group rule matched" "$work/stdout" || fail "$name: no group rule count"
        expect_exit 0 env LC_ALL=$loc "$KILN" split "$c" --seed 11 --ratios 50:25:25
        cats+=("$c")
    done
    "$PYTHON" "$ref" check "$work" "${cats[@]}" || fail "labels, groups or splits differ ($loc)"
done
# The locale never shows: every catalogue is byte-identical under C and C.UTF-8.
for c in "$work"/C/*.csv; do
    cmp "$c" "$work/C.UTF-8/$(basename "$c")" || fail "$(basename "$c") depends on the locale"
done
# A zip that flags a non-UTF-8 name as UTF-8: that member is a corrupt row under a placeholder
# that says where it is; the other member is read as usual.
expect_exit 0 env LC_ALL=C "$KILN" scan "$work/badflag.zip" -o "$work/bad.csv"
grep -q ',<member 2: name unreadable>,.*,corrupt,member name cannot be read' "$work/bad.csv" ||
    fail "unreadable member name: $(cat "$work/bad.csv")"
grep -q ',loam/ok_a.png,.*,ok,' "$work/bad.csv" || fail "the readable member: $(cat "$work/bad.csv")"
# Pack members with UTF-8 names (zip flag set, pax) and raw names (zip flag unset, which holds
# the non-UTF-8 name too), then find them again by name and by content.
for f in flag.zip pax.tar noflag.zip; do
    expect_exit 0 env LC_ALL=C "$KILN" build "$work/forms/$f" -o "$work/out-$f" --seed 3 \
        --group-regex "$regex" --size 12 --jobs 2
    "$PYTHON" - "$work/out-$f/items.csv" <<'PY' || fail "$f: items"
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1], newline="", encoding="utf-8")))
assert rows and all(r["status"] == "ok" and r["split"] and r["member"] for r in rows), rows
assert any("Bodenprobe_\u00e4" in r["member"] for r in rows), [r["member"] for r in rows]
PY
    expect_exit 0 env LC_ALL=C.UTF-8 "$KILN" verify "$work/out-$f" --source "$work/forms/$f"
    grep -q "sources: all [0-9]* recorded files found (0 moved" "$work/stdout" ||
        fail "$f: verify --source: $(cat "$work/stdout")"
    expect_exit 0 env LC_ALL=C.UTF-8 "$KILN" reproduce "$work/out-$f/manifest.json" \
        --source "$work/forms/$f" -o "$work/re-$f"
    grep -q "every output is byte-identical" "$work/stdout" || fail "$f: reproduce: $(cat "$work/stdout")"
done
grep -q 'kalk/K9_a_%E4.png' "$work/out-noflag.zip/items.csv" ||
    fail "the non-UTF-8 member name is not kept byte for byte (escaped)"
# Two identical recorded files that now exist once, as one member of a ./ tarball: reproduce
# finds both there, and pack must read that one member for both of them.
mkdir -p "$work/twins/loam" "$work/later/loam"
cp "$work/tree/loam/T01_a.png" "$work/twins/loam/T01_a.png"
cp "$work/tree/loam/T01_a.png" "$work/twins/loam/T09_a.png"
cp "$work/tree/loam/T02_a.jpg" "$work/twins/loam/T02_a.jpg"
cp "$work/twins/loam/T01_a.png" "$work/twins/loam/T02_a.jpg" "$work/later/loam/"
tar -C "$work/later" -czf "$work/later.tgz" .
expect_exit 0 "$KILN" build "$work/twins" -o "$work/tw1" --seed 3 --size 12 --ratios 100:0:0
expect_exit 0 "$KILN" reproduce "$work/tw1/manifest.json" --source "$work/later.tgz" -o "$work/tw2"
grep -q "every output is byte-identical" "$work/stdout" || fail "twins: $(cat "$work/stdout")"
echo ok
