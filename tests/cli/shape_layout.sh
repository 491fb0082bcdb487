# --layout nchw stores the nhwc records transposed, byte for byte (numpy's transpose through
# examples/read_kten.py), for 8- and 16-bit records of the demo set with the same seed and recipe.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
ref="$KILN_SRC/tests/ref/resize_shape.py"
for depth in 8 16; do
    for layout in nhwc nchw; do
        expect_exit 0 "$KILN" build "$work/data" -o "$work/$layout$depth" --seed 11 --size 40x30 \
            --fit pad --pad-value 9 --filter bicubic --depth "$depth" --layout "$layout" --jobs 2
    done
    "$PYTHON" "$ref" layout "$work/nhwc$depth" "$work/nchw$depth" || fail "nchw vs nhwc, $depth-bit"
done
echo ok
