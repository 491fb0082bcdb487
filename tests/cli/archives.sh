# Archives are read in place: the same images in zip, tar, tar.gz, tar.bz2, tar.xz and
# tar.zst give identical rows (sizes and SHA-256 checked against coreutils sha256sum); an
# archive can be a source or sit in a folder; links inside archives, OS junk inside archives
# and nested archives get their statuses; pack reads members straight from the archives.
. "$(dirname "$0")/lib.sh"
need_python
for t in zip tar gzip bzip2 xz zstd; do command -v $t >/dev/null || skip "$t is needed"; done
demo_data "$work/data"
mkdir -p "$work/pack/cells" "$work/pack/__MACOSX"
cp "$work/data/crazing/T0111_a.jpg" "$work/data/crazing/T0111_b.png" "$work/pack/cells/"
cp "$work/data/crawling/T0101_d.png" "$work/pack/cells/"     # a 16-bit grey PNG
printf 'junk' > "$work/pack/__MACOSX/._T0111_a.jpg"
printf 'junk' > "$work/pack/cells/.DS_Store"
ln -s T0111_a.jpg "$work/pack/cells/link.jpg"
mkdir -p "$work/src"
(cd "$work/pack" && zip -qry "$work/src/set.zip" cells __MACOSX &&
    tar cf "$work/src/set.tar" cells __MACOSX &&
    tar czf "$work/src/set.tar.gz" cells __MACOSX &&
    tar cjf "$work/src/set.tar.bz2" cells __MACOSX &&
    tar cJf "$work/src/set.tar.xz" cells __MACOSX &&
    tar --zstd -cf "$work/src/set.tar.zst" cells __MACOSX)
expect_exit 0 "$KILN" scan "$work/src" "$work/src/set.zip" -o "$work/c.csv" --labels none
"$PYTHON" - "$work/c.csv" "$work/pack/cells" <<'PY' || fail "archive rows"
import csv, hashlib, os, subprocess, sys
rows = list(csv.DictReader(open(sys.argv[1], newline="")))
cells = sys.argv[2]
want = {}
for f in ("T0111_a.jpg", "T0111_b.png", "T0101_d.png"):
    p = os.path.join(cells, f)
    # coreutils sha256sum is the outside reference for the digests
    want["cells/" + f] = (os.path.getsize(p), subprocess.run(["sha256sum", p], capture_output=True, text=True).stdout.split()[0])
archives = ["set.zip", "set.tar", "set.tar.gz", "set.tar.bz2", "set.tar.xz", "set.tar.zst"]
for a in archives + [""]:
    sel = [r for r in rows if (r["path"] == a if a else r["source"].endswith("set.zip"))]
    got = {r["member"]: r for r in sel}
    for m, (size, sha) in want.items():
        r = got.get(m)
        assert r and r["status"] == "ok" and int(r["size"]) == size and r["sha256"] == sha, (a, m, r)
    assert got["cells/T0101_d.png"]["depth"] == "16", got["cells/T0101_d.png"]
    link = got.get("cells/link.jpg")
    assert link and link["status"] == "archive-link", (a, link)
    assert not any("__MACOSX" in m or ".DS_Store" in m for m in got), (a, sorted(got))
print("ok:", len(archives) + 1, "archive sources, identical rows")
PY
grep -q "skipped without a row" "$work/stdout" || fail "junk inside archives not counted"
# Nested: an archive inside an archive is listed, not opened.
(cd "$work/src" && zip -q "$work/nested.zip" set.tar.gz)
expect_exit 0 "$KILN" scan "$work/nested.zip" -o "$work/n.csv" --labels none
grep -q ',set.tar.gz,.*,nested-archive,' "$work/n.csv" || fail "nested archive row: $(cat "$work/n.csv")"
# Pack reads members from each archive in one pass; the tensors of the zip and the tar.xz copies
# are identical because the member bytes are.
for a in set.zip set.tar.xz; do
    mkdir -p "$work/one-$a" && cp "$work/src/$a" "$work/one-$a/"
    expect_exit 0 "$KILN" build "$work/one-$a" -o "$work/out-$a" --labels none --seed 1 \
        --ratios 100:0:0 --size 16
done
cmp "$work/out-set.zip/train.kten" "$work/out-set.tar.xz/train.kten" ||
    fail "tensors differ between zip and tar.xz sources"
echo ok
