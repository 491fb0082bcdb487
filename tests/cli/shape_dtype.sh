# --dtype f32 is (v / M - mean_c) / std_c in double precision rounded to binary32 (docs/pixels.md
# step 7), with the training split's statistics for every split: compared bit for bit with numpy
# (float64, then float32) applied to the integer records of the same recipe.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
ref="$KILN_SRC/tests/ref/resize_shape.py"
common=(--seed 5 --ratios 70:15:15 --size 48x36 --fit crop --jobs 2)
expect_exit 0 "$KILN" build "$work/data" -o "$work/u8" "${common[@]}"
expect_exit 0 "$KILN" build "$work/data" -o "$work/f32" "${common[@]}" --dtype f32
"$PYTHON" "$ref" dtype "$work/u8" "$work/f32" || fail "f32 from 8-bit records"
# 16-bit records (M = 65535), channel-first, grey.
common=(--seed 5 --ratios 70:15:15 --size 40x40 --depth 16 --channels 1 --layout nchw --jobs 2)
expect_exit 0 "$KILN" build "$work/data" -o "$work/u16" "${common[@]}"
expect_exit 0 "$KILN" build "$work/data" -o "$work/f32b" "${common[@]}" --dtype f32
"$PYTHON" "$ref" dtype "$work/u16" "$work/f32b" || fail "f32 from 16-bit records"
echo ok
