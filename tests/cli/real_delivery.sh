# A real delivery (issue 11): published pictures from Debian's packages, cut into shots of
# specimens and packaged the way colleagues send them, checked against the builder's ground
# truth and PIL. Sources and licences: tests/ref/real_delivery.py (scikit-image's data,
# python3-skimage, public domain / CC0 / BSD-3-Clause; scikit-learn's china.jpg and flower.jpg,
# python3-sklearn, CC BY 2.0; matplotlib's grace_hopper.jpg, python-matplotlib-data, public
# domain). Default options throughout (stretch, bilinear, RGB, 8-bit, DCT reduction on), plus
# --no-dct-scale for the sample-exact comparison.
. "$(dirname "$0")/lib.sh"
need_python
"$PYTHON" -c 'import tifffile' 2>/dev/null || skip "python3-tifffile is needed (Debian: python3-tifffile)"
ref="$KILN_SRC/tests/ref/real_delivery.py"
rc=0
"$PYTHON" "$ref" build "$work" || rc=$?
[ $rc = 77 ] && skip "the published pictures are missing (see above)"
[ $rc = 0 ] || fail "building the delivery"
regex=$("$PYTHON" -c 'import json,sys; print(json.load(open(sys.argv[1], encoding="utf-8"))["group_regex"])' "$work/truth.json")
cd "$work"  # the catalogue records sources as given: a relative name keeps paths short
common=(--seed 2026 --size 64x48 --group-regex "$regex" --jobs 2)
expect_exit 0 env LC_ALL=C "$KILN" build delivery -o full "${common[@]}" --no-dct-scale
"$PYTHON" "$ref" check "$work" full --exact || fail "labels, groups, statuses or pixels (--no-dct-scale)"
expect_exit 0 env LC_ALL=C.UTF-8 "$KILN" build delivery -o out "${common[@]}"
# Mixed formats, sizes, depths and archives, none tied to a class: the shortcut check is quiet.
! grep -q "shortcut" "$work/stderr" || fail "shortcut warning on a real delivery: $(cat "$work/stderr")"
grep -q "^shortcut check: no attribute besides the picture predicts the label" "$work/stdout" ||
    fail "shortcut check not reported: $(cat "$work/stdout")"
# The copy of a grey micrograph filed under texture joins a unit across two classes: named.
grep -q "^  group 'S14' (5 items" "$work/stderr" || fail "mixed-label unit not named: $(cat "$work/stderr")"
grep -q "^1 multi-page file: only the first page" "$work/stdout" || fail "multi-page TIFF not reported"
# The default run: identical to the exact one except the DCT-reduced JPEGs, which must stay
# within the PSNR floor of docs/resize.md against PIL's full-size decode and resize. (Before the
# DCT geometry fix, issue 11 item 3, 6 of the 7 reduced shots at odd sizes missed it by up to
# 6 dB.)
"$PYTHON" "$ref" check "$work" out || fail "default recipe against PIL"
# Found again by name and by content, and rebuilt byte for byte, whatever the locale.
expect_exit 0 env LC_ALL=C "$KILN" verify out --source delivery
grep -q "sources: all [0-9]* recorded files found (0 moved" "$work/stdout" ||
    fail "verify --source: $(cat "$work/stdout")"
expect_exit 0 env LC_ALL=C "$KILN" reproduce out/manifest.json --source delivery -o again --jobs 2
grep -q "every output is byte-identical" "$work/stdout" || fail "reproduce: $(cat "$work/stdout")"
echo ok
