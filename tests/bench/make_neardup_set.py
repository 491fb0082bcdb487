#!/usr/bin/env python3
"""Near-duplicate benchmark set from real published images packaged in Debian.

    make_neardup_set.py OUTDIR [--seed N]

Writes OUTDIR/images/* and OUTDIR/truth.csv (one row per file: file, set, specimen, label,
role, transform, param, source). Files with the same specimen id show the same picture and
must end in one unit; files with different specimen ids are different pictures and must not.
Everything is drawn from one seeded numpy generator and written by PIL (JPEG, TIFF) or by the
small PNG writer below, so the same seed, numpy, PIL and libjpeg give the same bytes.

Sets:
  main    non-overlapping, adjacent crops of the pictures below (the look-alikes: neighbouring
          crops of one picture, crops of three photographed textures) and lab-style copies of
          about half of them, one transformation named per copy (TRANSFORMS below).
  flat    low-information frames: crops of the pictures with next to nothing in them
          (near_flat below; their copies keep the transformation names of the main set) and
          generated ones (blank, near-flat, faint gradients, vignetting, dark frames with hot
          pixels, 8 and 16 bit), every one a different specimen, plus copies with identical
          pixels (role "copy", transform "same-pixels") and re-encoded copies (transform
          "flat-reencode"), which the detector is meant to leave alone (merged only by exact
          digests).
  digits  the 1797 UCI handwritten digits bundled with scikit-learn, 8x8, 17 grey levels;
          none is a copy of another (each is its own specimen), label = digit.
  faces   scikit-image's LFW subset: 100 aligned 25x25 faces and 100 non-face patches, each
          its own specimen.

Sources and licences (as the packages state them; "not stated" where they say nothing):
  python3-skimage (scikit-image 0.19 data, /usr/lib/python3/dist-packages/skimage/data):
    astronaut.png  NASA, public domain          camera.png    Lav Varshney, CC0
    coffee.png     Rachel Michetti, CC0          chelsea.png   Stefan van der Walt, CC0
    rocket.jpg     SpaceX, public domain         brick.png, gravel.png  CC0Textures, CC0
    grass.png      DeviantArt linolafett, CC0    coins.png     Brooklyn Museum, no known
    hubble_deep_field.jpg  NASA, public domain                 copyright restrictions
    retina.jpg     Mikael Haggstrom, CC0         cell.png      CC0
    ihc.png        CMMI, no known copyright restrictions       clock_motion.png  public domain
    text.png       Wikipedia, public domain      moon.png, page.png  licence not stated
    motorcycle_left.png  Middlebury 2014 stereo benchmark, licence not stated
    lfw_subset.npy Labeled Faces in the Wild subset, licence not stated
  python3-sklearn (scikit-learn 1.2, sklearn/datasets/images and the bundled digits):
    china.jpg (danielbuechele) and flower.jpg (vultilion): CC BY 2.0
    load_digits(): UCI ML Optical Recognition of Handwritten Digits, CC BY 4.0 (from memory)
  python3-matplotlib (matplotlib 3.6 sample data, /usr/share/matplotlib/mpl-data/sample_data):
    grace_hopper.jpg, s1045.ima.gz (MRI slice, 16-bit big-endian), jacksboro_fault_dem.npz
    (elevation, int16): matplotlib's licence covers the package; no separate licence stated.
Not used: the figures in python-skimage-doc (rendered plots of the examples, several derived
from one another, e.g. gallery thumbnails of the first figure, so there is no ground truth),
motorcycle_right.png (the other view of a stereo pair: neither a copy nor a different
picture), truncated.jpg (broken on purpose).
"""
import argparse
import csv
import gzip
import io
import os
import struct
import sys
import zlib

import numpy as np
from PIL import Image, ImageDraw, ImageFilter, ImageFont

SKI = "/usr/lib/python3/dist-packages/skimage/data"
SKL = "/usr/lib/python3/dist-packages/sklearn/datasets/images"
MPL = "/usr/share/matplotlib/mpl-data/sample_data"

# (name, loader, tile sizes to cut it into). Tiles are cut on a grid with no gap, so
# neighbouring specimens continue into each other: the hardest look-alikes a picture offers.
PICTURES = [
    ("astronaut", "ski:astronaut.png", [(96, 96), (80, 88)]),
    ("camera", "ski:camera.png", [(96, 96), (101, 77)]),
    ("coffee", "ski:coffee.png", [(80, 80)]),
    ("chelsea", "ski:chelsea.png", [(75, 64)]),
    ("rocket", "ski:rocket.jpg", [(80, 85)]),
    ("brick", "ski:brick.png", [(80, 80), (96, 64)]),
    ("grass", "ski:grass.png", [(80, 80), (64, 96)]),
    ("gravel", "ski:gravel.png", [(72, 72), (80, 80)]),
    ("moon", "ski:moon.png", [(100, 100)]),
    ("coins", "ski:coins.png", [(75, 75)]),
    ("hubble", "ski:hubble_deep_field.jpg", [(100, 87)]),
    ("retina", "ski:retina.jpg", [(141, 141)]),
    ("cell", "ski:cell.png", [(110, 91)]),
    ("ihc", "ski:ihc.png", [(96, 96), (85, 85)]),
    ("motorcycle", "ski:motorcycle_left.png", [(92, 83)]),
    ("clock", "ski:clock_motion.png", [(80, 75)]),
    ("page", "ski:page.png", [(96, 95)]),
    ("text", "ski:text.png", [(112, 86)]),
    ("china", "skl:china.jpg", [(96, 85), (80, 71)]),
    ("flower", "skl:flower.jpg", [(96, 85), (91, 61)]),
    ("grace_hopper", "mpl:grace_hopper.jpg", [(102, 100)]),
    ("mri", "mpl:s1045", [(64, 64)]),
    ("dem", "mpl:jacksboro", [(80, 68)]),
]

# Copy transformations. Each copy names one; a share of copies is then saved as JPEG again
# ("+jpeg" in param), as files passed between people usually are.
TRANSFORMS = ["jpeg-quality", "png-to-jpeg", "jpeg-to-png", "resize-down", "resize-up", "crop",
              "brightness", "gamma", "blur", "grey", "depth-16", "depth-12", "depth-8",
              "exif-orientation", "pixel-orientation", "rotate-small", "label-text",
              "label-box", "noise"]

EXIF_ORIENTATIONS = range(2, 9)


# ---- loading -----------------------------------------------------------------------------

def load_picture(spec):
    where, name = spec.split(":")
    if where == "ski":
        return _load_pil(os.path.join(SKI, name))
    if where == "skl":
        return _load_pil(os.path.join(SKL, name))
    if name == "s1045":
        raw = gzip.open(os.path.join(MPL, "s1045.ima.gz")).read()
        return np.frombuffer(raw, ">u2").reshape(256, 256).astype(np.uint16)
    if name == "jacksboro":
        e = np.load(os.path.join(MPL, "jacksboro_fault_dem.npz"))["elevation"]
        return e.astype(np.uint16)  # 236..1076 m: a 16-bit image using 10 bits
    return _load_pil(os.path.join(MPL, name))


def _load_pil(path):
    im = Image.open(path)
    if im.mode in ("RGBA", "P", "LA"):
        im = im.convert("RGB")
    elif im.mode not in ("RGB", "L"):
        im = im.convert("L")
    return np.asarray(im)


# ---- orientation (CIPA DC-008 / Exif 2.3 table, as kiln_orient applies it) ---------------

def orient(a, o):
    """The displayed image of stored pixels a with Exif orientation o."""
    return {1: lambda s: s, 2: lambda s: s[:, ::-1], 3: lambda s: s[::-1, ::-1],
            4: lambda s: s[::-1, :], 5: lambda s: s.swapaxes(0, 1),
            6: lambda s: np.rot90(s, -1), 7: lambda s: np.rot90(s, -1)[:, ::-1],
            8: lambda s: np.rot90(s, 1)}[o](a).copy()


def unorient(d, o):
    """Stored pixels that display as d under orientation o."""
    return orient(d, {6: 8, 8: 6}.get(o, o))


def exif_tiff(o):
    """A TIFF-structured Exif block: little-endian header, IFD0 with Orientation only."""
    return b"II*\x00" + struct.pack("<I", 8) + struct.pack("<H", 1) + \
        struct.pack("<HHIHH", 0x0112, 3, 1, o, 0) + struct.pack("<I", 0)


# ---- writers -------------------------------------------------------------------------------

def png_bytes(a, exif_o=None):
    """PNG of a uint8 or uint16 array (H, W) or (H, W, 3), zlib level 6, optional eXIf."""
    grey = a.ndim == 2
    depth = 16 if a.dtype == np.uint16 else 8
    h, w = a.shape[:2]
    colour = 0 if grey else 2
    rows = a.astype(">u2" if depth == 16 else np.uint8).reshape(h, -1).tobytes()
    stride = len(rows) // h
    raw = b"".join(b"\x00" + rows[y * stride:(y + 1) * stride] for y in range(h))

    def chunk(t, d):
        return struct.pack(">I", len(d)) + t + d + struct.pack(">I", zlib.crc32(t + d))
    out = b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, depth, colour,
                                                            0, 0, 0))
    if exif_o:
        out += chunk(b"eXIf", exif_tiff(exif_o))
    return out + chunk(b"IDAT", zlib.compress(raw, 6)) + chunk(b"IEND", b"")


def jpeg_bytes(a, quality, exif_o=None):
    im = Image.fromarray(to8(a))
    buf = io.BytesIO()
    kw = {"exif": b"Exif\x00\x00" + exif_tiff(exif_o)} if exif_o else {}
    im.save(buf, "JPEG", quality=int(quality), **kw)
    return buf.getvalue()


def tiff_bytes(a):
    buf = io.BytesIO()
    if a.dtype == np.uint16 and a.ndim == 2:
        Image.fromarray(a.astype("<u2"), "I;16").save(buf, "TIFF")
    else:
        Image.fromarray(to8(a)).save(buf, "TIFF", compression="tiff_deflate")
    return buf.getvalue()


def to8(a):
    """8-bit samples of 16-bit data, scaled by the bits the data uses (data_top), as an export
    from a lab camera's 12-bit frames would."""
    if a.dtype == np.uint8:
        return a
    top = int(data_top(a))
    return ((a.astype(np.uint64) * 255 + top // 2) // top).astype(np.uint8)


def decode(data):
    """Pixels as a reader shows them (for copies made from a stored file, e.g. JPEG to PNG)."""
    im = Image.open(io.BytesIO(data))
    if im.mode == "I;16":
        return np.asarray(im).astype(np.uint16)
    return np.asarray(im.convert("RGB" if im.mode in ("RGB", "CMYK") else "L"))


# ---- pixel transformations (on 8-bit arrays unless noted; 16-bit handled by scaling) --------

def data_top(a):
    """Full scale of the data: 255 for 8 bits; for 16-bit samples the largest value of the
    bits actually used (a 12-bit camera's 4095), so noise and offsets scale as on the sensor."""
    if a.dtype != np.uint16:
        return 255.0
    return float((1 << max(8, int(a.max()).bit_length())) - 1)


def as_float(a):
    return a.astype(np.float64) / data_top(a)


def from_float(f, like):
    top = data_top(like)
    return np.clip(np.rint(f * top), 0, top).astype(like.dtype)


def per_channel(f, a):
    """f applied to each channel of a 16-bit colour array (PIL's float mode is one channel)."""
    return np.stack([f(a[:, :, c]) for c in range(a.shape[2])], 2)


def pil_resize(a, w, h, rng):
    flt = [Image.BILINEAR, Image.BICUBIC, Image.LANCZOS][rng.integers(3)]
    if a.dtype == np.uint16 and a.ndim == 3:
        return per_channel(lambda c: pil_resize_f(c, w, h, flt), a)
    if a.dtype == np.uint16:
        return pil_resize_f(a, w, h, flt)
    return np.asarray(Image.fromarray(a).resize((w, h), flt))


def pil_resize_f(a, w, h, flt):
    f = Image.fromarray(a.astype(np.float32), "F").resize((w, h), flt)
    return np.clip(np.rint(np.asarray(f)), 0, 65535).astype(np.uint16)


def rotate_small(a, rng):
    deg = float(rng.uniform(1, 3)) * (1 if rng.integers(2) else -1)
    fill_black = bool(rng.integers(2))
    if a.dtype == np.uint16:
        def rot(c):
            im = Image.fromarray(c.astype(np.float32), "F")
            r = np.asarray(im.rotate(deg, Image.BICUBIC, fillcolor=0.0))
            return np.clip(np.rint(r), 0, 65535).astype(np.uint16)
        r = per_channel(rot, a) if a.ndim == 3 else rot(a)
    else:
        im = Image.fromarray(a)
        fill = 0 if a.ndim == 2 else (0, 0, 0)
        r = np.asarray(im.rotate(deg, Image.BICUBIC, fillcolor=fill))
    if not fill_black:  # cut to the largest centred rectangle the rotation filled
        h, w = r.shape[:2]
        t = abs(np.radians(deg))
        mx = int(np.ceil(h * np.sin(t) / 2 + 1))
        my = int(np.ceil(w * np.sin(t) / 2 + 1))
        r = r[my:h - my, mx:w - mx]
    return r, "%.2fdeg %s" % (deg, "black-corners" if fill_black else "cut")


def crop(a, rng):
    h, w = a.shape[:2]
    axes = ["x", "y", "xy"][rng.integers(3)]
    fx = rng.uniform(0.03, 0.10) if "x" in axes else 0.0
    fy = rng.uniform(0.03, 0.10) if "y" in axes else 0.0
    cx, cy = int(round(w * fx)), int(round(h * fy))
    lx, ty = int(rng.integers(cx + 1)), int(rng.integers(cy + 1))
    return a[ty:h - (cy - ty), lx:w - (cx - lx)].copy(), "%.1f%%x %.1f%%y" % (100 * fx, 100 * fy)


def burn_label(a, rng, box):
    """A label burnt in by acquisition or annotation software: text, or a filled box with a
    scale bar and text, in a corner, white or black."""
    im = Image.fromarray(to8(a))
    d = ImageDraw.Draw(im)
    font = ImageFont.load_default()
    h, w = a.shape[:2]
    white = bool(rng.integers(2))
    ink = 255 if white else 0
    if im.mode == "RGB":
        ink = (ink, ink, ink)
    text = "S-%04d %dx %02d:%02d" % (rng.integers(10000), [4, 10, 20, 40][rng.integers(4)],
                                     rng.integers(24), rng.integers(60))
    tw, th = font.getbbox(text)[2:]
    corner = rng.integers(4)
    x = 3 if corner % 2 == 0 else max(0, w - tw - 3)
    y = 3 if corner < 2 else max(0, h - th - 3)
    if box:
        bw, bh = int(w * rng.uniform(0.25, 0.45)), int(h * rng.uniform(0.10, 0.16))
        bx = 0 if corner % 2 == 0 else w - bw
        by = 0 if corner < 2 else h - bh
        back = (255 - ink) if not isinstance(ink, tuple) else tuple(255 - v for v in ink)
        d.rectangle([bx, by, bx + bw - 1, by + bh - 1], fill=back)
        d.line([bx + 4, by + bh - 4, bx + bw // 2, by + bh - 4], fill=ink, width=2)
        d.text((bx + 3, by + 2), text[:6], fill=ink, font=font)
        what = "box %dx%d" % (bw, bh)
    else:
        d.text((x, y), text, fill=ink, font=font)
        what = "text"
    out = np.asarray(im)
    if a.dtype == np.uint16:  # back to the data's own range
        top = int(data_top(a))
        return ((out.astype(np.uint64) * top + 127) // 255).astype(np.uint16), what
    return out, what


def photometric(a, kind, rng):
    f = as_float(a)
    if kind == "brightness":
        if rng.integers(2):
            k = rng.choice([rng.uniform(0.70, 0.88), rng.uniform(1.12, 1.35)])
            return from_float(f * k, a), "x%.2f" % k
        off = rng.choice([-1, 1]) * rng.uniform(0.06, 0.14)
        return from_float(f + off, a), "%+.2f" % off
    if kind == "gamma":
        g = rng.choice([rng.uniform(0.6, 0.85), rng.uniform(1.18, 1.6)])
        return from_float(f ** g, a), "gamma %.2f" % g
    if kind == "noise":
        s = rng.uniform(2, 8) / 255
        return from_float(f + rng.normal(0, s, f.shape), a), "sigma %.1f/255" % (s * 255)
    raise ValueError(kind)


def blur(a, rng):
    r = rng.uniform(0.7, 2.0)
    if a.dtype == np.uint16:  # PIL blurs 8-bit modes only: a separable Gaussian in numpy
        x = np.arange(-int(3 * r + 1), int(3 * r + 1) + 1)
        k = np.exp(-x * x / (2 * r * r))
        k /= k.sum()
        f = a.astype(np.float64)
        pad = len(x) // 2
        f = np.pad(f, [(pad, pad), (pad, pad)] + [(0, 0)] * (a.ndim - 2), mode="edge")
        f = np.apply_along_axis(lambda v: np.convolve(v, k, "valid"), 1, f)
        f = np.apply_along_axis(lambda v: np.convolve(v, k, "valid"), 0, f)
        return np.clip(np.rint(f), 0, 65535).astype(np.uint16), "radius %.1f" % r
    return np.asarray(Image.fromarray(a).filter(ImageFilter.GaussianBlur(r))), "radius %.1f" % r


# ---- the benchmark ---------------------------------------------------------------------------

class Writer:
    def __init__(self, out):
        self.dir = os.path.join(out, "images")
        os.makedirs(self.dir, exist_ok=True)
        self.rows = []

    def put(self, name, data, **row):
        with open(os.path.join(self.dir, name), "xb") as f:
            f.write(data)
        row["file"] = "images/" + name
        self.rows.append(row)


def store(a, fmt, rng, exif_o=None):
    """(bytes, extension) of a specimen or copy in the given container."""
    if fmt == "jpeg":
        return jpeg_bytes(a, rng.integers(85, 96), exif_o), "jpg"
    if fmt == "tiff":
        return tiff_bytes(a), "tif"
    return png_bytes(a, exif_o), "png"


def make_copy(kind, a, fmt, data, rng):
    """(pixels, container, param, exif orientation) of one copy of specimen pixels a stored as
    fmt with bytes data."""
    o = None
    if kind == "jpeg-quality":
        return decode(data), "jpeg:%d" % rng.integers(45, 80), "", None
    if kind == "png-to-jpeg":
        q = rng.integers(60, 96)
        return a, "jpeg:%d" % q, "q%d" % q, None
    if kind == "jpeg-to-png":
        return decode(data), "png", "", None
    if kind in ("resize-down", "resize-up"):
        h, w = a.shape[:2]
        k = rng.uniform(0.45, 0.85) if kind == "resize-down" else rng.uniform(1.2, 2.2)
        return pil_resize(a, max(8, int(round(w * k))), max(8, int(round(h * k))), rng), fmt, \
            "x%.2f" % k, None
    if kind == "crop":
        c, p = crop(a, rng)
        return c, fmt, p, None
    if kind in ("brightness", "gamma", "noise"):
        c, p = photometric(a, kind, rng)
        return c, fmt, p, None
    if kind == "blur":
        c, p = blur(a, rng)
        return c, fmt, p, None
    if kind == "grey":
        if a.dtype == np.uint16:
            g = np.rint(a @ np.array([0.299, 0.587, 0.114])).astype(np.uint16)
            return g, fmt, "ITU-R 601-2 luma (numpy)", None
        g = np.asarray(Image.fromarray(a).convert("L"))
        return g, fmt, "ITU-R 601-2 luma (PIL)", None
    if kind == "depth-16":
        return a.astype(np.uint16) * 257, ["png", "tiff"][rng.integers(2)], "x257", None
    if kind == "depth-12":
        v = np.rint(a.astype(np.float64) * 4095 / 255) + rng.integers(-1, 2, a.shape)
        return np.clip(v, 0, 4095).astype(np.uint16), ["png", "tiff"][rng.integers(2)], \
            "12 bits in 16", None
    if kind == "depth-8":
        lo, hi = int(a.min()), int(a.max())
        s = np.rint((a.astype(np.float64) - lo) * 255 / max(1, hi - lo)).astype(np.uint8)
        return s, ["png", "jpeg:92"][rng.integers(2)], "stretched %d..%d" % (lo, hi), None
    if kind == "exif-orientation":
        o = int(rng.choice(list(EXIF_ORIENTATIONS)))
        cont = "png" if a.dtype == np.uint16 else ["png", "jpeg:92"][rng.integers(2)]
        return unorient(a, o), cont, "orientation %d" % o, o
    if kind == "pixel-orientation":
        o = int(rng.choice(list(EXIF_ORIENTATIONS)))
        return orient(a, o), fmt, "as orientation %d" % o, None
    if kind == "rotate-small":
        c, p = rotate_small(a, rng)
        return c, fmt, p, None
    if kind in ("label-text", "label-box"):
        c, p = burn_label(a, rng, kind == "label-box")
        return c, fmt, p, None
    raise ValueError(kind)


def compatible(kind, a, fmt):
    colour = a.ndim == 3
    deep = a.dtype == np.uint16
    if kind in ("jpeg-quality", "jpeg-to-png"):
        return fmt == "jpeg"
    if kind == "png-to-jpeg":
        return fmt in ("png", "tiff") and not deep
    if kind == "grey":
        return colour
    if kind in ("depth-16", "depth-12"):
        return not deep
    if kind == "depth-8":
        return deep
    return True


def write_file(w, stem, a, container, rng, exif_o=None):
    if container.startswith("jpeg:"):
        data = jpeg_bytes(a, int(container[5:]), exif_o)
        return data, stem + ".jpg"
    data, ext = store(a, container, rng, exif_o)
    return data, stem + "." + ext


def near_flat(a):
    """A crop with next to no picture in it (the black around the retina, empty sky): the
    standard deviation of its 4x4-pixel block means is under 2 grey levels of its full scale.
    Such crops go to the flat set, where copies are not expected to be found."""
    g = as_float(a if a.ndim == 2 else a.mean(axis=2).astype(a.dtype))
    h, w = (g.shape[0] // 4) * 4, (g.shape[1] // 4) * 4
    b = g[:h, :w].reshape(h // 4, 4, w // 4, 4).mean(axis=(1, 3))
    return b.std() * 255 < 2.0


def main_set(w, rng):
    specimens = []
    for name, spec, tiles in PICTURES:
        pic = load_picture(spec)
        h, w_ = pic.shape[:2]
        # Tile sizes alternate over horizontal bands, so one picture gives several sizes.
        y = 0
        band = 0
        while True:
            tw, th = tiles[band % len(tiles)]
            if y + th > h:
                break
            for x in range(0, w_ - tw + 1, tw):
                specimens.append((name, pic[y:y + th, x:x + tw].copy()))
            y += th
            band += 1
    order = rng.permutation(len(specimens))
    counts = {t: 0 for t in TRANSFORMS}
    for n, k in enumerate(order):
        source, a = specimens[k]
        sid = "m%04d" % n
        deep = a.dtype == np.uint16
        if not deep and rng.random() < 0.04:  # a lab camera's 12-bit frame in 16 bits
            a = (a.astype(np.uint16) * 4095 // 255)
        fmt = "png" if a.dtype == np.uint16 else ["png", "jpeg", "tiff"][
            rng.choice(3, p=[0.55, 0.35, 0.10])]
        data, ext = store(a, fmt, rng)
        group = "flat" if near_flat(a) else "main"
        w.put("%s.%s" % (sid, ext), data, set=group, specimen=sid, label=source,
              role="original", transform="", param=fmt, source=source)
        shown = decode(data) if fmt == "jpeg" else a
        ncopies = rng.choice([0, 1, 2, 3], p=[0.50, 0.34, 0.11, 0.05])
        for c in range(ncopies):
            options = [t for t in TRANSFORMS if compatible(t, a, fmt)]
            least = min(counts[t] for t in options)
            pick = [t for t in options if counts[t] == least]
            kind = pick[rng.integers(len(pick))]
            counts[kind] += 1
            pix, container, param, exif_o = make_copy(kind, shown, fmt, data, rng)
            if pix.dtype == np.uint16 and container.startswith("jpeg"):
                pix = to8(pix)  # JPEG holds 8 bits
                param += " 8-bit"
            elif pix.dtype == np.uint16 and pix.ndim == 3 and container == "tiff":
                container = "png"  # the TIFF writer at hand holds 16-bit grey only
            if exif_o is None and not container.startswith("jpeg") and \
                    pix.dtype == np.uint8 and rng.random() < 0.2:
                container = "jpeg:%d" % rng.integers(70, 96)
                param += " +jpeg"
            data2, fname = write_file(w, "%s_c%d" % (sid, c + 1), pix, container, rng, exif_o)
            w.put(fname, data2, set=group, specimen=sid, label=source, role="copy",
                  transform=kind, param=param.strip(), source=source)
    return counts


def flat_set(w, rng):
    """Low-information frames: different specimens that a hash cannot tell apart."""
    n = 0
    for k in range(48):
        h, wd = int(rng.integers(48, 257)), int(rng.integers(48, 257))
        kind = ["blank", "near-flat", "gradient", "vignette", "hot-pixels", "dark-16"][k % 6]
        yy, xx = np.mgrid[0:h, 0:wd]
        base = float(rng.integers(20, 236))
        if kind == "blank":
            f = np.full((h, wd), base)
        elif kind == "near-flat":
            f = base + rng.normal(0, rng.uniform(0.4, 2.0), (h, wd))
        elif kind == "gradient":
            ang = rng.uniform(0, 2 * np.pi)
            f = base + rng.uniform(1, 4) * (np.cos(ang) * xx / wd + np.sin(ang) * yy / h) + \
                rng.normal(0, 0.5, (h, wd))
        elif kind == "vignette":
            r2 = ((xx - wd / 2) / wd) ** 2 + ((yy - h / 2) / h) ** 2
            f = base - rng.uniform(2, 6) * r2 * 2 + rng.normal(0, 0.5, (h, wd))
        elif kind == "hot-pixels":
            f = np.full((h, wd), float(rng.integers(2, 12))) + rng.normal(0, 0.7, (h, wd))
            for _ in range(int(rng.integers(1, 6))):
                f[rng.integers(h), rng.integers(wd)] = 255
        else:
            f = 100 + rng.normal(0, 3, (h, wd))
        if kind == "dark-16":
            a = np.clip(np.rint(f), 0, 65535).astype(np.uint16)
            fmt = "png"
        else:
            a = np.clip(np.rint(f), 0, 255).astype(np.uint8)
            if k % 5 == 0:
                a = np.stack([a, a, np.clip(a.astype(int) + 3, 0, 255).astype(np.uint8)], 2)
            fmt = ["png", "tiff", "jpeg"][k % 3] if kind != "hot-pixels" else "png"
        sid = "f%03d" % n
        n += 1
        data, ext = store(a, fmt, rng)
        w.put("%s.%s" % (sid, ext), data, set="flat", specimen=sid, label="flat", role="original",
              transform="", param=kind, source="generated")
        if k % 4 == 0:  # same pixels in another container: an exact-digest merge
            other = "tiff" if fmt == "png" else "png"
            shown = decode(data) if fmt == "jpeg" else a
            d2, e2 = store(shown, other, rng)
            w.put("%s_c1.%s" % (sid, e2), d2, set="flat", specimen=sid, label="flat",
                  role="copy", transform="same-pixels", param=other, source="generated")
        elif k % 4 == 2 and a.dtype == np.uint8:  # a re-encode: left apart by design
            d2 = jpeg_bytes(a, 75)
            w.put("%s_c1.jpg" % sid, d2, set="flat", specimen=sid, label="flat", role="copy",
                  transform="flat-reencode", param="q75", source="generated")


def digits_set(w):
    from sklearn.datasets import load_digits
    d = load_digits()
    for i, (img, t) in enumerate(zip(d.images, d.target)):
        a = np.rint(img * 255 / 16).astype(np.uint8)
        w.put("d%04d.png" % i, png_bytes(a), set="digits", specimen="d%04d" % i,
              label=str(int(t)), role="original", transform="", param="8x8",
              source="sklearn digits")


def faces_set(w):
    f = np.load(os.path.join(SKI, "lfw_subset.npy"))
    for i, img in enumerate(f):
        a = np.rint(img * 255).astype(np.uint8)
        label = "face" if i < 100 else "non-face"
        w.put("l%03d.png" % i, png_bytes(a), set="faces", specimen="l%03d" % i, label=label,
              role="original", transform="", param="25x25", source="skimage lfw_subset")


def self_check(out, rows):
    """The Exif copies must display as their specimen: PIL applies the tag the same way."""
    from PIL import ImageOps
    for r in rows:
        if r["transform"] != "exif-orientation":
            continue
        im = Image.open(os.path.join(out, r["file"]))
        o = im.getexif().get(0x0112)
        shown = ImageOps.exif_transpose(im)
        if o is None or shown.size == im.size and o >= 5 and im.size[0] != im.size[1]:
            sys.exit("make_neardup_set: %s lost its orientation tag" % r["file"])


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("out")
    ap.add_argument("--seed", type=int, default=13)
    ap.add_argument("--no-digits", action="store_true")
    args = ap.parse_args()
    if os.path.exists(os.path.join(args.out, "truth.csv")):
        sys.exit("make_neardup_set: %s already holds a set" % args.out)
    rng = np.random.default_rng(args.seed)
    w = Writer(args.out)
    counts = main_set(w, rng)
    flat_set(w, rng)
    if not args.no_digits:
        digits_set(w)
    faces_set(w)
    self_check(args.out, w.rows)
    cols = ["file", "set", "specimen", "label", "role", "transform", "param", "source"]
    tmp = os.path.join(args.out, "truth.csv.tmp")
    with open(tmp, "w", newline="") as f:
        wr = csv.DictWriter(f, fieldnames=cols)
        wr.writeheader()
        for r in w.rows:
            wr.writerow(r)
    os.rename(tmp, os.path.join(args.out, "truth.csv"))
    sets = {}
    for r in w.rows:
        sets.setdefault(r["set"], [0, 0])[r["role"] == "copy"] += 1
    for s, (o, c) in sets.items():
        print("%-7s %5d specimens, %4d copies" % (s, o, c))
    print("copies per transformation: " + ", ".join("%s %d" % kv for kv in counts.items()))


if __name__ == "__main__":
    main()
