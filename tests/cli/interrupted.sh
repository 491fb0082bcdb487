# A pack or build killed mid-run (SIGKILL: no chance to clean up) leaves its hidden temporary
# files; the next run into the folder removes them -- only regular files named by kiln's own
# temporary-name pattern (formats/files/outfile.c) for one of its outputs, whose process is gone --
# says how many files and bytes (checked against stat), and then writes a complete output.
# Look-alikes are left alone: a symbolic link with such a name, a hidden file of another name,
# and a temporary file of a process that is still running.
. "$(dirname "$0")/lib.sh"
demo_data "$work/data"
expect_exit 0 "$KILN" scan "$work/data" -o "$work/c.csv" -q
expect_exit 0 "$KILN" split "$work/c.csv" --seed 5 -q

# 1. pack killed while writing: --size 256 makes ~38 MB of tensors, reserved up front, one
# file after the other (train, val, test): once test's temporary file exists, the other two
# are complete.
before_try() { rm -rf "$work/out"; }
signal_when_seen KILL "$work/out/.test.kten.tmp-*" \
    "$KILN" pack "$work/c.csv" -o "$work/out" --size 256 --filter lanczos3 --jobs 1
[ ! -e "$work/out/manifest.json" ] || fail "a killed pack left a manifest"
read -r n bytes < <(sizes_of "$work/out/.*.tmp-*")
[ "$n" -ge 3 ] || fail "expected the killed pack's temporary files, found $n: $(ls -A "$work/out")"
[ "$bytes" -gt 1000000 ] || fail "the killed pack's files hold only $bytes bytes"
# Look-alikes that must survive the next run.
printf 'user data\n' > "$work/precious"
ln -s "$work/precious" "$work/out/.test.kten.tmp-999999-0"
printf 'x' > "$work/out/.notes.tmp-1-0"
printf 'y' > "$work/out/.val.kten.tmp-$$-0"   # this shell is alive
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$work/out" --size 16
grep -q "removed $n temporary files ([0-9.]* MB, $bytes bytes) that an interrupted run left in $work/out" \
    "$work/stderr" || fail "no or wrong report of the removed files: $(cat "$work/stderr")"
grep -q "holds 1 temporary file of another kiln process that is still running" "$work/stderr" ||
    fail "the live process's file was not reported: $(cat "$work/stderr")"
[ -L "$work/out/.test.kten.tmp-999999-0" ] && [ "$(cat "$work/precious")" = "user data" ] ||
    fail "the symbolic link or its target was touched"
[ -f "$work/out/.notes.tmp-1-0" ] || fail "a hidden file of another name was removed"
[ -f "$work/out/.val.kten.tmp-$$-0" ] || fail "the running process's file was removed"
rm "$work/out/.test.kten.tmp-999999-0" "$work/out/.notes.tmp-1-0" "$work/out/.val.kten.tmp-$$-0"
left=$(ls -A "$work/out")
[[ $left != *.tmp-* ]] || fail "temporary files left after the rerun: $left"
expect_exit 0 "$KILN" verify "$work/out"
# A clean folder: nothing to report.
expect_exit 0 "$KILN" pack "$work/c.csv" -o "$work/out" --size 16
if grep -q "temporary" "$work/stderr"; then fail "a clean rerun reported debris: $(cat "$work/stderr")"; fi

# 2. build killed during its scan, with the record pool open.
before_try() { rm -rf "$work/b"; }
signal_when_seen KILL "$work/b/.records.pool.tmp-*" \
    "$KILN" build "$work/data" -o "$work/b" --seed 5 --size 256 --jobs 1
read -r n bytes < <(sizes_of "$work/b/.*.tmp-*")
[ "$n" -ge 1 ] || fail "the killed build left no record pool: $(ls -A "$work/b")"
expect_exit 0 "$KILN" build "$work/data" -o "$work/b" --seed 5 --size 16 -q
if [ "$n" = 1 ]; then what="1 temporary file"; else what="$n temporary files"; fi
grep -q "removed $what ([0-9.]* MB, $bytes bytes) that an interrupted run left in $work/b" \
    "$work/stderr" || fail "build did not report the removed files: $(cat "$work/stderr")"
left=$(ls -A "$work/b")
[[ $left != *.tmp-* ]] || fail "temporary files left after the build rerun: $left"
expect_exit 0 "$KILN" verify "$work/b"
echo ok
