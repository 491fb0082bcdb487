# Memory at scale (docs/performance.md, "Memory at scale"): scan, split, pack and build of 30 000
# generated small pictures (tests/bench/make_scale_set.c, near-duplicate check on, the
# default) each stay within the brief's bound of 64 MiB + 300 bytes per item, measured as the
# peak RSS the kernel reports (getrusage). The 10^5 and 10^6 figures come from
# tests/bench/scale.sh, a benchmark. Under a sanitizer (shadow memory, quarantine) the bound
# does not apply: the commands must still succeed.
. "$(dirname "$0")/lib.sh"
need_python
n=30000
"$KILN_TOOLS/kiln-bench-scale" "$work/set" "$n" >/dev/null || fail "could not generate the set"
limit=$(((64 * 1024 * 1024 + 300 * n) / 1024))
ldd "$KILN" >"$work/ldd"
sanitized=0
grep -q 'libasan\|libtsan' "$work/ldd" && sanitized=1
check() {
    [ "$status" = 0 ] || fail "$1 exited $status: $(cat "$work/stderr")"
    if [ "$sanitized" = 0 ] && [ "$rss_kib" -gt "$limit" ]; then
        fail "$1 peaked at $rss_kib KiB for $n items (bound $limit KiB)"
    fi
    echo "$1: $rss_kib KiB (bound $limit KiB)"
}
peak_rss "$KILN" scan "$work/set" -o "$work/c.csv" --jobs 2 -q
check scan
peak_rss "$KILN" split "$work/c.csv" --seed 1 -q
check split
peak_rss "$KILN" pack "$work/c.csv" -o "$work/out" --size 16 --jobs 2 -q
check pack
peak_rss "$KILN" build "$work/set" -o "$work/bout" --seed 1 --size 16 --jobs 2 -q
check build
echo "ok: memory at scale"
