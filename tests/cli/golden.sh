# Golden table: the SHA-256 of every file that fixed recipes and seeds write from the demo set,
# compared with tests/cli/golden.sha256, so that any change of output bytes shows as a diff of
# that table. A change that is meant (a new format version, a changed rule) regenerates it:
#     GOLDEN_UPDATE=1 ctest -R cli.golden      (in the build folder; then review the diff)
# manifest.json records the versions of the decoding libraries, which change with a Debian
# point release while no output byte does: its "libraries" object is emptied before hashing,
# and SHA256SUMS's line for manifest.json is hashed without its digest, and a manifest's digest
# recorded elsewhere (split --keep) is replaced by that of its neutral form. Every other byte of
# every output is compared as written. The table's header lists the libraries it was made
# with, so a failure can tell a changed library from a changed kiln.
. "$(dirname "$0")/lib.sh"
table="$KILN_SRC/tests/cli/golden.sha256"
g="$work/g"
mkdir -p "$g"
cd "$g"
# Relative names: the outputs record the sources as given on the command line.
demo_data tiles
printf 'golden path key\n' >key
group=(--group-regex '/(T[0-9]+)_')
run() { expect_exit 0 "$KILN" "$@" -q; }

# A: the defaults (stretch, bilinear, 3 channels, u8, nhwc) with groups.
run build tiles -o A --seed 1 "${group[@]}" --size 32x24 --jobs 2
# B: letterbox, Lanczos-3, 16-bit records in nchw, stratified stable mode.
run build tiles -o B --seed 2 "${group[@]}" --size 40x30 --fit pad --pad-value 10,20,30 \
    --filter lanczos3 --depth 16 --layout nchw --stratify --mode stable
# C: centre crop to grey f32 (normalised with the training statistics), two-way split, no DCT
# reduction, no near-duplicate check.
run build tiles -o C --seed 3 --size 28 --fit crop --channels 1 --dtype f32 --filter bicubic \
    --ratios 70:30 --no-dct-scale --near-duplicates off
# D: hashed names with a secret key, near-duplicate unit limit lowered, RGBA over a background,
# box filter, EXIF orientation ignored.
run build tiles -o D --seed 4 "${group[@]}" --size 24x16 --hash-paths --path-key key \
    --near-unit-limit 3 --channels 4 --background 0,128,255 --filter box --no-orient
# E: the staged route scan -> split -> pack, each with its own record beside the catalogue.
mkdir E
run scan tiles -o E/scan.csv "${group[@]}" --jobs 2
run split E/scan.csv -o E/split.csv --seed 5 --ratios 60:20:20 --near-radius 4
run pack E/split.csv -o E/out --size 20x20 --filter nearest --dtype u16 --jobs 2
# F: a split that keeps the assignment of A (--keep), packed.
mkdir F
run split E/scan.csv -o F/split.csv --seed 6 --keep A/manifest.json --keep-conflicts test
run pack F/split.csv -o F/out --size 16
# G: A reproduced from a reorganised copy of its sources (every file moved and renamed).
mkdir -p moved/2027
for d in tiles/*/; do
    c=$(basename "$d")
    mkdir -p "moved/2027/box-$c"
    for f in "$d"*; do
        [ -f "$f" ] && cp "$f" "moved/2027/box-$c/x-$(basename "$f")"
    done
done
run reproduce A/manifest.json --source moved -o G
# H: D reproduced in place with its key.
run reproduce D/manifest.json --source tiles --path-key key -o H

# One line per output file: "<sha256>  <recipe>/<file>", in byte order of the names.
"$PYTHON" - A B C D E F G H >"$work/got" <<'PY'
import hashlib, os, re, sys
def neutral(f, b):
    if f == "manifest.json":
        b = re.sub(rb'"libraries": \{[^}]*\}', b'"libraries": {}', b, count=1)
    elif f == "SHA256SUMS":
        b = re.sub(rb"^[0-9a-f]{64}(  manifest\.json)$", rb"-\1", b, flags=re.M)
    return b
# A manifest's SHA-256 recorded in another output (split --keep records the kept manifest's)
# carries the library versions too: it is replaced by the SHA-256 of the neutral form, so a
# recorded digest that is wrong still shows.
files = [(root, f) for top in sys.argv[1:] for root, _, fs in os.walk(top) for f in fs]
swap = {}
for root, f in files:
    if f == "manifest.json":
        b = open(os.path.join(root, f), "rb").read()
        swap[hashlib.sha256(b).hexdigest().encode()] = \
            hashlib.sha256(neutral(f, b)).hexdigest().encode()
rows = []
for root, f in files:
    p = os.path.join(root, f)
    b = neutral(f, open(p, "rb").read())
    for raw, norm in swap.items():
        b = b.replace(raw, norm)
    rows.append((p, hashlib.sha256(b).hexdigest()))
for p, h in sorted(rows):
    print(f"{h}  {p}")
PY
if [ -n "${GOLDEN_UPDATE:-}" ]; then
    {
        echo "# Output SHA-256 of the recipes in tests/cli/golden.sh on the demo set; made with:"
        "$KILN" --version | sed 's/^/#   /'
        cat "$work/got"
    } >"$table"
    echo "ok: wrote $table ($(grep -vc '^#' "$table") files)"
    exit 0
fi
[ -f "$table" ] || fail "no golden table at $table (GOLDEN_UPDATE=1 writes one)"
grep -v '^#' "$table" >"$work/want"
[ -s "$work/want" ] || fail "the golden table $table lists no file"
if ! diff "$work/want" "$work/got" >"$work/diff"; then
    cat "$work/diff" >&2
    echo "libraries the table was made with, and now:" >&2
    grep '^#   ' "$table" >&2
    "$KILN" --version >&2
    fail "output bytes differ from the golden table (lines above: < table, > this build)"
fi
echo "ok: $(wc -l <"$work/want") output files byte-identical to the golden table"
