#!/usr/bin/env bash
# ThreadSanitizer over the threaded stages: a kiln built with -fsanitize=thread runs a demo build
# with --jobs 2, and a build whose record pool cannot grow (a file size limit, SIGXFSZ ignored,
# so writes fail with EFBIG) so that several scan workers fail the run at the same moment, the
# path where workers once wrote the shared error without its mutex. Any report fails (exit 66).
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cmake -S "$here" -B "$work/tsan" -DKILN_SANITIZE=thread -DCMAKE_BUILD_TYPE=Debug -DKILN_TESTS=OFF \
    -DKILN_WERROR=ON >/dev/null
cmake --build "$work/tsan" -j"$(nproc)" --target kiln kiln-demo-data >/dev/null
export TSAN_OPTIONS="halt_on_error=1 exitcode=66"
"$work/tsan/kiln-demo-data" "$work/data" >/dev/null
common=(--seed 1 --group-regex '/(T[0-9]+)_' --size 48 --jobs 2 -q)
"$work/tsan/kiln" build "$work/data/glaze-tiles" -o "$work/ok" "${common[@]}" 2>"$work/err" || {
    cat "$work/err"
    echo "FAIL: build --jobs 2 under ThreadSanitizer"
    exit 1
}
echo "ok: build --jobs 2 without a race report"
rc=0
(trap '' XFSZ; ulimit -f 200; "$work/tsan/kiln" build "$work/data/glaze-tiles" -o "$work/full" \
    "${common[@]}") 2>"$work/err" || rc=$?
tsan_report=$(grep -c "ThreadSanitizer" "$work/err" || true)
if [ $rc = 66 ] || [ "$tsan_report" != 0 ]; then
    cat "$work/err"
    echo "FAIL: ThreadSanitizer report when scan workers fail together"
    exit 1
fi
[ $rc != 0 ] || { echo "FAIL: a build that cannot write its record pool succeeded"; exit 1; }
grep -q "kiln: error: .*File too large" "$work/err" || { cat "$work/err"; echo "FAIL: no error"; exit 1; }
echo "ok: failed writes in several scan workers end the run without a race report (exit $rc)"
