#!/usr/bin/env python3
"""JPEG DCT-domain reduction (docs/pixels.md 1a, docs/resize.md "Reduced sources") through the
real command line, on awkward inputs, against PIL (python3-pil) and numpy (python3-numpy):

    resize_dct.py make DIR                         writes the awkward JPEG set into DIR
    resize_dct.py check SRC DCT_OUT FULL_OUT LOG   one recipe packed with and without
                                                   --no-dct-scale; appends what it saw to LOG
    resize_dct.py coverage LOG                     every orientation, fit and reduction seen
    resize_dct.py sweep                            the measurement behind the rule (no test)

`check` asserts, for every record of the default run (DCT reduction on):
1. the reduction is the documented rule's (largest d in {2, 4, 8} with 2 * box >= 3 * d * inner
   on both axes, never for nearest or box): the catalogue's pixel_scale of kiln build, and the
   manifest's dct_reduced_items;
2. the geometry is the full-size picture's: outside the fit's inner box (computed here from
   docs/resize.md on the full-size oriented size) the record is exactly the pad value, each
   edge of the inner box holds image, in both runs; unreduced records are byte-identical;
3. PSNR per channel over the inner box against the --no-dct-scale record >= FLOOR dB;
4. against PIL's resize of PIL's own full-size decode after PIL's exif_transpose (the outside
   reference for what the record should be): PSNR >= FLOOR dB for reduced records and every
   sample within 1 for unreduced ones;
5. against PIL's own reduced decode (Image.draft at the same 1/d, same libjpeg), transposed by
   exif_transpose and resized by PIL with the fractional box docs/resize.md maps the full-size
   box to: every sample within 1 (PIL's 8-bit coefficients lack the rounding residue step,
   docs/resize.md "Reference checks"). This checks the mapping, shift for reversed axes
   included, against PIL's resampler exactly; 3 and 4 check that the mapping is the right one.

Awkward inputs (`make`): real photographs from Debian packages, cropped or scaled to sizes that
are not multiples of 8 (odd, prime, 1x1, 7x3, 997x13, 13x997, 4099x17) and saved as JPEG by
PIL with EXIF orientations 1-8, plus two files kept byte for byte, and generated content with
hard edges. Sources and licences:
- scikit-image 0.19 data (Debian python3-skimage, skimage/data/; licences from each function's
  docstring in skimage/data/__init__.py): retina.jpg (CC0, Häggström, Wikimedia Commons),
  hubble_deep_field.jpg (NASA, public domain), coffee.png (CC0, Rachel Michetti),
  chelsea.png (CC0, Stefan van der Walt), astronaut.png (NASA, public domain), camera.png
  (CC0, Lav Varshney).
- scikit-learn (Debian python3-sklearn, sklearn/datasets/images/, README.txt there):
  china.jpg and flower.jpg, CC BY 2.0 (Flickr users danielbuechele and vultilion).
"""
import csv
import importlib.util
import io
import json
import math
import os
import shutil
import sys

import numpy as np
from PIL import Image, ImageOps

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "..", "examples"))
sys.path.insert(0, HERE)
from orientation import exif  # noqa: E402
from read_kten import read_kten  # noqa: E402
from resize_reference import PIL_FILTER, natural  # noqa: E402
from resize_shape import dispatch, fit_geometry  # noqa: E402  (fit: docs/resize.md "Fit")

SPLITS = ("train", "val", "test")
FLOOR = 35.0  # dB, docs/resize.md "Reduced sources: quality"


def fail(msg):
    print("FAIL:", msg)
    sys.exit(1)


def package_dir(name, *sub):
    """A Debian package's data folder, located without importing the package."""
    spec = importlib.util.find_spec(name)
    if spec is None or not spec.submodule_search_locations:
        fail(f"python3 module {name} not found (Debian: tests/deps.sh installs it)")
    return os.path.join(list(spec.submodule_search_locations)[0], *sub)


# ---- the awkward set ----

def crop(im, w, h):
    """A w x h window from the centre of im, scaled up first (bicubic) when im is smaller."""
    s = max(w / im.width, h / im.height, 1.0)
    if s > 1:
        im = im.resize((math.ceil(im.width * s), math.ceil(im.height * s)), Image.BICUBIC)
    x, y = (im.width - w) // 2, (im.height - h) // 2
    return im.crop((x, y, x + w, y + h))


def make(root):
    sk = package_dir("skimage", "data")
    sl = package_dir("sklearn", "datasets", "images")
    real = lambda name: Image.open(os.path.join(sk, name)).convert(  # noqa: E731
        "L" if name == "camera.png" else "RGB")
    os.makedirs(os.path.join(root, "real"))
    os.makedirs(os.path.join(root, "rotated"))
    os.makedirs(os.path.join(root, "generated"))

    def save(im, rel, orientation=1, **kw):
        kw.setdefault("quality", 90)
        if orientation != 1:
            kw["exif"] = exif(orientation)
        im.save(os.path.join(root, rel), "JPEG", **kw)

    retina, hubble = real("retina.jpg"), real("hubble_deep_field.jpg")
    save(crop(retina, 661, 440), "real/retina_661x440.jpg")
    save(crop(retina, 1409, 1009), "real/retina_1409x1009.jpg", quality=85)
    save(crop(retina, 13, 997), "real/retina_13x997.jpg")
    save(crop(hubble, 997, 13), "real/hubble_997x13.jpg", quality=95)
    save(crop(retina, 4099, 17), "real/retina_4099x17.jpg")
    save(crop(real("coffee.png"), 599, 397), "real/coffee_599x397.jpg", subsampling=0)
    save(crop(real("astronaut.png"), 509, 503), "real/astronaut_509x503.jpg", progressive=True)
    save(crop(real("camera.png"), 331, 509), "real/camera_331x509.jpg")  # grey JPEG
    save(crop(real("chelsea.png"), 7, 3), "real/chelsea_7x3.jpg")
    save(crop(real("chelsea.png"), 1, 1), "real/chelsea_1x1.jpg")
    # Published files as they are, byte for byte: 640x427, 4:2:0.
    for name in ("china.jpg", "flower.jpg"):
        shutil.copy(os.path.join(sl, name), os.path.join(root, "real", name))
    flower = Image.open(os.path.join(sl, "flower.jpg")).convert("RGB")
    save(crop(flower, 439, 293), "real/flower_439x293.jpg", quality=95, subsampling=0)
    # The same stored pixels under every orientation, and the extreme aspects turned.
    stored = crop(retina.transpose(Image.FLIP_LEFT_RIGHT), 661, 440)
    for o in range(1, 9):
        save(stored, f"rotated/retina_661x440_o{o}.jpg", o)
    thin = crop(hubble.transpose(Image.ROTATE_90), 997, 13)
    for o in (2, 3, 4, 5, 6, 7, 8):
        save(thin, f"rotated/hubble_997x13_o{o}.jpg", o)
    tall = crop(retina.transpose(Image.ROTATE_180), 13, 997)
    for o in (3, 5, 6, 7, 8):
        save(tall, f"rotated/retina_13x997_o{o}.jpg", o)
    save(crop(retina.transpose(Image.ROTATE_270), 4099, 17), "rotated/retina_4099x17_o6.jpg", 6)
    save(crop(real("coffee.png"), 1021, 67), "rotated/coffee_1021x67_o8.jpg", 8)
    save(crop(flower, 607, 401), "rotated/flower_607x401_o7.jpg", 7, subsampling=0)
    # Generated: smooth content, and hard edges that a reduced decode cannot smooth away.
    save(Image.fromarray(natural(777, 333, 3, 4201, 255)), "generated/natural_333x777.jpg")
    y, x = np.mgrid[0:389, 0:517]
    edges = np.where(((x // 3 + y // 5) % 2 == 0) | (np.abs(x - 2 * y) < 2), 235, 20)
    save(Image.fromarray(edges.astype(np.uint8), "L"), "generated/edges_517x389.jpg", quality=95)
    save(Image.fromarray(natural(211, 1531, 3, 4202, 255)), "generated/natural_1531x211_o5.jpg", 5)
    n = sum(len(f) for _, _, f in os.walk(root))
    print(f"made {n} JPEGs under {root}")


# ---- docs/pixels.md 1a and docs/resize.md "Reduced sources", written out again ----

def expected_denom(w, h, W, H, fit, flt):
    """docs/pixels.md 1a on the oriented full size (catalog.csv's width and height)."""
    if flt in ("nearest", "box"):
        return 1
    box, (iw, ih), _ = fit_geometry(w, h, W, H, fit)
    best = 1
    for d in (2, 4, 8):
        if 2 * box[2] >= 3 * d * iw and 2 * box[3] >= 3 * d * ih:
            best = d
        else:
            break
    return best


def reduced_box(box, w, h, d, orientation):
    """docs/resize.md "Reduced sources": the full-size box on the 1/d pixels after orientation.
    Reduced pixel t covers full-size [t d - s, (t + 1) d - s); s is the part of the last block
    past the picture on an axis the orientation reversed (x: 2, 3, 6, 7; y: 3, 4, 7, 8)."""
    sx = -(-w // d) * d - w if orientation in (2, 3, 6, 7) else 0
    sy = -(-h // d) * d - h if orientation in (3, 4, 7, 8) else 0
    x, y, bw, bh = box
    return ((x + sx) / d, (y + sy) / d, (x + bw + sx) / d, (y + bh + sy) / d)


# ---- checks ----

def load(out):
    man = json.load(open(os.path.join(out, "manifest.json")))
    rows = list(csv.DictReader(open(os.path.join(out, "items.csv"), newline="", encoding="utf-8")))
    cat = {r["path"]: r for r in csv.DictReader(open(os.path.join(out, "catalog.csv"),
                                                     newline="", encoding="utf-8"))}
    tens = {s: read_kten(os.path.join(out, f"{s}.kten"), check=True) for s in SPLITS}
    recs = {}
    for r in rows:
        if r["split"]:
            a = np.asarray(tens[r["split"]]["images"][int(r["index"])]).astype(np.int64)
            recs[r["path"]] = a.transpose(1, 2, 0) if man["recipe"]["layout"] == "nchw" else a
    return man, cat, recs


def psnr(a, b):
    """Worst channel's 10 log10(255^2 / MSE), over [h, w, c] arrays."""
    mse = ((a.astype(np.float64) - b) ** 2).reshape(-1, a.shape[2]).mean(axis=0)
    return min(10 * math.log10(255 * 255 / m) if m > 0 else math.inf for m in mse)


def pil_decode(path, channels, d=1):
    """PIL's decode (at 1/d through Image.draft, the same libjpeg scaling), then PIL's own
    exif_transpose, in the record's channel count. Returns (image, stored w, stored h)."""
    im = Image.open(path)
    w, h = im.size
    if d > 1:
        im.draft(im.mode, (w // d, h // d))
        if im.size != (-(-w // d), -(-h // d)):
            fail(f"{path}: PIL's draft gave {im.size}, not the 1/{d} decode")
    im = ImageOps.exif_transpose(im)
    return im.convert("L" if channels == 1 else "RGB"), w, h


def pil_resize(im, flt, size, box):
    a = np.asarray(im.resize(size, PIL_FILTER[flt], box=box)).astype(np.int64)
    return a.reshape(size[1], size[0], -1)


def check(src, dct_out, full_out, log):
    md, cat, rd = load(dct_out)
    mf, _, rf = load(full_out)
    rc = md["recipe"]
    if not rc["dct_scale"] or mf["recipe"]["dct_scale"]:
        fail("expected a run with and one without DCT scaling")
    if dict(rc, dct_scale=0) != dict(mf["recipe"], dct_scale=0) or rd.keys() != rf.keys():
        fail("the two runs differ in more than --no-dct-scale")
    if rc["depth"] != 8:
        fail("this check reads 8-bit records")
    W, H = (int(v) for v in rc["size"].split("x"))
    fit, flt, C = rc["fit"], rc["filter"], rc["channels"]
    pad = np.array(rc["pad_value"][:C], np.int64)
    stats = {}  # d -> [n, psnr vs full, psnr vs PIL, max diff vs PIL, max diff vs PIL reduced]
    seen, reduced = [], 0
    for path in sorted(rd):
        c = cat[path]
        w, h, o = int(c["width"]), int(c["height"]), int(c["orientation"])
        if not rc["orient"]:
            fail("this check assumes orientation is applied")
        d = expected_denom(w, h, W, H, fit, flt) if c["format"] == "jpeg" else 1
        if c["pixel_scale"] != str(d):  # kiln build decodes once, at pack's scale
            fail(f"{path}: decoded at 1/{c['pixel_scale']}, the rule of docs/pixels.md 1a "
                 f"gives 1/{d}")
        box, (iw, ih), (ox, oy) = fit_geometry(w, h, W, H, fit)
        a, b = rd[path], rf[path]
        for name, rec in (("default", a), ("--no-dct-scale", b)):
            mask = np.ones((H, W), bool)
            mask[oy:oy + ih, ox:ox + iw] = False
            if mask.any() and not np.all(rec[mask] == pad):
                fail(f"{path} ({name}): outside the inner box {iw}x{ih} at {ox},{oy} of the "
                     f"full-size geometry the record is not the pad value {pad.tolist()}")
            inner = rec[oy:oy + ih, ox:ox + iw]
            if fit == "pad" and any(np.all(e == pad) for e in (
                    inner[0], inner[-1], inner[:, 0], inner[:, -1])):
                fail(f"{path} ({name}): an edge of the inner box {iw}x{ih} at {ox},{oy} is "
                     f"all pad: the picture does not fill the full-size geometry")
        a, b = a[oy:oy + ih, ox:ox + iw], b[oy:oy + ih, ox:ox + iw]
        if d == 1 and not np.array_equal(a, b):
            fail(f"{path}: not reduced by the rule, yet its record differs from "
                 f"--no-dct-scale's")
        if c["format"] != "jpeg":
            continue  # other formats' records are checked against PIL by tests/cli/shape_fit.sh
        full_pil, _, _ = pil_decode(os.path.join(src, path), C)
        ref = pil_resize(full_pil, flt, (iw, ih), (box[0], box[1], box[0] + box[2],
                                                   box[1] + box[3]))
        if d == 1:
            diff = int(np.abs(a - ref).max())
            if diff > 1:
                fail(f"{path}: unreduced record differs from PIL's resize by {diff}")
            continue
        reduced += 1
        seen.append([o, d, f"{w}x{h}"])
        p_full, p_pil = psnr(a, b), psnr(a, ref)
        red_pil, _, _ = pil_decode(os.path.join(src, path), C, d)
        exact = pil_resize(red_pil, flt, (iw, ih), reduced_box(box, w, h, d, o))
        d_red = int(np.abs(a - exact).max())
        s = stats.setdefault(d, [0, [], [], 0, 0])
        s[0] += 1
        s[1].append(p_full)
        s[2].append(p_pil)
        s[3] = max(s[3], int(np.abs(a - ref).max()))
        s[4] = max(s[4], d_red)
        if p_full < FLOOR or p_pil < FLOOR:
            fail(f"{path} ({w}x{h}, orientation {o}, 1/{d}): PSNR {p_full:.2f} dB against "
                 f"--no-dct-scale, {p_pil:.2f} dB against PIL's full-size resize; the floor "
                 f"is {FLOOR} dB")
        if d_red > 1:
            fail(f"{path} ({w}x{h}, orientation {o}, 1/{d}): differs by {d_red} from PIL's "
                 f"resize of its own 1/{d} decode with the box {reduced_box(box, w, h, d, o)}")
    if md["dct_reduced_items"] != reduced or mf["dct_reduced_items"] != 0:
        fail(f"dct_reduced_items {md['dct_reduced_items']} (--no-dct-scale: "
             f"{mf['dct_reduced_items']}); the rule of docs/pixels.md 1a gives {reduced} (0)")
    print(f"ok: {rc['size']} {fit} {flt}: {len(rd)} records, {reduced} reduced; geometry of "
          f"the full-size picture in both runs, unreduced records identical")
    for d in sorted(stats):
        n, pf, pp, mx, mr = stats[d]
        finite = [p for p in pf if math.isfinite(p)] or [math.inf]
        print(f"  1/{d}: {n} records; PSNR vs --no-dct-scale worst {min(pf):.2f} mean "
              f"{np.mean(finite):.2f} dB (of {len(finite)} not identical); vs PIL full-size resize worst {min(pp):.2f} dB, max diff "
              f"{mx}; vs PIL's 1/{d} decode and fractional box max diff {mr}")
    with open(log, "a") as f:
        f.write(json.dumps({"size": rc["size"], "fit": fit, "filter": flt, "reduced": seen,
                            "psnr_full": [p for s in stats.values() for p in s[1]],
                            "psnr_pil": [p for s in stats.values() for p in s[2]],
                            "maxdiff_pil": max([s[3] for s in stats.values()], default=0)})
                + "\n")


def coverage(log):
    runs = [json.loads(line) for line in open(log)]
    fits = {r["fit"] for r in runs}
    pf = [p for r in runs for p in r["psnr_full"]]
    pp = [p for r in runs for p in r["psnr_pil"]]
    if not pf:
        fail("coverage: no record was reduced")
    for fit in ("stretch", "pad", "crop"):
        if fit not in fits:
            fail(f"coverage: no run with --fit {fit}")
        got = {o for r in runs if r["fit"] == fit for o, _, _ in r["reduced"]}
        if got != set(range(1, 9)):
            fail(f"coverage: --fit {fit} reduced no JPEG with orientation "
                 f"{sorted(set(range(1, 9)) - got)}")
    ds = {d for r in runs for _, d, _ in r["reduced"]}
    odd = {s for r in runs for _, _, s in r["reduced"]
           if any(int(v) % 8 for v in s.split("x"))}
    if ds != {2, 4, 8} or not odd:
        fail(f"coverage: reductions {sorted(ds)}, sizes not multiples of 8 {sorted(odd)}")
    print(f"ok: coverage: {len(runs)} runs, {len(pf)} reduced records, every orientation under "
          f"every fit, reductions 1/2, 1/4, 1/8, sizes {', '.join(sorted(odd))}; PSNR vs "
          f"--no-dct-scale worst {min(pf):.2f} dB, vs PIL worst {min(pp):.2f} dB; max diff vs "
          f"PIL {max(r['maxdiff_pil'] for r in runs)}")


# ---- the measurement behind the rule (docs/resize.md "Reduced sources: quality") ----

def sweep():
    """PIL alone: each picture saved as JPEG, decoded at full size and resized, and decoded at
    1/d (Image.draft) and resized with the fractional box, for every d whose reduced box is at
    least the output; PSNR (worst channel) by filter and by r = reduced box / output (the
    smaller axis). Prints a table; asserts nothing (a measurement, about four minutes)."""
    sk = package_dir("skimage", "data")
    sl = package_dir("sklearn", "datasets", "images")
    names = [os.path.join(sk, n) for n in (
        "astronaut.png", "chelsea.png", "coffee.png", "rocket.jpg", "hubble_deep_field.jpg",
        "camera.png", "retina.jpg", "brick.png", "grass.png", "gravel.png", "page.png",
        "text.png", "chessboard_RGB.png", "coins.png")] + \
        [os.path.join(sl, n) for n in ("china.jpg", "flower.jpg")]
    sizes = [(661, 440), (997, 613), (1409, 1009), (803, 1201), (1999, 97)]
    outs = [(64, 64), (128, 96), (224, 224), (100, 300), (37, 11)]
    filters = ("box", "bilinear", "bicubic", "lanczos3")
    bins = [(1.0, 1.5), (1.5, 2.0), (2.0, 3.0), (3.0, math.inf)]
    got = {}  # (filter, bin) -> list of PSNR

    def decode(data, d):
        im = Image.open(io.BytesIO(data))
        w, h = im.size
        if d > 1:
            im.draft("RGB", (w // d, h // d))
        return im.convert("RGB")

    for path in names:
        for (w, h) in sizes:
            for q, sub in ((75, 2), (95, 0)):
                buf = io.BytesIO()
                crop(Image.open(path).convert("RGB"), w, h).save(buf, "JPEG", quality=q,
                                                                  subsampling=sub)
                data = buf.getvalue()
                full = decode(data, 1)
                red = {d: decode(data, d) for d in (2, 4, 8)}
                for (W, H) in outs:
                    for fit in ("stretch", "pad", "crop"):
                        (bx, by, bw, bh), (iw, ih), _ = fit_geometry(w, h, W, H, fit)
                        for flt in filters:
                            ref = pil_resize(full, flt, (iw, ih), (bx, by, bx + bw, by + bh))
                            for d in (2, 4, 8):
                                r = min(bw / d / iw, bh / d / ih)
                                if r < 1:
                                    continue
                                out = pil_resize(red[d], flt, (iw, ih),
                                                 reduced_box((bx, by, bw, bh), w, h, d, 1))
                                b = next(i for i, (lo, hi) in enumerate(bins) if lo <= r < hi)
                                got.setdefault((flt, b), []).append(psnr(out, ref))
    print("filter     " + "".join(f"  r in [{lo:g}, {hi:g})".ljust(24) for lo, hi in bins))
    for flt in filters:
        row = ""
        for b in range(len(bins)):
            v = [p for p in got.get((flt, b), []) if math.isfinite(p)]
            row += (f"  {len(v)}: worst {min(v):.2f} mean {np.mean(v):.1f}" if v else "  -")\
                .ljust(24)
        print(f"{flt:10s} {row}")
    # The limit of the rule: a full-contrast vertical grating of f cycles per full-size pixel,
    # 997x613 grey, stretched to W x W with the whole picture as the box.
    y, x = np.mgrid[0:613, 0:997]
    worst = {}
    for f in np.linspace(0.01, 0.2, 20):
        v = np.clip(127.5 + 120 * np.sin(2 * np.pi * f * x + 0.3) + 0 * y, 0, 255)
        buf = io.BytesIO()
        Image.fromarray(v.astype(np.uint8), "L").save(buf, "JPEG", quality=95)
        full = decode(buf.getvalue(), 1)
        for d in (2, 4, 8):
            red = decode(buf.getvalue(), d)
            for W in range(8, 200, 7):
                r = min(997 / d / W, 613 / d / W)
                for flt in ("bilinear", "lanczos3"):
                    if r < 1.5:
                        continue
                    p = psnr(pil_resize(red, flt, (W, W), (0, 0, 997 / d, 613 / d)),
                             pil_resize(full, flt, (W, W), None))
                    k = next(lo for lo in (3.0, 2.0, 1.5) if r >= lo)
                    worst[k] = min(worst.get(k, math.inf), p)
    print("full-contrast gratings, bilinear and lanczos3: worst " + ", ".join(
        f"{worst[k]:.2f} dB at r >= {k:g}" for k in sorted(worst)))


def main(argv):
    cmds = {"make": (make, 1), "check": (check, 4), "coverage": (coverage, 1),
            "sweep": (sweep, 0)}
    return dispatch(cmds, argv, __doc__)


if __name__ == "__main__":
    sys.exit(main(sys.argv))
