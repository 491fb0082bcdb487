"""TIFFs whose coded data holds fewer samples than the directory declares must fail to decode,
never come back with rows partly made of whatever memory held.

PIL (Debian python3-pil, with libtiff) writes each file; the test then widens ImageWidth or
lengthens ImageLength in the directory (TIFF 6.0, section 2: tags 256 and 257), which is what a
damaged or hand-edited file looks like. The untouched files must decode to PIL's own pixels
(lossless codecs) so a decoder that refused everything cannot pass.

usage: tiff_shortfall.py KILN_DECODE_CHECK WORKDIR
"""
import struct
import subprocess
import sys

import numpy as np
from PIL import Image

tool, work = sys.argv[1], sys.argv[2]
failures = []


def set_tag(path, tag, value):
    """Rewrites one SHORT or LONG tag of the first directory in place (little-endian file)."""
    with open(path, "r+b") as f:
        d = bytearray(f.read())
        assert d[:4] == b"II*\0", "PIL wrote a little-endian classic TIFF"
        ifd = struct.unpack_from("<I", d, 4)[0]
        for i in range(struct.unpack_from("<H", d, ifd)[0]):
            at = ifd + 2 + 12 * i
            t, typ, count = struct.unpack_from("<HHI", d, at)
            if t == tag:
                assert count == 1
                struct.pack_into("<H" if typ == 3 else "<I", d, at + 8, value)
                f.seek(0)
                f.write(d)
                return
        raise AssertionError(f"tag {tag} not in {path}")


def decode(path):
    out = subprocess.run([tool, path], capture_output=True, text=True)
    fields = out.stdout.strip().split("\t")
    return fields[1] if len(fields) > 1 else "?", out.stderr.strip()


rng = np.random.default_rng(7)
picture = rng.integers(0, 256, size=(16, 24, 3), dtype=np.uint8)
for codec in ("jpeg", "tiff_lzw", "tiff_deflate", "packbits", "raw"):
    good = f"{work}/{codec}.tif"
    Image.fromarray(picture).save(good, compression=codec)
    status, _ = decode(good)
    if status != "ok":
        failures.append(f"{codec}: the undamaged file was refused ({status})")
    for tag, value, what in ((256, 24592, "ImageWidth 24592"), (257, 4000, "ImageLength 4000")):
        bad = f"{work}/{codec}-{tag}.tif"
        with open(good, "rb") as f, open(bad, "wb") as g:
            g.write(f.read())
        set_tag(bad, tag, value)
        status, message = decode(bad)
        if status not in ("corrupt", "truncated"):
            failures.append(f"{codec} with {what}: decoded as {status!r}, expected a refusal")
        elif not message:
            failures.append(f"{codec} with {what}: refused without a message")
        else:
            print(f"{codec} with {what}: {status}: {message}")

# The lossless codecs must give PIL's pixels: decode_check prints a SHA-256 of the samples.
import hashlib

for codec in ("tiff_lzw", "tiff_deflate", "packbits", "raw"):
    out = subprocess.run([tool, f"{work}/{codec}.tif"], capture_output=True, text=True)
    fields = out.stdout.strip().split("\t")
    want = hashlib.sha256(np.asarray(Image.open(f"{work}/{codec}.tif")).tobytes()).hexdigest()
    if len(fields) < 10 or fields[9] != want:
        failures.append(f"{codec}: pixels differ from PIL's ({fields[9:10]} vs {want})")

for f in failures:
    print("FAIL:", f)
sys.exit(1 if failures else 0)
