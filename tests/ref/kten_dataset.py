#!/usr/bin/env python3
"""Checks of kten.Dataset (examples/python/kten/_torch.py) in PyTorch DataLoaders with 2 workers:

    kten_dataset.py WORK OUT...     OUT: kiln output folders (any dtype and layout)

- every item read through a DataLoader with 2 worker processes, under both the fork and the
  spawn start method, equals a direct read of the same file with examples/read_kten.py (numpy
  memory map, docs/format.md only) normalised by numpy with the training statistics of
  manifest.json, (v / M - mean_unit) / std_unit in float64 rounded to float32 (docs/pixels.md
  step 7; for f32 files the stored values themselves); labels equal, as int64;
- no per-worker copy of the array: the Dataset pickles to a few kilobytes after the parent has
  read from it, while a Dataset holding the numpy memory map pickles the whole array (the
  negative control: it shows the size check can fail); in each worker the file was opened by
  the worker's own process id and /proc/self/maps lists the .kten file as mapped;
- tensors are float32 [C, H, W] with warnings turned into errors (torch warns when it wraps a
  read-only memory map), labels int64; load_tensors gives the same numbers;
- a file rebuilt after the Dataset was made is refused in the worker with KtenError.
Exits 1 with a message on the first failure.
"""
import json
import os
import pickle
import shutil
import sys
import warnings

import numpy as np
import torch
from torch.utils.data import DataLoader

import kten

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "examples"))
from read_kten import read_kten  # noqa: E402


def fail(msg):
    print("FAIL:", msg)
    sys.exit(1)


class Probe(kten.Dataset):
    """Returns, beside each item, where it was read: (pid, pid that opened the file, whether
    /proc/self/maps lists the file)."""

    def __getitem__(self, index):
        image, label = super().__getitem__(index)
        with open("/proc/self/maps") as f:
            mapped = os.path.realpath(self.path) in f.read()
        where = torch.tensor([os.getpid(), self._pid, int(mapped)])
        return image, label, torch.tensor(index), where


class Naive(torch.utils.data.Dataset):
    """What the Dataset must not be: one holding the memory map itself."""

    def __init__(self, path):
        self.images = read_kten(path)["images"]

    def __len__(self):
        return len(self.images)

    def __getitem__(self, index):
        return torch.from_numpy(np.array(self.images[index]))


def direct(out, split):
    """(float32 [N, C, H, W], int64 [N]) from read_kten and numpy, per docs/pixels.md."""
    with open(os.path.join(out, "manifest.json")) as f:
        man = json.load(f)
    t = read_kten(os.path.join(out, f"{split}.kten"), check=True)
    x, y = np.asarray(t["images"]), np.asarray(t["labels"]).astype(np.int64)
    if man["recipe"]["layout"] == "nhwc":
        x = x.transpose(0, 3, 1, 2)
    if man["recipe"]["dtype"] == "f32":
        return x.astype(np.float32), y
    ch = man["statistics"]["train"]["channels"]
    mean = np.array([c["mean_unit"] for c in ch])[:, None, None]
    std = np.array([c["std_unit"] or 1.0 for c in ch])[:, None, None]
    m = 65535.0 if man["recipe"]["depth"] == 16 else 255.0
    return ((x.astype(np.float64) / m - mean) / std).astype(np.float32), y


def strict(_worker):
    warnings.simplefilter("error")  # in spawned workers too


def check_loader(out, split, context):
    path = os.path.join(out, f"{split}.kten")
    want_x, want_y = direct(out, split)
    ds = Probe(path)
    ds[0]  # the parent maps the file too: pickling must still not carry the array
    blob = pickle.dumps(ds)
    naive = len(pickle.dumps(Naive(path)))
    if naive < want_x.size * np.dtype(read_kten(path)["images"].dtype).itemsize:
        fail(f"negative control: a Dataset holding the memmap pickles to only {naive} bytes")
    if len(blob) > 16384 or len(blob) * 20 > naive:
        fail(f"{path}: the Dataset pickles to {len(blob)} bytes (the array is {naive})")
    if pickle.loads(blob)._file is not None:
        fail(f"{path}: an unpickled Dataset arrives with an open file")
    loader = DataLoader(ds, batch_size=5, shuffle=True, num_workers=2,
                        multiprocessing_context=context, worker_init_fn=strict)
    seen = np.zeros(len(ds), dtype=int)
    pids = set()
    for image, label, index, where in loader:
        if image.dtype != torch.float32 or image.shape[1:] != want_x.shape[1:]:
            fail(f"{path}: batch of {image.dtype} {tuple(image.shape)}, want float32 "
                 f"[*, {', '.join(map(str, want_x.shape[1:]))}]")
        if label.dtype != torch.int64:
            fail(f"{path}: labels are {label.dtype}, not int64")
        i = index.numpy()
        seen[i] += 1
        if not np.array_equal(image.numpy(), want_x[i]):
            fail(f"{path}: {context} workers: records {i} differ from the direct read by "
                 f"{np.abs(image.numpy() - want_x[i]).max()}")
        if not np.array_equal(label.numpy(), want_y[i]):
            fail(f"{path}: labels of records {i} differ from the direct read")
        for pid, opener, mapped in where.tolist():
            if pid == os.getpid() or opener != pid or not mapped:
                fail(f"{path}: {context} worker {pid}: file opened by {opener}, "
                     f"mapped {bool(mapped)} (the parent is {os.getpid()})")
            pids.add(pid)
    if not (seen == 1).all() or len(pids) != 2:
        fail(f"{path}: {context}: items seen {np.bincount(seen)} times, {len(pids)} workers")
    x, y = kten.load_tensors(path)
    if not (np.array_equal(x.numpy(), want_x) and np.array_equal(y.numpy(), want_y)):
        fail(f"{path}: load_tensors differs from the direct read")
    print(f"ok: {path}: {len(ds)} items via 2 {context} workers = direct read; "
          f"pickled Dataset {len(blob)} bytes vs {naive} holding the map")


def check_rebuilt(work, out):
    path = os.path.join(work, "rebuilt.kten")
    shutil.copy(os.path.join(out, "train.kten"), path)
    ds = kten.Dataset(path)
    # A rebuild replaces the file by rename, as kiln's outputs do.
    shutil.copy(os.path.join(out, "val.kten"), path + ".tmp")
    os.replace(path + ".tmp", path)
    try:
        for _ in DataLoader(ds, batch_size=5, num_workers=2):
            pass
    except kten.KtenError as e:
        if "changed since the Dataset was made" not in str(e) or path not in str(e):
            fail(f"rebuilt file: unclear error {e}")
        print(f"ok: rebuilt file refused in the worker: {str(e).splitlines()[-1]}")
        return
    fail(f"{path}: a file replaced after the Dataset was made was read without complaint")


def main(argv):
    if len(argv) < 3:
        print(__doc__)
        return 2
    warnings.simplefilter("error")
    torch.set_num_threads(1)
    work, outs = argv[1], argv[2:]
    for k, out in enumerate(outs):
        # Both start methods on the first folder; fork (Linux's default) on the others.
        for context in ("fork", "spawn") if k == 0 else ("fork",):
            check_loader(out, "train", context)
        check_loader(out, "test", "fork")
    check_rebuilt(work, outs[0])
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
