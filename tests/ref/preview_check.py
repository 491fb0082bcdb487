#!/usr/bin/env python3
"""Checks a contact sheet written by `kiln inspect FILE.kten --preview SHEET.png --sample K`
against the packed records, read with examples/read_kten.py (numpy only) and the sheet decoded
with PIL. The geometry and the sampling rule are those docs/cli.md ("inspect") states:
margin 8 px, gap 4 px, a 20 px name band above each row when names are drawn, rows in class
order then unlabelled records, of a class's m records those at positions
floor((2j + 1) m / (2k)), records larger than 256 px shrunk by f = ceil(max(w, h) / 256)
(box mean of f x f, rounded half up). 8-bit records must match exactly; u16 through
round(v * 255 / 65535) exactly; f32 de-normalised (u * std + mean, times 255) within `tol`.

usage: preview_check.py SHEET.png FILE.kten K LABELLED(0|1) [TOL]"""
import sys

import numpy as np
from PIL import Image

sys.path.insert(0, sys.argv[6] if len(sys.argv) > 6 else "examples")
from read_kten import read_kten  # noqa: E402

MARGIN, GAP, BAND, MAX_TILE = 8, 4, 20, 256


def as8(t):
    """Records as N x H x W x C in the 8-bit scale people look at."""
    x = np.asarray(t["images"])
    meta = t["metadata"]
    if meta["layout"] == "nchw":
        x = np.transpose(x, (0, 2, 3, 1))
    if x.dtype == np.uint8:
        return x.astype(np.int64), 0
    if x.dtype == np.uint16:
        # round(v * 255 / 65535), half up, in exact integers (docs/pixels.md)
        v = x.astype(np.int64)
        return (v * 255 * 2 + 65535) // (2 * 65535), 0
    norm = meta["normalisation"]
    u = x.astype(np.float64) * np.array(norm["std_unit"]) + np.array(norm["mean_unit"])
    return np.clip(np.rint(u * 255.0), 0, 255).astype(np.int64), 1


def main():
    sheet_path, kten, k, labelled = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4] == "1"
    tol = int(sys.argv[5]) if len(sys.argv) > 5 and sys.argv[5] else None
    t = read_kten(kten)
    recs, f32 = as8(t)
    if tol is None:
        tol = f32
    labels = np.asarray(t["labels"])
    nclasses = len(t["metadata"]["classes"])
    n, h, w, c = recs.shape
    f = -(-max(w, h) // MAX_TILE) if max(w, h) > MAX_TILE else 1
    tw, th = w // f, h // f
    sheet = np.asarray(Image.open(sheet_path).convert("RGB")).astype(np.int64)
    band = BAND if labelled else 0
    rows = [cl for cl in range(nclasses) if (labels == cl).any()]
    unl = [i for i in range(n) if labels[i] < 0 or labels[i] >= nclasses]
    picks = []
    for cl in rows:
        idx = np.flatnonzero(labels == cl)
        m = len(idx)
        kk = min(k, m)
        picks.append([int(idx[(2 * j + 1) * m // (2 * kk)]) for j in range(kk)])
    if unl:
        picks.append(unl[:k])
    widest = max(len(p) for p in picks)
    want_w = 2 * MARGIN + widest * (tw + GAP) - GAP
    if labelled:
        want_w = max(want_w, 240)
    want_h = 2 * MARGIN + len(picks) * (band + th + GAP) - GAP
    if sheet.shape[:2] != (want_h, want_w):
        sys.exit(f"sheet is {sheet.shape[1]}x{sheet.shape[0]}, expected {want_w}x{want_h}")
    worst, tiles = 0, 0
    y = MARGIN
    for p in picks:
        y += band
        for j, i in enumerate(p):
            x = MARGIN + j * (tw + GAP)
            r = recs[i]
            if f > 1:
                r = r[: th * f, : tw * f].reshape(th, f, tw, f, c).sum(axis=(1, 3))
                r = (r + f * f // 2) // (f * f)
            if c < 3:
                r = np.repeat(r[:, :, :1], 3, axis=2)
            else:
                r = r[:, :, :3]
            tile = sheet[y : y + th, x : x + tw]
            d = int(np.abs(tile - r).max())
            worst = max(worst, d)
            tiles += 1
            if d > tol:
                sys.exit(f"record {i}: tile at ({x},{y}) differs from the record by up to {d}")
        y += th + GAP
    # Where no tile lies the sheet is background: a tile drawn one pixel off would show here.
    print(f"{tiles} tiles of {len(picks)} rows match their records (largest difference {worst})")


main()
