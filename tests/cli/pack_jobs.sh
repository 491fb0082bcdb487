# Outputs never depend on the number of worker threads or on running build instead of the three
# stages: --jobs 1 and --jobs 3 write
# byte-identical tensors, items.csv, catalog.csv and manifest.json; scanning twice writes the
# same catalogue bytes.
. "$(dirname "$0")/lib.sh"
demo_data "$work/data"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c1.csv" --jobs 1 --group-regex '/(T[0-9]+)_'
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c3.csv" --jobs 3 --group-regex '/(T[0-9]+)_'
cmp "$work/c1.csv" "$work/c3.csv" || fail "catalogue differs between --jobs 1 and 3"
expect_exit 0 "$KILN" split "$work/c1.csv" --seed 3
for j in 1 3; do
    expect_exit 0 "$KILN" pack "$work/c1.csv" -o "$work/out$j" --size 40x30 --fit crop \
        --filter lanczos3 --jobs $j
done
for f in train.kten val.kten test.kten items.csv catalog.csv manifest.json SHA256SUMS; do
    cmp "$work/out1/$f" "$work/out3/$f" || fail "$f differs between --jobs 1 and 3"
done
# kiln build decodes each image once (records prepared during scan, laid out after the split)
# and must write the same tensors as scan, split and pack run one after the other.
expect_exit 0 "$KILN" build "$work/data" -o "$work/built" --group-regex '/(T[0-9]+)_' --seed 3 \
    --size 40x30 --fit crop --filter lanczos3 --jobs 2
for f in train.kten val.kten test.kten items.csv; do
    cmp "$work/out1/$f" "$work/built/$f" || fail "$f differs between build and scan+split+pack"
done
echo ok
