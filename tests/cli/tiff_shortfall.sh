# TIFF strips or tiles holding fewer samples than the directory declares are refused, named,
# and never decoded into rows of stale memory (tests/ref/tiff_shortfall.py; found by fuzzing).
. "$(dirname "$0")/lib.sh"
need_python
"$PYTHON" "$KILN_SRC/tests/ref/tiff_shortfall.py" "$KILN_TOOLS/kiln-decode-check" "$work" ||
    fail "a TIFF with missing samples was not refused"
echo ok
