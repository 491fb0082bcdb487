#!/usr/bin/python3
"""A catalogue of N generated rows for the split benchmark (tests/bench/run.sh):

  make_catalogue_rows.py OUT.csv N

Rows in the current catalog.csv layout (docs/formats.md) as `kiln scan` writes them: five
classes, distinct file and pixel digests, and a near-duplicate fingerprint per row with random
hashes and thumbnail (version 1, no flags, grey), so the near-duplicate search meets the
spread of hashes of unrelated pictures. The seed is fixed: the same file every time.
"""
import base64
import hashlib
import random
import struct
import sys

HEADER = ("source,path,member,size,sha256,format,width,height,channels,depth,stored_depth,"
          "orientation,pages,notes,label,class,group,status,reason,pixel_sha256,pixel_scale,"
          "record_digest,unit,split,near_fingerprint\r\n")


def fingerprint(rng):
    # docs/formats.md "near_fingerprint": version, flags, info, hash, centre, chroma scale,
    # 32 chroma bytes, 256 thumbnail bytes; big-endian; bit 0 of both hashes clear.
    head = struct.pack(">BBHQQI", 1, 0, rng.randrange(8, 65536),
                       rng.getrandbits(64) & ~1, rng.getrandbits(64) & ~1, 0)
    return base64.b64encode(head + bytes(32) + rng.randbytes(256)).decode()


def main():
    out, n = sys.argv[1], int(sys.argv[2])
    rng = random.Random(20261203)
    with open(out, "w", newline="") as f:
        f.write(HEADER)
        for i in range(n):
            h = hashlib.sha256(i.to_bytes(8, "little")).hexdigest()
            p = hashlib.sha256(b"p" + i.to_bytes(8, "little")).hexdigest()
            f.write(f"s,c{i % 5}/f{i}.png,,1000,{h},png,64,64,1,8,8,1,1,,c{i % 5},{i % 5},,ok,,"
                    f"{p},1,,,,{fingerprint(rng)}\r\n")


if __name__ == "__main__":
    main()
