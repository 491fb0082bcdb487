# The reviewer story: months later the lab folder has been reorganised and has grown. reproduce
# finds every recorded item by content, rebuilds, and reports every output byte-identical;
# verify --source agrees. One altered source file is named by both, and --allow-missing
# rebuilds with the difference shown per file.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
expect_exit 0 "$KILN" build "$work/data" -o "$work/v1" --seed 77 --group-regex '/(T[0-9]+)_' \
    --ratios 70:15:15 --stratify --size 40x32 --fit crop --filter bicubic --near-unit-limit 4
# Reorganise a copy: every file renamed and moved into new folders, new unrelated files added.
"$PYTHON" - "$work/data" "$work/lab" <<'PY'
import os, shutil, sys
from PIL import Image
src, dst = sys.argv[1], sys.argv[2]
n = 0
for root, dirs, files in sorted(os.walk(src)):
    for f in sorted(files):
        n += 1
        d = os.path.join(dst, "2027", f"box-{n % 5}", "scans")
        os.makedirs(d, exist_ok=True)
        shutil.copy(os.path.join(root, f), os.path.join(d, f"img-{n:04d}-{f[::-1]}"))
os.makedirs(os.path.join(dst, "new-batch"))
for i in range(5):
    Image.new("RGB", (50, 40), (i * 40, 90, 200)).save(os.path.join(dst, "new-batch", f"n{i}.png"))
PY
expect_exit 0 "$KILN" reproduce "$work/v1/manifest.json" --source "$work/lab" -o "$work/v2" --jobs 2
grep -q "every output is byte-identical" "$work/stdout" || fail "reproduce: $(cat "$work/stdout")"
grep -q "0 missing" "$work/stdout" || fail "reproduce missed items: $(cat "$work/stdout")"
for f in train.kten val.kten test.kten items.csv catalog.csv manifest.json; do
    cmp "$work/v1/$f" "$work/v2/$f" || fail "$f differs although reproduce said identical"
done
# 196 recorded files (194 packed, notes.txt and the truncated JPEG); extra: the 5 new images
# and the two system files, which lost their hidden or system names when renamed.
expect_exit 0 "$KILN" verify "$work/v1" --source "$work/lab"
grep -q "all 196 recorded files found (196 moved, 7 extra files)" "$work/stdout" ||
    fail "verify --source summary: $(tail -n 2 "$work/stdout")"
# One source file altered: both commands name it.
victim=$(first_file "$work/lab/2027" -type f -size +2k)
printf 'x' >> "$victim"
expect_exit 5 "$KILN" verify "$work/v1" --source "$work/lab"
grep -q "SOURCE MISSING" "$work/stdout" || fail "verify --source: $(cat "$work/stdout")"
expect_exit 5 "$KILN" reproduce "$work/v1/manifest.json" --source "$work/lab" -o "$work/v3"
grep -q "^MISSING: " "$work/stdout" || fail "reproduce did not name the missing item"
[ ! -e "$work/v3/manifest.json" ] || fail "reproduce wrote a manifest though it refused"
expect_exit 7 "$KILN" reproduce "$work/v1/manifest.json" --source "$work/lab" -o "$work/v4" \
    --allow-missing
grep -q "DIFFERENT" "$work/stdout" || fail "no differing output reported"
grep -q "records are missing" "$work/stdout" || fail "no explanation: $(cat "$work/stdout")"
# A damaged record is refused: catalog.csv no longer matches its manifest.
printf 'x' >> "$work/v1/catalog.csv"
expect_exit 3 "$KILN" reproduce "$work/v1/manifest.json" --source "$work/data" -o "$work/v5"
grep -q "does not match" "$work/stderr" || fail "damaged record accepted: $(cat "$work/stderr")"
# --hash-paths: no file, folder or tile name appears in any output, and reproduce still
# finds everything by content and rebuilds identical bytes.
printf 'lab secret\n' > "$work/key"
expect_exit 0 "$KILN" build "$work/data" -o "$work/h1" --seed 77 --group-regex '/(T[0-9]+)_' \
    --size 24 --hash-paths --path-key "$work/key"
if grep -l -e 'T0[0-9][0-9][0-9]' -e 'crazing/' -e "$work" "$work/h1/items.csv" \
    "$work/h1/catalog.csv" "$work/h1/manifest.json"; then
    fail "a name survived --hash-paths"
fi
expect_exit 0 "$KILN" reproduce "$work/h1/manifest.json" --source "$work/data" -o "$work/h2"
grep -q "every output is byte-identical" "$work/stdout" || fail "hashed reproduce: $(cat "$work/stdout")"
echo ok
