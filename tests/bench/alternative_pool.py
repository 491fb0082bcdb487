#!/usr/bin/env python3
"""The strongest script a careful practitioner writes for the same job, for the side-by-side
benchmark (tests/bench/run.sh):

    alternative_pool.py SRC OUT SEED WORKERS [pil|opencv]

The same work as alternative.py (read and hash every file, decode at a reduced scale, RGB,
128x128, split 80:10:10 by a seeded shuffle of the content hashes, training mean and standard
deviation, raw tensors and a checksum list), but spread over WORKERS processes with
multiprocessing.Pool, each worker decoding a chunk of files and returning its block of pixels
together with exact per-channel sums and sums of squares, so the statistics never need the
whole training set as float64 at once. "pil": PIL with JPEG draft mode and antialiased
bilinear resize; "opencv": OpenCV's reduced JPEG decode (IMREAD_REDUCED_COLOR_*) and
INTER_AREA resize (Debian's python3-opencv)."""
import hashlib
import os
import random
import sys
from multiprocessing import Pool

import numpy as np

SIZE = (128, 128)
BACKEND = "pil"


def load_pil(path):
    """alternative.py's decode, the same work per picture."""
    from alternative import load  # tests/bench/, the folder Python puts first on sys.path
    return load(path)


def load_opencv(path):
    import cv2
    flags = cv2.IMREAD_UNCHANGED
    if path.lower().endswith((".jpg", ".jpeg")):
        # the largest reduction that keeps the picture at least 1.5 x SIZE (as kiln's rule);
        # the header's size read by PIL, which reads no pixels for it
        from PIL import Image
        w, h = Image.open(path).size
        flags = cv2.IMREAD_COLOR
        for d, f in ((8, cv2.IMREAD_REDUCED_COLOR_8), (4, cv2.IMREAD_REDUCED_COLOR_4),
                     (2, cv2.IMREAD_REDUCED_COLOR_2)):
            if min(h, w) / d >= 1.5 * SIZE[0]:
                flags = f
                break
    a = cv2.imread(path, flags)
    if a.dtype == np.uint16:
        a = ((a.astype(np.uint32) * 255 + 32767) // 65535).astype(np.uint8)
    if a.ndim == 2:
        a = cv2.cvtColor(a, cv2.COLOR_GRAY2RGB)
    elif a.shape[2] == 4:
        a = cv2.cvtColor(a, cv2.COLOR_BGRA2RGB)
    else:
        a = cv2.cvtColor(a, cv2.COLOR_BGR2RGB)
    return cv2.resize(a, SIZE, interpolation=cv2.INTER_AREA)


def work(chunk):
    load = load_opencv if BACKEND == "opencv" else load_pil
    x = np.stack([load(p) for p in chunk])
    flat = x.reshape(-1, 3).astype(np.int64)
    return x, flat.sum(axis=0), (flat * flat).sum(axis=0), flat.shape[0]


def init(backend):
    global BACKEND
    BACKEND = backend


def main(src, out, seed, workers, backend):
    items = []
    for root, _, files in os.walk(src):
        for f in sorted(files):
            p = os.path.join(root, f)
            with open(p, "rb") as fh:
                items.append((hashlib.sha256(fh.read()).hexdigest(), os.path.basename(root), p))
    items.sort()
    random.Random(seed).shuffle(items)
    n = len(items)
    cut = [int(n * 0.8), int(n * 0.9)]
    splits = {"train": items[: cut[0]], "val": items[cut[0]: cut[1]], "test": items[cut[1]:]}
    classes = sorted({c for _, c, _ in items})
    os.makedirs(out, exist_ok=True)
    sums = []
    with Pool(workers, initializer=init, initargs=(backend,)) as pool:
        for name, rows in splits.items():
            paths = [p for _, _, p in rows]
            chunks = [paths[i: i + 16] for i in range(0, len(paths), 16)]
            fn = os.path.join(out, f"{name}_images.bin")
            s = np.zeros(3, np.int64)
            s2 = np.zeros(3, np.int64)
            count = 0
            h = hashlib.sha256()
            with open(fn, "wb") as f:
                for x, a, b, k in pool.imap(work, chunks):
                    raw = x.tobytes()
                    f.write(raw)
                    h.update(raw)
                    s += a
                    s2 += b
                    count += k
            sums.append((h.hexdigest(), os.path.basename(fn)))
            if name == "train" and count:
                mean = s / count / 255.0
                std = np.sqrt(np.maximum(s2 / count / 65025.0 - mean * mean, 0))
                print("train mean", mean, "std", std)
            y = np.array([classes.index(c) for _, c, _ in rows], dtype=np.int32)
            fn = os.path.join(out, f"{name}_labels.bin")
            y.tofile(fn)
            sums.append((hashlib.sha256(y.tobytes()).hexdigest(), os.path.basename(fn)))
    with open(os.path.join(out, "SHA256SUMS"), "w") as f:
        for d, fn in sums:
            f.write(f"{d}  {fn}\n")


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]),
         sys.argv[5] if len(sys.argv) > 5 else "pil")
