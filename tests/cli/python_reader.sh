# The kten package's reader (examples/python/kten) against docs/format.md and the decoded source pixels:
# every dtype (u8, u16, f32) and layout (nhwc, nchw) of tiles of real published pictures
# (scikit-image's bundled data; sources and licences in tests/ref/kten_reader.py), 0-record
# splits, statistics null or absent, damaged and mismatched files.
. "$(dirname "$0")/lib.sh"
need_python
"$PYTHON" -c 'import skimage.data' 2>/dev/null ||
    skip "$PYTHON without scikit-image's sample pictures (Debian: python3-skimage)"
kten_install
ref="$KILN_SRC/tests/ref/kten_reader.py"
"$PYTHON" "$ref" tiles "$work/t8" "$work/t16" || fail "writing the test tiles"
# Packed at the tiles' own size: the records must be the decoded pixels themselves.
common=(--seed 3 --size 13x11 --jobs 2)
outs=()
for layout in nhwc nchw; do
    expect_exit 0 "$KILN" build "$work/t8" -o "$work/u8-$layout" "${common[@]}" --layout "$layout"
    expect_exit 0 "$KILN" build "$work/t8" -o "$work/f32-$layout" "${common[@]}" --layout "$layout" \
        --dtype f32
    expect_exit 0 "$KILN" build "$work/t16" -o "$work/u16-$layout" "${common[@]}" --layout "$layout" \
        --depth 16
    outs+=("$work/u8-$layout" "$work/f32-$layout" "$work/u16-$layout")
done
"$PYTHON" "$ref" formats "$work/t8" "$work/t16" "${outs[@]}" || fail "dtype and layout checks"
expect_exit 0 "$KILN" build "$work/t8" -o "$work/empty" "${common[@]}" --ratios 100:0:0
"$PYTHON" "$ref" empty "$work/empty" || fail "0-record splits"
mkdir "$work/damaged"
"$PYTHON" "$ref" damaged "$work/u8-nhwc" "$work/damaged" || fail "damaged files"
echo ok
