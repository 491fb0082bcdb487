#!/usr/bin/env python3
"""The script a practitioner would write for the same job with a general imaging library and
an array library (PIL and numpy from Debian), for the side-by-side benchmark:

    alternative.py SRC OUT SEED

Reads and hashes every file, decodes it (JPEG draft mode on, so PIL also decodes at a DCT
reduction), converts to RGB (16-bit grey scaled to 8 bits correctly), resizes to 128x128 with
PIL's antialiased bilinear filter, splits 80:10:10 by a seeded shuffle of the content hashes,
computes the training mean and standard deviation, and writes raw tensors and a checksum list.
One process, as such scripts usually are."""
import hashlib
import os
import random
import sys

import numpy as np
from PIL import Image

SIZE = (128, 128)


def load(path):
    im = Image.open(path)
    if im.format == "JPEG":
        im.draft("RGB", SIZE)
    if im.mode in ("I;16", "I;16B", "I"):
        a = np.asarray(im, dtype=np.uint32)
        a = ((a * 255 + 32767) // 65535).astype(np.uint8)
        im = Image.fromarray(a, "L")
    im = im.convert("RGB").resize(SIZE, Image.BILINEAR)
    return np.asarray(im, dtype=np.uint8)


def main(src, out, seed):
    items = []
    for root, _, files in os.walk(src):
        for f in sorted(files):
            p = os.path.join(root, f)
            data = open(p, "rb").read()
            items.append((hashlib.sha256(data).hexdigest(), os.path.basename(root), p))
    items.sort()
    random.Random(seed).shuffle(items)
    n = len(items)
    cut = [int(n * 0.8), int(n * 0.9)]
    splits = {"train": items[: cut[0]], "val": items[cut[0]: cut[1]], "test": items[cut[1]:]}
    classes = sorted({c for _, c, _ in items})
    os.makedirs(out, exist_ok=True)
    sums = []
    for name, rows in splits.items():
        x = np.stack([load(p) for _, _, p in rows]) if rows else np.zeros((0, 128, 128, 3), np.uint8)
        y = np.array([classes.index(c) for _, c, _ in rows], dtype=np.int32)
        if name == "train":
            f = x.reshape(-1, 3).astype(np.float64) / 255.0
            print("train mean", f.mean(axis=0), "std", f.std(axis=0))
        for kind, arr in (("images", x), ("labels", y)):
            fn = os.path.join(out, f"{name}_{kind}.bin")
            arr.tofile(fn)
            sums.append((hashlib.sha256(open(fn, "rb").read()).hexdigest(), os.path.basename(fn)))
    with open(os.path.join(out, "SHA256SUMS"), "w") as f:
        for d, fn in sums:
            f.write(f"{d}  {fn}\n")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]))
