#!/usr/bin/env python3
"""Compares kiln's decoders (through tests/tools/decode_check) with published reference values
and with PIL:

    reference_decode.py DECODE_CHECK TESTDATA

- PngSuite (Willem van Schaik), image-rs/image-png result lists in pngsuite-full/: the CRC-32
  of the decoded samples after EXPAND|STRIP_16 for all 161 valid images, the CRC-32 of the
  samples as stored for every non-palette image, and rejection of the 14 x*.png files;
- libpng's crashers: every file is rejected (or decoded, for the one valid file) with a status;
- libjpeg-turbo test images: SHA-256 of the reference decodes listed in CHECKS.md section 2
  (djpeg -dct int: islow DCT, fancy upsampling), identical pixels for the arithmetic- and
  Huffman-coded copies, and "unsupported" for the 12-bit file;
- libtiff test images: SHA-256 of the pixel bytes listed in CHECKS.md section 3 for the TIFFs
  and their PNM references, PIL's decode for the lossless files without a reference, statuses
  for float, broken and looping files.
"""
import subprocess
import sys
import os

import numpy as np
from PIL import Image

tool, data = sys.argv[1], sys.argv[2]
failures = []


def check(cond, msg):
    if not cond:
        failures.append(msg)


def kiln_samples(name):
    """The decoded samples of one file, from the tool's --raw mode."""
    return subprocess.run([tool, "--raw", os.path.join(tf, name)], capture_output=True, timeout=60).stdout


def run(files):
    out = subprocess.run([tool] + files, capture_output=True, text=True, timeout=600).stdout
    rows = {}
    for line in out.splitlines():
        f = line.split("\t")
        rows[f[0]] = dict(zip(["name", "status", "format", "w", "h", "c", "depth", "orient",
                               "pages", "sha256", "crc_expand", "crc_identity"], f))
    return rows


# -- PngSuite ----------------------------------------------------------------------------------
suite = os.path.join(data, "pngsuite-full")
expand = dict(l.strip().split(": ", 1) for l in open(os.path.join(suite, "image-png-results.txt")))
ident = dict(l.strip().split(": ", 1) for l in open(os.path.join(suite, "image-png-results_identity.txt")))
rows = run([os.path.join(suite, n) for n in sorted(expand)])
n_ok = n_ident = n_fail = 0
for name, want in expand.items():
    r = rows[name]
    if want == "Expected failure":
        check(r["status"] in ("corrupt", "truncated", "unsupported", "not-image"), f"{name} must be rejected, got {r['status']}")
        n_fail += 1
        continue
    check(r["status"] == "ok", f"{name}: {r['status']}")
    check(r["crc_expand"] == want, f"{name}: expanded CRC-32 {r['crc_expand']} != {want}")
    n_ok += 1
    if r["crc_identity"] != "-":
        check(r["crc_identity"] == ident[name], f"{name}: stored-sample CRC-32 differs")
        n_ident += 1
check(n_ok == 161 and n_fail == 14, f"PngSuite counts {n_ok} valid / {n_fail} invalid")
print(f"PngSuite: {n_ok} CRC-32 matches, {n_ident} stored-sample matches, {n_fail} rejected")

crash = os.path.join(data, "libpng-crashers")
rows = run([os.path.join(crash, n) for n in sorted(os.listdir(crash)) if n.endswith(".png")])
for name, r in rows.items():
    want = "ok" if name == "empty_ancillary_chunks.png" else None
    if want:
        check(r["status"] == "ok", f"{name}: {r['status']}")
    else:
        check(r["status"] in ("corrupt", "truncated", "too-large"), f"{name}: {r['status']}")
check(len(rows) == 23, f"crashers: {len(rows)} results")
print(f"libpng crashers: {len(rows)} files handled without a crash")

# -- libjpeg-turbo -----------------------------------------------------------------------------
jt = os.path.join(data, "libjpeg-turbo")
rows = run([os.path.join(jt, n) for n in ("testorig.jpg", "testimgint.jpg", "testimgari.jpg", "monkey12.jpg")])
# SHA-256 of djpeg -dct int -ppm output payloads, from ../shared/testdata/CHECKS.md section 2.
check(rows["testorig.jpg"]["sha256"] == "37280c2751859a3cff4b45000b365aba7c102b6e7da5c1a39c95752269d4f34e", "testorig.jpg")
for n in ("testimgint.jpg", "testimgari.jpg"):
    check(rows[n]["sha256"] == "0a42217ec0ee16e2473fed4d73c5d6331e811d21c14b3732f188a01e42659021", n)
check(rows["testorig.jpg"]["w"] == "227" and rows["testorig.jpg"]["h"] == "149", "testorig size")
check(rows["monkey12.jpg"]["status"] == "unsupported", "12-bit JPEG status")
print("libjpeg-turbo: reference decodes match")

# -- libtiff -----------------------------------------------------------------------------------
tf = os.path.join(data, "libtiff")
names = sorted(n for n in os.listdir(tf) if n.endswith((".tif", ".tiff", ".ppm", ".pgm", ".pbm")))
rows = run([os.path.join(tf, n) for n in names])
# SHA-256 of the pixel bytes, from ../shared/testdata/CHECKS.md section 3 (16-bit big-endian).
published = {
    "rgb-3c-8b": "ff53739e3609939a902677367b759b4dd0c32e0605dae9173657e32f56de0ff4",
    "minisblack-1c-8b": "6f2d6e8e78698950bfced4d1049ff79e13b54d751db08364c43de4a721b72d16",
    "rgb-3c-16b": "80aca8bc4e69ebded102f69f792515f7d1d853d248912631e701fcafed00bbe2",
}
for stem, sha in published.items():
    for ext in (".tiff", ".ppm" if stem.startswith("rgb") else ".pgm"):
        check(rows[stem + ext]["sha256"] == sha, f"{stem}{ext} pixels differ from the published digest")
# The 1-bit min-is-white TIFF and its PBM must agree (both decoded to 0 = black, 255 = white).
check(rows["miniswhite-1c-1b.tiff"]["sha256"] == rows["miniswhite-1c-1b.pbm"]["sha256"], "1-bit TIFF vs PBM")
for n in ("test_float64_predictor2_be_lzw.tif", "test_float64_predictor2_le_lzw.tif"):
    check(rows[n]["status"] == "unsupported", f"{n}: {rows[n]['status']}")
for n in ("test_ifd_loop_to_self.tif", "test_ifd_loop_to_first.tif", "test_ifd_loop_subifd.tif"):
    check(n in rows, f"{n}: no result (hang?)")
# Lossless files without a published digest: PIL (python3-pil, libtiff underneath) is the reference.
pil_ref = ["palette-1c-8b.tiff", "palette-1c-4b.tiff", "palette-1c-1b.tiff", "lzw-single-strip.tiff",
           "quad-lzw-compat.tiff", "deflate-last-strip-extra-data.tiff", "minisblack-1c-16b.tiff",
           "32bpp-None.tiff", "testfax4.tiff"]  # PIL 9.4 cannot open minisblack-2c-8b-alpha.tiff
import hashlib
for n in pil_ref:
    im = Image.open(os.path.join(tf, n))
    if im.mode == "P":
        im = im.convert("RGB")
    elif im.mode == "1":
        im = im.convert("L")
    a = np.asarray(im)
    if a.dtype != np.uint8:
        a = a.astype(">u2")
    check(rows[n]["status"] == "ok", f"{n}: {rows[n]['status']}")
    if n == "32bpp-None.tiff":
        # Associated (premultiplied) alpha: PIL divides it out rounding down, kiln rounding to
        # nearest (docs/formats.md), so allow one step.
        k = np.frombuffer(kiln_samples(n), dtype=np.uint8).astype(int)
        check(np.abs(k - a.astype(int).ravel()).max() <= 1, f"{n}: differs from PIL by more than 1")
        continue
    check(hashlib.sha256(a.tobytes()).hexdigest() == rows[n]["sha256"], f"{n}: differs from PIL ({im.mode})")
print(f"libtiff: published digests match, {len(pil_ref)} files equal PIL's decode")

if failures:
    print("FAIL:\n  " + "\n  ".join(failures))
    sys.exit(1)
