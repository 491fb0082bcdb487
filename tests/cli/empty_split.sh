# A split with no records is a valid, complete output: its .kten file has N = 0 in every array
# (docs/format.md, "Empty files"), the numpy reader of examples/ reads it, and its statistics
# are null -- not a mean and standard deviation of 0 -- in the manifest and in the file's
# metadata (docs/statistics.md). Non-empty statistics are checked against numpy on the packed
# records. f32 output with an empty training split is refused before any work.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
# 1. zero shares: val and test get no record
expect_exit 0 "$KILN" build "$work/data" -o "$work/z" --seed 3 --size 9x7 --ratios 100:0:0
grep -q "val   0 records" "$work/stdout" || fail "summary: $(cat "$work/stdout")"
expect_exit 0 "$KILN" verify "$work/z"
expect_exit 0 "$KILN" inspect "$work/z/test.kten"
grep -q "channel 0: no values (0 samples)" "$work/stdout" || fail "inspect: $(cat "$work/stdout")"
"$PYTHON" - "$work/z" "$KILN_SRC/examples" <<'PY' || fail "empty split files or statistics"
import json, sys
import numpy as np
sys.path.insert(0, sys.argv[2])
from read_kten import read_kten
out = sys.argv[1]
man = json.load(open(f"{out}/manifest.json"))
undefined = ("min", "max", "mean", "std", "std_sample", "mean_unit", "std_unit", "std_sample_unit")
for split in ("val", "test"):
    t = read_kten(f"{out}/{split}.kten", check=True)
    assert t["images"].shape == (0, 7, 9, 3), t["images"].shape
    assert t["labels"].shape == (0,) and t["item"].shape == (0,)
    for stats in (man["statistics"][split], t["metadata"]["statistics"]):
        assert stats["records"] == 0
        for ch in stats["channels"]:
            assert ch["count"] == 0 and ch["sum"] == "0" and ch["sum_of_squares"] == "0", ch
            for k in undefined:
                assert ch[k] is None, (split, k, ch[k])
    assert t["metadata"]["training_statistics"] == man["statistics"]["train"]
# The training statistics, from the packed records with numpy (population and sample std).
x = read_kten(f"{out}/train.kten")["images"].astype(np.float64)
for c, ch in enumerate(man["statistics"]["train"]["channels"]):
    v = x[..., c]
    assert ch["count"] == v.size and ch["min"] == v.min() and ch["max"] == v.max()
    assert abs(ch["mean"] - v.mean()) < 1e-9 and abs(ch["std"] - v.std()) < 1e-9
    assert abs(ch["std_sample"] - v.std(ddof=1)) < 1e-9
    assert abs(ch["mean_unit"] - v.mean() / 255) < 1e-12
PY
# 2. an empty split without a zero share: one image, stable mode, a seed that deals it to test
mkdir -p "$work/one/cls"
cp "$(first_file "$work/data/sound" -name '*.png')" "$work/one/cls/"
seed=
for s in $(seq 1 64); do
    expect_exit 0 "$KILN" build "$work/one" -o "$work/o$s" --seed "$s" --size 8 --ratios 50:50 \
        --mode stable -q
    if "$PYTHON" -c 'import json,sys; sys.exit(json.load(open(sys.argv[1]))["counts"]["train"]["records"])' \
        "$work/o$s/manifest.json"; then
        seed=$s
        break
    fi
done
[ -n "$seed" ] || fail "no seed in 1..64 put the one image in test (a unit key is uniform)"
"$PYTHON" - "$work/o$seed" "$KILN_SRC/examples" <<'PY' || fail "empty training split"
import json, sys
sys.path.insert(0, sys.argv[2])
from read_kten import read_kten
t = read_kten(f"{sys.argv[1]}/train.kten", check=True)
assert t["images"].shape == (0, 8, 8, 3)
for ch in t["metadata"]["statistics"]["channels"]:
    assert ch["count"] == 0 and ch["mean"] is None and ch["std"] is None, ch
test = read_kten(f"{sys.argv[1]}/test.kten", check=True)
assert test["images"].shape == (1, 8, 8, 3)
for ch in test["metadata"]["training_statistics"]["channels"]:
    assert ch["mean"] is None, ch
for ch in test["metadata"]["statistics"]["channels"]:
    assert ch["std_sample"] is not None and ch["mean"] is not None, ch
PY
expect_exit 0 "$KILN" build "$work/one" -o "$work/s" --seed "$seed" --size 8 --ratios 50:50 --mode stable
grep -q "training statistics: none, the training split is empty" "$work/stdout" ||
    fail "pack summary: $(cat "$work/stdout")"
expect_exit 3 "$KILN" build "$work/one" -o "$work/f" --seed "$seed" --size 8 --ratios 50:50 \
    --mode stable --dtype f32
grep -q "training split is empty, so --dtype f32" "$work/stderr" || fail "f32: $(cat "$work/stderr")"
[ ! -e "$work/f/manifest.json" ] || fail "a refused f32 pack wrote a manifest"
echo ok
