# Channels and depth (docs/pixels.md steps 3-5) through the command line, every record rebuilt
# in numpy from its lossless source (tests/ref/resize_shape.py records): BT.601 luma, grey
# replication, alpha compositing over --background, opaque alpha for --channels 4, 16-bit
# sources kept at 16 bits or rounded to 8, 8-bit sources times 257. --size 640x480 with
# --fit stretch makes resizing the identity for the 640x480 files; the others are resampled
# (checked against docs/resize.md in numpy and PIL). Then the whole demo set (JPEG included):
# --channels 4 = --channels 3 plus an opaque alpha.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
ref="$KILN_SRC/tests/ref/resize_shape.py"
"$PYTHON" "$ref" make-chosen "$work/data" "$work/src"
run=0
check() { # recipe options...: build the chosen files with them, rebuild every record
    run=$((run + 1))
    expect_exit 0 "$KILN" build "$work/src" -o "$work/c$run" --seed 3 --ratios 60:20:20 --jobs 2 \
        "$@"
    "$PYTHON" "$ref" records "$work/src" "$work/c$run" || fail "records with $*"
}
check --size 640x480 --channels 1
check --size 640x480 --channels 1 --depth 16
check --size 640x480 --channels 3 --depth 16 --background 40,40,40
check --size 640x480 --channels 1 --depth 8 --background 200,90,10 --filter nearest
check --size 640x480 --channels 4 --depth 16
check --size 128x96 --channels 1 --filter lanczos3       # luma before resampling
check --size 100x70 --channels 3 --depth 8 --filter box --background 10,200,30
check --size 100x70 --channels 4 --filter bicubic --layout nchw
for depth in 8 16; do
    for ch in 3 4; do
        expect_exit 0 "$KILN" build "$work/data" -o "$work/d$ch-$depth" --seed 3 --size 56x42 \
            --channels "$ch" --depth "$depth" --jobs 2
    done
    "$PYTHON" "$ref" alpha "$work/d3-$depth" "$work/d4-$depth" || fail "channels 4, $depth-bit"
done
echo ok
