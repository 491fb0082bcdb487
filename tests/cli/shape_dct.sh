# DCT-domain JPEG reduction (docs/pixels.md 1a): --size 128x96 packs of the demo set with and
# without --no-dct-scale. The number of reduced items must be what the documented rule gives
# (and 0 without), unreduced records must be identical, and every reduced record must stay
# above a conservative PSNR floor against the full-size decode (a measurement, printed; the
# numbers are in docs/resize.md, "DCT-domain reduction: quality").
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
ref="$KILN_SRC/tests/ref/resize_shape.py"
for size in 128x96 224x224; do
    common=(--seed 8 --size "$size" --jobs 2)
    expect_exit 0 "$KILN" build "$work/data" -o "$work/dct$size" "${common[@]}"
    expect_exit 0 "$KILN" build "$work/data" -o "$work/full$size" "${common[@]}" --no-dct-scale
    "$PYTHON" "$ref" dct "$work/data" "$work/dct$size" "$work/full$size" || fail "dct $size"
done
echo ok
