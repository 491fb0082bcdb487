#!/usr/bin/env python3
"""EXIF orientation against the CIPA DC-008 (Exif) table:

    orientation.py make DIR            writes DIR/src/o/{png,jpg}-<v>.* for v = 1..8
    orientation.py check DIR OUTDIR    checks kiln's catalogue and packed records

For each value v the stored image is built from one asymmetric 6x4 image so that displaying it
as the Exif table says gives the asymmetric image back. The table, written out from the Exif
specification (row 0 / column 0 of the stored image are the visual ...):
  1 top / left        2 top / right       3 bottom / right    4 bottom / left
  5 left / top        6 right / top       7 right / bottom    8 left / bottom
PNG copies carry the value in an eXIf chunk, JPEG copies in an APP1 Exif segment. Packed PNG
records must equal the asymmetric image exactly; JPEG records must equal PIL's decode after
PIL's exif_transpose (PIL 9.4, python3-pil), an independent implementation of the same table.
"""
import csv
import os
import struct
import sys

import numpy as np
from PIL import Image, ImageOps

H, W = 4, 6
BASE = np.zeros((H, W, 3), np.uint8)
for y in range(H):
    for x in range(W):
        BASE[y, x] = (40 * x + 10, 60 * y + 5, (x * 50 + y * 90) % 256)


def stored(v):
    """The stored image S whose display (per the table above) is BASE. With T = BASE transposed
    (T[i][j] = BASE[j][i]): for 6, stored row i is the visual column W-1-i read top to bottom,
    so S[i][j] = BASE[j][W-1-i] = T[W-1-i][j]; for 8, S[i][j] = BASE[H-1-j][i] = T[i][H-1-j]."""
    b = BASE
    return {
        1: b,
        2: b[:, ::-1],                 # column 0 is the visual right
        3: b[::-1, ::-1],              # row 0 is the bottom, column 0 the right
        4: b[::-1, :],                 # row 0 is the bottom
        5: b.transpose(1, 0, 2),       # row 0 is the visual left, column 0 the top
        6: b.transpose(1, 0, 2)[::-1, :],   # row 0 is the visual right, column 0 the top
        7: b.transpose(1, 0, 2)[::-1, ::-1],  # row 0 right, column 0 bottom
        8: b.transpose(1, 0, 2)[:, ::-1],   # row 0 left, column 0 bottom
    }[v]


def exif(v):
    # A big-endian TIFF header with one IFD holding Orientation (0x0112, SHORT, count 1).
    return b"Exif\0\0" + b"MM\0\x2a" + struct.pack(">I", 8) + struct.pack(">H", 1) + \
        struct.pack(">HHIHH", 0x0112, 3, 1, v, 0) + struct.pack(">I", 0)


def make(root):
    d = os.path.join(root, "src", "o")
    os.makedirs(d)
    for v in range(1, 9):
        im = Image.fromarray(np.ascontiguousarray(stored(v)))
        im.save(os.path.join(d, f"png-{v}.png"), exif=exif(v))
        im.save(os.path.join(d, f"jpg-{v}.jpg"), quality=95, exif=exif(v))


def main_check(root, out):
    sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "examples"))
    from read_kten import read_kten
    bad = []
    cat = {r["path"]: r for r in csv.DictReader(open(os.path.join(out, "catalog.csv"), newline=""))}
    items = list(csv.DictReader(open(os.path.join(out, "items.csv"), newline="")))
    recs = {}
    t = read_kten(os.path.join(out, "train.kten"), check=True)
    for r in items:
        if r["split"] == "train":
            recs[r["path"]] = np.asarray(t["images"][int(r["index"])])
    for v in range(1, 9):
        for kind in ("png", "jpg"):
            p = f"o/{kind}-{v}.{kind}"
            c = cat[p]
            if int(c["orientation"]) != v or (c["width"], c["height"]) != (str(W), str(H)):
                bad.append(f"{p}: catalogue says orientation {c['orientation']} size {c['width']}x{c['height']}")
            if kind == "png":
                ref = BASE
                # PIL's own reading of the table must agree with the one above.
                pil = np.asarray(ImageOps.exif_transpose(Image.open(os.path.join(root, "src", p))))
                if not np.array_equal(pil, BASE):
                    bad.append(f"{p}: PIL's exif_transpose disagrees with the table")
            else:
                ref = np.asarray(ImageOps.exif_transpose(Image.open(os.path.join(root, "src", p))).convert("RGB"))
            if not np.array_equal(recs[p], ref):
                bad.append(f"{p}: packed record differs (max diff {np.abs(recs[p].astype(int) - ref).max()})")
    if bad:
        print("FAIL:\n  " + "\n  ".join(bad))
        sys.exit(1)
    print("ok: 8 orientations x 2 formats")


if __name__ == "__main__":
    if sys.argv[1] == "make":
        make(sys.argv[2])
    else:
        main_check(sys.argv[2], sys.argv[3])
