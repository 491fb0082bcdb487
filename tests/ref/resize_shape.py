#!/usr/bin/env python3
"""Tensor shaping through the real command line, checked against numpy (python3-numpy) and PIL
(python3-pil) computations written from docs/pixels.md and docs/resize.md:

    resize_shape.py layout NHWC_OUT NCHW_OUT     nchw records = nhwc records transposed
    resize_shape.py dtype INT_OUT F32_OUT        f32 = (v / M - mean_c) / std_c, exactly
    resize_shape.py alpha OUT3 OUT4              --channels 4 = RGB records + opaque alpha
    resize_shape.py make-chosen DEMO_DIR DIR     a folder of lossless files (see make_chosen)
    resize_shape.py records SRC_DIR OUT          every record rebuilt from its source file
    resize_shape.py pad-regions OUT              pad areas of every record = the pad value

Each check exits 1 with a message on the first failure and prints what it checked.
"""
import csv
import json
import os
import shutil
import sys

import numpy as np
from PIL import Image

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "..", "examples"))
sys.path.insert(0, HERE)
from read_kten import read_kten  # noqa: E402
from resize_reference import doc_resize, natural, pil_8bit, pil_16bit  # noqa: E402

SPLITS = ("train", "val", "test")


def fail(msg):
    print("FAIL:", msg)
    sys.exit(1)


def load(out):
    """(manifest, items.csv rows, {split: kten dict}) of an output folder."""
    man = json.load(open(os.path.join(out, "manifest.json")))
    rows = list(csv.DictReader(open(os.path.join(out, "items.csv"), newline="", encoding="utf-8")))
    tens = {s: read_kten(os.path.join(out, f"{s}.kten"), check=True) for s in SPLITS}
    return man, rows, tens


def records(tens, split):
    return np.asarray(tens[split]["images"])


# ---- layout ----

def check_layout(a_dir, b_dir):
    ma, _, ta = load(a_dir)
    mb, _, tb = load(b_dir)
    if (ma["recipe"]["layout"], mb["recipe"]["layout"]) != ("nhwc", "nchw"):
        fail("layout: expected an nhwc and an nchw output")
    n = 0
    for s in SPLITS:
        a, b = records(ta, s), records(tb, s)
        if b.shape != (a.shape[0], a.shape[3], a.shape[1], a.shape[2]):
            fail(f"layout {s}: nchw shape {b.shape} is not nhwc {a.shape} transposed")
        # Byte for byte: the nchw array equals numpy's (0, 3, 1, 2) transpose of the nhwc one.
        if np.ascontiguousarray(a.transpose(0, 3, 1, 2)).tobytes() != b.tobytes():
            fail(f"layout {s}: nchw records are not the nhwc records transposed")
        for name in ("labels", "item"):
            if not np.array_equal(ta[s][name], tb[s][name]):
                fail(f"layout {s}: array {name} differs between the layouts")
        n += a.shape[0]
    if ma["statistics"] != mb["statistics"]:
        fail("layout: statistics differ between the layouts")
    print(f"ok: layout: {n} records, nchw = nhwc transposed (0, 3, 1, 2), byte for byte")


# ---- dtype ----

def check_dtype(int_dir, f32_dir):
    mi, _, ti = load(int_dir)
    mf, _, tf = load(f32_dir)
    depth = mf["recipe"]["depth"]
    maxv = 65535.0 if depth == 16 else 255.0
    if mf["recipe"]["dtype"] != "f32" or mi["recipe"]["depth"] != depth:
        fail("dtype: expected an integer and an f32 output of the same depth")
    if mi["statistics"] != mf["statistics"]:
        fail("dtype: the f32 run's statistics differ from the integer run's (same records)")
    train = mf["statistics"]["train"]
    if not train["used_for_normalisation"]:
        fail("dtype: the training statistics are not marked as used for normalisation")
    mean = np.array([c["mean_unit"] for c in train["channels"]], np.float64)
    std = np.array([c["std_unit"] for c in train["channels"]], np.float64)
    std = np.where(std == 0, 1.0, std)  # docs/pixels.md: a channel whose std is 0 is divided by 1
    n = 0
    for s in SPLITS:
        v, f = records(ti, s), records(tf, s)
        if f.dtype != np.float32 or f.shape != v.shape:
            fail(f"dtype {s}: f32 array is {f.dtype} {f.shape}, integer array {v.shape}")
        if f.size == 0:
            continue
        shape = (1, 1, 1, -1) if mf["recipe"]["layout"] == "nhwc" else (1, -1, 1, 1)
        # float64 throughout, in the documented order, then rounded once to binary32.
        want = ((v.astype(np.float64) / maxv - mean.reshape(shape)) / std.reshape(shape))
        want = want.astype(np.float32)
        if not np.array_equal(f.view(np.uint32), want.view(np.uint32)):
            ulp = np.abs(f.view(np.int32).astype(np.int64) - want.view(np.int32).astype(np.int64))
            fail(f"dtype {s}: {np.sum(ulp != 0)} of {f.size} values differ from numpy "
                 f"(max {ulp.max()} ulp)")
        if s != "train":
            # The check can tell the statistics apart: this split's own would give other values.
            own = mf["statistics"][s]["channels"]
            om = np.array([c["mean_unit"] for c in own]).reshape(shape)
            if np.array_equal(f, ((v / maxv - om) / std.reshape(shape)).astype(np.float32)):
                fail(f"dtype {s}: normalised with its own mean, not the training split's")
        n += f.size
    print(f"ok: dtype f32 ({depth}-bit records): {n} values bit-identical to numpy's "
          f"(v / {int(maxv)} - mean_c) / std_c with the training split's mean_unit, std_unit")


# ---- channels 4 ----

def check_alpha(out3, out4):
    m3, _, t3 = load(out3)
    m4, _, t4 = load(out4)
    if (m3["recipe"]["channels"], m4["recipe"]["channels"]) != (3, 4):
        fail("alpha: expected a 3- and a 4-channel output")
    maxv = 65535 if m4["recipe"]["depth"] == 16 else 255
    n = 0
    for s in SPLITS:
        a, b = records(t3, s), records(t4, s)
        # No source of the demo set has alpha: channels 4 adds an opaque one (docs/pixels.md),
        # and resampling never mixes channels, so the colour channels equal the 3-channel run.
        if not np.array_equal(b[..., :3], a) or not np.all(b[..., 3] == maxv):
            fail(f"alpha {s}: 4-channel records are not the 3-channel ones plus alpha {maxv}")
        n += a.shape[0]
    print(f"ok: channels 4: {n} records = channels 3 records + opaque alpha ({maxv})")


# ---- chosen lossless files, rebuilt record by record ----

def write_ppm16(path, rgb):
    h, w, _ = rgb.shape
    with open(path, "wb") as f:
        f.write(f"P6\n{w} {h}\n65535\n".encode())
        f.write(rgb.astype(">u2").tobytes())


def make_chosen(demo, root):
    """Copies the demo set's PNGs (8-bit RGB, 8-bit grey, 16-bit grey) with their class folders
    and adds generated files the demo set lacks: 16-bit RGB (binary PPM), 8-bit RGBA and grey
    plus alpha (PNG, written by PIL), all natural-looking with fixed seeds."""
    for cls in sorted(os.listdir(demo)):
        d = os.path.join(demo, cls)
        if not os.path.isdir(d):
            continue
        for name in sorted(os.listdir(d)):
            if name.endswith(".png") and not name.startswith("."):
                os.makedirs(os.path.join(root, cls), exist_ok=True)
                shutil.copy(os.path.join(d, name), os.path.join(root, cls, name))
    g = os.path.join(root, "generated")
    os.makedirs(g)
    write_ppm16(os.path.join(g, "rgb16.ppm"), natural(200, 300, 3, 4101, 65535))
    rgba = natural(160, 256, 4, 4102, 255)
    rgba[:20, :, 3] = 0  # fully transparent band
    rgba[20:40, :, 3] = 255  # opaque band
    Image.fromarray(rgba, "RGBA").save(os.path.join(g, "rgba.png"))
    Image.fromarray(natural(90, 120, 2, 4103, 255), "LA").save(os.path.join(g, "la.png"))


def decode(path):
    """The stored samples as [h, w, c] (uint8 or uint16), by PIL or, for PPM, by hand."""
    if path.endswith(".ppm"):
        data = open(path, "rb").read()
        parts = data.split(maxsplit=4)
        w, h, maxv = int(parts[1]), int(parts[2]), int(parts[3])
        assert parts[0] == b"P6" and maxv == 65535
        return np.frombuffer(parts[4], ">u2").reshape(h, w, 3).astype(np.uint16)
    im = Image.open(path)
    a = np.asarray(im)
    if im.mode in ("I", "I;16"):
        a = a.astype(np.uint16)
    elif a.dtype != np.uint8:
        fail(f"{path}: unexpected PIL mode {im.mode}")
    return a.reshape(a.shape[0], a.shape[1], -1)


def convert_channels(x, channels, background):
    """docs/pixels.md step 3, in numpy integers."""
    maxv = 65535 if x.dtype == np.uint16 else 255
    c = x.shape[2]
    v = x.astype(np.int64)
    colour = v[..., :1].repeat(3, axis=2) if c <= 2 else v[..., :3]
    alpha = v[..., -1:] if c in (2, 4) else np.full(v.shape[:2] + (1,), maxv, np.int64)
    if channels == 4:
        return np.concatenate([colour, alpha], axis=2)
    bg = np.array(background, np.int64) * (257 if maxv == 65535 else 1)
    colour = (colour * alpha + bg * (maxv - alpha) + maxv // 2) // maxv
    if channels == 1:
        if c <= 2:
            return colour[..., :1]
        r, g, b = colour[..., 0], colour[..., 1], colour[..., 2]
        return ((299 * r + 587 * g + 114 * b + 500) // 1000)[..., None]
    return colour


def fit_geometry(w, h, W, H, fit):
    """docs/resize.md "Fit", written out again: (box x, y, w, h), inner w, h, offset x, y."""
    box, inner, off = (0, 0, w, h), (W, H), (0, 0)
    if fit == "pad":
        if W * h <= H * w:
            inner = (W, max(1, (2 * h * W + w) // (2 * w)))
        else:
            inner = (max(1, (2 * w * H + h) // (2 * h)), H)
        off = ((W - inner[0]) // 2, (H - inner[1]) // 2)
    elif fit == "crop":
        if W * h >= H * w:
            bh = (2 * w * H + W) // (2 * W)
            box = (0, (h - bh) // 2, w, bh)
        else:
            bw = (2 * h * W + H) // (2 * H)
            box = ((w - bw) // 2, 0, bw, h)
    return box, inner, off


def pil_resize(x, flt, ow, oh, box):
    """PIL's resize as in resize_reference.py; grey+alpha and RGBA channel by channel in mode L,
    because PIL's LA and RGBA resize premultiplies alpha and docs/resize.md does not."""
    if x.dtype == np.uint16:
        return pil_16bit(x, flt, ow, oh, box)
    if x.shape[2] in (1, 3):
        return pil_8bit(x, flt, ow, oh, box)
    return np.concatenate([pil_8bit(x[..., c:c + 1], flt, ow, oh, box)
                           for c in range(x.shape[2])], axis=2)


def check_records(src, out):
    man, rows, tens = load(out)
    rc = man["recipe"]
    W, H = (int(v) for v in rc["size"].split("x"))
    C, depth, fit, flt = rc["channels"], rc["depth"], rc["fit"], rc["filter"]
    pad = np.array(rc["pad_value"][:C], np.int64) * (257 if depth == 16 else 1)
    cat = {r["path"]: r for r in csv.DictReader(open(os.path.join(out, "catalog.csv"),
                                                     newline="", encoding="utf-8"))}
    n = skipped = 0
    worst_pil = 0
    for r in rows:
        if not r["split"]:
            continue
        got = records(tens, r["split"])[int(r["index"])].astype(np.int64)
        if rc["layout"] == "nchw":
            got = got.transpose(1, 2, 0)
        path = os.path.join(src, r["path"])
        if cat[r["path"]]["orientation"] != "1":
            fail(f"{r['path']}: chosen files must not need orientation")
        img = decode(path)
        h, w = img.shape[:2]
        box, (iw, ih), (ox, oy) = fit_geometry(w, h, W, H, fit)
        bg = rc["background"]
        if img.shape[2] == 2 and C != 4 and not bg[0] == bg[1] == bg[2]:
            # docs/pixels.md does not say what grey+alpha is composited over when the
            # background is coloured (kiln uses the background's luma); not checked.
            skipped += 1
            continue
        # Pad region: exactly the pad value (times 257 for 16-bit records).
        mask = np.ones((H, W), bool)
        mask[oy:oy + ih, ox:ox + iw] = False
        if mask.any() and not np.all(got[mask] == pad):
            fail(f"{r['path']}: pad region is not {pad.tolist()}")
        inner = got[oy:oy + ih, ox:ox + iw]
        # docs/pixels.md order: channels, then fit and resample at the decoded depth, then depth.
        conv = convert_channels(img, C, rc["background"]).astype(img.dtype)
        res = doc_resize(conv, flt, iw, ih, box)
        if img.dtype == np.uint16 and depth == 8:
            want = (res * 255 + 32767) // 65535
        elif img.dtype == np.uint8 and depth == 16:
            want = res * 257
        else:
            want = res
        if not np.array_equal(inner, want):
            d = np.abs(inner - want)
            fail(f"{r['path']}: record differs from docs/pixels.md + docs/resize.md in numpy in "
                 f"{np.sum(d != 0)} samples (max {d.max()}; geometry box {box} inner {iw}x{ih} "
                 f"at {ox},{oy})")
        # And the resampling step against PIL itself where kiln's depth does not rescale the
        # result: within 1 for 8-bit, 2 for 16-bit (two passes of +-1 ties against PIL's double
        # weights; tests/ref/resize_reference.py explains and checks each pass).
        if img.dtype == np.uint16 and depth == 8 or img.dtype == np.uint8 and depth == 16:
            pass
        elif flt != "nearest":
            pil = pil_resize(conv, flt, iw, ih, box)
            d = int(np.abs(inner - pil.astype(np.int64)).max())
            worst_pil = max(worst_pil, d)
            if d > (1 if img.dtype == np.uint8 else 2):
                fail(f"{r['path']}: record differs from PIL's resize by {d}")
        n += 1
    if n == 0:
        fail("records: no record checked")
    print(f"ok: records: {n} rebuilt exactly ({rc['size']} {fit} {flt}, {C} channels, "
          f"{depth}-bit, background {rc['background']}, pad {pad.tolist()}); PIL max diff "
          f"{worst_pil}" + (f"; {skipped} grey+alpha record(s) skipped (coloured background)"
                            if skipped else ""))


def check_pad_regions(out):
    """For every record (any format): the area outside the inner box is the pad value."""
    man, rows, tens = load(out)
    rc = man["recipe"]
    W, H = (int(v) for v in rc["size"].split("x"))
    C, depth = rc["channels"], rc["depth"]
    pad = np.array(rc["pad_value"][:C], np.int64) * (257 if depth == 16 else 1)
    cat = {r["path"]: r for r in csv.DictReader(open(os.path.join(out, "catalog.csv"),
                                                     newline="", encoding="utf-8"))}
    n = 0
    for r in rows:
        if not r["split"]:
            continue
        c = cat[r["path"]]
        w, h = int(c["width"]), int(c["height"])  # after orientation (docs/formats.md)
        _, (iw, ih), (ox, oy) = fit_geometry(w, h, W, H, "pad")
        got = records(tens, r["split"])[int(r["index"])].astype(np.int64)
        if rc["layout"] == "nchw":
            got = got.transpose(1, 2, 0)
        mask = np.ones((H, W), bool)
        mask[oy:oy + ih, ox:ox + iw] = False
        if not np.all(got[mask] == pad):
            fail(f"{r['path']}: pad region is not {pad.tolist()}")
        # The image reaches every edge of its inner box (no pad-coloured rim inside it).
        for edge in (got[oy, ox:ox + iw], got[oy + ih - 1, ox:ox + iw], got[oy:oy + ih, ox],
                     got[oy:oy + ih, ox + iw - 1]):
            if np.all(edge == pad):
                fail(f"{r['path']}: an edge of the inner box {iw}x{ih} at {ox},{oy} is all pad")
        n += 1
    print(f"ok: pad regions of {n} records are exactly {pad.tolist()}")


def dispatch(cmds, argv, usage):
    """Runs argv[1] from cmds ({name: (function, number of arguments)}); 2 and the usage on a
    wrong command line."""
    if len(argv) < 2 or argv[1] not in cmds or len(argv) != cmds[argv[1]][1] + 2:
        print(usage, file=sys.stderr)
        return 2
    cmds[argv[1]][0](*argv[2:])
    return 0


def main(argv):
    cmds = {"layout": (check_layout, 2), "dtype": (check_dtype, 2), "alpha": (check_alpha, 2),
            "make-chosen": (make_chosen, 2), "records": (check_records, 2),
            "pad-regions": (check_pad_regions, 1)}
    return dispatch(cmds, argv, __doc__)


if __name__ == "__main__":
    sys.exit(main(sys.argv))
