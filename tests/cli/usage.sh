# Every command answers --help, bad command lines exit 2, bad input files exit 3 (docs/cli.md).
. "$(dirname "$0")/lib.sh"
for c in scan split pack build verify inspect; do
    expect_exit 0 "$KILN" "$c" --help
    grep -q "usage: kiln $c" "$work/stdout" || fail "$c --help does not show its usage line"
done
expect_exit 0 "$KILN" --version
grep -Eq '^kiln [0-9]+\.[0-9]+\.[0-9]+$' "$work/stdout" || fail "--version output: $(cat "$work/stdout")"
expect_exit 2 "$KILN"
expect_exit 2 "$KILN" frobnicate
grep -q "'frobnicate' is not a kiln command" "$work/stderr" || fail "unknown command message"
expect_exit 2 "$KILN" scan --no-such-option x -o y
expect_exit 2 "$KILN" scan "$work"                      # no -o
expect_exit 2 "$KILN" split "$work/c.csv"               # no --seed
expect_exit 2 "$KILN" split "$work/c.csv" --seed -4
expect_exit 2 "$KILN" split "$work/c.csv" --seed 1 --ratios 0:50:50
expect_exit 2 "$KILN" pack "$work/c.csv" -o "$work/o"   # no --size
expect_exit 2 "$KILN" pack "$work/c.csv" -o "$work/o" --size 0x5
expect_exit 2 "$KILN" pack "$work/c.csv" -o "$work/o" --size 8 --filter sinc
expect_exit 3 "$KILN" split "$work/missing.csv" --seed 1
grep -q "missing.csv" "$work/stderr" || fail "the message does not name the missing catalogue"
printf 'not,a,catalogue\r\n1,2,3\r\n' > "$work/bad.csv"
expect_exit 3 "$KILN" split "$work/bad.csv" --seed 1
grep -q "bad.csv: no 'source' column" "$work/stderr" || fail "malformed catalogue message: $(cat "$work/stderr")"
expect_exit 4 "$KILN" verify "$work"
expect_exit 3 "$KILN" inspect "$work/bad.csv"
grep -q "bad.csv: .*kten" "$work/stderr" || fail "inspect message: $(cat "$work/stderr")"
echo ok
