# SIGKILL at many moments of a run that replaces an earlier output: while build's scan fills the
# record pool, while pack's workers fill the reserved tensor files, and -- with
# tests/tools/kill_step.c preloaded -- as each output file is finished (before its fsync) and
# before every single rename and removal of the replace, including the removal of its journal
# (the moment the new output takes over) and of the old files' backups after it. After each
# kill:
#   - nothing claims completeness that is not: when `sha256sum -c SHA256SUMS` passes, the folder
#     is the old output or the new one, whole; when it fails, a journal says a replace was cut
#     off;
#   - `kiln verify` puts a cut-off replace back and passes, on the old output (killed before the
#     journal's removal) or the new one (after);
#   - the next build removes what the killed one left, says so, and writes the new output with
#     nothing temporary left over.
. "$(dirname "$0")/lib.sh"
lib="$KILN_TOOLS/libkiln-kill-step.so"
[ -f "$lib" ] || fail "the kill-step library $lib was not built"
# A sanitizer runtime must come first among preloaded libraries; the step counter needs none.
export ASAN_OPTIONS="${ASAN_OPTIONS:+$ASAN_OPTIONS:}verify_asan_link_order=0"

# A small set: six files of each class, so a run takes a moment.
demo_data_copy "$work/all"
mkdir "$work/data"
for d in "$work/all"/*/; do
    c=$(basename "$d")
    mkdir "$work/data/$c"
    find "$d" -maxdepth 1 -type f | LC_ALL=C sort >"$work/list"
    k=0
    while read -r f && [ $((k += 1)) -le 6 ]; do cp "$f" "$work/data/$c/"; done <"$work/list"
done
new_args=(build "$work/data" --seed 2 --size 24 --jobs 1 -q)
expect_exit 0 "$KILN" build "$work/data" -o "$work/old" --seed 1 --size 24 -q
expect_exit 0 "$KILN" "${new_args[@]}" -o "$work/new"

# sums_of DIR: the SHA256SUMS of an output, or "-" when it has none.
sums_of() { if [ -f "$1/SHA256SUMS" ]; then cat "$1/SHA256SUMS"; else echo -; fi; }
old_sums=$(sums_of "$work/old")
new_sums=$(sums_of "$work/new")
[ "$old_sums" != "$new_sums" ] || fail "the old and new outputs are the same; the test shows nothing"

out="$work/out"
before_try() { rm -rf "$out"; cp -a "$work/old" "$out"; }

# check_after_kill WHAT [DEBRIS]: the checks above, WHAT naming the moment; with DEBRIS, the
# next build must say it removed what the killed run left.
check_after_kill() {
    local what=$1 debris=${2:-} raw=0 journal=no got
    [ -e "$out/.kiln-journal" ] && journal=yes
    (cd "$out" && sha256sum --quiet -c SHA256SUMS >/dev/null 2>&1) || raw=$?
    got=$(sums_of "$out")
    if [ "$raw" = 0 ]; then
        [ "$got" = "$old_sums" ] || [ "$got" = "$new_sums" ] ||
            fail "$what: the folder checks out but is neither the old nor the new output"
    else
        [ "$journal" = yes ] || fail "$what: the folder does not check out and holds no journal: $(ls -A "$out")"
    fi
    expect_exit 0 "$KILN" verify "$out"
    got=$(sums_of "$out")
    [ "$got" = "$old_sums" ] || [ "$got" = "$new_sums" ] ||
        fail "$what: after verify the folder is neither the old nor the new output"
    if [ "$journal" = yes ]; then
        grep -q "put the earlier output in $out back in place: kiln process [0-9]* was killed" \
            "$work/stderr" || fail "$what: verify did not say it restored the output: $(cat "$work/stderr")"
        [ "$got" = "$old_sums" ] || fail "$what: a cut-off replace did not give the old output back"
    fi
    expect_exit 0 "$KILN" "${new_args[@]}" -o "$out"
    if [ -n "$debris" ]; then
        grep -Eq "removed [0-9]+ temporary files? \(.*\) that an interrupted run left in $out" \
            "$work/stderr" || fail "$what: the next build did not report the debris: $(cat "$work/stderr")"
    fi
    got=$(sums_of "$out")
    [ "$got" = "$new_sums" ] || fail "$what: the next build did not write the new output"
    left=$(ls -A "$out")
    [[ $left != *.tmp-* && $left != *.old-* && $left != *.kiln-journal* ]] ||
        fail "$what: the next build left: $left"
    expect_exit 0 "$KILN" verify "$out"
}

# 1. During the scan, with the record pool growing; and in a pack, while workers decode into
# the reserved tensor files.
signal_when_seen KILL "$out/.records.pool.tmp-*" "$KILN" "${new_args[@]}" -o "$out"
[ "$status" = 137 ] || fail "kill during the scan: exit status $status, expected 137"
check_after_kill "kill during the scan" debris
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 2 -q
signal_when_seen KILL "$out/.test.kten.tmp-*" \
    "$KILN" pack "$work/c.csv" -o "$out" --size 256 --filter lanczos3 --no-dct-scale --jobs 1
[ "$status" = 137 ] || fail "kill during a pack: exit status $status, expected 137"
check_after_kill "kill during a pack's work" debris

# 2. Every moment a file is finished (its fsync) and every step of the replace: count them in a
# whole run, then kill before each.
before_try
KILN_TEST_STEP_COUNT="$work/steps" LD_PRELOAD="$lib" "$KILN" "${new_args[@]}" -o "$out" ||
    fail "the counted run failed"
steps=$(cat "$work/steps")
# seven files finished and synced, the journal, two renames a file, the journal's removal
[ "$steps" -ge 30 ] || fail "only $steps steps counted in a run that replaces seven files"
for ((k = 1; k <= steps; k++)); do
    before_try
    status=0
    KILN_TEST_KILL_STEP=$k LD_PRELOAD="$lib" "$KILN" "${new_args[@]}" -o "$out" \
        >/dev/null 2>&1 || status=$?
    [ "$status" = 137 ] || fail "step $k of $steps: exit status $status, expected 137 (killed)"
    check_after_kill "kill before step $k of $steps"
done
echo ok
