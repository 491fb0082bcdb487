# A real client end to end: the 1797 UCI hand-written digits bundled with scikit-learn (source
# and licence in tests/ref/digits_folder.py) written as PNG class folders, packed by kiln build
# (16x16, one channel, a fixed seed, default options otherwise) and trained on with
# examples/train_torch.py and the installed kten package, on the CPU. The test accuracy must be
# at least 0.95. Published context, from memory: scikit-learn's gallery example "Recognizing
# hand-written digits" (plot_digits_classification.py) reports about 0.97 for an SVC trained on
# half of this set; small CNNs reach about 0.97-0.99.
. "$(dirname "$0")/lib.sh"
need_python
need_torch
"$PYTHON" -c 'import sklearn.datasets' 2>/dev/null ||
    skip "$PYTHON without scikit-learn's bundled digits (Debian: python3-sklearn)"
kten_install
"$PYTHON" "$KILN_SRC/tests/ref/digits_folder.py" "$work/digits" || fail "writing the digits"
expect_exit 0 "$KILN" build "$work/digits" -o "$work/packed" --size 16x16 --channels 1 --seed 2026 \
    --jobs 2
expect_exit 0 "$KILN" verify "$work/packed"
"$PYTHON" - "$work/packed/manifest.json" <<'PY' || fail "packed digits"
import json, sys
m = json.load(open(sys.argv[1]))
total = sum(m["counts"][s]["records"] for s in ("train", "val", "test"))
assert m["classes"] == [str(d) for d in range(10)], m["classes"]
assert total == 1797, total
print("ok: 1797 digits packed,", {s: m["counts"][s]["records"] for s in ("train", "val", "test")})
PY
# One thread, a fixed seed: on a shared 2-core machine OpenMP threads that wait for a busy core
# made an epoch 12x slower; one thread also makes the run repeatable.
(cd "$work" && "$PYTHON" "$KILN_SRC/examples/train_torch.py" packed --threads 1 --seed 0) \
    >"$work/train.log" 2>&1 || { cat "$work/train.log" >&2; fail "train_torch.py"; }
cat "$work/train.log"
acc=$(sed -n 's/^test accuracy \([0-9.]*\) .*/\1/p' "$work/train.log")
[ -n "$acc" ] || fail "train_torch.py printed no test accuracy"
"$PYTHON" -c 'import sys; sys.exit(float(sys.argv[1]) < 0.95)' "$acc" ||
    fail "test accuracy $acc is below 0.95"
echo "ok: test accuracy $acc"
