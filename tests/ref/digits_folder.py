#!/usr/bin/env python3
"""Writes the UCI ML hand-written digits as PNG class folders: digits_folder.py DIR.

Source: the 1797 8x8 images of "Optical Recognition of Handwritten Digits" (E. Alpaydin,
C. Kaynak, UCI Machine Learning Repository, 1998), the copy of its test set bundled with
scikit-learn (sklearn.datasets.load_digits, Debian python3-sklearn; scikit-learn is under the
BSD 3-clause licence). Each image becomes DIR/<digit>/u<index>.png, 8-bit grey, the 0..16 counts
scaled to 0..255 (round(v * 255 / 16)), so the folder label rule gives classes "0".."9" in
digit order. Prints the number of files written per class.
"""
import os
import sys

import numpy as np
from PIL import Image
from sklearn.datasets import load_digits


def main(out):
    d = load_digits()
    if d.images.shape != (1797, 8, 8):
        sys.exit(f"unexpected digits shape {d.images.shape}")
    grey = np.floor(d.images * 255.0 / 16.0 + 0.5).astype(np.uint8)
    counts = [0] * 10
    for i, (img, digit) in enumerate(zip(grey, d.target)):
        folder = os.path.join(out, str(digit))
        os.makedirs(folder, exist_ok=True)
        Image.fromarray(img, mode="L").save(os.path.join(folder, f"u{i:04d}.png"))
        counts[digit] += 1
    print("digits written per class:", counts)


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit("usage: digits_folder.py DIR")
    main(sys.argv[1])
