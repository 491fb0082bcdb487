#!/usr/bin/env bash
# Memory at scale (docs/performance.md, "Memory at scale"): peak RSS of scan, split, pack and
# build on N generated small pictures (tests/bench/make_scale_set.c), against the brief's bound
# of 64 MiB + 300 bytes per catalogued item. A benchmark, not a test: it prints figures.
#
#   bash tests/bench/scale.sh N [--tar]     e.g. 100000; 1000000 --tar (one 1.5 GB archive)
#
# KILN_BUILD (default build/) holds kiln and kiln-bench-scale; BENCH_WORK keeps the files
# (default: a scratch folder, removed at the end); BENCH_JOBS the --jobs (default 2).
set -euo pipefail
here=$(cd "$(dirname "$0")/../.." && pwd)
build=${KILN_BUILD:-$here/build}
n=${1:?name the number of items}
tar=${2:-}
jobs=${BENCH_JOBS:-2}
kiln="$build/kiln"
gen="$build/tests/kiln-bench-scale"
[ -x "$kiln" ] && [ -x "$gen" ] || { echo "build kiln and kiln-bench-scale in $build first" >&2; exit 1; }
work=${BENCH_WORK:-$(mktemp -d)}
[ -n "${BENCH_WORK:-}" ] || trap 'rm -rf "$work"' EXIT
mkdir -p "$work"

src="$work/set"
[ "$tar" = --tar ] && src="$work/set.tar"
if [ ! -e "$src" ]; then
    echo "generating $n pictures into $src" >&2
    "$gen" "$src" "$n" $tar
fi
limit_kib=$(((64 * 1024 * 1024 + 300 * n) / 1024))

# measure NAME command...: peak RSS (KiB) and wall time of one command, as a table row.
measure() {
    local name=$1 out
    shift
    out=$(/usr/bin/time -f '%M %e' "$@" 2>&1 >/dev/null | tail -n 1)
    read -r rss secs <<<"$out"
    printf '| %-6s | %7.1f MiB | %7.1f MiB | %s | %8s s |\n' "$name" \
        "$(echo "$rss / 1024" | bc -l)" "$(echo "$limit_kib / 1024" | bc -l)" \
        "$([ "$rss" -le "$limit_kib" ] && echo "within" || echo "OVER  ")" "$secs"
}

echo "| stage  | peak RSS    | bound       | verdict | wall       |"
echo "| ---    | ---         | ---         | ---     | ---        |"
measure scan "$kiln" scan "$src" -o "$work/c.csv" --jobs "$jobs" -q
measure split "$kiln" split "$work/c.csv" --seed 1 -q
measure pack "$kiln" pack "$work/c.csv" -o "$work/out" --size 16 --jobs "$jobs" -q
measure build "$kiln" build "$src" -o "$work/bout" --seed 1 --size 16 --jobs "$jobs" -q
echo "($n items; bound = 64 MiB + 300 B/item)"
