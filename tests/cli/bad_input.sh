# A scripted corpus of bad input (tests/ref/bad_corpus.py): every file gets its documented
# status and a reason, the run completes, good files are still catalogued, hidden and system
# files are counted, and a second scan writes the same bytes.
. "$(dirname "$0")/lib.sh"
need_python
command -v zip >/dev/null || skip "zip is needed to build the archive cases"
"$PYTHON" "$KILN_SRC/tests/ref/bad_corpus.py" make "$work/corpus"
expect_exit 0 "$KILN" scan "$work/corpus/src" -o "$work/c.csv" --jobs 2
"$PYTHON" "$KILN_SRC/tests/ref/bad_corpus.py" check "$work/corpus" "$work/c.csv" || fail "statuses"
grep -q "skipped without a row: 1 hidden, 2 system files" "$work/stdout" ||
    fail "skip counts: $(cat "$work/stdout")"
expect_exit 0 "$KILN" scan "$work/corpus/src" -o "$work/c2.csv" --jobs 1
cmp "$work/c.csv" "$work/c2.csv" || fail "a second scan wrote different bytes"
expect_exit 3 "$KILN" scan "$work/corpus/src" -o "$work/c3.csv" --strict
# With --follow-links the link is read and the loop is reported, not walked forever.
expect_exit 0 "$KILN" scan "$work/corpus/src" -o "$work/f.csv" --follow-links
grep -q '^[^,]*,loopdir/up,,.*,link-loop,' "$work/f.csv" || fail "no link-loop row"
grep -q '^[^,]*,good/link.png,,.*,ok,' "$work/f.csv" || fail "followed link not catalogued"
# An unreadable file is a row, not an abort (root reads everything, so only as a normal user).
if [ "$(id -u)" != 0 ]; then
    cp "$work/corpus/src/good/a.png" "$work/corpus/src/good/locked.png"
    chmod 000 "$work/corpus/src/good/locked.png"
    expect_exit 0 "$KILN" scan "$work/corpus/src" -o "$work/u.csv"
    grep -q 'good/locked.png,,.*,unreadable,' "$work/u.csv" || fail "no unreadable row"
else
    echo "note: running as root, which can read a mode-000 file; the unreadable case is skipped"
fi
# The non-UTF-8 name is found again on disk by pack (the CSV holds it escaped).
expect_exit 0 "$KILN" split "$work/c.csv" --seed 1 --ratios 100:0:0
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$work/out" --size 16
echo ok
