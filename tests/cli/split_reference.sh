# The split agrees with an independent reference implementation written from docs/split.md and
# docs/near-duplicates.md alone (tests/ref/split_ref.py, tests/ref/near_ref.py) on randomised
# synthetic catalogues carrying real near-duplicate fingerprints and on a catalogue kiln scanned
# from copies of scikit-image's photographs, for every mode, ratio form and option: the same
# unit and split for every item, the same checked links with the same verdicts; shuffling rows
# and renaming files changes nothing; split sizes follow the document.
. "$(dirname "$0")/lib.sh"
need_python
rc=0
"$PYTHON" "$KILN_SRC/tests/ref/split_compare.py" --work "$work/compare" || rc=$?
[ "$rc" = 77 ] && skip "split_compare.py: pictures for the fingerprint pool are missing"
[ "$rc" = 0 ] || fail "kiln split disagrees with the reference implementation (tests/ref/split_ref.py)"
echo ok
