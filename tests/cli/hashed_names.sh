# --hash-paths: no file, folder, archive or member name of any source, nor the name of a labels
# CSV or of an earlier output given to --keep, appears in any byte of any output -- of build,
# of the staged route (scan -> split -> pack) and of reproduce of both. The delivery is awkward
# on purpose: UTF-8 names (NFC, several scripts), spaces, a '%', one-character names, a zip and
# a tar with members in folders, a corrupt file and a non-image (their rows carry reasons).
#
# How names are searched, and why so: every path component is looked for as a whole token,
# i.e. preceded by the start of the file or one of / \ " , : ( ) space tab CR LF NUL, and
# followed likewise, in its UTF-8 form, kiln's %XX-escaped form and JSON's \u-escaped form. A
# bare substring search would report a one-letter folder "b" inside every word and hex digest;
# as whole tokens even one-letter names can be searched. kiln's own tokens cannot collide with
# the chosen names (no name is a number, a two-digit hex byte as reasons show, or a word kiln
# writes). In a .kten file the same applies to the header, the array table and the metadata
# block; the array data (pixels and integers, not text) is searched for every name of six or
# more bytes as a plain substring, where a chance match of random bytes is negligible (2^-48
# per position). Class names are the one kind of folder name kept on purpose (they are the
# class map, docs/formats.md), so the class folders' names are not searched, nor kiln's own
# file name manifest.json at the end of the --keep path. The same search
# on outputs made without --hash-paths must find every name: the check can fail.
. "$(dirname "$0")/lib.sh"
need_python
cd "$work"
src="Klinik Süd – Lieferung"
"$PYTHON" - "$src" <<'PY'
import io, os, sys, tarfile, zipfile
from PIL import Image
src = sys.argv[1]
def img(seed, size=(23, 17)):
    im = Image.new("RGB", size)
    im.putdata([((x * 7 + seed * 31) % 256, (y * 13 + seed * 17) % 256, (x * y + seed) % 256)
                for y in range(size[1]) for x in range(size[0])])
    return im
def save(rel, seed, fmt):
    p = os.path.join(src, rel)
    os.makedirs(os.path.dirname(p), exist_ok=True)
    img(seed).save(p, fmt)
def data(seed, fmt):
    b = io.BytesIO()
    img(seed).save(b, fmt)
    return b.getvalue()
save("benign/Patient Müller/IMG_0001 Anna.png", 1, "PNG")
save("benign/Patient Müller/é.jpg", 2, "JPEG")
save("benign/Пациент Иванов/снимок 3.png", 3, "PNG")
save("malignant/b/x1.png", 4, "PNG")
save("malignant/Sørensen Ø/scan (2).tif", 5, "TIFF")
save("malignant/Sørensen Ø/100% Probe.png", 6, "PNG")
save("malignant/患者 王/图像.jpg", 7, "JPEG")
with zipfile.ZipFile(os.path.join(src, "malignant", "Lieferung März.zip"), "w") as z:
    z.writestr("Pat Olsen/y2.png", data(8, "PNG"))
    z.writestr("Pat Olsen/zz.jpg", data(9, "JPEG"))
with tarfile.open(os.path.join(src, "benign", "Akte Hansen.tar"), "w") as t:
    for name, seed in (("Hansen Kind/ü1.png", 10), ("Hansen Kind/q.png", 11),
                       ("Pat Ölund/ä.png", 13)):
        b = data(seed, "PNG")
        ti = tarfile.TarInfo(name)
        ti.size = len(b)
        t.addfile(ti, io.BytesIO(b))
with open(os.path.join(src, "benign", "Patient Müller", "Befund Jørgensen.jpg"), "wb") as f:
    f.write(data(12, "JPEG")[:300])
with open(os.path.join(src, "malignant", "notiz Weiß.txt"), "w") as f:
    f.write("Termin mit Frau Weiß\n")
# A labels CSV for the staged route: same files, labels and groups from the CSV.
rows = []
for root, dirs, files in os.walk(src):
    for f in files:
        rel = os.path.relpath(os.path.join(root, f), src)
        if f.endswith((".zip", ".tar")):
            continue
        rows.append((rel, "gut" if rel.startswith("benign") else "schlecht", "Fall Nyström"))
rows += [("malignant/Lieferung März.zip/Pat Olsen/y2.png", "schlecht", "Fall Olsen"),
         ("malignant/Lieferung März.zip/Pat Olsen/zz.jpg", "schlecht", "Fall Olsen"),
         ("benign/Akte Hansen.tar/Hansen Kind/ü1.png", "gut", "Fall Hansen"),
         ("benign/Akte Hansen.tar/Hansen Kind/q.png", "gut", "Fall Hansen"),
         ("benign/Akte Hansen.tar/Pat Ölund/ä.png", "gut", "Fall Ölund")]
with open("Etiketten Ärztin.csv", "w", newline="") as f:
    f.write("path,label,group\r\n")
    for r in rows:
        f.write(",".join(r) + "\r\n")
PY
printf 'Geheimnis der Klinik\n' > "Schlüssel Datei"

# names_in OUTDIR... : prints every searched name found in any output, one per line.
names_in() {
    "$PYTHON" - "$src" "Etiketten Ärztin.csv" "Ausgabe Eins/manifest.json" "$@" <<'PY'
import json, os, struct, sys
src, labels_csv, keep, outs = sys.argv[1], sys.argv[2], sys.argv[3], sys.argv[4:]
classes = {"benign", "malignant", "gut", "schlecht"}
names = set()
for p in (src, labels_csv, keep):
    names.update(p.split("/"))
for root, dirs, files in os.walk(src):
    for n in dirs + files:
        names.add(n)
names.update(["Pat Ölund", "ä.png", "Pat Olsen", "y2.png", "zz.jpg", "Hansen Kind",  # members
              "ü1.png", "q.png",
              "Fall Nyström", "Fall Ölund", "Fall Olsen", "Fall Hansen"])  # groups of the CSV
names -= classes
names -= {"manifest.json"}  # kiln's own file name, last component of the --keep path
names.discard("")
delim = set(b'/\\",:() \t\r\n\0')
def forms(n):
    raw = n.encode()
    esc = raw.replace(b"%", b"%25")
    uesc = json.dumps(n)[1:-1].encode()
    return {raw, esc, uesc}
def whole(buf, f):
    i = buf.find(f)
    while i >= 0:
        j = i + len(f)
        if (i == 0 or buf[i - 1] in delim) and (j == len(buf) or buf[j] in delim):
            return True
        i = buf.find(f, i + 1)
    return False
found = set()
for out in outs:
    for fn in sorted(os.listdir(out)):
        b = open(os.path.join(out, fn), "rb").read()
        text, data = b, b""
        if fn.endswith(".kten"):
            meta_off = struct.unpack_from("<Q", b, 24)[0]
            text, data = b[:4096] + b"\n" + b[meta_off:], b[4096:meta_off]
        for n in names:
            for f in forms(n):
                if whole(text, f) or (len(f) >= 6 and f in data):
                    found.add(f"{n}\t{out}/{fn}")
print("\n".join(sorted(found)))
print(f"searched {len(names)} names", file=sys.stderr)
PY
}

# Plain outputs first: the search must find every name there (build and the staged route).
expect_exit 0 "$KILN" build "$src" -o "Ausgabe Eins" --seed 4 --size 12 --group-regex '(Pat[^/]*)/' \
    --ratios 60:20:20
expect_exit 0 "$KILN" scan "$src" -o "Katalog.csv" --labels "csv:Etiketten Ärztin.csv"
expect_exit 0 "$KILN" split "Katalog.csv" --seed 4 --keep "Ausgabe Eins/manifest.json" \
    --keep-conflicts test
expect_exit 0 "$KILN" pack "Katalog.csv" -o "plain staged" --size 12
names_in "Ausgabe Eins" "plain staged" > plain.txt
"$PYTHON" - plain.txt <<'PY' || fail "the search does not find every name in plain outputs"
import sys
found = {l.split("\t")[0] for l in open(sys.argv[1]).read().splitlines() if l}
want = {"Klinik Süd – Lieferung", "Patient Müller", "IMG_0001 Anna.png", "é.jpg", "b", "x1.png",
        "Пациент Иванов", "снимок 3.png", "Sørensen Ø", "scan (2).tif", "100% Probe.png",
        "患者 王", "图像.jpg", "Lieferung März.zip", "Pat Olsen", "y2.png", "zz.jpg",
        "Akte Hansen.tar", "Hansen Kind", "ü1.png", "q.png", "Pat Ölund", "ä.png",
        "Befund Jørgensen.jpg", "notiz Weiß.txt", "Etiketten Ärztin.csv", "Ausgabe Eins",
        "Fall Nyström", "Fall Olsen", "Fall Hansen", "Fall Ölund"}
assert want <= found, sorted(want - found)
PY

# Hashed: build (public key), staged route (secret key, labels CSV, --keep), reproduce of both.
expect_exit 0 "$KILN" build "$src" -o "h build" --seed 4 --size 12 --group-regex '(Pat[^/]*)/' \
    --ratios 60:20:20 --hash-paths
expect_exit 0 "$KILN" pack "Katalog.csv" -o "h staged" --size 12 --hash-paths \
    --path-key "Schlüssel Datei"
expect_exit 0 "$KILN" reproduce "h build/manifest.json" --source "$src" -o "h build again"
grep -q "every output is byte-identical" "$work/stdout" || fail "reproduce: $(cat "$work/stdout")"
expect_exit 0 "$KILN" reproduce "h staged/manifest.json" --source "$src" -o "h staged again"
grep -q "every output is byte-identical" "$work/stdout" || fail "reproduce: $(cat "$work/stdout")"
leaks=$(names_in "h build" "h staged" "h build again" "h staged again")
[ -z "$leaks" ] || fail "names in hashed outputs:
$leaks"
# The records' names are hashed consistently with the rows: the scan record's source is the
# hash the rows carry, under the same key.
"$PYTHON" - "h build" <<'PY' || fail "record and rows disagree"
import csv, json, sys
m = json.load(open(f"{sys.argv[1]}/manifest.json"))
rows = list(csv.DictReader(open(f"{sys.argv[1]}/items.csv", newline="")))
assert m["scan"]["sources"] == [rows[0]["source"]], (m["scan"]["sources"], rows[0]["source"])
assert m["scan"]["group_regex"].startswith("h:")
assert "audit" not in m["split"] and "findings" in m["audit"]
PY
echo ok
