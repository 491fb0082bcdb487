# The README's main job on the generated demo set: build, then check every output against
# outside computations (coreutils sha256sum, numpy, hashlib), the bad files' statuses, and that
# verify names a damaged file.
. "$(dirname "$0")/lib.sh"
need_python
demo_data "$work/data"
expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --group-regex '/(T[0-9]+)_' \
    --seed 2026 --ratios 70:15:15 --stratify --size 64x48 --fit pad --jobs 2
# coreutils is the outside reference for SHA256SUMS (SPEC: sha256sum -c must agree).
(cd "$work/out" && sha256sum --quiet -c SHA256SUMS) || fail "sha256sum -c SHA256SUMS"
expect_exit 0 "$KILN" verify "$work/out"
"$PYTHON" "$KILN_SRC/tests/ref/check_pack.py" "$work/out" || fail "reference check"
# The broken files of the demo set are listed with their reasons, not dropped.
"$PYTHON" - "$work/out/manifest.json" <<'PY' || fail "skipped files in the manifest"
import json, sys
m = json.load(open(sys.argv[1]))
by = {}
for s in m["skipped"]:
    by.setdefault(s["status"], []).append(s)
assert len(by.get("truncated", [])) == 1, by.keys()
assert "ends" in by["truncated"][0]["reason"], by["truncated"][0]
assert any(s["path"].endswith("notes.txt") for s in by.get("not-image", [])), by.keys()
assert m["scan"]["hidden_skipped"] >= 1 and m["scan"]["system_files_skipped"] >= 1, m["scan"]
assert m["split"]["merged_by_bytes"] >= 1, m["split"]
print("ok: skipped", {k: len(v) for k, v in by.items()})
PY
# One flipped byte in a tensor: verify exits 4 and names the file.
cp -r "$work/out" "$work/bad"
"$PYTHON" -c "
import sys
p = sys.argv[1]; b = bytearray(open(p, 'rb').read()); b[5000] ^= 1; open(p, 'wb').write(b)" \
    "$work/bad/train.kten"
expect_exit 4 "$KILN" verify "$work/bad"
grep -q "train.kten" "$work/stdout" || fail "verify does not name train.kten: $(cat "$work/stdout")"
grep -q "array 'images'" "$work/stdout" || fail "verify does not name the damaged array"
if (cd "$work/bad" && sha256sum --quiet -c SHA256SUMS >/dev/null 2>&1); then
    fail "sha256sum -c passed on a damaged file"
fi
# An edited manifest is caught too.
sed -i 's/"fit": "pad"/"fit": "crop"/' "$work/out/manifest.json"
expect_exit 4 "$KILN" verify "$work/out"
grep -q "manifest.json" "$work/stdout" || fail "verify does not name the edited manifest"
echo ok
