# inspect --preview: the contact sheet decoded with PIL, each tile compared with its packed
# record read by examples/read_kten.py (numpy): exact for u8 and u16 (round(v*255/65535)),
# within 1 for f32 de-normalised; sizes that are not multiples of 8, grey channel-first,
# records shrunk above 256 px, unlabelled records, a UTF-8 class name, and the errors.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
check="$KILN_SRC/tests/ref/preview_check.py"
ex="$KILN_SRC/examples"

# sheet OUT KTEN K [TOL]: writes the sheet, reads from stdout whether names were drawn, checks.
sheet() {
    expect_exit 0 "$KILN" inspect "$2" --preview "$1" --sample "$3"
    local drawn=0
    grep -q 'names drawn with' "$work/stdout" && drawn=1
    "$PYTHON" "$check" "$1" "$2" "$3" "$drawn" "${4:-}" "$ex" || fail "sheet $1 of $2"
}

common=(--seed 3 --jobs 2 -q)
expect_exit 0 "$KILN" build "$work/data" -o "$work/u8" --size 37x23 "${common[@]}"
sheet "$work/u8.png" "$work/u8/train.kten" 5
sheet "$work/u8v.png" "$work/u8/val.kten" 64
# Deterministic: the same file gives the same bytes.
expect_exit 0 "$KILN" inspect "$work/u8/train.kten" --preview "$work/again.png" --sample 5 -q
cmp "$work/u8.png" "$work/again.png" || fail "two sheets of one file differ"
# With fonts-dejavu-core installed (tests/deps.sh) the class names are drawn.
font=$(fc-match -f '%{file}' 'DejaVu Sans' 2>/dev/null || true)
if [[ $font == *DejaVu* ]]; then
    expect_exit 0 "$KILN" inspect "$work/u8/train.kten" --preview "$work/n.png" --sample 2
    grep -q 'names drawn with .*DejaVu' "$work/stdout" || fail "names not drawn: $(cat "$work/stdout")"
fi

expect_exit 0 "$KILN" build "$work/data" -o "$work/u16" --size 41x29 --depth 16 --channels 1 \
    --layout nchw "${common[@]}"
sheet "$work/u16.png" "$work/u16/train.kten" 3

expect_exit 0 "$KILN" build "$work/data" -o "$work/f32" --size 33x17 --dtype f32 "${common[@]}"
sheet "$work/f32.png" "$work/f32/test.kten" 4 1

# 300x200 records: shrunk by 2 on the sheet (box mean).
expect_exit 0 "$KILN" build "$work/data" -o "$work/big" --size 300x200 --ratios 10:45:45 "${common[@]}"
sheet "$work/big.png" "$work/big/train.kten" 2

# No labels: one row of unlabelled records; a UTF-8 class name is drawn without complaint.
expect_exit 0 "$KILN" build "$work/data" -o "$work/none" --labels none --size 16x16 "${common[@]}"
sheet "$work/none.png" "$work/none/train.kten" 7
mkdir -p "$work/utf/Überzug_ä" "$work/utf/grün"
cp "$(first_file "$work/data/crawling/" -name '*.jpg')" "$work/utf/Überzug_ä/a.jpg"
cp "$(first_file "$work/data/sound/" -name '*.jpg')" "$work/utf/grün/b.jpg"
expect_exit 0 "$KILN" build "$work/utf" -o "$work/utfout" --size 16x16 --ratios 100:0:0 "${common[@]}"
sheet "$work/utf.png" "$work/utfout/train.kten" 1

# Errors: a bad --sample is a usage error; a file that is not a .kten is bad input named in
# the message; an empty split has nothing to show; a missing output folder is refused before
# any work (exit 1, docs/cli.md), and nothing is written.
expect_exit 2 "$KILN" inspect "$work/u8/train.kten" --preview "$work/x.png" --sample 0
grep -q -- "--sample" "$work/stderr" || fail "bad --sample not named: $(cat "$work/stderr")"
expect_exit 3 "$KILN" inspect "$work/u8/manifest.json" --preview "$work/x.png"
grep -q "manifest.json" "$work/stderr" || fail "bad input not named: $(cat "$work/stderr")"
expect_exit 0 "$KILN" build "$work/data" -o "$work/two" --size 8x8 --ratios 100:0:0 "${common[@]}"
expect_exit 3 "$KILN" inspect "$work/two/val.kten" --preview "$work/x.png"
grep -q "no records" "$work/stderr" || fail "empty split: $(cat "$work/stderr")"
expect_exit 1 "$KILN" inspect "$work/u8/train.kten" --preview "$work/nowhere/x.png"
[ ! -s "$work/stdout" ] || fail "work done before the output folder was checked"
[ ! -e "$work/x.png" ] || fail "a failed preview left $work/x.png"
echo ok
