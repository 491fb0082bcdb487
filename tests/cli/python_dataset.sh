# kten.Dataset (examples/python/kten/_torch.py) in PyTorch DataLoaders with 2 worker processes (fork and
# spawn): the same items as a direct numpy read, no per-worker copy of the array, float32 CHW
# and int64 labels for u8 NHWC, 16-bit NCHW and f32 outputs (tests/ref/kten_dataset.py).
. "$(dirname "$0")/lib.sh"
need_python
need_torch
kten_install
demo_data "$work/data"
common=(--seed 8 --ratios 80:10:10 --size 64x48 --jobs 2)
expect_exit 0 "$KILN" build "$work/data" -o "$work/u8" "${common[@]}"
expect_exit 0 "$KILN" build "$work/data" -o "$work/u16" "${common[@]}" --depth 16 --channels 1 \
    --layout nchw
expect_exit 0 "$KILN" build "$work/data" -o "$work/f32" "${common[@]}" --dtype f32 --fit pad
"$PYTHON" "$KILN_SRC/tests/ref/kten_dataset.py" "$work" "$work/u8" "$work/u16" "$work/f32" ||
    fail "Dataset checks"
echo ok
