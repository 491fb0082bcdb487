#!/usr/bin/env python3
"""Checks a packed kiln folder against independent computations (numpy, hashlib, csv):

    check_pack.py OUTDIR

- every SHA256SUMS line and manifest output digest, recomputed with hashlib;
- the tensors read with examples/read_kten.py (numpy memory map, docs/format.md only);
- per-channel count, sum, sum of squares (exact, numpy integers), mean and standard deviations
  (numpy float64; relative error at most 1e-12) against manifest.json;
- labels, item rows and class counts against items.csv;
- no group key and no file digest appears in two splits.
Exits 1 with a message on the first failure."""
import csv
import hashlib
import json
import os
import sys

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "examples"))
from read_kten import read_kten  # noqa: E402


def fail(msg):
    print("FAIL:", msg)
    sys.exit(1)


def close(a, b, what):
    if a == b:
        return
    if b == 0 or abs(a - b) / abs(b) > 1e-12:
        fail(f"{what}: kiln {a!r} vs numpy {b!r}")


def main(out):
    man = json.load(open(os.path.join(out, "manifest.json")))
    sums = {}
    for line in open(os.path.join(out, "SHA256SUMS")):
        digest, name = line.rstrip("\n").split("  ", 1)
        sums[name] = digest
    for name, digest in sums.items():
        real = hashlib.sha256(open(os.path.join(out, name), "rb").read()).hexdigest()
        if real != digest:
            fail(f"SHA256SUMS: {name}")
    for o in man["outputs"]:
        if sums.get(o["name"]) != o["sha256"] or os.path.getsize(os.path.join(out, o["name"])) != o["bytes"]:
            fail(f"manifest output {o['name']} disagrees with SHA256SUMS or its size")
    rows = list(csv.DictReader(open(os.path.join(out, "items.csv"), newline="", encoding="utf-8")))
    for i, r in enumerate(rows):
        if int(r["row"]) != i:
            fail("items.csv rows are not numbered in order")
    classes = man["classes"]
    depth = man["recipe"]["depth"]
    maxv = 65535.0 if depth == 16 else 255.0
    layout = man["recipe"]["layout"]
    for split, st in man["statistics"].items():
        t = read_kten(os.path.join(out, f"{split}.kten"), check=True)
        x, y, item = t["images"], t["labels"], t["item"]
        n = man["counts"][split]["records"]
        if x.shape[0] != n or y.shape[0] != n or item.shape[0] != n:
            fail(f"{split}: record count differs from the manifest")
        if t["metadata"]["classes"] != classes:
            fail(f"{split}: class map differs from the manifest")
        if st["used_for_normalisation"] != (split == "train"):
            fail(f"{split}: used_for_normalisation is wrong")
        chan_axis = 3 if layout == "nhwc" else 1
        for c, cs in enumerate(st["channels"]):
            v = np.take(x, c, axis=chan_axis).astype(np.int64).ravel() if n else np.zeros(0, np.int64)
            if cs["count"] != v.size:
                fail(f"{split} channel {c}: count")
            if n == 0:
                continue
            if int(cs["sum"]) != int(v.sum()) or int(cs["sum_of_squares"]) != int((v * v).sum()):
                fail(f"{split} channel {c}: exact sums differ from numpy")
            if cs["min"] != int(v.min()) or cs["max"] != int(v.max()):
                fail(f"{split} channel {c}: min/max")
            f = v.astype(np.float64)
            close(cs["mean"], float(f.mean()), f"{split} channel {c} mean")
            close(cs["std"], float(f.std(ddof=0)), f"{split} channel {c} std")
            close(cs["std_sample"], float(f.std(ddof=1)) if v.size > 1 else 0.0, f"{split} channel {c} sample std")
            close(cs["mean_unit"], float((f / maxv).mean()), f"{split} channel {c} unit mean")
            close(cs["std_unit"], float((f / maxv).std(ddof=0)), f"{split} channel {c} unit std")
        counts = np.bincount(np.asarray(y)[np.asarray(y) >= 0], minlength=len(classes)) if n else np.zeros(len(classes), int)
        for k, name in enumerate(classes):
            if man["counts"][split]["per_class"].get(name, 0) != int(counts[k]):
                fail(f"{split}: per-class count of {name}")
        for i in range(n):
            r = rows[int(item[i])]
            if r["split"] != split or int(r["index"]) != i:
                fail(f"{split} record {i}: item row {item[i]} points elsewhere")
            want = int(r["class"]) if r["class"] != "" else -1
            if int(y[i]) != want:
                fail(f"{split} record {i}: label {y[i]} vs items.csv class {want}")
    where = {}
    for r in rows:
        if not r["split"]:
            continue
        for key in (("group", r["group"]), ("sha256", r["sha256"])):
            if key[1]:
                where.setdefault(key, set()).add(r["split"])
    for key, splits in where.items():
        if len(splits) > 1:
            fail(f"{key[0]} {key[1]} appears in splits {sorted(splits)}")
    print(f"ok: {out}: {sum(man['counts'][s]['records'] for s in man['counts'])} records checked")


if __name__ == "__main__":
    main(sys.argv[1])
