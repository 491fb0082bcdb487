#!/usr/bin/env python3
"""kiln's resampler (core/resize.c, run through tests/tools/resize_check.c) against outside
references:

    resize_reference.py KILN_RESIZE_CHECK

1. PIL (python3-pil 9.4, Image.resize) for box, bilinear, bicubic and lanczos3 <-> PIL BOX,
   BILINEAR, BICUBIC, LANCZOS. PIL implements the same published scheme that docs/resize.md
   specifies (separable, horizontal pass first, half-pixel centres, support widened by the
   reduction factor, windows cut at the edge and renormalised; BICUBIC is Keys with a = -0.5).
   - 8-bit grey and RGB: PIL modes "L" and "RGB" in one Image.resize call. PIL's 8-bit path
     quantises the coefficients to 22 bits and keeps an 8-bit intermediate image, like kiln.
   - 16-bit: PIL 9.4 resizes "I;16" with NEAREST only, so the reference is mode "I" (32-bit
     integers, double-precision coefficients, intermediate rounded half up). PIL's "I" path
     does not clamp, so the reference runs PIL's two passes as two single-axis Image.resize
     calls (PIL skips the pass of an unchanged axis) and clips to [0, 65535] after each, which
     is kiln's documented clamp of the intermediate. RGB is resized channel by channel
     (resampling never mixes channels).
   8-bit: every sample within +-1 of PIL. 16-bit: each pass within +-1 of PIL's pass on the
   same input (kiln run on PIL's intermediate for the vertical pass), and the whole resize
   within +-2. The 16-bit differences are exact ties (a pass value of k + 1/2 in exact
   arithmetic, common when the weights are multiples of 1/10 as in 512 -> 640) that kiln's
   22-bit weights and PIL's double weights tip different ways; a one-unit intermediate
   difference, spread by the vertical weights, plus the vertical pass's own tie can give 2.
2. nearest against docs/resize.md's exact-integer formula (input b + ((2i + 1) n) div (2m)).
   PIL's NEAREST for 8-bit modes steps through the source with an accumulated floating-point
   position (Pillow Geometry.c, ImagingScaleAffine; from memory) and so truncates a centre
   that falls exactly on a pixel boundary either way; its agreement is printed, and every
   disagreement must be such a boundary case, one input pixel earlier.
3. docs/resize.md computed here in numpy, from the document alone (kernels, coefficient
   windows, 22-bit quantisation with the rounding residue on the first largest weight, integer
   passes): kiln must match it exactly, every filter, both depths. Without the residue step the
   same computation must reproduce PIL's 8-bit results exactly (Pillow Resample.c, from memory:
   normalize_coeffs_8bpc, does not correct the sum), which accounts for every 8-bit difference
   from PIL. The 16-bit differences come from kiln's 22-bit coefficients against PIL's doubles.
4. Analytic (numpy): a constant image stays exactly constant for every filter; bilinear
   upscaling reproduces a linear ramp (within 0.5 plus coefficient quantisation) away from the
   borders; the box filter at factor 2 or 4 along one axis equals the block mean rounded half
   up, exactly.

Test images are "natural-looking": smooth gradients, soft Gaussian blobs, a few hard-edged
discs and mild Gaussian noise, from fixed seeds. Prints one line per case (exact-match fraction
and maximum difference against PIL) and a summary per filter; exits 1 if any check fails.
"""
import subprocess
import sys

import numpy as np
from PIL import Image

FILTERS = ["nearest", "box", "bilinear", "bicubic", "lanczos3"]
PIL_FILTER = {"nearest": Image.NEAREST, "box": Image.BOX, "bilinear": Image.BILINEAR,
              "bicubic": Image.BICUBIC, "lanczos3": Image.LANCZOS}

# (in_w, in_h, out_w, out_h, box or None); box = (x, y, w, h) in source pixels.
CASES = [
    (64, 64, 32, 32, None),      # integer reduction 2
    (64, 64, 16, 16, None),      # integer reduction 4
    (60, 60, 25, 25, None),      # non-integer reduction 2.4
    (100, 100, 37, 37, None),    # non-integer reduction 2.70
    (400, 300, 30, 20, None),    # strong reduction (13.3 x 15): wide kernels
    (32, 24, 64, 48, None),      # integer enlargement 2
    (37, 37, 100, 100, None),    # non-integer enlargement 2.70
    (90, 60, 40, 70, None),      # anisotropic: reduce x, enlarge y
    (80, 50, 33, 50, None),      # horizontal pass only
    (50, 80, 50, 33, None),      # vertical pass only
    (90, 60, 40, 30, (10, 5, 64, 48)),  # a source box (the crop fit's path)
    (512, 512, 640, 480, None),  # the demo set's 512x512 files at 640x480: 16-bit ties
]

failures = []


def check(ok, msg):
    if not ok:
        failures.append(msg)
        print("FAIL:", msg)


def natural(h, w, c, seed, maxv):
    """A smooth, photograph-like test image in [0, maxv] (values clip at both ends in places,
    as exposures do)."""
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[0:h, 0:w].astype(np.float64)
    y, x = (y + 0.5) / h, (x + 0.5) / w
    out = np.empty((h, w, c))
    for ch in range(c):
        v = rng.uniform(0.2, 0.5) + rng.uniform(-0.3, 0.3) * x + rng.uniform(-0.3, 0.3) * y
        fx, fy, ph = rng.uniform(0.5, 2.5), rng.uniform(0.5, 2.5), rng.uniform(0, 2 * np.pi)
        v += 0.12 * np.sin(2 * np.pi * (fx * x + fy * y) + ph)
        for _ in range(6):  # soft blobs
            cx, cy, s = rng.uniform(0, 1), rng.uniform(0, 1), rng.uniform(0.03, 0.15)
            v += rng.uniform(-0.45, 0.45) * np.exp(-((x - cx) ** 2 + (y - cy) ** 2) / (2 * s * s))
        for _ in range(2):  # hard-edged discs (specimen edges): ringing, clipping
            cx, cy, r = rng.uniform(0.2, 0.8), rng.uniform(0.2, 0.8), rng.uniform(0.05, 0.2)
            v += rng.uniform(-0.4, 0.4) * (((x - cx) ** 2 + (y - cy) ** 2) < r * r)
        v += rng.normal(0.0, 1.5 / 255.0, (h, w))  # mild sensor noise
        out[:, :, ch] = v
    dtype = np.uint8 if maxv == 255 else np.uint16
    return np.clip(np.rint(out * maxv), 0, maxv).astype(dtype)


def kiln_resize(tool, img, flt, ow, oh, box=None):
    h, w, c = img.shape
    depth = 8 if img.dtype == np.uint8 else 16
    args = [tool, str(w), str(h), str(c), str(depth), flt, str(ow), str(oh)]
    if box:
        args += [str(v) for v in box]
    data = np.ascontiguousarray(img, dtype=img.dtype.newbyteorder("="))
    r = subprocess.run(args, input=data.tobytes(), stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    if r.returncode != 0:
        raise SystemExit(f"{' '.join(args)}: {r.stderr.decode().strip()}")
    out = np.frombuffer(r.stdout, dtype=data.dtype)
    if out.size != ow * oh * c:
        raise SystemExit(f"{' '.join(args)}: {out.size} samples, expected {ow * oh * c}")
    return out.reshape(oh, ow, c)


def pil_box(box, w, h):
    return (0, 0, w, h) if box is None else (box[0], box[1], box[0] + box[2], box[1] + box[3])


def pil_8bit(img, flt, ow, oh, box):
    h, w, c = img.shape
    im = Image.fromarray(img[:, :, 0] if c == 1 else img, "L" if c == 1 else "RGB")
    out = np.asarray(im.resize((ow, oh), PIL_FILTER[flt], box=pil_box(box, w, h)))
    return out.reshape(oh, ow, c)


def pil_pass(chan, flt, size, box):
    """One PIL mode "I" resize of a single channel, clipped to [0, 65535]."""
    im = Image.fromarray(chan.astype(np.int32), "I").resize(size, PIL_FILTER[flt], box=box)
    return np.clip(np.asarray(im), 0, 65535).astype(np.uint16)


def pil_16bit(img, flt, ow, oh, box, tool=None):
    """PIL mode "I", one axis at a time, clipped to [0, 65535] after each pass (see above).
    With tool, also runs kiln on each pass's input alone and returns the largest difference
    of a single pass: (result, per-pass max diff)."""
    h, w, c = img.shape
    x0, y0, x1, y1 = pil_box(box, w, h)
    out = np.empty((oh, ow, c), np.uint16)
    worst = 0
    for ch in range(c):
        x = img[:, :, ch]
        if (ow, x0, x1) != (w, 0, w):  # PIL and kiln both skip an identity pass
            nx = pil_pass(x, flt, (ow, h), (x0, 0, x1, h))
            if tool:
                k = kiln_resize(tool, x[:, :, None], flt, ow, h, (x0, 0, x1 - x0, h))
                worst = max(worst, int(np.abs(k[:, :, 0].astype(np.int64) - nx).max()))
            x = nx
        if (oh, y0, y1) != (h, 0, h):
            nx = pil_pass(x, flt, (ow, oh), (0, y0, ow, y1))
            if tool:
                k = kiln_resize(tool, x[:, :, None], flt, ow, oh, (0, y0, ow, y1 - y0))
                worst = max(worst, int(np.abs(k[:, :, 0].astype(np.int64) - nx).max()))
            x = nx
        out[:, :, ch] = x
    return (out, worst) if tool else out


# ---- docs/resize.md in numpy ("Filters", "Coefficients", "Per-pixel arithmetic") ----

BITS = 22
SUPPORT = {"box": 0.5, "bilinear": 1.0, "bicubic": 2.0, "lanczos3": 3.0}


def kernel(flt, x):
    """The kernel table of docs/resize.md (numpy's sinc is sin(pi x)/(pi x))."""
    ax = abs(x)
    if flt == "box":
        return 1.0 if -0.5 < x <= 0.5 else 0.0
    if flt == "bilinear":
        return 1.0 - ax if ax < 1 else 0.0
    if flt == "bicubic":
        a = -0.5
        if ax < 1:
            return (a + 2) * ax ** 3 - (a + 3) * ax ** 2 + 1
        return a * ax ** 3 - 5 * a * ax ** 2 + 8 * a * ax - 4 * a if ax < 2 else 0.0
    return float(np.sinc(x) * np.sinc(x / 3)) if ax < 3 else 0.0  # lanczos3


def axis_matrix(flt, in_size, b, n, m, fix_sum=True):
    """The integer coefficients mapping [b, b + n) of an in_size axis onto m outputs, as an
    [m, in_size] matrix whose rows sum to 2^22 (fix_sum) or to whatever the rounding gives."""
    mat = np.zeros((m, in_size), np.int64)
    if flt == "nearest":
        mat[np.arange(m), nearest_index(b, n, m)] = 1 << BITS
        return mat
    scale = n / m
    s = max(scale, 1.0)
    support = SUPPORT[flt] * s
    for i in range(m):
        centre = b + (i + 0.5) * scale
        first = max(0, int(centre - support + 0.5))  # int() truncates, as the doc's trunc
        last = min(in_size, int(centre + support + 0.5))
        w = [kernel(flt, (t - centre + 0.5) / s) for t in range(first, last)]
        total = 0.0
        for v in w:  # in order, as a plain loop sums
            total += v
        q = [int(v / total * (1 << BITS) + (0.5 if v >= 0 else -0.5)) for v in w]
        if fix_sum:
            # docs/resize.md says "the largest q_t"; kiln takes the first of equal largest ones
            # (the choice changes output bytes: see the note in docs/resize.md).
            big = max(range(len(q)), key=lambda t: (q[t], -t))
            q[big] += (1 << BITS) - sum(q)
        mat[i, first:last] = q
    return mat


def apply_axis(x, mat, axis, maxv):
    """One pass: out_i = floor((sum_t q_it v_t + 2^21) / 2^22) clamped to [0, maxv], over the
    nonzero window of each row of mat only (so large images stay quick)."""
    x = np.moveaxis(x, axis, 0)
    out = np.empty((mat.shape[0],) + x.shape[1:], np.int64)
    for i, row in enumerate(mat):
        nz = np.nonzero(row)[0]
        lo, hi = nz[0], nz[-1] + 1
        out[i] = np.tensordot(row[lo:hi], x[lo:hi], axes=(0, 0))
    out = np.clip((out + (1 << (BITS - 1))) >> BITS, 0, maxv)
    return np.moveaxis(out, 0, axis)


def doc_resize(img, flt, ow, oh, box=None, fix_sum=True):
    """Horizontal pass, then vertical; an axis whose output equals its whole input is left
    alone."""
    h, w, _ = img.shape
    maxv = 255 if img.dtype == np.uint8 else 65535
    bx, by, bw, bh = box if box else (0, 0, w, h)
    x = img.astype(np.int64)
    if (ow, bx, bw) != (w, 0, w):
        x = apply_axis(x, axis_matrix(flt, w, bx, bw, ow, fix_sum), 1, maxv)
    if (oh, by, bh) != (h, 0, h):
        x = apply_axis(x, axis_matrix(flt, h, by, bh, oh, fix_sum), 0, maxv)
    return x


def nearest_index(b, n, m):
    """docs/resize.md: output i takes input b + ((2i + 1) n) div (2m)."""
    i = np.arange(m, dtype=np.int64)
    return b + ((2 * i + 1) * n) // (2 * m)


def pil_nearest(img, ow, oh, box):
    h, w, c = img.shape
    if img.dtype == np.uint8:
        return pil_8bit(img, "nearest", ow, oh, box)
    out = np.empty((oh, ow, c), np.uint16)
    for ch in range(c):
        im = Image.fromarray(np.ascontiguousarray(img[:, :, ch]), "I;16")
        out[:, :, ch] = np.asarray(im.resize((ow, oh), Image.NEAREST, box=pil_box(box, w, h)))
    return out


def pil_nearest_explained(img, got, ow, oh, box):
    """True when every sample where PIL's NEAREST differs from the exact formula is one where
    the exact source position (2i+1) n / (2m) is an integer (a pixel boundary) on an axis and
    taking the pixel before it on that axis gives PIL's value."""
    h, w, _ = img.shape
    bx, by, bw, bh = box if box else (0, 0, w, h)
    ix, iy = nearest_index(bx, bw, ow), nearest_index(by, bh, oh)
    on_x = ((2 * np.arange(ow) + 1) * bw) % (2 * ow) == 0
    on_y = ((2 * np.arange(oh) + 1) * bh) % (2 * oh) == 0
    alt_x = np.where(on_x, np.maximum(ix - 1, 0), ix)
    alt_y = np.where(on_y, np.maximum(iy - 1, 0), iy)
    ok = np.zeros((oh, ow), bool)
    for yy in (iy, alt_y):
        for xx in (ix, alt_x):
            ok |= np.all(img[yy][:, xx] == got, axis=2)
    return bool(ok.all())


def compare_pil(tool):
    summary = {}
    seed = 1000
    for flt in FILTERS:
        for depth in (8, 16):
            maxv = 255 if depth == 8 else 65535
            for c in (1, 3):
                for (w, h, ow, oh, box) in CASES:
                    seed += 1
                    img = natural(h, w, c, seed, maxv)
                    got = kiln_resize(tool, img, flt, ow, oh, box).astype(np.int64)
                    name = f"{flt:8s} {depth:2d}-bit C={c} {w}x{h}->{ow}x{oh}" + \
                        (f" box {box}" if box else "")
                    doc = doc_resize(img, flt, ow, oh, box)
                    per_pass = 0
                    check(np.array_equal(got, doc), f"{name}: differs from docs/resize.md in "
                          f"{np.sum(got != doc)} samples (max {np.abs(got - doc).max()})")
                    if flt == "nearest":
                        pil = pil_nearest(img, ow, oh, box).astype(np.int64)
                        check(pil_nearest_explained(img, pil, ow, oh, box),
                              f"{name}: PIL NEAREST differs other than at pixel boundaries")
                    elif depth == 8:
                        pil = pil_8bit(img, flt, ow, oh, box).astype(np.int64)
                    else:
                        pil, per_pass = pil_16bit(img, flt, ow, oh, box, tool)
                        pil = pil.astype(np.int64)
                    d = np.abs(got - pil)
                    extra = f" (one pass: max {per_pass})" if depth == 16 and flt != "nearest" \
                        else ""
                    print(f"{name}: exact {np.mean(d == 0):.4f} max {d.max()} vs PIL{extra}")
                    if flt != "nearest":
                        # 8-bit: +-1. 16-bit: +-1 per pass; the whole resize +-2 (see above).
                        tol = 1 if depth == 8 else 2
                        check(d.max() <= tol, f"{name}: differs from PIL by {d.max()} "
                              f"at {np.argwhere(d == d.max())[:4].tolist()} (y, x, c)")
                        check(depth == 8 or per_pass <= 1,
                              f"{name}: one pass differs from PIL's by {per_pass}")
                    if flt != "nearest" and depth == 8:
                        nofix = doc_resize(img, flt, ow, oh, box, fix_sum=False)
                        check(np.array_equal(pil, nofix), f"{name}: PIL is not docs/resize.md "
                              f"without the residue step ({np.sum(pil != nofix)} samples)")
                    s = summary.setdefault((flt, depth), [0, 0, 0, 0])
                    s[0] += int(np.sum(d == 0))
                    s[1] += d.size
                    s[2] = max(s[2], int(d.max()))
                    if depth == 16 and flt != "nearest":
                        s[3] = max(s[3], per_pass)
    print("summary against PIL (all cases, grey and RGB; kiln equals docs/resize.md exactly):")
    for (flt, depth), (eq, n, mx, mp) in summary.items():
        extra = f" (one pass: max {mp})" if depth == 16 and flt != "nearest" else ""
        print(f"  {flt:8s} {depth:2d}-bit: exact {eq / n:.6f} ({n - eq} of {n} samples differ), "
              f"max diff {mx}{extra}")


def analytic(tool):
    # Constant images: weights sum to exactly 2^22 (docs/resize.md), so out == in, exactly,
    # including the extremes where negative lobes would otherwise clip.
    for flt in FILTERS:
        for depth, values in ((8, (0, 1, 128, 254, 255)), (16, (0, 1, 32768, 65534, 65535))):
            for v in values:
                for (w, h, ow, oh, box) in CASES[:8]:
                    img = np.full((h, w, 2), v, np.uint8 if depth == 8 else np.uint16)
                    got = kiln_resize(tool, img, flt, ow, oh, box)
                    check(np.all(got == v), f"constant {v} {depth}-bit {flt} {w}x{h}->{ow}x{oh}: "
                          f"got {np.unique(got)[:5]}")
    print("analytic: constant images stay constant (5 filters, 8 sizes, 10 values)")

    # Linear ramps under bilinear enlargement. Input pixel t (centre t + 0.5) holds a + b t;
    # output i has centre c = (i + 0.5) n / m, and linear interpolation between the two
    # neighbouring centres gives exactly a + b (c - 0.5) whenever 0.5 <= c <= n - 0.5.
    # kiln rounds once (a horizontal ramp has a constant vertical pass), so the error is at most
    # 0.5 plus the coefficient quantisation (2^-22 relative per weight).
    worst = 0.0
    for depth, a, b, n, m in ((16, 1000, 500, 100, 263), (16, 60000, -577, 97, 250),
                              (8, 3, 2, 120, 301), (8, 250, -3, 64, 128)):
        for axis in (0, 1):
            t = a + b * np.arange(n, dtype=np.int64)
            if axis == 0:  # ramp along x, 7 identical rows, enlarged 3x vertically too
                img, ow, oh = np.repeat(t[None, :], 7, axis=0)[:, :, None], m, 21
            else:
                img, ow, oh = np.repeat(t[:, None], 7, axis=1)[:, :, None], 21, m
            img = img.astype(np.uint8 if depth == 8 else np.uint16)
            got = kiln_resize(tool, img, "bilinear", ow, oh).astype(np.float64)
            c = (np.arange(m) + 0.5) * n / m
            want = a + b * (c - 0.5)
            inside = (c >= 0.5) & (c <= n - 0.5)
            line = got[:, :, 0][0] if axis == 0 else got[:, :, 0][:, 0]
            both = got[:, :, 0] if axis == 0 else got[:, :, 0].T
            check(np.all(both == both[:1]), f"ramp {depth}-bit axis {axis}: not constant across")
            err = np.abs(line - want)[inside]
            worst = max(worst, float(err.max()))
            check(err.max() <= 0.5 + 1e-3, f"bilinear ramp {depth}-bit {n}->{m} axis {axis}: "
                  f"error {err.max():.4f} > 0.5")
    print(f"analytic: bilinear reproduces linear ramps inside the borders (max error {worst:.4f})")

    # Box filter at factor 2 and 4 along one axis: the kernel covers exactly the 2 or 4 inputs
    # of a block with equal weights (2^21 or 2^20), so the output is floor((sum + f/2) / f),
    # the block mean rounded half up.
    for depth in (8, 16):
        maxv = 255 if depth == 8 else 65535
        for f in (2, 4):
            for c in (1, 3):
                img = natural(48, 64, c, 77 + f + c + depth, maxv)
                s = img.astype(np.int64)
                got = kiln_resize(tool, img, "box", 64 // f, 48).astype(np.int64)
                want = (s.reshape(48, 64 // f, f, c).sum(axis=2) + f // 2) // f
                check(np.array_equal(got, want), f"box x{f} horizontal {depth}-bit C={c}")
                got = kiln_resize(tool, img, "box", 64, 48 // f).astype(np.int64)
                want = (s.reshape(48 // f, f, 64, c).sum(axis=1) + f // 2) // f
                check(np.array_equal(got, want), f"box x{f} vertical {depth}-bit C={c}")
    print("analytic: box at factor 2 and 4 along one axis is the block mean rounded half up")


def main(argv):
    if len(argv) != 2:
        print("usage: resize_reference.py KILN_RESIZE_CHECK", file=sys.stderr)
        return 2
    compare_pil(argv[1])
    analytic(argv[1])
    if failures:
        print(f"{len(failures)} check(s) failed")
        return 1
    print("ok")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
