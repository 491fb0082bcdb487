#!/usr/bin/env python3
"""Reference implementation of kiln's near-duplicate links (`kiln-near-v1`) over stored
fingerprints, written from docs/near-duplicates.md (sections 1.3, 2, 3 and 4) and the
catalog.csv column of docs/formats.md alone. Standard library only; every step is plain integer
arithmetic, as the document specifies it; candidates are found by brute force over all pairs
and orientations (kiln's multi-index search finds exactly the same pairs, the document says).
A specification check, not production code: it is quadratic in the number of pictures.

Used by split_ref.py for rule 5 of docs/split.md section 2.
"""
import base64
import math

Q20 = 1 << 20
SIDE = 16
NCELL = SIDE * SIDE
HUE = 4
HUE_FLOOR = 3 * 257 * 16          # §3 Hue: three 8-bit levels, in grid units
TRIM = 31                         # §3: cells left out of the trimmed correlations
LOWINFO, SMALL = 1, 2             # docs/formats.md: flag bits

# docs/near-duplicates.md §2 and docs/split.md §2.1: the default settings.
DEFAULTS = {"radius_full": 6, "radius_centre": 6, "radius_turned": 4, "radius_coarse": 4,
            "coarse_confirm": 14, "max_pictures": 8}
FULL, CENTRE, TURNED, COARSE, COARSE_CENTRE = 1, 2, 4, 8, 16


class Fingerprint:
    """docs/formats.md `near_fingerprint`: base64 of 312 bytes."""

    def __init__(self, text):
        raw = base64.b64decode(text, validate=True)
        self.text = text
        if len(text) != 416 or len(raw) != 312 or raw[0] != 1:
            raise ValueError("not a version-1 fingerprint")
        self.flags = raw[1]
        self.info = int.from_bytes(raw[2:4], "big")
        self.hash = int.from_bytes(raw[4:12], "big")
        self.centre = int.from_bytes(raw[12:20], "big")
        self.scale = int.from_bytes(raw[20:24], "big")
        sb = lambda b: b - 256 if b > 127 else b
        self.chroma = [(sb(raw[24 + 2 * i]), sb(raw[25 + 2 * i])) for i in range(HUE * HUE)]
        self.thumb = list(raw[56:312])

    @property
    def lowinfo(self):
        return bool(self.flags & LOWINFO)


def popcount(x):
    return bin(x).count("1")


def isqrt(x):
    return math.isqrt(x)


def trunc_div(p, q):
    """Division rounded toward zero (q > 0 or q < 0)."""
    r = abs(p) // abs(q)
    return r if (p >= 0) == (q > 0) else -r


def orient_hash(h, o):
    """§1.3 Orientation: the hash of the picture displayed under Exif orientation o."""
    out = 0
    for v in range(8):
        for u in range(8):
            if u == 0 and v == 0:
                continue
            sv, su = (u, v) if o >= 5 else (v, u)
            bit = (h >> (64 - (8 * sv + su))) & 1
            if (u % 2 == 1 and o in (2, 3, 6, 7)) != (v % 2 == 1 and o in (3, 4, 7, 8)):
                bit ^= 1
            out |= bit << (64 - (8 * v + u))
    return out


def coarse(h):
    """§2: the 35 bits of the 6x6 lowest frequencies."""
    out = 0
    for v in range(6):
        for u in range(6):
            if u or v:
                out |= ((h >> (64 - (8 * v + u))) & 1) << (64 - (6 * v + u))
    return out


def orient_array(arr, n, o):
    """§3: B[y][x] = b[sy][sx] for an n x n array displayed under o."""
    out = [0] * (n * n)
    for y in range(n):
        for x in range(n):
            ty = n - 1 - y if o in (3, 4, 7, 8) else y
            tx = n - 1 - x if o in (2, 3, 6, 7) else x
            sy, sx = (tx, ty) if o >= 5 else (ty, tx)
            out[y * n + x] = arr[sy * n + sx]
    return out


def candidates(fps, p):
    """§2 by brute force: [(a, b, o, sources, distance, centre distance)] over pictures a < b
    that are not low-information, in the order (a, b, o)."""
    turned = [[orient_hash(f.hash, o) for o in range(1, 9)] for f in fps]
    turned_c = [[orient_hash(f.centre, o) for o in range(1, 9)] for f in fps]
    co = [(coarse(f.hash), coarse(f.centre)) for f in fps]
    out = []
    n = len(fps)
    for a in range(n):
        fa = fps[a]
        if fa.lowinfo:
            continue
        for b in range(a + 1, n):
            if fps[b].lowinfo:
                continue
            for o in range(1, 9):
                d = popcount(fa.hash ^ turned[b][o - 1])
                dc = popcount(fa.centre ^ turned_c[b][o - 1])
                src = 0
                if o == 1:
                    if d <= p["radius_full"]:
                        src |= FULL
                    if dc <= p["radius_centre"]:
                        src |= CENTRE
                    if d <= p["coarse_confirm"]:
                        if popcount(co[a][0] ^ co[b][0]) <= p["radius_coarse"]:
                            src |= COARSE
                        if popcount(co[a][1] ^ co[b][1]) <= p["radius_coarse"]:
                            src |= COARSE_CENTRE
                elif d <= p["radius_turned"]:
                    src |= TURNED
                if src:
                    out.append((a, b, o, src, d, dc))
    return out


# ---------------------------------------------------------------- §3 the pixel check

def hue(fa, fb, o):
    if not fa.scale or not fb.scale:
        return Q20
    idx = orient_array(list(range(HUE * HUE)), HUE, o)
    floor = (127 * HUE_FLOOR) ** 2
    cos = []
    for i in range(HUE * HUE):
        p, q = fa.chroma[i], fb.chroma[idx[i]]
        np2, nq2 = p[0] ** 2 + p[1] ** 2, q[0] ** 2 + q[1] ** 2
        if np2 * fa.scale ** 2 < floor or nq2 * fb.scale ** 2 < floor:
            continue
        cos.append(trunc_div(Q20 * (p[0] * q[0] + p[1] * q[1]), isqrt(np2) * isqrt(nq2)))
    if len(cos) < 4:
        return Q20
    cos.sort()
    return max(-Q20, min(Q20, cos[len(cos) // 4]))


def corr(x, y, cells=None):
    """§3 correlation over a set of cells (all when None)."""
    cells = range(NCELL) if cells is None else cells
    n = sx = sy = sxx = syy = sxy = 0
    for i in cells:
        n += 1
        sx += x[i]
        sy += y[i]
        sxx += x[i] * x[i]
        syy += y[i] * y[i]
        sxy += x[i] * y[i]
    if n < 2:
        return 0
    dx, dy = isqrt(n * sxx - sx * sx), isqrt(n * syy - sy * sy)
    if dx == 0 or dy == 0:
        return 0
    return max(-Q20, min(Q20, trunc_div(Q20 * (n * sxy - sx * sy), dx * dy)))


def neighbours(i):
    y, x = divmod(i, SIDE)
    return [yy * SIDE + xx for yy in (y - 1, y, y + 1) for xx in (x - 1, x, x + 1)
            if 0 <= yy < SIDE and 0 <= xx < SIDE]


def detail(v):
    s1, s2 = sum(v), sum(t * t for t in v)
    sd = isqrt(NCELL * s2 - s1 * s1)
    out = []
    for i in range(NCELL):
        nb = neighbours(i)
        c = len(nb)
        ls, lss = sum(v[j] for j in nb), sum(v[j] * v[j] for j in nb)
        den = isqrt(c * lss - ls * ls) + c * sd // (50 * NCELL)
        out.append(trunc_div(1024 * (c * v[i] - ls), den) if den else 0)
    return out


def keeps(v, kept):
    n, s, ss = NCELL, sum(v), sum(t * t for t in v)
    nk, sk, ssk = len(kept), sum(v[i] for i in kept), sum(v[i] * v[i] for i in kept)
    return 4 * n * (nk * ssk - sk * sk) >= nk * (n * ss - s * s)


def measures(x, y):
    """global, global_trim, local, local_trim, trim_ok of two 1/16-unit arrays."""
    g = corr(x, y)
    sx, sy = sum(x), sum(y)
    dx = isqrt(NCELL * sum(t * t for t in x) - sx * sx)
    dy = isqrt(NCELL * sum(t * t for t in y) - sy * sy)
    z = [abs((NCELL * x[i] - sx) * dy - (NCELL * y[i] - sy) * dx) for i in range(NCELL)]
    trimmed = set(sorted(range(NCELL), key=lambda i: (-z[i], i))[:TRIM])
    kept = [i for i in range(NCELL) if i not in trimmed]
    gt = corr(x, y, kept)
    trim_ok = keeps(x, kept) or keeps(y, kept)
    lx, ly = detail(x), detail(y)
    inner = [i for i in range(NCELL) if not any(j in trimmed for j in neighbours(i))]
    return {"global": g, "global_trim": gt, "local": corr(lx, ly),
            "local_trim": corr(lx, ly, inner), "trim_ok": trim_ok}


def decide(m, o, aligned):
    m["trimmed"] = o == 1 and m["trim_ok"]
    g = m["global_trim"] if m["trimmed"] else m["global"]
    l = m["local_trim"] if m["trimmed"] else m["local"]
    need = 950 if o != 1 else 750 if aligned else 700
    return 1000 * g >= 930 * Q20 and 1000 * l >= need * Q20


OPTIONS = [(40, 0), (38, 0), (38, 1), (38, 2), (36, 0), (36, 2), (36, 4)]


def positions(opt):
    s, e = OPTIONS[opt]
    out = []
    for i in range(SIDE):
        p = (2 * 256 * (32 * e + s * (2 * i + 1) - 40) + 80) // 160   # round_half_up(256 * num / 80)
        out.append(min(max(p, 0), 15 * 256))
    return out


def resample_1d(vals, opt):
    out = []
    for p in positions(opt):
        k, f = divmod(p, 256)
        out.append(vals[k] * (256 - f) + (vals[k + 1] * f if f else 0))
    return out


def profile_score(a, b):
    n = SIDE
    sa, sb = sum(a), sum(b)
    da, db = isqrt(n * sum(t * t for t in a) - sa * sa), isqrt(n * sum(t * t for t in b) - sb * sb)
    if not da or not db:
        return 0
    return trunc_div(Q20 * (n * sum(a[i] * b[i] for i in range(n)) - sa * sb), da * db)


def best_axis(P, F, cols):
    def sums(v):
        return [sum(v[y * SIDE + x] for y in range(SIDE)) if cols else
                sum(v[x * SIDE + y] for y in range(SIDE)) for x in range(SIDE)]
    pp, ff = sums(P), sums(F)
    best, best_s = 0, profile_score(pp, ff)
    for opt in range(1, 7):
        sc = profile_score(resample_1d(pp, opt), ff)
        if sc > best_s:
            best, best_s = opt, sc
    return best


def warp(thumb8, ix, iy):
    rows = [resample_1d(thumb8[y * SIDE:(y + 1) * SIDE], ix) for y in range(SIDE)]
    out = [0] * NCELL
    for x in range(SIDE):
        col = resample_1d([rows[y][x] for y in range(SIDE)], iy)
        for y in range(SIDE):
            out[y * SIDE + x] = (col[y] + 2048) >> 12
    return out


_checked = {}


def check(fa, fb, o, src):
    """§3: the measures that decided (or None) for candidate (a, b, o) found by searches src.
    Remembered per pair of fingerprints, since test catalogues reuse them."""
    key = (fa.text, fb.text, o, bool(src & (FULL | CENTRE | TURNED)))
    if key not in _checked:
        _checked[key] = _check(fa, fb, o, src)
    return _checked[key]


def _check(fa, fb, o, src):
    if fa.lowinfo or fb.lowinfo:
        return None
    h = hue(fa, fb, o)
    if 1000 * h < 950 * Q20:
        return None
    bt = orient_array(fb.thumb, SIDE, o)
    va, vb = [16 * t for t in fa.thumb], [16 * t for t in bt]
    if not src & (FULL | CENTRE | TURNED) and 1000 * corr(va, vb) < 500 * Q20:
        return None                                                     # §3 Gate
    m = measures(va, vb)
    if decide(m, o, False):
        m["hue"], m["warp"] = h, 0
        return m
    if 1000 * m["global"] < 500 * Q20:
        return None
    best, best_g = 0, None
    for moves_b in (0, 1):
        P, F = (vb, va) if moves_b else (va, vb)
        ix, iy = best_axis(P, F, True), best_axis(P, F, False)
        if ix == 0 and iy == 0:
            continue
        w = warp(bt if moves_b else fa.thumb, ix, iy)
        g = corr(va, w) if moves_b else corr(w, vb)
        if best_g is None or g > best_g:
            best, best_g = (moves_b, ix, iy, w), g
    if not best:
        return None
    moves_b, ix, iy, w = best
    m = measures(va, w) if moves_b else measures(w, vb)
    if not decide(m, o, True):
        return None
    m["hue"], m["warp"] = h, 1 + 48 * moves_b + 7 * ix + iy - 1
    return m


# ---------------------------------------------------------------- §4 the unit rule

def unit_rule(links, exact_of, labels_of, max_pictures):
    """links: [(a, b, o, distance, m)] over items given in order; exact_of[i]: exact unit id of
    item i (any hashable); labels_of[i]: class or None. Returns the verdicts ("linked",
    "refused: different labels", "refused: too many pictures") and the accepted links."""
    parent = {}

    def find(u):
        while parent.get(u, u) != u:
            u = parent[u]
        return u

    labels, size = {}, {}
    for i, e in exact_of.items():
        labels.setdefault(e, set())
        size[e] = 1
        if labels_of[i] is not None:
            labels[e].add(labels_of[i])

    def key(k):
        a, b, o, d, m = links[k]
        g = m["global_trim"] if m["trimmed"] else m["global"]
        l = m["local_trim"] if m["trimmed"] else m["local"]
        return (-g, -l, d, k)

    verdict = {}
    for k in sorted(range(len(links)), key=key):
        a, b = links[k][0], links[k][1]
        x, y = find(exact_of[a]), find(exact_of[b])
        if x == y:
            verdict[k] = "linked"
        elif labels[x] and labels[y] and (labels[x] != labels[y] or len(labels[x]) > 1):
            verdict[k] = "refused: different labels"
        elif size[x] + size[y] > max_pictures:
            verdict[k] = "refused: too many pictures"
        else:
            verdict[k] = "linked"
            parent[y] = x
            labels[x] |= labels[y]
            size[x] += size[y]
    return verdict
