#!/usr/bin/env python3
"""Builds a corpus of bad (and some good) input by script and states the status kiln must give
each file:

    bad_corpus.py make DIR      writes DIR/src/... and DIR/expected.tsv
    bad_corpus.py check DIR CATALOG.csv

Good images come from PIL (python3-pil); broken ones are cut or edited from them by byte
offsets taken from the PNG specification (signature 8 bytes, chunk = length, type, data, CRC;
IHDR data at offset 16) and the JPEG marker layout. Expected statuses are docs/statuses.md.
"""
import csv
import io
import os
import struct
import subprocess
import sys
import zlib

from PIL import Image


def png_bytes(w, h, mode="RGB", seed=1):
    im = Image.new(mode, (w, h))
    px = im.load()
    for y in range(h):
        for x in range(w):
            v = (x * 7 + y * 13 + seed * 31) % 256
            px[x, y] = (v, 255 - v, (v * 3) % 256) if mode == "RGB" else v
    b = io.BytesIO()
    im.save(b, "PNG")
    return b.getvalue()


def jpeg_bytes(w, h, seed=1, progressive=False):
    im = Image.frombytes("RGB", (w, h), bytes(((i * 37 + seed) % 251) for i in range(w * h * 3)))
    b = io.BytesIO()
    im.save(b, "JPEG", quality=90, progressive=progressive)
    return b.getvalue()


def chunk(kind, data):
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))


def png_with_ihdr(w, h, depth=8, ctype=2):
    """A PNG whose IHDR says w x h (valid CRC) followed by a tiny IDAT: a header-only bomb."""
    ihdr = chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, depth, ctype, 0, 0, 0))
    return b"\x89PNG\r\n\x1a\n" + ihdr + chunk(b"IDAT", zlib.compress(b"\0" * 16)) + chunk(b"IEND", b"")


def make(root):
    src = os.path.join(root, "src")
    os.makedirs(os.path.join(src, "good"))
    os.makedirs(os.path.join(src, "bad"))
    exp = []

    def put(rel, data, status, member=""):
        path = os.path.join(src, rel)
        os.makedirs(os.path.dirname(path), exist_ok=True)
        if data is not None:
            with open(path, "wb") as f:
                f.write(data)
        exp.append((rel, member, status))

    good_png, good_jpg = png_bytes(40, 30), jpeg_bytes(64, 48)
    put("good/a.png", good_png, "ok")
    put("good/b.jpg", good_jpg, "ok")
    put("good/c.jpg", jpeg_bytes(33, 17, seed=5, progressive=True), "ok")
    put("good/misnamed.jpg", png_bytes(20, 10, "L"), "ok")      # content decides, not the name
    put("bad/empty.png", b"", "empty")
    put("bad/text.png", b"just some notes, not a picture\n", "not-image")
    put("bad/gif.png", b"GIF89a" + b"\0" * 20, "unsupported")
    # Truncated PNGs: inside IHDR, just after IHDR, half-way through IDAT.
    put("bad/trunc-ihdr.png", good_png[:20], "truncated")
    put("bad/trunc-after-ihdr.png", good_png[:33], "truncated")
    put("bad/trunc-idat.png", good_png[: len(good_png) // 2], "truncated")
    # Truncated JPEGs: in the headers, at one third, just before EOI.
    put("bad/trunc-head.jpg", good_jpg[:200], "truncated")
    put("bad/trunc-third.jpg", good_jpg[: len(good_jpg) // 3], "truncated")
    put("bad/trunc-end.jpg", good_jpg[:-2], "truncated")
    crc = bytearray(good_png)
    crc[29] ^= 0xFF                                              # IHDR CRC (bytes 29..32)
    put("bad/ihdr-crc.png", bytes(crc), "corrupt")
    put("bad/bomb.png", png_with_ihdr(100000, 100000), "too-large")
    put("bad/zero.png", png_with_ihdr(0, 0), "corrupt")
    put("bad/depth3.png", png_with_ihdr(8, 8, depth=3, ctype=0), "corrupt")
    # A TIFF cut after its 8-byte header (TIFF 6.0 section 2: byte order, 42, first IFD offset):
    # libtiff fails without an error message, and that must stay a row, not end the scan.
    put("bad/trunc-header.tif", b"II*\0\0\0\0\0", "truncated")
    put("bad/ifd-past-end.tif", b"MM\0*\0\0\1\0" + b"\0" * 16, "truncated")
    put("bad/pnm-maxval.pgm", b"P5 4 4 70000\n" + b"\0" * 32, "corrupt")
    put("bad/pnm-short.pgm", b"P5 4 4 255\n" + b"\0" * 7, "truncated")
    # Non-UTF-8 file name: kept byte-exact (escaped in the CSV), still usable.
    name = b"good/caf\xe9.png"
    with open(os.path.join(src.encode(), name), "wb") as f:
        f.write(png_bytes(12, 12, seed=9))
    exp.append(("good/caf%E9.png", "", "ok"))
    # Archives: an encrypted member, a member named with "..", a nested archive, OS junk.
    z = os.path.join(root, "z")
    os.makedirs(os.path.join(z, "good"))
    open(os.path.join(z, "good", "secret.png"), "wb").write(png_bytes(10, 10, seed=3))
    open(os.path.join(z, "good", "plain.png"), "wb").write(png_bytes(10, 10, seed=4))
    subprocess.run(["zip", "-q", "-P", "pw", os.path.join(src, "enc.zip"), "good/secret.png"], cwd=z, check=True)
    subprocess.run(["zip", "-q", os.path.join(src, "enc.zip"), "good/plain.png"], cwd=z, check=True)
    exp.append(("enc.zip", "good/secret.png", "encrypted"))
    exp.append(("enc.zip", "good/plain.png", "ok"))
    os.makedirs(os.path.join(z, "deep"))
    subprocess.run(["zip", "-q", os.path.join(src, "dotdot.zip"), "../good/plain.png"], cwd=os.path.join(z, "deep"), check=True)
    exp.append(("dotdot.zip", "../good/plain.png", "ok"))
    subprocess.run(["zip", "-q", os.path.join(z, "inner.zip"), "good/plain.png"], cwd=z, check=True)
    subprocess.run(["zip", "-q", os.path.join(src, "outer.zip"), "inner.zip"], cwd=z, check=True)
    exp.append(("outer.zip", "inner.zip", "nested-archive"))
    # A symbolic link (not followed by default) and a loop (reported with --follow-links).
    os.symlink("a.png", os.path.join(src, "good", "link.png"))
    exp.append(("good/link.png", "", "symlink"))
    os.makedirs(os.path.join(src, "loopdir"))
    os.symlink("..", os.path.join(src, "loopdir", "up"))
    exp.append(("loopdir/up", "", "symlink"))
    # Skipped without a row.
    open(os.path.join(src, "good", ".DS_Store"), "wb").write(b"\0\0\0\1Bud1")
    open(os.path.join(src, "good", "Thumbs.db"), "wb").write(b"\xd0\xcf\x11\xe0")
    os.makedirs(os.path.join(src, "__MACOSX"))
    open(os.path.join(src, "__MACOSX", "._a.png"), "wb").write(b"\0\5\26\7")
    with open(os.path.join(root, "expected.tsv"), "w") as f:
        for rel, member, status in exp:
            f.write(f"{rel}\t{member}\t{status}\n")


def check(root, catalog):
    rows = {(r["path"], r["member"]): r for r in csv.DictReader(open(catalog, newline="", encoding="utf-8"))}
    bad = []
    for line in open(os.path.join(root, "expected.tsv")):
        rel, member, status = line.rstrip("\n").split("\t")
        r = rows.pop((rel, member), None)
        if r is None:
            bad.append(f"{rel} {member}: no catalogue row")
        elif r["status"] != status:
            bad.append(f"{rel} {member}: status {r['status']} ({r['reason']}), expected {status}")
        elif status != "ok" and not r["reason"]:
            bad.append(f"{rel} {member}: no reason given")
        elif status == "ok" and r["channels"] == "":
            bad.append(f"{rel}: ok row without header fields")
    for key, r in rows.items():
        bad.append(f"unexpected row {key}: {r['status']}")
    if bad:
        print("FAIL:\n  " + "\n  ".join(bad))
        sys.exit(1)
    print("ok: every case has its expected status")


if __name__ == "__main__":
    if sys.argv[1] == "make":
        make(sys.argv[2])
    else:
        check(sys.argv[2], sys.argv[3])
