#!/usr/bin/env python3
"""Checks of the kten package's reader (examples/python/kten) against docs/format.md and against the
source images, decoded by PIL (python3-pil) and computed with numpy (python3-numpy):

    kten_reader.py tiles DIR8 DIR16          write the lossless test folders (below)
    kten_reader.py formats SRC8 SRC16 OUT... every dtype/layout output against its sources
    kten_reader.py empty OUT                 0-record splits; statistics null or absent
    kten_reader.py damaged OUT WORK          damaged and foreign files: KtenError naming both

Source images: astronaut.png (NASA, public domain), chelsea.png and coffee.png (CC0, by Stefan
van der Walt and Rachel Michetti) from scikit-image's bundled data (Debian python3-skimage), cut
into 13x11 tiles (odd sizes on purpose) written as 8-bit RGB PNG, and as 16-bit RGB PNG whose
high byte is the tile and low byte the tile one pixel to the right (real content in both
bytes). Packed at their own size, kiln's records must equal the decoded pixels exactly.
Each check exits 1 with a message on the first failure and prints what it checked.
"""
import csv
import hashlib
import json
import os
import shutil
import struct
import sys
import zlib

import numpy as np
from PIL import Image

import kten

SPLITS = ("train", "val", "test")
TILE_W, TILE_H = 13, 11
PICTURES = {"astronaut": "astronaut.png", "chelsea": "chelsea.png", "coffee": "coffee.png"}
# dtype codes of docs/format.md's array table.
DOC_DTYPES = {1: "<u1", 2: "<u2", 3: "<i4", 4: "<u4", 5: "<f4"}


def fail(msg):
    print("FAIL:", msg)
    sys.exit(1)


# ---- test folders ----

def png16(path, rgb):
    """A 16-bit RGB PNG written from the PNG specification (ISO/IEC 15948: IHDR colour type 2,
    depth 16, big-endian samples, filter type 0 per row, zlib stream, CRC-32 per chunk)."""
    h, w, _ = rgb.shape

    def chunk(kind, data):
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))

    rows = b"".join(b"\0" + rgb[y].astype(">u2").tobytes() for y in range(h))
    with open(path, "wb") as f:
        f.write(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 16, 2, 0, 0, 0))
                + chunk(b"IDAT", zlib.compress(rows)) + chunk(b"IEND", b""))


def make_tiles(dir8, dir16):
    import skimage.data
    base = os.path.dirname(skimage.data.__file__)
    for cls, name in PICTURES.items():
        pic = np.asarray(Image.open(os.path.join(base, name)).convert("RGB"))
        os.makedirs(os.path.join(dir8, cls))
        os.makedirs(os.path.join(dir16, cls))
        n = 0
        for y in range(0, pic.shape[0] - TILE_H, 37):
            for x in range(0, pic.shape[1] - TILE_W - 1, 53):
                tile = pic[y:y + TILE_H, x:x + TILE_W]
                Image.fromarray(tile).save(os.path.join(dir8, cls, f"t{n:03d}.png"))
                v16 = tile.astype(np.uint16) * 256 + pic[y:y + TILE_H, x + 1:x + 1 + TILE_W]
                p16 = os.path.join(dir16, cls, f"t{n:03d}.png")
                png16(p16, v16)
                # PIL reads 16-bit RGB as 8-bit (the high byte): a check of the writer.
                if not np.array_equal(np.asarray(Image.open(p16).convert("RGB")), tile):
                    fail(f"16-bit PNG writer: PIL reads {p16} differently")
                n += 1
        print(f"tiles: {cls} {n}")


def source_pixels(src, row, depth):
    """The decoded source image of an items.csv row: PIL for 8-bit, the 16-bit PNG's samples
    decoded from the file with zlib (PIL has no 16-bit RGB mode) for 16-bit."""
    path = os.path.join(src, row["path"])
    if depth == 8:
        return np.asarray(Image.open(path).convert("RGB"))
    data = open(path, "rb").read()
    w, h = struct.unpack(">II", data[16:24])
    idat, pos = b"", 8
    while pos < len(data):
        (n,) = struct.unpack(">I", data[pos:pos + 4])
        if data[pos + 4:pos + 8] == b"IDAT":
            idat += data[pos + 8:pos + 8 + n]
        pos += 12 + n
    raw = np.frombuffer(zlib.decompress(idat), dtype=np.uint8).reshape(h, 1 + w * 6)
    if raw[:, 0].any():
        fail(f"{path}: unexpected PNG filter")
    return raw[:, 1:].copy().view(">u2").reshape(h, w, 3).astype(np.uint16)


# ---- the file per docs/format.md, parsed here independently of the package ----

def doc_arrays(path):
    """{name: (dtype, dims, offset, length, sha256)} from the header and array table at the
    offsets docs/format.md gives."""
    head = open(path, "rb").read(4096)
    if head[:8] != b"KTEN\r\n\x1a\n":
        fail(f"{path}: magic")
    (count,) = struct.unpack_from("<I", head, 16)
    out = {}
    for i in range(count):
        e = head[128 + 128 * i:256 + 128 * i]
        rank = e[17]
        out[e[:16].rstrip(b"\0").decode()] = (
            DOC_DTYPES[e[16]], struct.unpack_from("<4Q", e, 24)[:rank],
            *struct.unpack_from("<2Q", e, 56), e[72:104])
    return out


def check_against_doc(path, t):
    raw = open(path, "rb").read()
    for name, (dt, dims, offset, length, sha) in doc_arrays(path).items():
        a = t.arrays[name]
        if a.dtype != np.dtype(dt) or a.shape != tuple(dims):
            fail(f"{path}: {name} is {a.dtype} {a.shape}, the table says {dt} {dims}")
        if a.tobytes() != raw[offset:offset + length]:
            fail(f"{path}: {name} differs from the bytes at offset {offset}")
        if hashlib.sha256(raw[offset:offset + length]).digest() != sha:
            fail(f"{path}: {name} SHA-256 (test's own hashlib) differs from the table")
        if a.flags.writeable:
            fail(f"{path}: {name} is writable; the map must be read-only")
    meta = json.loads(raw[struct.unpack_from("<Q", raw, 24)[0]:].decode())
    if meta != t.metadata:
        fail(f"{path}: metadata differs from the block at the header's offset")


# ---- formats ----

def check_output(src8, src16, out):
    man = json.load(open(os.path.join(out, "manifest.json")))
    recipe = man["recipe"]
    depth, layout, dtype = recipe["depth"], recipe["layout"], recipe["dtype"]
    src = src16 if depth == 16 else src8
    m = 65535.0 if depth == 16 else 255.0
    rows = list(csv.DictReader(open(os.path.join(out, "items.csv"), newline="", encoding="utf-8")))
    classes = sorted(PICTURES)
    files = {s: kten.open(os.path.join(out, f"{s}.kten"), verify=True) for s in SPLITS}
    # The training statistics, from the source pixels with numpy (population, [0,1] scale).
    train_px = np.stack([source_pixels(src, rows[int(i)], depth) for i in files["train"].item])
    mean = train_px.reshape(-1, 3).mean(axis=0, dtype=np.float64) / m
    std = train_px.reshape(-1, 3).std(axis=0, dtype=np.float64) / m
    checked = 0
    for s, t in files.items():
        path = os.path.join(out, f"{s}.kten")
        check_against_doc(path, t)
        if (t.split, t.layout, t.dtype, t.record_depth) != (s, layout, dtype, depth):
            fail(f"{path}: split/layout/dtype/depth {t.split} {t.layout} {t.dtype} "
                 f"{t.record_depth}, recipe says {s} {layout} {dtype} {depth}")
        if t.classes != classes or t.recipe != recipe:
            fail(f"{path}: classes {t.classes} or recipe differ from the folders / manifest")
        if (t.channels, t.height, t.width) != (3, TILE_H, TILE_W) or len(t) != man["counts"][s]["records"]:
            fail(f"{path}: shape C,H,W = {t.channels},{t.height},{t.width}, {len(t)} records")
        if not (np.allclose(t.mean, mean, rtol=1e-12, atol=0)
                and np.allclose(t.std, std, rtol=1e-12, atol=0)):
            fail(f"{path}: mean/std {t.mean} {t.std}, numpy from the sources {mean} {std}")
        x_unit, x_norm = t.to_float(normalise=False), t.to_float(normalise=True)
        if x_unit.dtype != np.float32 or x_unit.shape != (len(t), 3, TILE_H, TILE_W):
            fail(f"{path}: to_float gives {x_unit.dtype} {x_unit.shape}")
        x_load, y_load = t.load()
        if not np.array_equal(x_load, x_norm) or y_load.dtype != np.int64:
            fail(f"{path}: load() differs from to_float() or labels are not int64")
        try:
            t.load(max_bytes=x_load.nbytes - 1)
            fail(f"{path}: load() ignored its memory limit")
        except MemoryError as e:
            if path not in str(e):
                fail(f"{path}: the memory refusal does not name the file: {e}")
        for k in range(len(t)):
            row = rows[int(t.item[k])]
            if (row["split"], int(row["index"])) != (s, k):
                fail(f"{path}: record {k} is items.csv row {row['row']} ({row['split']} {row['index']})")
            if t.labels[k] != classes.index(row["path"].split("/")[0]) or y_load[k] != t.labels[k]:
                fail(f"{path}: record {k} label {t.labels[k]} for {row['path']}")
            px = source_pixels(src, row, depth)  # H, W, C
            rec = np.asarray(t.images[k])
            if dtype != "f32":
                want = px if layout == "nhwc" else px.transpose(2, 0, 1)
                if rec.dtype != want.dtype or not np.array_equal(rec, want):
                    fail(f"{path}: record {k} differs from {row['path']} decoded by PIL")
            chw = px.transpose(2, 0, 1).astype(np.float64)
            unit = (chw / m).astype(np.float32)
            norm = (chw / m - mean[:, None, None]) / std[:, None, None]
            # Statistics from numpy's float sums may differ from kiln's exact ones in the last
            # bits, so normalised values agree to float32 precision, not bit for bit.
            if not np.allclose(x_norm[k], norm, rtol=0, atol=2e-6):
                fail(f"{path}: normalised record {k} vs numpy: max diff "
                     f"{np.abs(x_norm[k] - norm).max()}")
            tol = 0 if dtype != "f32" else 4e-7  # f32 files: undoing kiln's rounding
            if np.abs(x_unit[k] - unit).max() > tol:
                fail(f"{path}: [0,1] record {k} vs numpy v/M: max diff "
                     f"{np.abs(x_unit[k] - unit).max()}")
            checked += 1
    print(f"ok: {out}: {dtype} {layout} {depth}-bit, {checked} records equal to their sources")
    return files


def check_formats(src8, src16, outs):
    got = {}
    for out in outs:
        files = check_output(src8, src16, out)
        t = files["train"]
        got[(t.dtype, t.layout, t.record_depth)] = files
    # u8/u16 normalised by the package = kiln's own --dtype f32 file, bit for bit (docs/training.md).
    for layout in ("nhwc", "nchw"):
        for s in SPLITS:
            a = got[("u8", layout, 8)][s].to_float()
            b = got[("f32", layout, 8)][s].to_float()
            if not np.array_equal(a, b):
                fail(f"{layout} {s}: normalised u8 differs from kiln's f32 by {np.abs(a - b).max()}")
    print("ok: normalised u8 records equal kiln's --dtype f32 files bit for bit")


# ---- empty splits ----

def rewrite(src, dst, meta=None, edit=None):
    """Copies a .kten file with a new metadata block (header digest, offset, length and file
    size updated per docs/format.md) and/or header bytes changed by edit(bytearray)."""
    data = bytearray(open(src, "rb").read())
    if meta is not None:
        (off,) = struct.unpack_from("<Q", data, 24)
        block = json.dumps(meta, indent=2).encode()
        data = data[:off] + block
        struct.pack_into("<Q", data, 32, len(block))
        data[40:72] = hashlib.sha256(block).digest()
        struct.pack_into("<Q", data, 72, len(data))
    if edit is not None:
        edit(data)
    open(dst, "wb").write(bytes(data))


def expect_error(path, phrase, call):
    try:
        call()
    except kten.KtenError as e:
        msg = str(e)
        if path not in msg or phrase not in msg:
            fail(f"error for {path} should name it and say '{phrase}': {msg}")
        return msg
    fail(f"{path}: no KtenError (expected '{phrase}')")


def check_empty(out):
    man = json.load(open(os.path.join(out, "manifest.json")))
    empty = [s for s in SPLITS if man["counts"][s]["records"] == 0]
    if not empty:
        fail(f"{out}: no 0-record split to check")
    for s in empty:
        path = os.path.join(out, f"{s}.kten")
        t = kten.open(path, verify=True)
        c, h, w = t.channels, t.height, t.width
        if len(t) != 0 or t.labels.shape != (0,) or t.item.shape != (0,):
            fail(f"{path}: {len(t)} records")
        x, y = t.load()
        if x.shape != (0, c, h, w) or y.shape != (0,) or x.dtype != np.float32:
            fail(f"{path}: load() of a 0-record split gives {x.shape} {y.shape}")
        if t.mean is None:
            fail(f"{path}: training statistics of a 0-record val/test split are missing")
        print(f"ok: {path}: 0 records, load() shapes {x.shape} {y.shape}")
    # A training split without records (issue 11 item 9): statistics null, or absent, in
    # every file. mean/std are None; normalising is refused with a clear error; v/M still works.
    src = os.path.join(out, f"{empty[0]}.kten")
    meta = kten.open(src).metadata
    for form in ("null", "absent"):
        m = dict(meta)
        if form == "null":
            m["statistics"] = m["training_statistics"] = None
        else:
            del m["statistics"], m["training_statistics"]
        dst = os.path.join(os.path.dirname(out), f"stats-{form}.kten")
        rewrite(src, dst, meta=m)
        t = kten.open(dst, verify=True)
        if t.mean is not None or t.std is not None or t.statistics is not None:
            fail(f"{dst}: statistics {form}: mean/std should be None")
        if t.to_float(normalise=False).shape != (0, t.channels, t.height, t.width):
            fail(f"{dst}: to_float(normalise=False) failed")
        expect_error(dst, "no training statistics", lambda: t.to_float(normalise=True))
        print(f"ok: statistics {form}: mean/std None, normalising refused by name")


# ---- damaged files ----

def check_damaged(out, work):
    good = os.path.join(out, "train.kten")
    size = os.path.getsize(good)
    (img_off,) = struct.unpack_from("<Q", open(good, "rb").read(4096), 128 + 56)
    (meta_off,) = struct.unpack_from("<Q", open(good, "rb").read(4096), 24)
    lab = doc_arrays(good)["labels"]

    def flip(at):
        return lambda d: d.__setitem__(at, d[at] ^ 0x01)

    def cut(n):
        return lambda d: d.__delitem__(slice(n, None))

    cases = [
        # (name, edit, phrase, needs verify)
        ("empty", cut(0), "empty file", False),
        ("short", cut(100), "truncated", False),
        ("truncated", cut(size - 10), "header says", False),
        ("longer", lambda d: d.extend(b"\0" * 7), "extra bytes", False),
        ("text-mode", lambda d: d.__setitem__(slice(0, 8), b"KTEN\n\x1a\n\0"), "damaged magic", False),
        ("png", lambda d: d.__setitem__(slice(0, 8), b"\x89PNG\r\n\x1a\n"), "not a .kten file", False),
        ("version", lambda d: struct.pack_into("<I", d, 8, 2), "format version 2", False),
        ("count", lambda d: struct.pack_into("<I", d, 16, 40), "array count 40", False),
        ("length", lambda d: struct.pack_into("<Q", d, 128 + 64, 12345), "disagrees with its shape", False),
        ("offset", lambda d: struct.pack_into("<Q", d, 128 + 56, img_off + 8), "4096-aligned", False),
        ("dtype", lambda d: d.__setitem__(128 + 16, 9), "unknown dtype code 9", False),
        ("rank", lambda d: d.__setitem__(128 + 17, 5), "rank 5", False),
        ("name", lambda d: d.__setitem__(slice(128, 144), b"\xff" * 16), "no valid ASCII name", False),
        ("metadata", flip(meta_off + 3), "metadata block does not match", False),
        ("label", lambda d: struct.pack_into("<i", d, lab[2], 99), "labels outside", False),
        ("pixel", flip(img_off + 5), "array 'images' does not match the SHA-256", True),
    ]
    for name, edit, phrase, verify in cases:
        path = os.path.join(work, f"{name}.kten")
        rewrite(good, path, edit=edit)
        if verify:
            kten.open(path)  # damaged pixels open without verification...
        msg = expect_error(path, phrase, lambda: kten.open(path, verify=verify))
        print(f"ok: {name}: {msg}")
    # A manifest.json from another output beside a file: recipe is refused, by both names.
    other = os.path.join(work, "mixed")
    os.makedirs(other)
    shutil.copy(good, other)
    man = json.load(open(os.path.join(out, "manifest.json")))
    man["recipe"]["filter"] = "lanczos3" if man["recipe"]["filter"] != "lanczos3" else "box"
    json.dump(man, open(os.path.join(other, "manifest.json"), "w"), indent=2)
    path = os.path.join(other, "train.kten")
    msg = expect_error(path, "not the one this file was packed with", lambda: kten.open(path).recipe)
    if "manifest.json" not in msg:
        fail(f"recipe mismatch should name manifest.json: {msg}")
    print(f"ok: foreign manifest: {msg}")


def main(argv):
    cmd = argv[1] if len(argv) > 1 else ""
    if cmd == "tiles" and len(argv) == 4:
        make_tiles(argv[2], argv[3])
    elif cmd == "formats" and len(argv) > 4:
        check_formats(argv[2], argv[3], argv[4:])
    elif cmd == "empty" and len(argv) == 3:
        check_empty(argv[2])
    elif cmd == "damaged" and len(argv) == 4:
        check_damaged(argv[2], argv[3])
    else:
        print(__doc__)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
