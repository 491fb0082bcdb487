#!/usr/bin/env bash
# Builds the libFuzzer harnesses (clang; ASan + UBSan; KILN_FUZZ) in their own folder and runs
# each one for a fixed time, one after the other. DEVELOPERS.md, "Fuzzing".
#
#   bash tests/fuzz/run.sh [HARNESS...]          # every harness, FUZZ_SECONDS (30) each
#   FUZZ_SECONDS=600 nice -n 19 bash tests/fuzz/run.sh png jpeg    # a long run of two
#
# Environment: FUZZ_SECONDS per harness; FUZZ_BUILD (default build-fuzz/ in the source tree);
# FUZZ_SEED libFuzzer's random seed (default 1, so a CI pass explores the same inputs each time
# and a finding can be replayed; 0 lets libFuzzer pick one, for long local runs); FUZZ_ARGS extra libFuzzer options (e.g. "-jobs=2 -workers=2"); KILN_TESTDATA (published test
# images, used as extra corpora when present). The corpus grows in FUZZ_BUILD/corpus/NAME
# across runs; crashes land in FUZZ_BUILD/crashes/ and make the script fail.
set -euo pipefail
src=$(cd "$(dirname "$0")/../.." && pwd)
fuzz=$src/tests/fuzz
secs=${FUZZ_SECONDS:-30}
build=${FUZZ_BUILD:-$src/build-fuzz}
all="png jpeg tiff pnm exif archive csv catalog_csv labels_csv items_csv kten manifest keep"
harnesses=${*:-$all}

for d in "${KILN_TESTDATA:-}" "$src/../shared/testdata" "$src/../../shared/testdata" \
         /work/shared/testdata; do
    if [ -n "$d" ] && [ -f "$d/CHECKS.md" ]; then
        testdata=$(cd "$d" && pwd)
        break
    fi
done
testdata=${testdata:-}
[ -n "$testdata" ] || echo "published test data not found: fuzzing from generated seeds only"
. "$src/tests/deps.sh"
kiln_deps_install "$KILN_BUILD_PACKAGES python3-numpy python3-pil $KILN_FUZZ_PACKAGES"

CC=clang cmake -S "$src" -B "$build" -DKILN_FUZZ=ON -DKILN_WERROR=ON \
    -DCMAKE_BUILD_TYPE=RelWithDebInfo >/dev/null
cmake --build "$build" --target kiln_fuzz_all -j2 >/dev/null
/usr/bin/python3 "$fuzz/make_seeds.py" "$build/seeds" >/dev/null
mkdir -p "$build/crashes" "$build/logs"

# Per harness: largest input, dictionary, and published test files used as extra corpora.
max_len() {
    case $1 in
        png|jpeg|tiff|pnm) echo 32768 ;;
        archive) echo 65536 ;;
        kten) echo 20480 ;;
        *) echo 8192 ;;
    esac
}
dict() {
    case $1 in
        manifest|keep) echo json ;;
        *) echo "$1" ;;
    esac
}
published() {
    [ -n "$testdata" ] || return 0
    case $1 in
        png) echo "$testdata/pngsuite $testdata/pngsuite-full $testdata/libpng-crashers" ;;
        jpeg) echo "$testdata/libjpeg-turbo" ;;
        tiff) echo "$testdata/libtiff" ;;
        pnm) echo "$testdata/libjpeg-turbo $testdata/libtiff" ;;
    esac
}

failed="" total_runs=0
printf '%-12s %8s %12s %8s %s\n' harness seconds executions exec/s result
for h in $harnesses; do
    [ -x "$build/tests/fuzz/fuzz_$h" ] || { echo "no harness named $h (known: $all)" >&2; exit 2; }
    corpus=$build/corpus/$h
    mkdir -p "$corpus"
    log=$build/logs/$h.log
    start=$SECONDS
    set +e
    # -timeout: one input may take 10 s under the sanitizers before it counts as a hang;
    # -rss_limit_mb: the harness limits keep honest inputs far below it (tests/fuzz/fuzz.h).
    # shellcheck disable=SC2046,SC2086
    "$build/tests/fuzz/fuzz_$h" -seed="${FUZZ_SEED:-1}" -max_total_time="$secs" -timeout=10 -rss_limit_mb=2048 \
        -max_len="$(max_len "$h")" -dict="$fuzz/dict/$(dict "$h").dict" \
        -artifact_prefix="$build/crashes/$h-" -print_final_stats=1 ${FUZZ_ARGS:-} \
        "$corpus" "$build/seeds/$h" "$fuzz/regress/$h" $(published "$h") >"$log" 2>&1
    rc=$?
    set -e
    runs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log")
    runs=${runs:-0}
    took=$((SECONDS - start))
    total_runs=$((total_runs + runs))
    if [ $rc -eq 0 ]; then
        result=ok
    else
        result="FAILED (exit $rc; log $log)"
        failed="$failed $h"
    fi
    printf '%-12s %8d %12d %8d %s\n' "$h" "$took" "$runs" $((runs / (took > 0 ? took : 1))) \
        "$result"
    if [ $rc -ne 0 ]; then
        grep -E -A30 '==ERROR|invariant broken|runtime error|deadly signal|Test unit written' \
            "$log" | tail -60 >&2 || true
        # The input itself, so a finding on a machine that is gone (CI) can be kept in
        # tests/fuzz/regress/NAME/: `base64 -d > tests/fuzz/regress/NAME/what-it-shows`.
        for f in "$build/crashes/$h-"*; do
            [ -f "$f" ] || continue
            echo "input $(basename "$f") ($(wc -c <"$f") bytes), base64:" >&2
            base64 -w 76 "$f" >&2
        done
    fi
done
echo "total executions: $total_runs"
if [ -n "$failed" ]; then
    echo "fuzzing found problems in:$failed; inputs in $build/crashes/" >&2
    exit 1
fi
