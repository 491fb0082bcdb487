# DCT-domain JPEG reduction (docs/pixels.md 1a, docs/resize.md "Reduced sources") on awkward
# JPEGs: real photographs from Debian's scikit-image and scikit-learn packages cropped to sizes
# that are not multiples of 8 (odd, prime, 1x1, 7x3, 997x13, 13x997, 4099x17), EXIF
# orientations 1-8, generated hard edges (tests/ref/resize_dct.py names each source and
# licence). Every fit at several sizes and filters is built with and without --no-dct-scale:
# the reduction must be the documented rule's, the geometry the full-size picture's, every
# reduced record within the documented PSNR of --no-dct-scale and of PIL's resize of the full
# decode, and equal (within 1) to PIL's resize of its own reduced decode with the documented
# fractional box. The staged route must give build's bytes. The demo set keeps the documented
# measurement at 128x96 (docs/resize.md).
. "$(dirname "$0")/lib.sh"
need_python
ref="$KILN_SRC/tests/ref/resize_dct.py"
"$PYTHON" "$ref" make "$work/src"
log="$work/coverage.jsonl"
run=0
pair() { # SOURCE SIZE options...: default and --no-dct-scale builds, then the checks
    run=$((run + 1))
    local src=$1 size=$2
    shift 2
    local common=(--seed 3 --ratios 100:0:0 --size "$size" --pad-value 3,141,59 --jobs 2 "$@")
    expect_exit 0 "$KILN" build "$src" -o "$work/d$run" "${common[@]}"
    expect_exit 0 "$KILN" build "$src" -o "$work/f$run" "${common[@]}" --no-dct-scale
    "$PYTHON" "$ref" check "$src" "$work/d$run" "$work/f$run" "$log" ||
        fail "dct check $size $*"
}
# Square, wide, tall and tiny targets, every fit (the staged route below reuses 37x23 pad).
pair "$work/src" 64x64 --fit stretch
pair "$work/src" 23x37 --fit stretch
pair "$work/src" 37x23 --fit pad
built="$work/d$run"
pair "$work/src" 5x3 --fit pad
pair "$work/src" 64x64 --fit crop
pair "$work/src" 37x23 --fit crop
pair "$work/src" 128x96 --fit pad --filter lanczos3
pair "$work/src" 41x29 --fit crop --filter bicubic
"$PYTHON" "$ref" coverage "$log" || fail "coverage"

# build decodes once at pack's scale; scan -> split -> pack decodes again: the same record for
# every item. (Not the same files: build also keeps identical records in one unit, and the
# 997x13 strips turned by their Exif tags give identical 37x23 records, so its units and with
# them the record order differ from the staged route's; docs/split.md.)
common=(--size 37x23 --fit pad --pad-value 3,141,59)
expect_exit 0 "$KILN" scan "$work/src" -o "$work/cat.csv" --jobs 2
expect_exit 0 "$KILN" split "$work/cat.csv" --seed 3 --ratios 100:0:0
expect_exit 0 "$KILN" pack "$work/cat.csv" -o "$work/staged" "${common[@]}" --jobs 2
"$PYTHON" - "$KILN_SRC/examples" "$work/staged" "$built" <<'PY' || fail "staged route and build differ"
import csv, sys
sys.path.insert(0, sys.argv[1])
from read_kten import read_kten
records = []
for out in sys.argv[2:]:
    images = read_kten(out + "/train.kten", check=True)["images"]
    rows = [r for r in csv.DictReader(open(out + "/items.csv", newline="")) if r["split"]]
    records.append({(r["source"], r["path"], r["member"]): images[int(r["index"])].tobytes()
                    for r in rows})
assert records[0].keys() == records[1].keys(), "different items"
bad = [k for k in records[0] if records[0][k] != records[1][k]]
assert not bad, f"{len(bad)} records differ, e.g. {bad[0]}"
print("ok: staged route and build give the same record for each of", len(records[0]), "items")
PY

# The demo set (multiples of 8), the documented measurement: every reduced record >= 35 dB.
demo_data "$work/demo"
expect_exit 0 "$KILN" build "$work/demo" -o "$work/demo_d" --seed 8 --size 128x96 --jobs 2
expect_exit 0 "$KILN" build "$work/demo" -o "$work/demo_f" --seed 8 --size 128x96 --jobs 2 \
    --no-dct-scale
"$PYTHON" "$ref" check "$work/demo" "$work/demo_d" "$work/demo_f" "$work/demo.jsonl" ||
    fail "dct check on the demo set"
echo ok
