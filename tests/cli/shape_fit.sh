# --fit pad and --fit crop (docs/resize.md "Fit") through the command line: geometry recomputed
# independently in Python, pad areas exactly --pad-value (times 257 for 16-bit records) on every
# demo record, and each lossless record rebuilt in numpy (docs/resize.md) and compared with
# PIL's resize of the same box (tests/ref/resize_shape.py). Square, wide and tall targets give
# both branches of each rule, the equality case and odd margins.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
ref="$KILN_SRC/tests/ref/resize_shape.py"
"$PYTHON" "$ref" make-chosen "$work/data" "$work/src"
run=0
build() { # SOURCE options...
    run=$((run + 1))
    local src=$1
    shift
    expect_exit 0 "$KILN" build "$src" -o "$work/f$run" --seed 4 --jobs 2 "$@"
}
for size in 75x75 101x67 67x101; do
    build "$work/src" --size "$size" --fit pad --pad-value 128,0,255,7 --filter bicubic
    "$PYTHON" "$ref" records "$work/src" "$work/f$run" || fail "pad $size"
    build "$work/src" --size "$size" --fit crop --filter lanczos3
    "$PYTHON" "$ref" records "$work/src" "$work/f$run" || fail "crop $size"
    build "$work/data" --size "$size" --fit pad --pad-value 128,0,255,7
    "$PYTHON" "$ref" pad-regions "$work/f$run" || fail "pad regions $size"
done
build "$work/src" --size 101x67 --fit pad --pad-value 128,0,255,7 --depth 16 --layout nchw
"$PYTHON" "$ref" records "$work/src" "$work/f$run" || fail "pad 16-bit"
build "$work/data" --size 67x101 --fit pad --pad-value 128,0,255,7 --depth 16 --channels 4
"$PYTHON" "$ref" pad-regions "$work/f$run" || fail "pad regions 16-bit, 4 channels"
# One value per channel, as --help and the error message describe: 3 values for 3 channels.
build "$work/data" --size 75x75 --fit pad --pad-value 128,0,255
"$PYTHON" "$ref" pad-regions "$work/f$run" || fail "pad regions with --pad-value 128,0,255"
echo ok
