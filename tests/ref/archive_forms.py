#!/usr/bin/env python3
"""One small tree of class folders, packaged every way a colleague might send it, for
tests/cli/archive_names.sh.

    archive_forms.py build DIR      writes DIR/tree (the folder) and DIR/forms/* (archives),
                                    and DIR/truth.json: per file its label and group
    archive_forms.py check DIR CATALOGUE...
                                    every ok row of every catalogue has the label and group of
                                    truth.json under its normalised name, every file of the tree
                                    is found exactly once per source, and (for split
                                    catalogues) every form gives each file the same split

Names are what users hit: ASCII, UTF-8 precomposed (podzol/core54_a_Bodenprobe_ä.jpg), a
class folder with a non-ASCII name, and (tar only) a name that is not UTF-8 at all. The forms:
zip with the UTF-8 flag set (Python's zipfile sets it for non-ASCII names), zip with raw UTF-8
bytes and the flag unset (crafted, as Info-ZIP and old Windows tools write them), tar in
ustar, GNU and pax formats (Python's tarfile), tar made with `tar -C tree -cf x.tar .`
(members ./class/file) and without ./, the ./ form compressed with gzip, bzip2, xz and zstd,
7z and cpio through bsdtar when present, and a tar whose names carry the other spellings of
the same path (a//b, a/./b, trailing ./)."""
import io
import json
import os
import random
import shutil
import subprocess
import sys
import tarfile
import zipfile

from PIL import Image

# (class folder, specimen, shot, format); the group of a file is its specimen.
LATIN1 = b"kalk/K9_a_\xe4.png"  # not UTF-8: tar stores bytes, so this one is tar-only
FILES = [
    ("loam", "T01", "a", "png"), ("loam", "T01", "b", "png"), ("loam", "T02", "a", "jpg"),
    ("loam", "T02", "b", "jpg"), ("loam", "T03", "a", "png"),
    ("podzol", "core54", "a_Bodenprobe_\u00e4", "jpg"), ("podzol", "core54", "b_Bodenprobe_\u00e4", "jpg"),
    ("podzol", "core55", "a", "png"), ("podzol", "core55", "b", "png"),
    ("\u00d6lschiefer", "\u00d61", "a", "png"), ("\u00d6lschiefer", "\u00d61", "b", "jpg"),
    ("\u00d6lschiefer", "\u00d62", "a", "png"),
]
GROUP_REGEX = "/([^/_]+)_[a-z]"


def image_bytes(seed, fmt):
    rnd = random.Random(seed)
    w, h = 17 + seed % 5, 13 + seed % 7  # odd sizes
    im = Image.frombytes("RGB", (w, h), bytes(rnd.randrange(256) for _ in range(w * h * 3)))
    buf = io.BytesIO()
    im.save(buf, "PNG" if fmt == "png" else "JPEG", quality=90)
    return buf.getvalue()


def tree_files():
    """[(relative name as bytes, content, label, group)]"""
    out = []
    for i, (cls, spec, shot, fmt) in enumerate(FILES):
        name = f"{cls}/{spec}_{shot}.{fmt}".encode()
        out.append((name, image_bytes(i, fmt), cls, spec))
    out.append((LATIN1, image_bytes(99, "png"), "kalk", "K9"))
    return out


def utf8_only(files):
    return [f for f in files if f[0] != LATIN1]


def write_tree(root, files):
    for name, data, _, _ in files:
        p = os.path.join(os.fsencode(root), name)
        os.makedirs(os.path.dirname(p), exist_ok=True)
        with open(p, "wb") as f:
            f.write(data)


def zip_flag(path, files):
    with zipfile.ZipFile(path, "w") as z:
        for name, data, _, _ in files:
            z.writestr(name.decode(), data)


def zip_noflag(path, files):
    """Raw UTF-8 bytes with general-purpose bit 11 clear: written under ASCII stand-ins of the
    same length, which are then replaced in the local and central headers."""
    stand = {}
    with zipfile.ZipFile(path, "w") as z:
        for i, (name, data, _, _) in enumerate(files):
            s = (b"N%03d" % i).ljust(len(name), b"_")
            stand[s] = name
            z.writestr(s.decode(), data)
    d = open(path, "rb").read()
    for s, name in stand.items():
        assert d.count(s) == 2, s
        d = d.replace(s, name)
    open(path, "wb").write(d)
    for info in zipfile.ZipFile(path).infolist():
        assert not info.flag_bits & 0x800, info


def zip_badflag(path):
    """The UTF-8 flag set on a name that is not UTF-8 (a broken writer): one row, status
    corrupt, under a placeholder name; the other member is read normally."""
    good = image_bytes(200, "png")
    zip_noflag(path, [(b"loam/ok_a.png", good, "", ""), (b"loam/bad_\xe4.png", good[::-1], "", "")])
    d = bytearray(open(path, "rb").read())
    for sig, off in ((b"PK\x03\x04", 7), (b"PK\x01\x02", 9)):
        k = 0
        while (j := d.find(sig, k)) >= 0:
            d[j + off] |= 0x08
            k = j + 4
    open(path, "wb").write(d)


def tar_python(path, files, fmt, prefix=b""):
    with tarfile.open(path, "w", format=fmt, encoding="utf-8", errors="surrogateescape") as t:
        for name, data, _, _ in files:
            ti = tarfile.TarInfo((prefix + name).decode("utf-8", "surrogateescape"))
            ti.size = len(data)
            t.addfile(ti, io.BytesIO(data))


def odd_spellings(path, files):
    """Every other spelling of the same relative name that normalisation must undo."""
    forms = [lambda n: b"./" + n, lambda n: n.replace(b"/", b"//"),
             lambda n: n.replace(b"/", b"/./"), lambda n: b".//./" + n]
    with tarfile.open(path, "w", format=tarfile.GNU_FORMAT, encoding="utf-8",
                      errors="surrogateescape") as t:
        for i, (name, data, _, _) in enumerate(files):
            ti = tarfile.TarInfo(forms[i % len(forms)](name).decode("utf-8", "surrogateescape"))
            ti.size = len(data)
            t.addfile(ti, io.BytesIO(data))


def run(*cmd, **kw):
    subprocess.run(cmd, check=True, **kw)


def build(d):
    files = tree_files()
    tree = os.path.join(d, "tree")
    write_tree(tree, files)
    forms = os.path.join(d, "forms")
    os.makedirs(forms)
    utf8_tree = os.path.join(d, "tree-utf8")  # the tree without the non-UTF-8 name
    write_tree(utf8_tree, utf8_only(files))
    made = {"tree-utf8": True}

    def form(name, utf8_names_only):
        made[name] = utf8_names_only
        return os.path.join(forms, name)

    zip_flag(form("flag.zip", True), utf8_only(files))
    zip_noflag(form("noflag.zip", False), files)
    tar_python(form("ustar.tar", False), files, tarfile.USTAR_FORMAT)
    tar_python(form("gnu.tar", False), files, tarfile.GNU_FORMAT)
    tar_python(form("pax.tar", True), utf8_only(files), tarfile.PAX_FORMAT)
    tar_python(form("pax-dot.tar", True), utf8_only(files), tarfile.PAX_FORMAT, b"./")
    odd_spellings(form("spellings.tar", False), files)
    top = sorted(os.listdir(tree))
    run("tar", "-C", tree, "-cf", form("plain.tar", False), *top)
    run("tar", "-C", tree, "-cf", form("dot.tar", False), ".")
    run("tar", "-C", tree, "-czf", form("dot.tgz", False), ".")
    run("tar", "-C", tree, "-cjf", form("dot.tar.bz2", False), ".")
    run("tar", "-C", tree, "-cJf", form("dot.tar.xz", False), ".")
    run("tar", "-C", tree, "--zstd", "-cf", form("dot.tar.zst", False), ".")
    if shutil.which("bsdtar"):
        # 7z stores names as UTF-16: only names that are Unicode text can go in.
        run("bsdtar", "--format", "7zip", "-C", utf8_tree, "-cf", form("dot.7z", True), ".",
            env=dict(os.environ, LC_ALL="C.UTF-8"))
        run("bsdtar", "--format", "newc", "-C", tree, "-cf", form("dot.cpio", False), ".")
    zip_badflag(os.path.join(d, "badflag.zip"))
    truth = {n.decode("utf-8", "surrogateescape"): [lab, grp] for n, _, lab, grp in files}
    json.dump({"files": truth, "utf8_only": made, "group_regex": GROUP_REGEX},
              open(os.path.join(d, "truth.json"), "w"), ensure_ascii=True)


def unescape(s):
    """docs/formats.md, "Names that are not UTF-8": %XX is a byte."""
    out, i, b = bytearray(), 0, s.encode()
    while i < len(b):
        if b[i:i + 1] == b"%":
            out.append(int(b[i + 1:i + 3], 16))
            i += 3
        else:
            out.append(b[i])
            i += 1
    return bytes(out)


def normalise(name):
    return b"/".join(p for p in name.split(b"/") if p not in (b"", b"."))


def check(d, catalogues):
    import csv
    t = json.load(open(os.path.join(d, "truth.json")))
    truth = {k.encode("utf-8", "surrogateescape"): v for k, v in t["files"].items()}
    splits = {}
    for cat in catalogues:
        rows = list(csv.DictReader(open(cat, newline="", encoding="utf-8")))
        per_source = {}
        for r in rows:
            per_source.setdefault(r["source"], []).append(r)
        for src, rs in per_source.items():
            form = os.path.basename(src)
            want = {k: v for k, v in truth.items()
                    if not (t["utf8_only"].get(form) and k == LATIN1)}
            seen = {}
            for r in rs:
                raw = unescape(r["member"] if r["member"] else r["path"])
                name = normalise(raw)
                if r["status"] != "ok":
                    raise SystemExit(f"{cat}: {src}: {raw!r} is {r['status']}: {r['reason']}")
                if name not in truth:
                    raise SystemExit(f"{cat}: {src}: unexpected name {raw!r} (normalised {name!r})")
                if [unescape(r["label"]), unescape(r["group"])] != [x.encode() for x in truth[name]]:
                    raise SystemExit(f"{cat}: {src}: {raw!r}: label {r['label']!r} group "
                                     f"{r['group']!r}, expected {truth[name]}")
                if name in seen:
                    raise SystemExit(f"{cat}: {src}: {name!r} twice")
                seen[name] = r
                if r.get("split"):
                    # The split is a function of the whole set, so forms are compared with
                    # those that hold the same files (with or without the non-UTF-8 name).
                    family = LATIN1 in want
                    splits.setdefault((family, name), {})[f"{cat}:{form}"] = r["split"]
            if set(seen) != set(want):
                raise SystemExit(f"{cat}: {src}: files {sorted(set(want) ^ set(seen))} missing or extra")
    for (_, name), by_form in splits.items():
        if len(set(by_form.values())) != 1:
            raise SystemExit(f"{name!r} is in different splits by form: {by_form}")
    print(f"ok: {len(catalogues)} catalogues, {len(truth)} files, labels, groups"
          f"{' and splits' if splits else ''} identical in every form")


if __name__ == "__main__":
    if sys.argv[1] == "build":
        build(sys.argv[2])
    else:
        check(sys.argv[2], sys.argv[3:])
