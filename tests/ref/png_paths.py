#!/usr/bin/python3
"""kiln's PNG image-data path (formats/decoders/png_idat.c: libdeflate + unfiltering in kiln)
against libpng's own path and against PIL:

  png_paths.py DECODE_CHECK WORKDIR [PNGSUITE_DIR...]

Writes PNGs by hand (zlib, struct; the PNG specification's chunk layout) in every layout the
path takes -- grey, grey+alpha, RGB, RGBA at 8 and 16 bits -- with every filter type chosen
row by row, odd and one-pixel sizes, the data split over many IDAT chunks, and a few the path
must decline (interlaced, palette, tRNS, a damaged IDAT CRC, a short stream); then decodes each
file, and every file of the PngSuite folders given, three ways with kiln-decode-check: the
default (kiln's path where it applies), --library (libpng only) and --trusted (checksums
skipped as pack does). All three must agree byte for byte (status and SHA-256 of the samples);
the 8-bit and 16-bit grey files must also equal PIL's decode. Exit 0, or 1 listing the files.
"""
import hashlib
import os
import random
import struct
import subprocess
import sys
import zlib

import numpy as np
from PIL import Image


def chunk(kind, data):
    crc = zlib.crc32(kind + data) & 0xFFFFFFFF
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", crc)


def paeth(a, b, c):
    p = a + b - c
    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
    return a if pa <= pb and pa <= pc else (b if pb <= pc else c)


def filtered(raw_rows, bpp, rng):
    """Each row filtered with a random filter type (the encoder side of PNG section 9)."""
    out, prev = b"", bytes(len(raw_rows[0]))
    for row in raw_rows:
        f = rng.randrange(5)
        enc = bytearray(len(row))
        for i, x in enumerate(row):
            left = row[i - bpp] if i >= bpp else 0
            up = prev[i]
            corner = prev[i - bpp] if i >= bpp else 0
            pred = (0, left, up, (left + up) >> 1, paeth(left, up, corner))[f]
            enc[i] = (x - pred) & 0xFF
        out += bytes([f]) + bytes(enc)
        prev = row
    return out


def write_png(path, arr, bits, ctype, rng, idat_parts=1, extra=b"", bad_crc=False,
              cut=0, interlace=0):
    h, w = arr.shape[:2]
    bpp = (arr.shape[2] if arr.ndim == 3 else 1) * bits // 8
    if bits == 16:
        rows = [arr[y].astype(">u2").tobytes() for y in range(h)]
    else:
        rows = [arr[y].astype(np.uint8).tobytes() for y in range(h)]
    z = zlib.compress(filtered(rows, bpp, rng), 9)
    if cut:
        z = z[:-cut]
    png = b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, bits, ctype, 0, 0,
                                                            interlace))
    png += extra
    step = max(1, len(z) // idat_parts)
    parts = [z[i: i + step] for i in range(0, len(z), step)] or [b""]
    for k, p in enumerate(parts):
        c = chunk(b"IDAT", p)
        if bad_crc and k == len(parts) - 1:
            c = c[:-1] + bytes([c[-1] ^ 1])
        png += c
    png += chunk(b"IEND", b"")
    with open(path, "wb") as f:
        f.write(png)


def make_set(d):
    rng = random.Random(20261203)
    nrng = np.random.default_rng(20261203)
    os.makedirs(d, exist_ok=True)
    files, pil_checked = [], []
    layouts = {0: 1, 4: 2, 2: 3, 6: 4}  # colour type -> channels
    for ctype, ch in layouts.items():
        for bits in (8, 16):
            for (w, h) in ((1, 1), (7, 5), (33, 17), (130, 3), (2, 61)):
                top = 256 if bits == 8 else 65536
                shape = (h, w) if ch == 1 else (h, w, ch)
                arr = nrng.integers(0, top, size=shape)
                # smooth parts too, so Sub/Up/Paeth see small differences
                arr[: h // 2] = (np.arange(w) * 37 % top)[None, :, None][..., 0] if ch == 1 \
                    else (np.arange(w) * 37 % top)[None, :, None]
                name = f"c{ctype}-b{bits}-{w}x{h}.png"
                p = os.path.join(d, name)
                write_png(p, arr, bits, ctype, rng, idat_parts=rng.choice((1, 2, 7)))
                files.append(p)
                if ch == 1:
                    pil_checked.append((p, arr, bits))
    # Declined by kiln's path, decoded by libpng: palette, tRNS, interlaced, bad IDAT CRC,
    # a stream cut short, extra data after the stream.
    g = nrng.integers(0, 256, size=(9, 11))
    pal = chunk(b"PLTE", bytes(range(256)) * 3)
    write_png(os.path.join(d, "x-palette.png"), g, 8, 3, rng, extra=pal)
    write_png(os.path.join(d, "x-trns.png"), g, 8, 0, rng, extra=chunk(b"tRNS", b"\x00\x05"))
    write_png(os.path.join(d, "x-badcrc.png"), g, 8, 0, rng, idat_parts=3, bad_crc=True)
    write_png(os.path.join(d, "x-short.png"), g, 8, 0, rng, cut=6)
    files += [os.path.join(d, f) for f in ("x-palette.png", "x-trns.png", "x-badcrc.png",
                                           "x-short.png")]
    return files, pil_checked


def decode(tool, flags, files):
    out = subprocess.run([tool] + flags + files, capture_output=True, text=True).stdout
    return {l.split("\t")[0]: (l.split("\t")[1], l.split("\t")[9]) for l in out.splitlines()}


def main():
    tool, work, suites = sys.argv[1], sys.argv[2], sys.argv[3:]
    files, pil_checked = make_set(os.path.join(work, "made"))
    for s in suites:
        files += sorted(os.path.join(s, f) for f in os.listdir(s) if f.endswith(".png"))
    bad = []
    by_path = {}
    for chunk_start in range(0, len(files), 200):
        part = files[chunk_start: chunk_start + 200]
        fast, lib, trusted = (decode(tool, f, part) for f in ([], ["--library"], ["--trusted"]))
        for p in part:
            k = os.path.basename(p)
            if not (fast.get(k) == lib.get(k)):
                bad.append(f"{p}: kiln's path {fast.get(k)} != libpng {lib.get(k)}")
            # trusted skips checksums: a file they reject may decode; otherwise the same pixels
            if lib.get(k, ("",))[0] == "ok" and trusted.get(k) != lib.get(k):
                bad.append(f"{p}: trusted {trusted.get(k)} != libpng {lib.get(k)}")
            by_path[p] = fast.get(k)
    for p, arr, bits in pil_checked:
        im = np.asarray(Image.open(p))
        want = np.asarray(arr, dtype=">u2" if bits == 16 else np.uint8)
        if not np.array_equal(im.astype(np.int64), arr.astype(np.int64)):
            bad.append(f"{p}: PIL reads other samples than were written")
            continue
        digest = hashlib.sha256(want.tobytes()).hexdigest()
        if by_path[p] != ("ok", digest):
            bad.append(f"{p}: kiln {by_path[p]} != PIL's samples {digest}")
    made = [p for p in files if "/made/" in p]
    declined = {os.path.basename(p): by_path[p][0] for p in made if "/x-" in p}
    if declined.get("x-badcrc.png") == "ok" or declined.get("x-short.png") == "ok":
        bad.append(f"damaged files decoded: {declined}")
    for b in bad:
        print(b)
    print(f"{len(files)} PNG files, {len(pil_checked)} also against PIL, {len(bad)} problems")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
