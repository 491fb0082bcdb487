# Decoders against published test images and reference values (tests/ref/reference_decode.py).
. "$(dirname "$0")/lib.sh"
need_python
need_testdata pngsuite-full
need_testdata libjpeg-turbo
need_testdata libtiff
"$PYTHON" "$KILN_SRC/tests/ref/reference_decode.py" "$KILN_TOOLS/kiln-decode-check" "$KILN_TESTDATA" ||
    fail "decoded pixels differ from the references"
echo ok
