# kiln's PNG image-data path (libdeflate and unfiltering in kiln, formats/decoders/png_idat.c)
# against libpng's own path and PIL, on hand-written PNGs of every layout and filter type and
# on the published PngSuite and libpng crash files when ../shared/testdata has them
# (tests/ref/png_paths.py).
. "$(dirname "$0")/lib.sh"
need_python
suites=()
for d in pngsuite pngsuite-full libpng-crashers; do
    [ -n "${KILN_TESTDATA:-}" ] && [ -d "$KILN_TESTDATA/$d" ] && suites+=("$KILN_TESTDATA/$d")
done
[ ${#suites[@]} -gt 0 ] || echo "note: ../shared/testdata absent; hand-written PNGs only"
"$PYTHON" "$KILN_SRC/tests/ref/png_paths.py" "$KILN_TOOLS/kiln-decode-check" "$work" "${suites[@]}" ||
    fail "kiln's PNG path differs from libpng's"
echo "ok: png paths"
