# CMYK JPEGs (as written by Adobe-style encoders, with an APP14 marker and inverted ink values)
# decode to the RGB of docs/formats.md: R = (255 - C)(255 - K) / 255 in ink terms, rounded.
# PIL (python3-pil) is the reference for the decoded ink values; the conversion is the
# documented formula applied to them.
. "$(dirname "$0")/lib.sh"
need_python
"$PYTHON" - "$KILN_TOOLS/kiln-decode-check" "$work" <<'PY' || fail "CMYK JPEG"
import subprocess, sys
import numpy as np
from PIL import Image
tool, work = sys.argv[1], sys.argv[2]
rng = np.random.default_rng(3)
# Smooth ink gradients so JPEG artefacts stay small but every combination varies.
y, x = np.mgrid[0:48, 0:64]
cmyk = np.stack([x * 4, y * 5, (x + y) * 2, 255 - x * 3], axis=-1).clip(0, 255).astype(np.uint8)
p = f"{work}/cmyk.jpg"
Image.fromarray(cmyk, "CMYK").save(p, quality=95)
raw = open(p, "rb").read()
assert b"Adobe" in raw, "PIL did not write an Adobe APP14 marker"
ink = np.asarray(Image.open(p)).astype(np.int64)      # PIL's decode, in ink terms
c, m, ye, k = (ink[..., i] for i in range(4))
expect = np.stack([((255 - v) * (255 - k) + 127) // 255 for v in (c, m, ye)], axis=-1)
got = np.frombuffer(subprocess.run([tool, "--raw", p], capture_output=True, check=True).stdout,
                    np.uint8).reshape(48, 64, 3)
d = np.abs(got.astype(np.int64) - expect)
assert d.max() == 0, f"max difference {d.max()}"
print("ok: CMYK JPEG matches the documented conversion of PIL's ink values")
PY
echo ok
