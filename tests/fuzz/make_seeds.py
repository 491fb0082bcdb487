#!/usr/bin/python3
"""Seed corpora for the fuzz harnesses: small valid files of every input kiln reads, one folder
per harness (OUT/png, OUT/jpeg, ...). Images are written by PIL and numpy or, where PIL cannot
write the variant (interlaced or 16-bit colour PNG, tiled or planar TIFF, every PNM kind), by
the small writers below from the published format specifications (PNG: ISO/IEC 15948 / W3C
PNG; TIFF 6.0; Netpbm's format pages; EXIF: CIPA DC-008). Archives come from Python's zipfile
and tarfile. Every file is valid: the replay test checks that each one is accepted.

Usage: make_seeds.py OUT
Deterministic: the same files on every run (fixed random seed, no time stamps)."""
import hashlib
import io
import json
import os
import shutil
import struct
import sys
import tarfile
import zipfile
import zlib

import numpy as np
from PIL import Image

RNG = np.random.default_rng(20240611)
OUT = None


def put(harness, name, data):
    folder = os.path.join(OUT, harness)
    os.makedirs(folder, exist_ok=True)
    with open(os.path.join(folder, name), "wb") as f:
        f.write(data)


def picture(h, w, c, maxval):
    """Gradient plus noise: a picture with structure, not just noise."""
    y, x = np.mgrid[0:h, 0:w]
    base = (x * 7 + y * 13)[:, :, None] + np.arange(c)[None, None, :] * 40
    noise = RNG.integers(0, max(2, maxval // 8), size=(h, w, c))
    return ((base * max(1, maxval // 64) + noise) % (maxval + 1)).astype(np.int64)


def plane(arr, dtype):
    """The array PIL's fromarray wants: 2-D for one channel (never squeezing a 1-pixel side)."""
    a = arr.astype(dtype)
    return a[:, :, 0] if a.shape[2] == 1 else a


# ---- EXIF (a TIFF-structured block, CIPA DC-008) ---------------------------------------------

def exif_block(orientation, big_endian=False):
    e = ">" if big_endian else "<"
    head = (b"MM" if big_endian else b"II") + struct.pack(e + "HI", 42, 8)
    make = b"kiln seed\0"
    entries = [
        (0x010F, 2, len(make), 8 + 2 + 12 * 2 + 4),  # Make, ASCII, stored after the IFD
        (0x0112, 3, 1, None),                          # Orientation, SHORT, in the entry
    ]
    ifd = struct.pack(e + "H", len(entries))
    for tag, typ, count, off in entries:
        if off is None:
            ifd += struct.pack(e + "HHIHH", tag, typ, count, orientation, 0)
        else:
            ifd += struct.pack(e + "HHII", tag, typ, count, off)
    ifd += struct.pack(e + "I", 0)
    return head + ifd + make


# ---- PNG (chunks written here so every colour type, depth and interlacing is covered) --------

def chunk(kind, data):
    return struct.pack(">I", len(data)) + kind + data + struct.pack(
        ">I", zlib.crc32(kind + data) & 0xFFFFFFFF)


def pack_row(samples, depth):
    if depth == 8:
        return bytes(int(v) for v in samples)
    if depth == 16:
        return b"".join(struct.pack(">H", int(v)) for v in samples)
    out, acc, bits = bytearray(), 0, 0
    for v in samples:
        acc, bits = (acc << depth) | int(v), bits + depth
        if bits == 8:
            out.append(acc)
            acc, bits = 0, 0
    if bits:
        out.append(acc << (8 - bits))
    return bytes(out)


ADAM7 = [(0, 0, 8, 8), (4, 0, 8, 8), (0, 4, 4, 8), (2, 0, 4, 4), (0, 2, 2, 4), (1, 0, 2, 2),
         (0, 1, 1, 2)]


def png_bytes(arr, ctype, depth, interlace=False, extra=(), plte=None, trns=None):
    h, w = arr.shape[:2]

    def scan(img):
        raw = bytearray()
        for y in range(img.shape[0]):
            raw.append(0)
            raw += pack_row(img[y].reshape(-1), depth)
        return raw

    if interlace:
        raw = bytearray()
        for x0, y0, dx, dy in ADAM7:
            sub = arr[y0::dy, x0::dx]
            if sub.shape[0] and sub.shape[1]:
                raw += scan(sub)
    else:
        raw = scan(arr)
    out = b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, depth, ctype, 0, 0,
                                                             1 if interlace else 0))
    for kind, data in extra:
        out += chunk(kind, data)
    if plte is not None:
        out += chunk(b"PLTE", plte)
    if trns is not None:
        out += chunk(b"tRNS", trns)
    z = zlib.compress(bytes(raw), 9)
    half = len(z) // 2  # two IDAT chunks: the stream may be split anywhere
    return out + chunk(b"IDAT", z[:half]) + chunk(b"IDAT", z[half:]) + chunk(b"IEND", b"")


def png_seeds():
    seeds = {}
    channels = {0: 1, 2: 3, 3: 1, 4: 2, 6: 4}
    cases = [  # (ctype, depth, h, w, interlace)
        (0, 1, 5, 7, False), (0, 2, 3, 3, False), (0, 4, 2, 5, False), (0, 8, 7, 13, False),
        (0, 16, 4, 9, False), (2, 8, 3, 11, False), (2, 16, 5, 5, False), (3, 1, 4, 9, False),
        (3, 2, 3, 3, False), (3, 4, 6, 5, False), (3, 8, 7, 7, False), (4, 8, 3, 4, False),
        (4, 16, 2, 3, False), (6, 8, 5, 3, False), (6, 16, 3, 5, False), (2, 8, 10, 10, True),
        (0, 16, 9, 9, True), (3, 4, 11, 6, True), (6, 8, 1, 1, False), (0, 8, 31, 1, False),
        (2, 8, 1, 37, True),
    ]
    for ctype, depth, h, w, interlace in cases:
        maxval = (1 << depth) - 1
        arr = picture(h, w, channels[ctype], maxval)
        plte = trns = None
        if ctype == 3:
            n = 1 << depth
            plte = bytes((i * 37 + k * 91) % 256 for i in range(n) for k in range(3))
            trns = bytes(255 - 20 * i % 256 for i in range(min(n, 4)))
        name = f"ok-c{ctype}-d{depth}-{w}x{h}{'-adam7' if interlace else ''}.png"
        seeds[name] = png_bytes(arr, ctype, depth, interlace, plte=plte, trns=trns)
    # tRNS on grey and RGB (a colour key becomes an alpha channel)
    seeds["ok-grey-trns.png"] = png_bytes(picture(4, 6, 1, 255), 0, 8, trns=struct.pack(">H", 7))
    seeds["ok-rgb16-trns.png"] = png_bytes(picture(3, 4, 3, 65535), 2, 16,
                                           trns=struct.pack(">HHH", 1, 2, 3))
    # EXIF orientation (eXIf chunk), colour notes (sRGB, gAMA), text
    seeds["ok-exif6.png"] = png_bytes(picture(4, 6, 3, 255), 2, 8,
                                      extra=[(b"eXIf", exif_block(6))])
    seeds["ok-exif8-be.png"] = png_bytes(picture(5, 3, 1, 255), 0, 8,
                                         extra=[(b"eXIf", exif_block(8, True))])
    seeds["ok-srgb-gama-text.png"] = png_bytes(
        picture(3, 3, 3, 255), 2, 8,
        extra=[(b"sRGB", b"\0"), (b"gAMA", struct.pack(">I", 45455)),
               (b"tEXt", b"Comment\0kiln seed")])
    # and two written by PIL
    for mode, name in (("L", "ok-pil-grey.png"), ("RGB", "ok-pil-rgb.png")):
        c = 1 if mode == "L" else 3
        img = Image.fromarray(plane(picture(9, 14, c, 255), np.uint8), mode)
        buf = io.BytesIO()
        img.save(buf, "PNG")
        seeds[name] = buf.getvalue()
    return seeds


# ---- JPEG (PIL on libjpeg) -------------------------------------------------------------------

def jpeg_seeds():
    seeds = {}

    def save(name, arr, mode, **kw):
        img = Image.fromarray(plane(arr, np.uint8), "L" if mode == "L" else "RGB")
        if mode == "CMYK":
            img = img.convert("CMYK")
        buf = io.BytesIO()
        img.save(buf, "JPEG", **kw)
        seeds[name] = buf.getvalue()

    save("ok-rgb-420.jpg", picture(11, 17, 3, 255), "RGB", quality=90)
    save("ok-rgb-444.jpg", picture(9, 9, 3, 255), "RGB", quality=95, subsampling=0)
    save("ok-rgb-422-optimized.jpg", picture(16, 24, 3, 255), "RGB", subsampling=1, optimize=True)
    save("ok-rgb-progressive.jpg", picture(16, 16, 3, 255), "RGB", progressive=True)
    save("ok-grey.jpg", picture(13, 9, 1, 255), "L", quality=80)
    save("ok-grey-progressive.jpg", picture(19, 23, 1, 255), "L", progressive=True)
    save("ok-cmyk.jpg", picture(8, 8, 3, 255), "CMYK")
    save("ok-1x1.jpg", picture(1, 1, 3, 255), "RGB")
    save("ok-33x1.jpg", picture(1, 33, 1, 255), "L")
    for o in (3, 6, 8):
        save(f"ok-exif{o}.jpg", picture(7, 12, 3, 255), "RGB", exif=b"Exif\0\0" + exif_block(o))
    return seeds


# ---- TIFF (PIL on libtiff, and a small writer for tiles, planes and tags PIL does not write) ---

def tiff_bytes(arr, bps, photometric, tile=None, planar=1, orientation=None, extra=None,
               big_endian=False):
    """Uncompressed TIFF 6.0 with one image: strips (one per row) or tiles, contiguous (1) or
    separate (2) planes."""
    e = ">" if big_endian else "<"
    h, w, c = arr.shape
    dt = np.dtype(e + ("u1" if bps == 8 else "u2"))
    planes = [arr] if planar == 1 else [arr[:, :, k:k + 1] for k in range(c)]
    blocks = []
    if tile:
        tw, th = tile
        for p in planes:
            for ty in range(0, h, th):
                for tx in range(0, w, tw):
                    t = np.zeros((th, tw, p.shape[2]), dtype=dt)
                    part = p[ty:ty + th, tx:tx + tw]
                    t[:part.shape[0], :part.shape[1]] = part
                    blocks.append(t.tobytes())
    else:
        for p in planes:
            for y in range(h):
                blocks.append(p[y].astype(dt).tobytes())
    data = b"".join(blocks)
    offsets, pos = [], 8
    for b in blocks:
        offsets.append(pos)
        pos += len(b)
    tags = [(256, 4, [w]), (257, 4, [h]), (258, 3, [bps] * c), (259, 3, [1]),
            (262, 3, [photometric]), (277, 3, [c]), (284, 3, [planar])]
    if orientation:
        tags.append((274, 3, [orientation]))
    if extra is not None:
        tags.append((338, 3, [extra]))
    if tile:
        tags += [(322, 4, [tile[0]]), (323, 4, [tile[1]]), (324, 4, offsets),
                 (325, 4, [len(b) for b in blocks])]
    else:
        tags += [(273, 4, offsets), (278, 4, [1]), (279, 4, [len(b) for b in blocks])]
    tags.sort()
    ifd_at = 8 + len(data)
    ifd_at += ifd_at % 2
    out_of_line = ifd_at + 2 + 12 * len(tags) + 4
    ifd, tail = struct.pack(e + "H", len(tags)), b""
    for tag, typ, vals in tags:
        fmt = "H" if typ == 3 else "I"
        raw = struct.pack(e + fmt * len(vals), *vals)
        if len(raw) <= 4:
            ifd += struct.pack(e + "HHI", tag, typ, len(vals)) + raw.ljust(4, b"\0")
        else:
            ifd += struct.pack(e + "HHII", tag, typ, len(vals), out_of_line + len(tail))
            tail += raw
    ifd += struct.pack(e + "I", 0)
    head = (b"MM" if big_endian else b"II") + struct.pack(e + "HI", 42, ifd_at)
    return head + data + b"\0" * (ifd_at - 8 - len(data)) + ifd + tail


def tiff_seeds():
    seeds = {}

    def pil(name, img, **kw):
        buf = io.BytesIO()
        img.save(buf, "TIFF", **kw)
        seeds[name] = buf.getvalue()

    rgb = Image.fromarray(picture(10, 13, 3, 255).astype(np.uint8), "RGB")
    grey = Image.fromarray(plane(picture(7, 9, 1, 255), np.uint8), "L")
    pil("ok-pil-grey-raw.tif", grey)
    pil("ok-pil-rgb-lzw.tif", rgb, compression="tiff_lzw")
    pil("ok-pil-rgb-deflate.tif", rgb, compression="tiff_adobe_deflate")
    pil("ok-pil-rgb-packbits.tif", rgb, compression="packbits")
    pil("ok-pil-rgb-jpeg.tif", Image.fromarray(picture(16, 16, 3, 255).astype(np.uint8), "RGB"),
        compression="jpeg")
    pil("ok-pil-rgba.tif", Image.fromarray(picture(5, 6, 4, 255).astype(np.uint8), "RGBA"),
        compression="tiff_lzw")
    pil("ok-pil-grey16.tif",
        Image.fromarray(plane(picture(6, 5, 1, 65535), np.uint16), "I;16"))
    pil("ok-pil-bilevel-g4.tif", grey.convert("1"), compression="group4")
    pil("ok-pil-palette.tif", rgb.convert("P"))
    seeds["ok-tiled-rgb8.tif"] = tiff_bytes(picture(18, 20, 3, 255), 8, 2, tile=(16, 16))
    seeds["ok-tiled-grey16-be.tif"] = tiff_bytes(picture(17, 33, 1, 65535), 16, 1, tile=(16, 16),
                                                 big_endian=True)
    seeds["ok-planar-rgb16.tif"] = tiff_bytes(picture(5, 7, 3, 65535), 16, 2, planar=2)
    seeds["ok-planar-tiled-rgb8.tif"] = tiff_bytes(picture(9, 17, 3, 255), 8, 2, tile=(16, 16),
                                                   planar=2)
    seeds["ok-miniswhite.tif"] = tiff_bytes(picture(4, 5, 1, 255), 8, 0)
    seeds["ok-orient6.tif"] = tiff_bytes(picture(3, 8, 3, 255), 8, 2, orientation=6)
    seeds["ok-grey-assoc-alpha.tif"] = tiff_bytes(picture(4, 4, 2, 255), 8, 1, extra=1)
    seeds["ok-rgba16-unassoc.tif"] = tiff_bytes(picture(3, 3, 4, 65535), 16, 2, extra=2)
    return seeds


# ---- PNM (Netpbm: P1-P6) ----------------------------------------------------------------------

def pnm_seeds():
    seeds = {}
    a = picture(5, 7, 1, 1)
    seeds["ok-p1.pbm"] = b"P1\n# kiln seed\n7 5\n" + b"\n".join(
        b" ".join(str(1 - int(v)).encode() for v in row) for row in a[:, :, 0]) + b"\n"
    seeds["ok-p1-packed.pbm"] = b"P1 7 5\n" + b"".join(
        b"".join(str(int(v)).encode() for v in row) + b"\n" for row in a[:, :, 0])
    g = picture(4, 6, 1, 15)
    seeds["ok-p2.pgm"] = b"P2\n6 4\n15\n" + b"\n".join(
        b" ".join(str(int(v)).encode() for v in row) for row in g[:, :, 0]) + b"\n"
    c = picture(3, 5, 3, 255)
    seeds["ok-p3.ppm"] = b"P3 5 3 255\n" + b" ".join(str(int(v)).encode() for v in c.reshape(-1))
    bits = np.packbits(picture(6, 11, 1, 1)[:, :, 0].astype(np.uint8), axis=1)
    seeds["ok-p4.pbm"] = b"P4\n11 6\n" + bits.tobytes()
    seeds["ok-p5.pgm"] = b"P5\n9 7\n255\n" + picture(7, 9, 1, 255).astype(np.uint8).tobytes()
    seeds["ok-p5-16.pgm"] = b"P5 3 5 65535\n" + picture(5, 3, 1, 65535).astype(">u2").tobytes()
    seeds["ok-p6.ppm"] = b"P6\n#c\n4 4\n255\n" + picture(4, 4, 3, 255).astype(np.uint8).tobytes()
    seeds["ok-p6-1000.ppm"] = b"P6 2 3 1000\n" + picture(3, 2, 3, 1000).astype(">u2").tobytes()
    seeds["ok-p5-1x29.pgm"] = b"P5 1 29 100\n" + picture(29, 1, 1, 100).astype(np.uint8).tobytes()
    return seeds


# ---- archives (zipfile, tarfile) ---------------------------------------------------------------

def archive_seeds(images):
    seeds = {}
    members = [("cats/a.png", images[0]), ("dogs/b.png", images[1]),
               ("dogs/\u00e9t\u00e9 1.png", images[0])]

    def zbytes(method, extra=()):
        buf = io.BytesIO()
        with zipfile.ZipFile(buf, "w", method) as z:
            for name in ("cats/", "dogs/"):
                info = zipfile.ZipInfo(name, (2020, 1, 1, 0, 0, 0))
                z.writestr(info, b"")
            for name, data in list(members) + list(extra):
                info = zipfile.ZipInfo(name, (2020, 1, 1, 0, 0, 0))
                info.compress_type = method
                z.writestr(info, data)
        return buf.getvalue()

    seeds["ok-stored.zip"] = zbytes(zipfile.ZIP_STORED)
    seeds["ok-deflated-junk.zip"] = zbytes(zipfile.ZIP_DEFLATED, [
        ("__MACOSX/cats/._a.png", b"\0\5\26\7junk"), ("cats/.hidden.png", images[1]),
        ("Thumbs.db", b"junk"), ("nested.zip", zbytes(zipfile.ZIP_STORED))])

    def tbytes(mode, prefix=""):
        buf = io.BytesIO()
        with tarfile.open(fileobj=buf, mode=mode, format=tarfile.PAX_FORMAT) as t:
            for d in ("cats", "dogs"):
                ti = tarfile.TarInfo(prefix + d)
                ti.type, ti.mode, ti.mtime = tarfile.DIRTYPE, 0o755, 0
                t.addfile(ti)
            for name, data in members:
                ti = tarfile.TarInfo(prefix + name)
                ti.size, ti.mode, ti.mtime = len(data), 0o644, 0
                t.addfile(ti, io.BytesIO(data))
            link = tarfile.TarInfo(prefix + "cats/link.png")
            link.type, link.linkname, link.mtime = tarfile.SYMTYPE, "a.png", 0
            t.addfile(link)
            hard = tarfile.TarInfo(prefix + "cats/hard.png")
            hard.type, hard.linkname, hard.mtime = tarfile.LNKTYPE, prefix + "cats/a.png", 0
            t.addfile(hard)
        return buf.getvalue()

    seeds["ok-dot-prefix.tar"] = tbytes("w", "./")
    seeds["ok.tar.gz"] = tbytes("w:gz")
    seeds["ok.tar.bz2"] = tbytes("w:bz2")
    seeds["ok.tar.xz"] = tbytes("w:xz")
    buf = io.BytesIO()
    with tarfile.open(fileobj=buf, mode="w", format=tarfile.USTAR_FORMAT) as t:
        ti = tarfile.TarInfo("one.png")
        ti.size, ti.mtime = len(images[0]), 0
        t.addfile(ti, io.BytesIO(images[0]))
    seeds["ok-ustar.tar"] = buf.getvalue()
    return seeds


# ---- CSV, catalog.csv, labels CSV --------------------------------------------------------------

def csv_seeds():
    return {
        "ok-plain.csv": b"path,label,group\r\na.png,cat,1\r\nb.png,dog,2\r\n",
        "ok-quoted.csv": b'name,note\r\n"a, b","say ""hi"""\r\n"multi\r\nline",x\r\n',
        "ok-lf-no-final-newline.csv": b"x,y,z\n1,,3\n,,\nlast,row,here",
        "ok-cr-only.csv": b"a,b\rc,d\r",
        "ok-empty-lines.csv": b"h\n\n\nv\n",
        "ok-utf8.csv": "path,label\n\u00e9t\u00e9/\u732b.png,\u732b\n".encode(),
    }


CATALOG_COLS = ["source", "path", "member", "size", "sha256", "format", "width", "height",
                "channels", "depth", "stored_depth", "orientation", "pages", "notes", "label",
                "class", "group", "status", "reason", "pixel_sha256", "pixel_scale",
                "record_digest", "unit", "split", "near_fingerprint"]


def fingerprint(seed, grey=False):
    """A near-duplicate fingerprint as catalog.csv holds it (docs/formats.md): base64 of version
    1, flags, info, hash, centre, chroma scale, 16 chroma pairs and a 16x16 thumbnail."""
    import base64
    h = (0x9E3779B97F4A7C15 * (seed + 1)) % 2 ** 64 & ~1
    c = (0xC2B2AE3D27D4EB4F * (seed + 3)) % 2 ** 64 & ~1
    head = bytes([1, 0]) + (500 + seed).to_bytes(2, "big") + h.to_bytes(8, "big") + \
        c.to_bytes(8, "big")
    if grey:
        chroma = bytes(4) + bytes(32)
    else:
        chroma = (40000 + seed).to_bytes(4, "big") + bytes(((i * 37 + seed) % 255 - 127) & 255
                                                           for i in range(32))
    thumb = bytes((i * 7 + seed * 31) % 256 for i in range(256))
    return base64.b64encode(head + chroma + thumb).decode()


def catalog_row(**kw):
    return [str(kw.get(c, "")) for c in CATALOG_COLS]


def csv_text(rows):
    def field(s):
        return '"' + s.replace('"', '""') + '"' if any(ch in s for ch in ',"\r\n') else s
    return "".join(",".join(field(f) for f in r) + "\r\n" for r in rows).encode()


def catalog_seeds():
    sha = [hashlib.sha256(bytes([i])).hexdigest() for i in range(6)]
    ok = dict(source="data", format="png", width=13, height=7, channels=3, depth=8,
              stored_depth=8, orientation=1, pages=1, status="ok")
    rows = [CATALOG_COLS,
            catalog_row(path="cats/a.png", size=120, sha256=sha[0], label="cats",
                        pixel_sha256=sha[1], near_fingerprint=fingerprint(1), pixel_scale=1, **ok),
            catalog_row(path="dogs/b%25.png", size=99, sha256=sha[2], label="dogs", notes="palette",
                        pixel_sha256=sha[3], near_fingerprint=fingerprint(2, grey=True),
                        record_digest="0123456789abcdef0123456789abcdef", pixel_scale=2, **ok),
            catalog_row(source="data", path="x.zip", member="dogs/c.jpg", size=5, sha256=sha[4],
                        format="jpeg", status="truncated", reason="JPEG stream ends early"),
            catalog_row(source="data", path="empty.png", size=0, status="empty",
                        reason="file is empty (0 bytes)")]
    for r in rows[1:3]:
        r[CATALOG_COLS.index("class")] = str(rows.index(r) - 1)
    split = [list(r) for r in rows]
    split[1][CATALOG_COLS.index("unit")] = "00000000000000ff"
    split[1][CATALOG_COLS.index("split")] = "train"
    split[2][CATALOG_COLS.index("unit")] = "a000000000000001"
    split[2][CATALOG_COLS.index("split")] = "test"
    order = [5, 0, 17, 4, 3, 1, 2, 24] + [i for i in range(len(CATALOG_COLS))
                                          if i not in (5, 0, 17, 4, 3, 1, 2, 24)]
    reordered = [[r[i] for i in order] + ["extra"] for r in rows]
    return {"ok-scanned.csv": csv_text(rows), "ok-split.csv": csv_text(split),
            "ok-reordered-extra-column.csv": csv_text(reordered)}


def labels_seeds():
    return {
        "ok-labels.csv": b"path,label,group\r\ncats/a.png,cat,s1\r\ndogs/b.png,dog,s2\r\n",
        "ok-labels-no-group.csv": b"label,path\nc,x/1.png\nd,x/2.png\n\n",
        "ok-labels-quoted.csv": '"path","label","group"\n"a, b.png","x ""y""",\n"\u00e9.png",z,g\n'
        .encode(),
    }


def items_seeds():
    head = b"row,source,path,member,size,sha256,label,class,group,unit,split,index,status,reason\r\n"
    sha = "ab" * 32
    packed = (f"0,data,cats/a.png,,120,{sha},cat,0,s1,0123456789abcdef,train,0,ok,\r\n"
              f"1,data,set.zip,dogs/b.png,99,{sha},dog,1,,fedcba9876543210,test,0,ok,\r\n").encode()
    rest = b'2,data,notes.txt,,5,,,,,,,,not-image,"content is not a known image format, ""x"""\r\n'
    return {"ok-items.csv": head + packed + rest,
            "ok-items-unpacked-only.csv": head + rest.replace(b"2,", b"0,", 1)}


# ---- .kten (docs/format.md) ----------------------------------------------------------------------

def kten_bytes(arrays, meta):
    table, data, pos = b"", b"", 4096
    for name, dtype, dims, raw in arrays:
        table += (name.encode().ljust(16, b"\0") + struct.pack("<BB6x", dtype, len(dims)) +
                  struct.pack("<4Q", *(list(dims) + [0] * (4 - len(dims)))) +
                  struct.pack("<QQ", pos, len(raw)) + hashlib.sha256(raw).digest() + b"\0" * 24)
        pad = (-len(raw)) % 4096
        data += raw + b"\0" * pad
        pos += len(raw) + pad
    meta_raw = json.dumps(meta).encode()
    head = (b"KTEN\r\n\x1a\n" + struct.pack("<IIII", 1, 4096, len(arrays), 128) +
            struct.pack("<QQ", pos, len(meta_raw)) + hashlib.sha256(meta_raw).digest() +
            struct.pack("<QI", pos + len(meta_raw), 4096) + b"\0" * 44)
    return (head + table).ljust(4096, b"\0") + data + meta_raw


def kten_seeds():
    n, h, w, c = 2, 3, 4, 1
    imgs = picture(n * h, w, c, 255).astype(np.uint8).tobytes()
    labels = np.array([0, -1], "<i4").tobytes()
    items = np.array([1, 0], "<u4").tobytes()
    meta = {"format": "kiln tensor file", "split": "train", "records": n, "layout": "nhwc",
            "dtype": "u8", "record_depth": 8, "classes": ["a", "b"]}
    f32 = np.linspace(-1, 1, n * c * h * w, dtype="<f4").tobytes()
    return {
        "ok-nhwc-u8.kten": kten_bytes([("images", 1, (n, h, w, c), imgs), ("labels", 3, (n,), labels),
                                       ("item", 4, (n,), items)], meta),
        "ok-nchw-f32.kten": kten_bytes([("images", 5, (n, c, h, w), f32), ("labels", 3, (n,), labels)],
                                       dict(meta, layout="nchw", dtype="f32")),
        "ok-empty.kten": kten_bytes([("images", 2, (0, 5, 5, 3), b"")], dict(meta, records=0)),
    }


# ---- manifest.json and --keep --------------------------------------------------------------------

SEP = b"\n--8<-- next file --8<--\n"  # tests/fuzz/fuzz.h FUZZ_SEP

RECIPE = {"size": "32x24", "fit": "pad", "filter": "lanczos3", "channels": 3, "depth": 8,
          "dtype": "u8", "layout": "nhwc", "dct_scale": True, "orient": True,
          "pad_value": [0, 0, 0, 0], "background": [255, 255, 255], "max_pixels": 268435456,
          "max_side": 65535, "resample_bits": 22, "hash_paths": False}


def manifest_seeds():
    outputs = [{"name": n, "bytes": 10 * i + 1, "sha256": hashlib.sha256(n.encode()).hexdigest()}
               for i, n in enumerate(["train.kten", "val.kten", "items.csv", "catalog.csv"])]
    m = {"format": "kiln output manifest", "version": 1, "recipe": RECIPE, "seed": 7, "outputs": outputs,
         "classes": ["a", "b"]}
    sums = "".join(f"{o['sha256']}  {o['name']}\n" for o in outputs).encode()
    m2 = dict(m, recipe=dict(RECIPE, fit="crop", filter="bilinear", channels=1, depth=16,
                             dtype="f32", layout="nchw", dct_scale=False, size="7x5"))
    return {"ok-manifest.json": json.dumps(m, indent=2).encode() + SEP + sums,
            "ok-manifest-f32.json": json.dumps(m2).encode() + SEP + sums,
            "ok-manifest-no-sums.json": json.dumps(m).encode()}


def keep_seeds():
    m = {"format": "kiln output manifest", "recipe": RECIPE,
         "outputs": [{"name": "train.kten", "sha256": "0" * 64},
                     {"name": "items.csv", "sha256": "@ITEMS_SHA256@"}]}
    sha = [hashlib.sha256(bytes([i])).hexdigest() for i in range(4)]
    items = ("row,source,path,member,size,sha256,label,class,group,unit,split,index,status,reason\r\n"
             f"0,d,a.png,,3,{sha[0]},a,0,,00000000000000aa,train,0,ok,\r\n"
             f"1,d,b.png,,3,{sha[1]},b,1,,00000000000000bb,val,0,ok,\r\n"
             f"2,d,c.png,,3,{sha[2]},b,1,,00000000000000cc,test,0,ok,\r\n"
             f"3,d,c2.png,,3,{sha[2]},b,1,,00000000000000cc,test,1,ok,\r\n"
             "4,d,bad.png,,0,,,,,,,,empty,file is empty\r\n").encode()
    return {"ok-keep.json": json.dumps(m, indent=1).encode() + SEP + items,
            "ok-keep-minimal.json": json.dumps(m).encode() + SEP + f"sha256,split\n{sha[3]},val\n".encode()}


def main():
    global OUT
    if len(sys.argv) != 2:
        sys.exit(__doc__)
    OUT = sys.argv[1]
    png = png_seeds()
    groups = {
        "png": png, "jpeg": jpeg_seeds(), "tiff": tiff_seeds(), "pnm": pnm_seeds(),
        "exif": {f"ok-{'mm' if be else 'ii'}-{o}.exif": exif_block(o, be)
                 for o in range(2, 9) for be in (False, True)},
        "archive": archive_seeds([png["ok-c2-d8-11x3.png"], png["ok-c0-d8-13x7.png"]]),
        "csv": csv_seeds(), "catalog_csv": catalog_seeds(), "labels_csv": labels_seeds(),
        "items_csv": items_seeds(),
        "kten": kten_seeds(), "manifest": manifest_seeds(), "keep": keep_seeds(),
    }
    for harness, seeds in groups.items():
        shutil.rmtree(os.path.join(OUT, harness), ignore_errors=True)  # no stale seeds
        for name, data in sorted(seeds.items()):
            put(harness, name, data)
    print(f"{sum(len(s) for s in groups.values())} seeds in {OUT}")


if __name__ == "__main__":
    main()
