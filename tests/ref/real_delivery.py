#!/usr/bin/env python3
"""A delivery as a colleague sends it, made from real published pictures that Debian packages,
and the ground truth kiln must reproduce (tests/cli/real_delivery.sh):

    real_delivery.py build DIR      DIR/delivery (the source) and DIR/truth.json
    real_delivery.py check DIR OUT [--exact]
                                    OUT, built from DIR/delivery, against the truth: every
                                    row's label, group, status and shape; skipped files;
                                    groups and copies in one split; every packed record
                                    against PIL (with --exact: every sample within 1, the
                                    --no-dct-scale run; without: JPEG records reduced in the
                                    DCT domain within docs/resize.md's PSNR bound, the rest
                                    within 1)

The pictures, their packages and licences (the copyright files of the packages, and the
docstrings of skimage.data for scikit-image's):
- scikit-image 0.19 data, python3-skimage (/usr/lib/python3/dist-packages/skimage/data):
  astronaut, camera, coffee, chelsea, rocket, brick, grass, gravel, coins, cell, ihc, retina,
  microaneurysms, hubble_deep_field, horse: public domain or CC0 per skimage.data; the 2-page
  multipage.tif, the cut truncated.jpg and the animated no_time_for_that_tiny.gif are
  scikit-image's own test files (BSD-3-Clause, debian/copyright of python-skimage).
- scikit-learn sample images, python3-sklearn (sklearn/datasets/images): china.jpg and
  flower.jpg, CC BY 2.0 (their README.txt: danielbuechele, vultilion on Flickr).
- matplotlib sample data, python-matplotlib-data (/usr/share/matplotlib/mpl-data/sample_data):
  grace_hopper.jpg, a U.S. Navy photograph in the public domain.
Nothing is copied into the repository: every file is cut from these at test time.

What the delivery holds: class folders (scene, texture, "zellen-µm" with a non-ASCII name);
several shots per specimen (crops of one picture at awkward sizes: primes, 293x37, 13x97)
named S<nn>_<shot>, so the group rule /(S[0-9]+)_ gathers them, some shots of a specimen in
the folder and others in an archive; a tarball made with `tar -C dir -czf batch2.tgz .`
(members ./class/file) and a zip with UTF-8 names and OS junk (__MACOSX, ._ files, .DS_Store,
Thumbs.db, desktop.ini); JPEG baseline, progressive, CMYK (Adobe) and EXIF orientation 3, 6
and 8; PNG 8-bit, 16-bit RGB and grey, palette with transparency, grey+alpha; 16-bit TIFF
with LZW strips (libtiff through PIL) and deflate tiles (tifffile), a 2-page TIFF; 16-bit and
12-bit PGM; byte-identical copies under other names; a truncated JPEG (scikit-image's),
JPEGs and a TIFF cut short, a PNG with a damaged IDAT, an empty file, a text file, a GIF, and
a picture outside any class folder."""
import csv
import io
import json
import math
import os
import shutil
import struct
import subprocess
import sys
import zipfile
import zlib

import numpy as np
from PIL import Image, ImageOps, TiffImagePlugin

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "..", "examples"))
sys.path.insert(0, HERE)
from read_kten import read_kten  # noqa: E402
from resize_shape import convert_channels, pil_resize  # noqa: E402

SKIMAGE = "/usr/lib/python3/dist-packages/skimage/data"
SKLEARN = "/usr/lib/python3/dist-packages/sklearn/datasets/images"
MPL = "/usr/share/matplotlib/mpl-data/sample_data"
PICTURES = {
    "astronaut": f"{SKIMAGE}/astronaut.png", "camera": f"{SKIMAGE}/camera.png",
    "coffee": f"{SKIMAGE}/coffee.png", "chelsea": f"{SKIMAGE}/chelsea.png",
    "rocket": f"{SKIMAGE}/rocket.jpg", "brick": f"{SKIMAGE}/brick.png",
    "grass": f"{SKIMAGE}/grass.png", "gravel": f"{SKIMAGE}/gravel.png",
    "coins": f"{SKIMAGE}/coins.png", "cell": f"{SKIMAGE}/cell.png", "ihc": f"{SKIMAGE}/ihc.png",
    "retina": f"{SKIMAGE}/retina.jpg", "microaneurysms": f"{SKIMAGE}/microaneurysms.png",
    "hubble": f"{SKIMAGE}/hubble_deep_field.jpg", "horse": f"{SKIMAGE}/horse.png",
    "china": f"{SKLEARN}/china.jpg", "flower": f"{SKLEARN}/flower.jpg",
    "grace_hopper": f"{MPL}/grace_hopper.jpg",
}
TEST_FILES = {"truncated": f"{SKIMAGE}/truncated.jpg", "multipage": f"{SKIMAGE}/multipage.tif",
              "gif": f"{SKIMAGE}/no_time_for_that_tiny.gif"}

MICRO = "zellen-\u00b5m"
# (class, specimen, picture, where its shots go: "dir", "tgz", "zip", or "dir+tgz")
SPECIMENS = [
    ("scene", "S01", "astronaut", "dir+tgz"), ("scene", "S02", "coffee", "dir"),
    ("scene", "S03", "chelsea", "dir"), ("scene", "S04", "rocket", "tgz"),
    ("scene", "S05", "china", "tgz"), ("scene", "S06", "flower", "zip"),
    ("scene", "S07", "grace_hopper", "dir"), ("scene", "S08", "camera", "zip"),
    ("texture", "S10", "brick", "dir"), ("texture", "S11", "grass", "tgz"),
    ("texture", "S12", "gravel", "dir+tgz"), ("texture", "S13", "coins", "zip"),
    (MICRO, "S20", "cell", "dir"), (MICRO, "S21", "ihc", "zip"), (MICRO, "S22", "retina", "tgz"),
    (MICRO, "S23", "microaneurysms", "dir"), (MICRO, "S24", "hubble", "zip"),
    (MICRO, "S25", "horse", "dir"),
]
GROUP_REGEX = "/(S[0-9]+)_"
# Awkward shot sizes (w, h): primes, extreme aspect ratios; clipped to the picture.
SIZES = [(211, 157), (157, 211), (293, 37), (101, 103), (383, 257), (37, 293), (127, 61),
         (13, 97), (509, 131), (61, 127), (97, 389), (199, 199)]
# Every shot gets the next encoding in turn, so each one occurs several times.
VARIANTS = ["jpeg", "png8", "jpeg-progressive", "png16", "jpeg-cmyk", "palette", "jpeg-exif3",
            "grey-alpha", "tiff16-lzw", "jpeg-exif6", "png16-grey", "pgm16", "jpeg-exif8",
            "tiff16-tiled", "pgm12"]
EXT = {"jpeg": "jpg", "png8": "png", "png16": "png", "palette": "png", "grey-alpha": "png",
       "png16-grey": "png", "tiff16-lzw": "tif", "tiff16-tiled": "tif", "pgm16": "pgm",
       "pgm12": "pgm"}
DCT_PSNR_FLOOR = 35.0  # docs/resize.md, "Reduced sources: quality": the documented bound


def fail(msg):
    print("FAIL:", msg)
    sys.exit(1)


# ---- writers ----

def png_chunk(kind, data):
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))


def png16(a):
    """A 16-bit grey or RGB PNG (PNG spec: colour types 0 and 2, filter 0 per row), which PIL
    cannot write."""
    h, w = a.shape[:2]
    c = 1 if a.ndim == 2 else a.shape[2]
    rows = a.astype(">u2").reshape(h, w * c).tobytes()
    raw = b"".join(b"\0" + rows[y * w * c * 2:(y + 1) * w * c * 2] for y in range(h))
    ihdr = struct.pack(">IIBBBBB", w, h, 16, 0 if c == 1 else 2, 0, 0, 0)
    return (b"\x89PNG\r\n\x1a\n" + png_chunk(b"IHDR", ihdr) +
            png_chunk(b"IDAT", zlib.compress(raw, 6)) + png_chunk(b"IEND", b""))


def pgm(a, maxval):
    """Binary PGM (netpbm's pgm(5)): 16-bit samples big-endian when maxval > 255."""
    h, w = a.shape
    return f"P5\n# kiln test\n{w} {h}\n{maxval}\n".encode() + a.astype(">u2").tobytes()


def pil_bytes(im, fmt, **kw):
    b = io.BytesIO()
    im.save(b, fmt, **kw)
    return b.getvalue()


def widen(a8, seed):
    """8-bit samples to 16 bits with low bits that 8-bit data cannot have (as a 16-bit camera
    would deliver)."""
    y, x = np.indices(a8.shape[:2])
    low = ((x * 7 + y * 13 + seed) % 251).astype(np.uint32)
    if a8.ndim == 3:
        low = low[..., None]
    return np.minimum(a8.astype(np.uint32) * 257 + low, 65535).astype(np.uint16)


def encode(variant, crop, k):
    """(file bytes, truth) for one shot. truth["pixels"] is the decoded, oriented picture kiln
    must see, for lossless files; JPEGs are decoded by PIL at check time."""
    rgb = crop if crop.ndim == 3 else np.repeat(crop[..., None], 3, axis=2)
    grey = crop if crop.ndim == 2 else np.asarray(Image.fromarray(crop).convert("L"))
    im = Image.fromarray(crop)
    t = {"orientation": 1, "pages": 1}
    if variant.startswith("jpeg"):
        t.update(kind="jpeg", depth=8)
        if variant == "jpeg-cmyk":
            # Real ink: K from the darkest channel, the rest under it (common practice).
            r = rgb.astype(np.int32)
            kk = 255 - r.max(axis=2)
            cmy = np.where(kk[..., None] < 255, (255 - r - kk[..., None]) * 255 //
                           np.maximum(255 - kk[..., None], 1), 0)
            cmyk = np.concatenate([cmy, kk[..., None]], axis=2).astype(np.uint8)
            data = pil_bytes(Image.fromarray(cmyk, "CMYK"), "JPEG", quality=92)
            t["channels"] = 3
        else:
            kw = {"quality": 90, "progressive": variant == "jpeg-progressive"}
            if variant.startswith("jpeg-exif"):
                ex = Image.Exif()
                ex[274] = t["orientation"] = int(variant[-1])
                kw["exif"] = ex.tobytes()
            data = pil_bytes(im, "JPEG", **kw)
            t["channels"] = 1 if crop.ndim == 2 else 3
        return data, t
    t["kind"] = "array"
    if variant == "png8":
        return pil_bytes(im, "PNG"), dict(t, pixels=crop, channels=t_ch(crop), depth=8)
    if variant == "png16":
        a = widen(rgb, k)
        return png16(a), dict(t, pixels=a, channels=3, depth=16)
    if variant == "png16-grey":
        a = widen(grey, k)
        return png16(a), dict(t, pixels=a, channels=1, depth=16)
    if variant == "palette":
        p = Image.fromarray(rgb).quantize(colors=48)
        data = pil_bytes(p, "PNG", transparency=0)
        a = np.asarray(Image.open(io.BytesIO(data)).convert("RGBA"))  # palette lookup is exact
        return data, dict(t, pixels=a, channels=4, depth=8)
    if variant == "grey-alpha":
        h, w = grey.shape
        alpha = np.tile((np.arange(w) * 255 // max(w - 1, 1)).astype(np.uint8), (h, 1))
        a = np.stack([grey, alpha], axis=2)
        return pil_bytes(Image.fromarray(a, "LA"), "PNG"), dict(t, pixels=a, channels=2, depth=8)
    if variant == "tiff16-lzw":
        a = widen(grey, k)
        TiffImagePlugin.WRITE_LIBTIFF = True
        try:
            data = pil_bytes(Image.fromarray(a, "I;16"), "TIFF", compression="tiff_lzw")
        finally:
            TiffImagePlugin.WRITE_LIBTIFF = False
        return data, dict(t, pixels=a, channels=1, depth=16)
    if variant == "tiff16-tiled":
        import tifffile
        a = widen(rgb, k)
        b = io.BytesIO()
        tifffile.imwrite(b, a, photometric="rgb", tile=(48, 48), compression="zlib")
        return b.getvalue(), dict(t, pixels=a, channels=3, depth=16)
    if variant == "pgm16":
        a = widen(grey, k)
        return pgm(a, 65535), dict(t, pixels=a, channels=1, depth=16)
    if variant == "pgm12":
        # A 12-bit camera's maxval 4095; docs/formats.md: rescaled to 16 bits, rounded half up.
        v = grey.astype(np.uint32) * 4095 // 255
        a = ((v * 65535 + 2047) // 4095).astype(np.uint16)
        return pgm(v, 4095), dict(t, pixels=a, channels=1, depth=16)
    raise ValueError(variant)


def t_ch(a):
    return 1 if a.ndim == 2 else a.shape[2]


# ---- the delivery ----

def load_picture(key):
    im = Image.open(PICTURES[key])
    if im.mode not in ("L", "RGB"):
        im = im.convert("RGB")  # horse.png is RGBA: its shots get alpha from the variants
    return np.asarray(im)


def build(d):
    for p in list(PICTURES.values()) + list(TEST_FILES.values()):
        if not os.path.exists(p):
            print(f"SKIP: {p} is missing (Debian: python3-skimage python3-sklearn "
                  f"python-matplotlib-data)")
            sys.exit(77)
    stage = {w: os.path.join(d, "stage", w) for w in ("dir", "tgz", "zip")}
    truth, k, in_dir = {}, 0, set()
    prefix = {"dir": "", "tgz": "batch2.tgz/", "zip": "Lieferung_\u00e4.zip/"}

    def put(where, rel, data, entry):
        path = os.path.join(stage[where], rel)
        os.makedirs(os.path.dirname(path), exist_ok=True)
        with open(path, "wb") as f:
            f.write(data)
        pix = entry.pop("pixels", None)
        if pix is not None:
            entry["npy"] = f"truth-{len(truth):03d}.npy"
            np.save(os.path.join(d, entry["npy"]), pix)
        entry["file"] = path
        truth[prefix[where] + rel] = entry
        if where == "dir":
            in_dir.add(rel)

    for cls, spec, pic, where in SPECIMENS:
        a = load_picture(pic)
        H, W = a.shape[:2]
        nshots = 2 + int(spec[1:]) % 3
        for s in range(nshots):
            w, h = SIZES[k % len(SIZES)]
            w, h = min(w, W - (k % 5)), min(h, H - (k % 3))
            x0, y0 = (k * 37) % (W - w + 1), (k * 53) % (H - h + 1)
            crop = np.ascontiguousarray(a[y0:y0 + h, x0:x0 + w])
            variant = VARIANTS[k % len(VARIANTS)]
            data, t = encode(variant, crop, k)
            shot = "abcde"[s]
            # UTF-8 in names: in the zip (the flag set by Python's zipfile) and in the folder.
            tail = "_Pr\u00e4parat" if where == "zip" or k % 4 == 0 else ""
            rel = f"{cls}/{spec}_{shot}{tail}.{EXT.get(variant, 'jpg')}"
            dest = where if "+" not in where else ("dir", "tgz")[s % 2]
            t.update(label=cls, group=spec, status="ok", w=w, h=h, variant=variant)
            if t["orientation"] >= 5:
                t["w"], t["h"] = h, w
            put(dest, rel, data, t)
            k += 1
    # Byte-identical copies under other names and specimens: one in the same folder, one
    # into the tarball. Each joins its original's unit, so both land in one split.
    first = {v: next(n for n, e in truth.items() if e["variant"] == v and n in in_dir)
             for v in ("jpeg", "png8")}
    for src, where, rel, group in ((first["jpeg"], "dir", "scene/S09_a.jpg", "S09"),
                                   (first["png8"], "tgz", "texture/S14_a.png", "S14")):
        e = dict(truth[src], group=group, copy_of=src, label=rel.split("/")[0])
        put(where, rel, open(e["file"], "rb").read(), e)
    # Files that cannot be used, each with the status docs/statuses.md gives it.
    good_jpg = open(next(e["file"] for e in truth.values() if e["variant"] == "jpeg"), "rb").read()
    good_png = open(next(e["file"] for e in truth.values() if e["variant"] == "png8"), "rb").read()
    good_tif = open(next(e["file"] for e in truth.values() if e["variant"] == "tiff16-lzw"), "rb").read()
    idat = good_png.index(b"IDAT") + 40
    damaged = good_png[:idat] + bytes([good_png[idat] ^ 0x55]) + good_png[idat + 1:]
    bad = [
        ("dir", "scene/S30_a.jpg", open(TEST_FILES["truncated"], "rb").read(), "truncated"),
        ("dir", "texture/S31_a.png", damaged, "corrupt"),
        ("dir", "texture/S32_a.jpg", good_jpg[: len(good_jpg) * 3 // 5], "truncated"),
        ("dir", f"{MICRO}/S33_a.tif", good_tif[:8], "truncated"),
        ("dir", "scene/S34_a.png", b"", "empty"),
        ("dir", "scene/Notizen.txt", "Aufnahmen vom 3. M\u00e4rz\n".encode(), "not-image"),
        ("dir", "scene/S35_a.gif", open(TEST_FILES["gif"], "rb").read(), "unsupported"),
        ("zip", f"{MICRO}/S37_a_Pr\u00e4parat.jpg", good_jpg[:-300], "truncated"),
        ("tgz", "texture/S38_a.png", good_png[:100], "truncated"),
    ]
    for where, rel, data, status in bad:
        put(where, rel, data, {"status": status, "label": rel.split("/")[0],
                               "group": rel.split("/")[1].split("_")[0], "variant": "bad"})
    mp = np.asarray(Image.open(TEST_FILES["multipage"]))
    put("dir", f"{MICRO}/S36_a.tif", open(TEST_FILES["multipage"], "rb").read(),
        {"status": "ok", "label": MICRO, "group": "S36", "kind": "array", "pixels": mp,
         "channels": 1, "depth": 8, "orientation": 1, "pages": 2, "w": mp.shape[1],
         "h": mp.shape[0], "variant": "tiff-multipage"})
    top = Image.fromarray(load_picture("coffee")[:101, :151])
    put("dir", "\u00fcbersicht.jpg", pil_bytes(top, "JPEG", quality=80),
        {"status": "unlabelled", "label": "", "group": "", "variant": "bad"})
    # OS junk: skipped without a row and counted (docs/statuses.md). A folder walk does not
    # enter a skipped folder, so __MACOSX counts once there; in an archive every member counts,
    # as the kind of its first skipped component.
    hidden = junk = 0
    for where, rel, kind in (("dir", ".DS_Store", "hidden"), ("dir", "scene/._S02_a.jpg", "hidden"),
                             ("dir", "__MACOSX/scene/._S02_a.jpg", "junk"),
                             ("dir", "texture/Thumbs.db", "junk"),
                             ("tgz", "scene/.DS_Store", "hidden"),
                             ("zip", "__MACOSX/scene/._S06_a.jpg", "junk"),
                             ("zip", "__MACOSX/._zellen", "junk"), ("zip", ".DS_Store", "hidden"),
                             ("zip", f"{MICRO}/Thumbs.db", "junk"), ("zip", "desktop.ini", "junk")):
        path = os.path.join(stage[where], rel)
        os.makedirs(os.path.dirname(path), exist_ok=True)
        open(path, "wb").write(b"\0\0\0\1Bud1" if "DS_Store" in rel else b"\0\5\26\7junk")
        hidden += kind == "hidden"
        junk += kind == "junk"
    # The delivery: the folder, the ./ tarball and the zip beside it.
    delivery = os.path.join(d, "delivery")
    shutil.copytree(stage["dir"], delivery)
    subprocess.run(["tar", "-C", stage["tgz"], "-czf", os.path.join(delivery, "batch2.tgz"), "."],
                   check=True)
    with zipfile.ZipFile(os.path.join(delivery, "Lieferung_\u00e4.zip"), "w",
                         zipfile.ZIP_DEFLATED) as z:
        for root, _, files in sorted(os.walk(stage["zip"])):
            for f in sorted(files):
                p = os.path.join(root, f)
                z.write(p, os.path.relpath(p, stage["zip"]))
    for e in truth.values():
        e.pop("file", None)
    with open(os.path.join(d, "truth.json"), "w", encoding="utf-8") as f:
        json.dump({"files": truth, "hidden": hidden, "junk": junk, "group_regex": GROUP_REGEX},
                  f, ensure_ascii=False, indent=1)
    print(f"delivery: {len(truth)} files ({sum(e['status'] == 'ok' for e in truth.values())} "
          f"usable), {hidden} hidden and {junk} system files")


# ---- the check ----

def normalise(name):
    return "/".join(p for p in name.split("/") if p not in ("", "."))


def rule_name(row):
    path, member = normalise(row["path"]), normalise(row["member"])
    return f"{path}/{member}" if path and member else path or member


def reference(d, e, src_file=None):
    """What kiln's default recipe makes of the file: PIL's decode (JPEG) or the written
    pixels, oriented, composited over white to RGB (docs/pixels.md step 3), resized with PIL
    bilinear to 64x48 (docs/resize.md: within 1 of PIL), 16 -> 8 bits rounded."""
    if e["kind"] == "jpeg":
        im = ImageOps.exif_transpose(Image.open(src_file))
        x = np.asarray(im)
        if im.mode == "CMYK":
            # docs/formats.md: R = C'K'/255 rounded, with C' = 255 - ink for PIL's ink values
            # (PIL undoes Adobe's inversion), likewise G and B.
            inv = 255 - x.astype(np.int64)
            x = ((inv[..., :3] * inv[..., 3:] + 127) // 255).astype(np.uint8)
    else:
        x = np.load(os.path.join(d, e["npy"]))
    x = x.reshape(x.shape[0], x.shape[1], -1)
    x = convert_channels(x, 3, (255, 255, 255)).astype(x.dtype)
    y = pil_resize(x, "bilinear", 64, 48, None).astype(np.int64)
    if x.dtype == np.uint16:
        y = (y * 255 + 32767) // 65535
    return y


def check(d, out, exact):
    t = json.load(open(os.path.join(d, "truth.json"), encoding="utf-8"))
    truth = t["files"]
    man = json.load(open(os.path.join(out, "manifest.json")))
    if man["recipe"]["size"] != "64x48" or man["recipe"]["dct_scale"] == exact:
        fail(f"{out}: not the recipe this check expects ({man['recipe']})")
    rows = list(csv.DictReader(open(os.path.join(out, "catalog.csv"), newline="",
                                                    encoding="utf-8")))
    seen = {}
    for r in rows:
        name = rule_name(r)
        e = truth.get(name)
        if e is None:
            fail(f"catalogue row {name!r} is not in the delivery")
        if name in seen:
            fail(f"{name!r} catalogued twice")
        seen[name] = r
        if r["status"] != e["status"]:
            fail(f"{name}: status {r['status']} ({r['reason']}), expected {e['status']}")
        if e["status"] == "ok" and (r["label"], r["group"]) != (e["label"], e["group"]):
            fail(f"{name}: label {r['label']!r}, group {r['group']!r}, expected "
                 f"{e['label']!r}, {e['group']!r}")
        if e["status"] != "ok":
            if not r["reason"]:
                fail(f"{name}: status {r['status']} without a reason")
            continue
        shape = (int(r["width"]), int(r["height"]), int(r["channels"]), int(r["depth"]),
                 int(r["orientation"]), int(r["pages"]))
        want = (e["w"], e["h"], e["channels"], e["depth"], e["orientation"], e["pages"])
        if shape != want:
            fail(f"{name} ({e['variant']}): width, height, channels, depth, orientation, pages "
                 f"{shape}, expected {want}")
    missing = sorted(set(truth) - set(seen))
    if missing:
        fail(f"not catalogued: {missing}")
    scan = man["scan"]
    if (scan["hidden_skipped"], scan["system_files_skipped"]) != (t["hidden"], t["junk"]):
        fail(f"skipped {scan['hidden_skipped']} hidden and {scan['system_files_skipped']} "
             f"system files, expected {t['hidden']} and {t['junk']}")
    # One split per group, and per set of identical files.
    where = {}
    for name, r in seen.items():
        if r["split"]:
            for key in ("g:" + r["group"], "h:" + r["sha256"]):
                where.setdefault(key, set()).add(r["split"])
    spread = {k: v for k, v in where.items() if len(v) > 1}
    if spread:
        fail(f"groups or copies in two splits: {spread}")
    for name, e in truth.items():
        if e.get("copy_of") and seen[name]["split"] != seen[e["copy_of"]]["split"]:
            fail(f"{name} and its copy {e['copy_of']} are in different splits")
    # Pixels.
    items = list(csv.DictReader(open(os.path.join(out, "items.csv"), newline="",
                                                     encoding="utf-8")))
    tens = {s: np.asarray(read_kten(os.path.join(out, f"{s}.kten"), check=True)["images"])
            for s in ("train", "val", "test") if os.path.exists(os.path.join(out, f"{s}.kten"))}
    files = os.path.join(d, "delivery")
    checked, worst_psnr, reduced = 0, math.inf, 0
    for r in items:
        if not r["split"]:
            continue
        name = rule_name(r)
        e = truth[name]
        src = None
        if e["kind"] == "jpeg":
            src = extract(files, r)
        ref = reference(d, e, src)
        got = tens[r["split"]][int(r["index"])].astype(np.int64)
        diff = np.abs(got - ref)
        if e["kind"] == "jpeg" and not exact and seen[name]["pixel_scale"] not in ("", "1"):
            reduced += 1
            mse = ((got - ref) ** 2).reshape(-1, 3).mean(axis=0)
            psnr = min(10 * math.log10(255 ** 2 / m) if m else math.inf for m in mse)
            worst_psnr = min(worst_psnr, psnr)
            if psnr < DCT_PSNR_FLOOR:
                print(f"DCT-PSNR: {name} ({e['variant']}, {e['w']}x{e['h']}, reduced 1/"
                      f"{seen[name]['pixel_scale']}): {psnr:.2f} dB against PIL, floor "
                      f"{DCT_PSNR_FLOOR} dB")
        elif diff.max() > 1:
            fail(f"{name} ({e['variant']}, {e['w']}x{e['h']}): {int((diff > 1).sum())} samples "
                 f"differ from PIL by more than 1 (largest {int(diff.max())})")
        checked += 1
    if checked != sum(man["counts"][s]["records"] for s in man["counts"]):
        fail(f"{checked} records checked, the manifest counts more")
    if not exact and reduced == 0:
        fail("no JPEG was reduced in the DCT domain: the default path was not exercised")
    if worst_psnr < DCT_PSNR_FLOOR:
        fail(f"DCT-reduced JPEGs below the {DCT_PSNR_FLOOR} dB floor (listed above)")
    print(f"ok: {len(rows)} rows (labels, groups, statuses, shapes), {checked} records against "
          f"PIL" + (f"; {reduced} DCT-reduced JPEGs, worst {worst_psnr:.2f} dB" if reduced else ""))


def extract(files, r):
    """The bytes of a JPEG, from the folder or from inside its archive (Python's tarfile and
    zipfile: independent of kiln's reader)."""
    import tarfile
    if not r["member"]:
        return os.path.join(files, r["path"])
    arch = os.path.join(files, r["path"])
    if arch.endswith(".zip"):
        return io.BytesIO(zipfile.ZipFile(arch).read(r["member"]))
    return io.BytesIO(tarfile.open(arch).extractfile(r["member"]).read())


if __name__ == "__main__":
    if sys.argv[1] == "build":
        build(sys.argv[2])
    else:
        check(sys.argv[2], sys.argv[3], "--exact" in sys.argv[4:])
