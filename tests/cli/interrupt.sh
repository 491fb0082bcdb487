# SIGTERM and SIGINT end a run cleanly: every temporary file of the run -- the tensor files
# reserved whole at the start of a pack, build's record pool -- is removed before the process
# ends by the signal (the shell sees 128 + its number: 143, 130), the message says how many
# files and bytes went (checked against stat just before the signal), and the earlier output
# the run was to replace is exactly as it was and verifies. A signal the process was started
# with ignored (as nohup does for SIGHUP) stays ignored.
. "$(dirname "$0")/lib.sh"
demo_data "$work/data"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 5 -q

expect_exit 0 "$KILN" pack "$work/c.csv" -o "$work/old" --size 16 -q

# when_frozen PID: the count and bytes of the run's temporary files, by stat, into $seen.
when_frozen() { seen=$(sizes_of "$out/.*.tmp-$1-*"); }
# Each run replaces an earlier output, snapshotted.
before_try() {
    rm -rf "$out"
    cp -a "$work/old" "$out"
    snapshot "$out" >"$work/before"
}

# old_output_intact: the earlier output is exactly as it was (entries, inodes, bytes) and
# verifies.
old_output_intact() {
    snapshot "$out" >"$work/after"
    diff "$work/before" "$work/after" >&2 || fail "the interrupted run changed the earlier output"
    expect_exit 0 "$KILN" verify "$out"
}

# check_report SIGNAL N BYTES [growing]: the message names the signal, the files and bytes
# removed. "growing": the files may still grow between the stat and the removal (build's
# workers go on writing the record pool until the signal thread has removed it), so the
# bytes reported must be at least those seen.
check_report() {
    local name=$1 n=$2 b=$3 what=files got
    [ "$n" = 1 ] && what=file
    got=$(sed -n "s/^kiln: error: interrupted by $name; removed $n temporary $what ([0-9.]* MB, \([0-9]*\) bytes) of this run$/\1/p" \
        "$work/stderr")
    [ -n "$got" ] || fail "wrong or no report after $name (expected $n files): $(cat "$work/stderr")"
    if [ "${4:-}" = growing ]; then
        [ "$got" -ge "$b" ] || fail "after $name: $got bytes reported, $b seen before the signal"
    else
        [ "$got" = "$b" ] || fail "after $name: $got bytes reported, $b seen before the signal"
    fi
}

# 1. pack at a size whose tensor files are reserved up front (about 200 MB): SIGTERM once the
# last of them exists. Nothing of the run survives.
out="$work/out"
signal_when_seen TERM "$out/.test.kten.tmp-*" \
    "$KILN" pack "$work/c.csv" -o "$out" --size 512 --filter lanczos3 --jobs 1
[ "$status" = 143 ] || fail "SIGTERM: exit status $status, expected 143 (128 + 15)"
read -r n b <<<"$seen"
[ "$n" -ge 3 ] && [ "$b" -gt 100000000 ] || fail "expected three reserved tensor files, saw $seen"
check_report SIGTERM "$n" "$b"
old_output_intact

# 2. build interrupted with SIGINT (Ctrl-C) during its scan: the record pool goes too.
out="$work/b"
signal_when_seen INT "$out/.records.pool.tmp-*" \
    "$KILN" build "$work/data" -o "$out" --seed 5 --size 256 --jobs 1
[ "$status" = 130 ] || fail "SIGINT: exit status $status, expected 130 (128 + 2)"
read -r n b <<<"$seen"
[ "$n" -ge 1 ] || fail "the build had no record pool when it was interrupted"
check_report SIGINT "$n" "$b" growing
old_output_intact

# 3. Started with SIGHUP ignored (nohup), kiln keeps ignoring it and finishes.
out="$work/h"
(
    trap '' HUP
    signal_when_seen HUP "$out/.train.kten.tmp-*" \
        "$KILN" pack "$work/c.csv" -o "$out" --size 128 --jobs 1
    [ "$status" = 0 ] || fail "a pack started with SIGHUP ignored ended with $status after SIGHUP"
)
expect_exit 0 "$KILN" verify "$work/h"
echo ok
