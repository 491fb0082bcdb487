# Shared helpers for command-level tests. Each test sources this file; ctest passes KILN,
# KILN_DEMO, KILN_TESTDATA, PYTHON, KILN_SRC and KILN_TOOLS in the environment, and
# KILN_DEMO_SET to the tests that use the shared demo set.
set -euo pipefail
: "${KILN:?KILN must name the kiln binary}"
: "${PYTHON:=/usr/bin/python3}"
: "${KILN_SRC:?KILN_SRC must name the source tree}"
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

fail() {
    echo "FAIL: $*" >&2
    exit 1
}

skip() {
    echo "SKIP: $*"
    exit 77
}

need_testdata() {
    [ -n "${KILN_TESTDATA:-}" ] && [ -d "$KILN_TESTDATA/$1" ] ||
        skip "published test data $1 not found under ${KILN_TESTDATA:-(unset)}"
}

need_python() {
    "$PYTHON" -c 'import numpy, PIL' 2>/dev/null ||
        skip "$PYTHON with numpy and PIL is needed (Debian: python3-numpy python3-pil)"
}

# expect_exit N command...: runs the command, fails unless it exits with status N. Its
# standard output and error are kept in $work/stdout and $work/stderr.
expect_exit() {
    local want=$1 got=0
    shift
    "$@" >"$work/stdout" 2>"$work/stderr" || got=$?
    if [ "$got" != "$want" ]; then
        echo "--- stdout" >&2; cat "$work/stdout" >&2
        echo "--- stderr" >&2; cat "$work/stderr" >&2
        fail "'$*' exited $got, expected $want"
    fi
}

# first_file FIND-ARGUMENTS...: the first path find prints, in byte order. The list is captured
# whole: piping it into head would let head exit early and kill find or sort with SIGPIPE, which
# set -o pipefail turns into a failure of the test now and then.
first_file() {
    local all
    all=$(find "$@" | LC_ALL=C sort)
    [ -n "$all" ] || fail "find $* found nothing"
    printf '%s\n' "${all%%$'\n'*}"
}

# demo_data DIR: DIR becomes the demo data set's class-folder root (crawling/, crazing/,
# pinholing/, sound/), so the folder label rule sees the four classes. Under ctest DIR is a link
# to the set the run generated once (fixture demo_set, tests/cli/demo_set.sh), which is read-only
# and checked after the tests: a test that changes, adds or removes files uses demo_data_copy.
# Run by hand without KILN_DEMO_SET, the set is generated into DIR.
demo_data() {
    if [ -n "${KILN_DEMO_SET:-}" ]; then
        [ -d "$KILN_DEMO_SET" ] || fail "the shared demo set $KILN_DEMO_SET is missing"
        ln -s "$KILN_DEMO_SET" "$1"
        return
    fi
    "$KILN_DEMO" "$1.gen" >/dev/null
    mv "$1.gen/glaze-tiles" "$1"
    rmdir "$1.gen"
}

# demo_data_copy DIR: a private, writable copy of the demo data set at DIR.
demo_data_copy() {
    if [ -n "${KILN_DEMO_SET:-}" ]; then
        cp -r "$KILN_DEMO_SET" "$1"
        chmod -R u+w "$1"
        return
    fi
    demo_data "$1"
}

need_torch() {
    "$PYTHON" -c 'import torch' 2>/dev/null ||
        skip "$PYTHON without PyTorch (Debian: python3-torch)"
}

# kten_install: installs the kten package the way the README's set-up does (examples/python/install.sh,
# here --user into $work/pyuser through PYTHONUSERBASE), so tests import it as users do:
# installed, never from the source tree.
kten_install() {
    "$PYTHON" -c 'import setuptools, wheel, pip' 2>/dev/null ||
        skip "$PYTHON cannot install packages (Debian: python3-pip python3-setuptools python3-wheel)"
    export PYTHONUSERBASE="$work/pyuser"
    PYTHON="$PYTHON" bash "$KILN_SRC/examples/python/install.sh" --user >"$work/install.log" 2>&1 || {
        cat "$work/install.log" >&2
        fail "examples/python/install.sh --user"
    }
    local got
    got=$(cd / && "$PYTHON" -c 'import kten; print(kten.__file__)')
    case "$got" in
    "$PYTHONUSERBASE"/*) ;;
    *) fail "kten was imported from $got, not from the test's installation" ;;
    esac
}

# signal_when_seen SIG GLOB command...: starts the command in the background with SIGINT at its
# default action (a script's background jobs ignore SIGINT otherwise), freezes it (SIGSTOP) as
# soon as a file matching GLOB exists, calls `when_frozen PID` if the test defines it, sends
# SIG, lets it go on (SIGCONT) and waits. Its exit status is left in $status, its standard
# error in $work/stderr. A command that ends before it is caught is run again (`before_try` is
# called before every try if defined), three times at most; then the test fails.
signal_when_seen() {
    local sig=$1 glob=$2 try pid f
    shift 2
    for try in 1 2 3; do
        if declare -F before_try >/dev/null; then before_try; fi
        env --default-signal=INT "$@" >/dev/null 2>"$work/stderr" &
        pid=$!
        while kill -0 "$pid" 2>/dev/null; do
            for f in $glob; do
                [ -e "$f" ] && kill -STOP "$pid" 2>/dev/null || continue
                if declare -F when_frozen >/dev/null; then when_frozen "$pid"; fi
                kill -"$sig" "$pid"
                kill -CONT "$pid" 2>/dev/null || true # gone already after SIGKILL
                status=0
                { wait "$pid"; } 2>/dev/null || status=$? # without the shell's "Killed" note
                return 0
            done
            sleep 0.01
        done
        wait "$pid" || true
    done
    fail "'$*' finished three times before it could be sent SIG$sig"
}

# sizes_of GLOB: "<count> <bytes>" of the regular files matching GLOB (stat, not kiln).
sizes_of() {
    local n=0 b=0 f
    for f in $1; do
        [ -f "$f" ] && [ ! -L "$f" ] || continue
        n=$((n + 1))
        b=$((b + $(stat -c %s "$f")))
    done
    echo "$n $b"
}

# peak_rss command...: runs the command (stdout and stderr into $work/stdout and $work/stderr)
# and sets $rss_kib to its peak resident set size in KiB (getrusage of the child) and $status
# to its exit status.
peak_rss() {
    local out
    status=0
    out=$("$PYTHON" -c '
import resource, subprocess, sys
with open(sys.argv[1], "wb") as o, open(sys.argv[2], "wb") as e:
    r = subprocess.run(sys.argv[3:], stdout=o, stderr=e)
print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss, r.returncode)
' "$work/stdout" "$work/stderr" "$@") || fail "could not run $*"
    read -r rss_kib status <<<"$out"
}

# snapshot DIR: every entry of DIR with its inode and size, then every file's SHA-256: what
# "exactly as it was" is compared on.
snapshot() {
    (cd "$1" && find . -mindepth 1 -printf '%p %i %s\n' | LC_ALL=C sort &&
        find . -type f -print0 | LC_ALL=C sort -z | xargs -0 -r sha256sum)
}
