#!/usr/bin/env python3
"""Reference implementation of kiln's split algorithm `kiln-split-v2`, written from
docs/split.md (and docs/formats.md for catalog.csv, items.csv and the %XX name escape;
near_ref.py implements docs/near-duplicates.md for rule 5) alone. Standard library only; a
specification check, not production code.

    split_ref.py catalog.csv --seed N [--ratios A:B[:C]] [--mode exact|stable] [--stratify]
                 [--near-duplicates on|off] [--near-radius BITS] [--near-unit-limit N]
                 [--keep OLD_MANIFEST] [--keep-conflicts test] [-o OUT.csv] [--links OUT.csv]

Writes one CSV row per ok catalogue row: row (0-based data row of the input), source, path,
member, unit (16 hex digits), split. --links writes the checked near-duplicate links: rows of
both items, orientation, distance, verdict.
"""
import argparse
import csv
import hashlib
import hmac
import os
import re
import sys
from collections import Counter, defaultdict
from decimal import Decimal, InvalidOperation

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import near_ref  # noqa: E402

SPLITS = ("train", "val", "test")
ALGORITHM = b"kiln-split-v2"


class SplitError(Exception):
    pass


def unescape(text):
    """docs/formats.md: undo the %XX escape of name-derived fields, giving the raw bytes."""
    return re.sub(rb"%([0-9A-Fa-f]{2})", lambda m: bytes([int(m.group(1), 16)]),
                  text.encode("utf-8"))


def read_csv(path):
    with open(path, newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def parse_ratios(text):
    """§5: shares -> (r_train, r_val, r_test) in millionths."""
    parts = text.split(":")
    if len(parts) not in (2, 3):
        raise SplitError("ratios need two or three shares: " + text)
    vals, fractional = [], False
    for p in parts:
        if p.endswith("%") or "." in p:
            fractional = True
        try:
            d = Decimal(p[:-1] if p.endswith("%") else p)
        except InvalidOperation:
            raise SplitError("bad share: " + p)
        m = d * 1000000
        if d < 0 or m != m.to_integral_value():
            raise SplitError("share is negative or finer than a millionth: " + p)
        vals.append(int(m))
    if fractional and sum(vals) not in (1000000, 100000000):
        raise SplitError("shares with a decimal point or % must sum to 1 or 100")
    if len(vals) == 2:
        vals = [vals[0], 0, vals[1]]
    if vals[0] <= 0:
        raise SplitError("the training share must be positive")
    return vals


def near_links(items, exact_of, settings):
    """§2 rule 5 and §2.1: the checked near-duplicate links among items (ok rows), each
    (item a, item b, orientation, distance, verdict), and the accepted ones."""
    pics = sorted((i for i, r in enumerate(items) if r.get("near_fingerprint")),
                  key=lambda i: (bytes.fromhex(items[i]["sha256"]), i))
    fps = [near_ref.Fingerprint(items[i]["near_fingerprint"]) for i in pics]
    links = []
    for a, b, o, src, d, dc in near_ref.candidates(fps, settings):
        m = near_ref.check(fps[a], fps[b], o, src)
        if m is not None:
            links.append((pics[a], pics[b], o, d, m))
    labels = {i: (int(r["class"]) if r["class"] not in ("", "-1") else None)
              for i, r in enumerate(items)}
    verdict = near_ref.unit_rule(links, exact_of, labels, settings["max_pictures"])
    out = [(a, b, o, d, verdict[k]) for k, (a, b, o, d, m) in enumerate(links)]
    return out, [(a, b) for a, b, o, d, v in out if v == "linked"]


def read_old_assignment(manifest):
    """§6 kept units: (file SHA-256 -> set of old splits) from the items.csv next to the
    manifest (OLD_MANIFEST may name manifest.json or its folder)."""
    folder = manifest if os.path.isdir(manifest) else os.path.dirname(manifest)
    old = defaultdict(set)
    for r in read_csv(os.path.join(folder, "items.csv")):
        if r["split"]:
            old[r["sha256"]].add(SPLITS.index(r["split"]))
    return old


def assign(rows, seed, ratios="80:10:10", mode="exact", stratify=False, near=None,
           keep=None, keep_conflicts=None, links_out=None):
    """rows: catalogue rows (dicts). near: the near-duplicate settings (near_ref.DEFAULTS, maybe
    changed), or None when off. Returns {row index: (unit hex, split name)} for ok rows and a
    list of report lines; links_out, a list, receives the checked links (rows, o, d, verdict)."""
    r = parse_ratios(ratios)
    R = sum(r)
    report = []
    idx = [i for i, row in enumerate(rows) if row["status"] == "ok"]          # §1
    items = [rows[i] for i in idx]
    n = len(items)

    # §2 units: union-find over the four relations.
    parent = list(range(n))

    def find(a):
        while parent[a] != a:
            parent[a] = parent[parent[a]]
            a = parent[a]
        return a

    def union(a, b):
        a, b = find(a), find(b)
        if a != b:
            parent[max(a, b)] = min(a, b)

    for column in ("group", "sha256", "pixel_sha256", "record_digest"):     # rules 1-4
        first = {}
        for i, row in enumerate(items):
            v = row.get(column, "")
            v = unescape(v) if column == "group" else v
            if v:
                union(i, first.setdefault(v, i))
    if near is not None:                                                       # rule 5
        exact_of = {i: find(i) for i in range(n)}
        checked, accepted = near_links(items, exact_of, near)
        for a, b in accepted:
            union(a, b)
        if links_out is not None:
            links_out.extend((idx[a], idx[b], o, d, v) for a, b, o, d, v in checked)
    members = defaultdict(list)
    for i in range(n):
        members[find(i)].append(i)
    units = list(members.values())

    # §3 unit id and key.
    key_of = seed.to_bytes(8, "little")
    info = []  # (key, id bytes, member list)
    for m in units:
        groups = [unescape(items[i]["group"]) for i in m if items[i]["group"]]
        if groups:
            kind, uid = 1, min(groups)
        else:
            kind, uid = 0, min(bytes.fromhex(items[i]["sha256"]) for i in m)
        mac = hmac.new(key_of, ALGORITHM + bytes([kind]) + uid, hashlib.sha256).digest()
        info.append((int.from_bytes(mac[:8], "big"), uid, m))

    # §4 strata.
    def stratum(m):
        if not stratify:
            return 0
        c = Counter(int(items[i]["class"]) if items[i]["class"] not in ("", "-1") else -1
                    for i in m)
        best = max(c.values())
        return min(k for k, v in c.items() if v == best)

    # §6 kept units.
    split_of = {}
    if keep is not None:
        old = read_old_assignment(keep)
        for u, (_, _, m) in enumerate(info):
            olds = set()
            for i in m:
                olds |= old.get(items[i]["sha256"], set())
            if not olds:
                continue
            if len(olds) > 1:
                named = [items[i]["path"] for i in m if old.get(items[i]["sha256"])]
                if keep_conflicts != "test":
                    raise SplitError("old items of one unit are in different splits: "
                                     + ", ".join(named))
                report.append("conflict resolved to %s: %s" % (SPLITS[max(olds)],
                                                               ", ".join(named)))
            split_of[u] = max(olds)

    if mode == "exact":
        strata = defaultdict(list)
        for u, (_, _, m) in enumerate(info):
            strata[stratum(m)].append(u)
        for us in strata.values():
            N = sum(len(info[u][2]) for u in us)
            C = [0, 0, 0]
            for u in us:
                if u in split_of:
                    C[split_of[u]] += len(info[u][2])
            rest = sorted((u for u in us if u not in split_of),
                          key=lambda u: (info[u][0], info[u][1]))
            for u in rest:
                s = max((s for s in range(3) if r[s] > 0),
                        key=lambda s: (r[s] * N - C[s] * R, -s))
                split_of[u] = s
                C[s] += len(info[u][2])
    elif mode == "stable":
        for u, (k, _, _) in enumerate(info):
            if u in split_of:
                continue
            cum = 0
            for s in range(3):
                cum += r[s]
                if r[s] > 0 and k * R < cum * 2 ** 64:
                    split_of[u] = s
                    break
    else:
        raise SplitError("mode must be exact or stable")

    out = {}
    for u, (k, _, m) in enumerate(info):
        for i in m:
            out[idx[i]] = ("%016x" % k, SPLITS[split_of[u]])
    return out, report


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("catalog")
    ap.add_argument("--seed", required=True, type=int)
    ap.add_argument("--ratios", default="80:10:10")
    ap.add_argument("--mode", default="exact", choices=("exact", "stable"))
    ap.add_argument("--stratify", action="store_true")
    ap.add_argument("--near-duplicates", choices=("on", "off"), default="on")
    ap.add_argument("--near-radius", type=int, metavar="BITS")
    ap.add_argument("--near-unit-limit", type=int, metavar="N")
    ap.add_argument("--links", metavar="OUT.csv")
    ap.add_argument("--keep", metavar="OLD_MANIFEST")
    ap.add_argument("--keep-conflicts", choices=("test",))
    ap.add_argument("-o", "--output")
    a = ap.parse_args(argv)
    if not 0 <= a.seed < 2 ** 64:
        ap.error("seed must be 0 to 2^64-1")
    near = dict(near_ref.DEFAULTS) if a.near_duplicates == "on" else None
    if near is not None and a.near_radius is not None:
        if not 0 <= a.near_radius <= 16:
            ap.error("--near-radius must be 0 to 16")
        near["radius_full"] = near["radius_centre"] = a.near_radius
    if near is not None and a.near_unit_limit is not None:
        if a.near_unit_limit < 2:
            ap.error("--near-unit-limit must be at least 2")
        near["max_pictures"] = a.near_unit_limit
    rows = read_csv(a.catalog)
    links = []
    try:
        result, report = assign(rows, a.seed, a.ratios, a.mode, a.stratify, near, a.keep,
                                a.keep_conflicts, links)
    except SplitError as e:
        print("split_ref: error:", e, file=sys.stderr)
        return 3
    for line in report:
        print(line, file=sys.stderr)
    f = open(a.output, "w", newline="", encoding="utf-8") if a.output else sys.stdout
    w = csv.writer(f, lineterminator="\r\n")
    w.writerow(["row", "source", "path", "member", "unit", "split"])
    for i in sorted(result):
        w.writerow([i, rows[i]["source"], rows[i]["path"], rows[i]["member"]] + list(result[i]))
    if a.output:
        f.close()
    if a.links:
        with open(a.links, "w", newline="", encoding="utf-8") as f:
            w = csv.writer(f, lineterminator="\r\n")
            w.writerow(["row_a", "row_b", "orientation", "distance", "unit_rule"])
            w.writerows(links)
    return 0


if __name__ == "__main__":
    sys.exit(main())
