# EXIF orientation (JPEG APP1 and PNG eXIf) for all 8 values against the Exif table
# (tests/ref/orientation.py), and --no-orient keeps the stored pixels.
. "$(dirname "$0")/lib.sh"
need_python
"$PYTHON" "$KILN_SRC/tests/ref/orientation.py" make "$work/o"
expect_exit 0 "$KILN" build "$work/o/src" -o "$work/out" --seed 1 --ratios 100:0:0 --size 6x4 \
    --no-dct-scale
"$PYTHON" "$KILN_SRC/tests/ref/orientation.py" check "$work/o" "$work/out" || fail "orientation"
echo ok
