#!/usr/bin/env bash
# Side by side (a benchmark, not a test): kiln build against the decode-only limit (with the
# standard libraries alone, libjpeg-turbo and libpng/zlib, and with kiln's decoders, which
# inflate PNG image data with libdeflate) and the scripts a practitioner would write, on the same files and cores, in rounds that alternate the
# systems so that a slow moment of the machine hits all of them.
#
#   bash tests/bench/versus.sh SET BUILD_DIR [ROUNDS]
#
# SET is a folder made by kiln-bench-data (tests/bench/run.sh makes one); BUILD_DIR holds a
# Release kiln and tests/kiln-bench-decode. Prints per system the median wall time, the median
# of the per-round ratios to kiln build, and the peak RSS. The OpenCV script runs when Debian's
# python3-opencv is installed. Results belong in docs/performance.md with the machine stated.
set -euo pipefail
here=$(cd "$(dirname "$0")/../.." && pwd)
set_dir=${1:?name the benchmark set}
b=${2:?name the build folder}
rounds=${3:-5}
py=/usr/bin/python3
jobs=$(nproc)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
SIZE=128x128

names=(build decode-std-libs decode-kiln pool-pil one-process-pil)
cmds=(
    "rm -rf '$work/k' && '$b/kiln' build '$set_dir' -o '$work/k' -q --seed 1 --size $SIZE --jobs $jobs"
    "'$b/tests/kiln-bench-decode' '$set_dir' $SIZE $jobs --library"
    "'$b/tests/kiln-bench-decode' '$set_dir' $SIZE $jobs"
    "rm -rf '$work/p' && $py '$here/tests/bench/alternative_pool.py' '$set_dir' '$work/p' 1 $jobs pil"
    "rm -rf '$work/a' && $py '$here/tests/bench/alternative.py' '$set_dir' '$work/a' 1"
)
if $py -c 'import cv2' 2>/dev/null; then
    names+=(pool-opencv)
    cmds+=("rm -rf '$work/o' && $py '$here/tests/bench/alternative_pool.py' '$set_dir' '$work/o' 1 $jobs opencv")
fi

# One warm-up run of each (page cache), then the rounds.
for c in "${cmds[@]}"; do bash -c "$c" >/dev/null 2>&1; done
for r in $(seq "$rounds"); do
    for i in "${!cmds[@]}"; do
        /usr/bin/time -f '%e %M' -o "$work/t" bash -c "${cmds[$i]}" >/dev/null 2>&1
        echo "$r ${names[$i]} $(cat "$work/t")" >>"$work/times"
    done
done
echo "machine: $jobs online CPUs; $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //');" \
    "$(find "$set_dir" -type f | wc -l) files; $rounds rounds; target $SIZE x3 u8"
$py - "$work/times" "${names[@]}" <<'PY'
import statistics, sys
rows = [l.split() for l in open(sys.argv[1])]
names = sys.argv[2:]
t = {(int(r), n): float(s) for r, n, s, _ in rows}
rss = {}
for r, n, s, m in rows:
    rss[n] = max(rss.get(n, 0), int(m))
rounds = sorted({int(r) for r, *_ in rows})
print(f"{'system':16} {'median s':>9} {'/ build (per round)':>20} {'peak RSS (largest process)':>27}")
for n in names:
    med = statistics.median(t[(r, n)] for r in rounds)
    ratio = statistics.median(t[(r, n)] / t[(r, "build")] for r in rounds)
    print(f"{n:16} {med:9.3f} {ratio:20.2f} {rss[n] / 1024:23.0f} MiB")
PY
