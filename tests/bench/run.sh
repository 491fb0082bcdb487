#!/usr/bin/env bash
# The benchmark (not a test): bash tests/bench/run.sh [SCALE]
# Builds a Release kiln, generates the benchmark set (SCALE 1: 200 camera JPEGs 1600x1200,
# 200 RGB PNGs 640x480, 100 16-bit grey PNGs 1024x1024), and prints, from runs side by side on
# the same files and cores (medians of BENCH_RUNS runs, default 5):
#   kiln build against the decode-only limit with the standard libraries and with kiln's own
#   decoders, kiln pack / decode limit, one-process script / kiln build, speed-up from --jobs 1
#   to 2, peak memory for this set and for 20 000 small images, scan throughput against
#   sha256sum alone, near-duplicate search of 10^6 hashes, split of 10^6 generated catalogue
#   rows (tests/bench/make_catalogue_rows.py) without and with the near-duplicate check, and
#   the side-by-side table of tests/bench/versus.sh (the Pool scripts). Targets printed are
#   those of docs/performance.md. Results belong there.
set -euo pipefail
here=$(cd "$(dirname "$0")/../.." && pwd)
scale=${1:-1}
runs=${BENCH_RUNS:-5}
py=/usr/bin/python3
work=${BENCH_WORK:-$(mktemp -d)}
trap '[ -z "${BENCH_WORK:-}" ] && rm -rf "$work"' EXIT
b="$work/build"
cmake -S "$here" -B "$b" -DCMAKE_BUILD_TYPE=Release -DKILN_TESTS=ON >/dev/null
cmake --build "$b" -j"$(nproc)" >/dev/null
K="$b/kiln"
jobs=$(nproc)
echo "machine: $jobs online CPUs; $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //')"
[ -d "$work/set" ] || "$b/tests/kiln-bench-data" "$work/set" "$scale"
du -sh "$work/set" | cut -f1 | sed 's/^/benchmark set size: /'

# median SECONDS... of a command run $runs times (after one warm-up run for the page cache); a
# command that fails stops the benchmark (a failing command's time would be a meaningless figure)
median() {
    local t=() i
    "$@" >/dev/null 2>"$work/median.err" || { echo "benchmark command failed: $*" >&2; cat "$work/median.err" >&2; exit 1; }
    for i in $(seq "$runs"); do
        local s e
        s=$(date +%s.%N); "$@" >/dev/null 2>&1; e=$(date +%s.%N)
        t+=("$(echo "$e - $s" | bc -l)")
    done
    printf '%s\n' "${t[@]}" | sort -g | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'
}
ratio() { echo "scale=3; $1 / $2" | bc -l; }

SIZE=128x128
limit=$(median "$b/tests/kiln-bench-decode" "$work/set" $SIZE "$jobs")
limit_full=$(median "$b/tests/kiln-bench-decode" "$work/set" $SIZE "$jobs" --full)
limit_trusted=$(median "$b/tests/kiln-bench-decode" "$work/set" $SIZE "$jobs" --trusted)
limit_std=$(median "$b/tests/kiln-bench-decode" "$work/set" $SIZE "$jobs" --library)
build=$(median bash -c "rm -rf '$work/out' && '$K' build '$work/set' -o '$work/out' -q --seed 1 --size $SIZE --jobs $jobs")
"$K" scan "$work/set" -o "$work/c.csv" -q --jobs "$jobs" && "$K" split "$work/c.csv" --seed 1 -q >/dev/null
pack=$(median bash -c "rm -rf '$work/pout' && '$K' pack '$work/c.csv' -o '$work/pout' -q --size $SIZE --jobs $jobs")
scan=$(median "$K" scan "$work/set" -o "$work/c2.csv" -q --jobs "$jobs")
alt=$(median "$py" "$here/tests/bench/alternative.py" "$work/set" "$work/alt" 1)
build1=$(median bash -c "rm -rf '$work/o1' && '$K' build '$work/set' -o '$work/o1' -q --seed 1 --size $SIZE --jobs 1")
build2=$(median bash -c "rm -rf '$work/o2' && '$K' build '$work/set' -o '$work/o2' -q --seed 1 --size $SIZE --jobs 2")
sha=$(median bash -c "find '$work/set' -type f -exec cat {} + | sha256sum")
bytes=$(du -sb "$work/set" | cut -f1)
rss=$( { /usr/bin/time -f %M "$K" build "$work/set" -o "$work/rss" -q --seed 1 --size $SIZE --jobs "$jobs" ; } 2>&1 | tail -n 1)
rm -rf "$work/rss"
if [ ! -d "$work/small" ]; then
    "$py" - "$work/small" <<'PY'
import os, sys
from PIL import Image
d = sys.argv[1]
for c in range(4):
    os.makedirs(f"{d}/c{c}", exist_ok=True)
for i in range(20000):
    Image.new("RGB", (48, 32), ((i * 37) % 256, (i * 11) % 256, (i * 5) % 256)).save(f"{d}/c{i % 4}/s{i:05d}.png")
PY
fi
rss_small=$( { /usr/bin/time -f %M "$K" build "$work/small" -o "$work/rss2" -q --seed 1 --size 32 --jobs "$jobs" ; } 2>&1 | tail -n 1)
rm -rf "$work/rss2"

echo
printf 'decode limit (pack scale)   %8.3f s   with the standard libraries alone (libpng + zlib): %.3f s; checksums skipped as in pack: %.3f s; full-size decode %.3f s\n' "$limit" "$limit_std" "$limit_trusted" "$limit_full"
printf 'kiln build                  %8.3f s   build / standard-library decode   %s   (target <= 1.0); / kiln-decoder limit %s\n' "$build" "$(ratio "$build" "$limit_std")" "$(ratio "$build" "$limit")"
printf 'kiln pack                   %8.3f s   pack / decode limit    %s   (against the limit with checksums: %s)\n' "$pack" "$(ratio "$pack" "$limit_trusted")" "$(ratio "$pack" "$limit")"
printf 'one-process PIL + numpy     %8.3f s   script / build         %s   (target >= 3; one core each: %s); the Pool script: see the side-by-side table (target >= 1.9)\n' "$alt" "$(ratio "$alt" "$build")" "$(ratio "$alt" "$build1")"
printf 'kiln build --jobs 1 / 2     %8.3f / %.3f s   speed-up %s   (target >= 1.85)\n' "$build1" "$build2" "$(ratio "$build1" "$build2")"
printf 'kiln scan                   %8.3f s   %.0f MB/s   (sha256sum alone: %.0f MB/s)\n' "$scan" "$(echo "$bytes / $scan / 1000000" | bc -l)" "$(echo "$bytes / $sha / 1000000" | bc -l)"
printf 'peak RSS, benchmark set     %8d KiB for %d items (target 64 MiB + 300 B/item)\n' "$rss" "$(find "$work/set" -type f | wc -l)"
printf 'peak RSS, 20 000 small      %8d KiB (target %d KiB)\n' "$rss_small" "$(( 65536 + 20000 * 300 / 1024 ))"
"$b/tests/kiln-bench-neardup" -n 1000000 -k 3 6 | sed 's/^/near duplicates: /'
[ -f "$work/big.csv" ] || "$py" "$here/tests/bench/make_catalogue_rows.py" "$work/big.csv" 1000000
split_off=$(median "$K" split "$work/big.csv" --seed 1 -o "$work/big-out.csv" -q --near-duplicates off)
split_on=$(median "$K" split "$work/big.csv" --seed 1 -o "$work/big-out.csv" -q)
printf 'split of 10^6 rows          %8.3f s   without the near-duplicate check (target <= 8); with it (the default) %.3f s\n' "$split_off" "$split_on"
echo
echo "side by side, alternating rounds (tests/bench/versus.sh):"
bash "$here/tests/bench/versus.sh" "$work/set" "$b" "$runs"
