# The demo data set of a test run, made once and shared by the command-level tests that read it
# (ctest fixture "demo_set"; tests/cli/lib.sh, demo_data). `make DIR` generates it into DIR,
# lists its checksums beside it and makes it read-only; `check DIR`, run after every test that
# used it, fails when a test changed, added or removed a file (tests that change the set work on
# a copy: demo_data_copy).
set -euo pipefail
: "${KILN_DEMO:?KILN_DEMO must name the demo data generator}"
what=$1 dir=$2
list() { (cd "$dir" && find . -type f -print0 | LC_ALL=C sort -z | xargs -0 sha256sum); }
case $what in
make)
    if [ -e "$dir" ]; then chmod -R u+w "$dir"; fi
    rm -rf "$dir" "$dir.gen"
    "$KILN_DEMO" "$dir.gen" >/dev/null
    mv "$dir.gen/glaze-tiles" "$dir"
    rmdir "$dir.gen"
    list >"$dir.sha256"
    chmod -R a-w "$dir"
    echo "ok: demo set in $dir ($(wc -l <"$dir.sha256") files)"
    ;;
check)
    now=$(list)
    if [ "$now" != "$(cat "$dir.sha256")" ]; then
        diff <(printf '%s\n' "$now") "$dir.sha256" >&2 || true
        echo "FAIL: a test changed the shared demo set $dir (lines above: < now, > as made)" >&2
        exit 1
    fi
    echo "ok: the shared demo set is as it was made"
    ;;
*)
    echo "usage: demo_set.sh make|check DIR" >&2
    exit 2
    ;;
esac
