# The resampler against PIL (python3-pil), docs/resize.md recomputed in numpy, and analytic
# properties (constant images, linear ramps, box block means): tests/ref/resize_reference.py
# runs kiln's resampler through tests/tools/resize_check.c.
. "$(dirname "$0")/lib.sh"
need_python
: "${KILN_TOOLS:?KILN_TOOLS must name the folder of the test tools}"
"$PYTHON" "$KILN_SRC/tests/ref/resize_reference.py" "$KILN_TOOLS/kiln-resize-check" >"$work/log" ||
    { cat "$work/log" >&2; fail "resampling differs from the references"; }
cat "$work/log"
echo ok
