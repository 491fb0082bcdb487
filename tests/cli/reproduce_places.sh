# reproduce and verify --source on an untouched tree report no item "at a new location": an
# item whose recorded place still holds its content is in place, even when exact copies of it
# exist elsewhere, and with hashed names (--hash-paths) the places are compared in hashed form
# (public key, or the secret key given with --path-key). A moved file is reported as exactly
# one move. Without the secret key, kiln says it cannot tell instead of calling everything moved.
. "$(dirname "$0")/lib.sh"
demo_data_copy "$work/demo"
# A set with many exact duplicates: 40 files copied under other names into other folders of
# their class (the demo set itself holds one identical pair).
cp -r "$work/demo" "$work/dups"
n=0
for f in $(find "$work/dups" -name 'T01[0-4]*' -type f | LC_ALL=C sort); do
    d=$(dirname "$f")
    mkdir -p "$d/copies"
    cp "$f" "$d/copies/copy-of-$(basename "$f")"
    n=$((n + 1))
done
[ "$n" -ge 40 ] || fail "only $n duplicates made"
printf 'lab secret\n' > "$work/key"

# check SET OUT EXTRA-ARGS...: build, then reproduce and verify --source on the untouched set.
check() {
    local set=$1 out=$2
    shift 2
    expect_exit 0 "$KILN" build "$work/$set" -o "$work/$out" --seed 9 --size 8 -q "$@"
    local key=()
    [[ " $* " != *" --path-key "* ]] || key=(--path-key "$work/key")
    expect_exit 0 "$KILN" reproduce "$work/$out/manifest.json" --source "$work/$set" \
        -o "$work/$out.again" "${key[@]}"
    grep -q "every output is byte-identical" "$work/stdout" || fail "$out: $(cat "$work/stdout")"
    grep -Eq "^[0-9]+ recorded items: [0-9]+ found \(0 at a new location\), 0 missing$" \
        "$work/stdout" || fail "$out: items reported moved: $(grep -m 12 -e moved -e recorded "$work/stdout")"
    if grep -q "^moved:" "$work/stdout"; then fail "$out: moved lines on an untouched tree"; fi
    expect_exit 0 "$KILN" verify "$work/$out" --source "$work/$set" "${key[@]}"
    grep -Eq "^sources: all [0-9]+ recorded files found \(0 moved, 0 extra files\)$" \
        "$work/stdout" || fail "$out: verify --source: $(grep sources: "$work/stdout")"
}
for set in demo dups; do
    check $set "$set-plain"
    check $set "$set-hashed" --hash-paths
    check $set "$set-secret" --hash-paths --path-key "$work/key"
done

# One file moved (renamed into another folder of its class), one copy of a duplicate removed:
# two items are elsewhere, and only those two are reported.
victim=$(first_file "$work/dups/sound" -maxdepth 1 -name 'T015*') # a file without copies
mv "$victim" "$work/dups/sound/copies/renamed.${victim##*.}"
rm "$work/dups/crawling/copies/copy-of-T0105_a.jpg"
for out in dups-plain dups-hashed dups-secret; do
    key=()
    [ "$out" != dups-secret ] || key=(--path-key "$work/key")
    expect_exit 0 "$KILN" reproduce "$work/$out/manifest.json" --source "$work/dups" \
        -o "$work/$out.moved" "${key[@]}"
    grep -Eq "found \(2 at a new location\), 0 missing$" "$work/stdout" ||
        fail "$out: $(grep recorded "$work/stdout")"
    grep -Eq "^moved: .* is now .*/dups/sound/copies/renamed\.${victim##*.}$" "$work/stdout" ||
        fail "$out: the move is not named: $(grep moved "$work/stdout")"
    grep -Eq "^moved: .* is now .*/dups/crawling/T0105_a\.jpg$" "$work/stdout" ||
        fail "$out: the removed copy is not found at its twin: $(grep moved "$work/stdout")"
    expect_exit 0 "$KILN" verify "$work/$out" --source "$work/dups" "${key[@]}"
    grep -q "(2 moved, 0 extra files)" "$work/stdout" || fail "$out: $(grep sources: "$work/stdout")"
done
# Secret key not given: no guess.
expect_exit 0 "$KILN" reproduce "$work/dups-secret/manifest.json" --source "$work/dups" \
    -o "$work/nokey"
grep -q "(0 at a new location)" "$work/stdout" || fail "no key: $(grep recorded "$work/stdout")"
grep -q "hashes names with a key that was not given (--path-key)" "$work/stderr" ||
    fail "no key: no warning: $(cat "$work/stderr")"
expect_exit 0 "$KILN" verify "$work/dups-secret" --source "$work/dups"
grep -q "hashes names with a key that was not given" "$work/stderr" || fail "verify, no key"
echo ok
