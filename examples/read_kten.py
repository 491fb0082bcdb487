#!/usr/bin/env python3
"""Reads a kiln .kten tensor file with nothing but numpy's memory map, following docs/format.md.

    python3 read_kten.py train.kten          # prints the arrays and the class map
    from read_kten import read_kten          # or use it as a module
    t = read_kten("train.kten"); x = t["images"]; y = t["labels"]

`images` is [N, H, W, C] for layout nhwc and [N, C, H, W] for nchw (see t["metadata"]["layout"]);
np.transpose(x, (0, 3, 1, 2)) turns the first into the second. Nothing is read into memory
until it is used. For training, the kten package (examples/python/, docs/training.md) does the rest:
checks, statistics, normalisation and a PyTorch Dataset.
"""
import hashlib
import json
import struct
import sys

import numpy as np

MAGIC = b"KTEN\r\n\x1a\n"
DTYPES = {1: "<u1", 2: "<u2", 3: "<i4", 4: "<u4", 5: "<f4"}


def read_kten(path, check=False):
    """Returns {"metadata": dict, "<array name>": np.memmap, ...}. With check=True the SHA-256
    of every array and of the metadata block is recomputed and compared with the header."""
    with open(path, "rb") as f:
        head = f.read(4096)
        if len(head) < 4096 or head[:8] != MAGIC:
            raise ValueError(f"{path}: not a .kten file")
        version, header_size, count, entry_size = struct.unpack_from("<4I", head, 8)
        if version != 1 or header_size != 4096 or entry_size != 128 or count > 31:
            raise ValueError(f"{path}: unsupported .kten header (version {version})")
        meta_off, meta_len = struct.unpack_from("<2Q", head, 24)
        meta_sha = head[40:72]
        (file_size,) = struct.unpack_from("<Q", head, 72)
        f.seek(0, 2)
        if f.tell() != file_size or meta_off + meta_len != file_size:
            raise ValueError(f"{path}: size does not match its header")
        f.seek(meta_off)
        meta_bytes = f.read(meta_len)
    if check and hashlib.sha256(meta_bytes).digest() != meta_sha:
        raise ValueError(f"{path}: metadata SHA-256 differs from the header")
    out = {"metadata": json.loads(meta_bytes.decode("utf-8"))}
    for i in range(count):
        e = head[128 + 128 * i: 256 + 128 * i]
        name = e[:16].rstrip(b"\0").decode("ascii")
        dtype, rank = e[16], e[17]
        dims = struct.unpack_from("<4Q", e, 24)[:rank]
        offset, length = struct.unpack_from("<2Q", e, 56)
        sha = e[72:104]
        dt = np.dtype(DTYPES[dtype])
        if offset % 4096 or int(np.prod(dims, dtype=np.uint64)) * dt.itemsize != length:
            raise ValueError(f"{path}: array {name} is malformed")
        if length == 0:
            arr = np.zeros(dims, dtype=dt)
        else:
            arr = np.memmap(path, dtype=dt, mode="r", offset=offset, shape=tuple(dims))
        if check and hashlib.sha256(arr.tobytes()).digest() != sha:
            raise ValueError(f"{path}: array {name} SHA-256 differs from the header")
        out[name] = arr
    return out


def main(argv):
    if len(argv) != 2:
        print("usage: read_kten.py FILE.kten", file=sys.stderr)
        return 2
    t = read_kten(argv[1], check=True)
    meta = t["metadata"]
    print(f"{argv[1]}: split {meta['split']}, layout {meta['layout']}, dtype {meta['dtype']}")
    for name, arr in t.items():
        if name != "metadata":
            print(f"  {name}: {arr.dtype} {list(arr.shape)}")
    print("  classes:", ", ".join(f"{i}={c}" for i, c in enumerate(meta["classes"])))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
