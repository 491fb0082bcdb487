# No shell script of the project pipes into a reader that may stop early (head, grep -q,
# grep -m): under `set -o pipefail` the writer then dies of SIGPIPE now and then, and the script
# fails -- or, inside an `if`, silently takes the wrong branch. Capture the output first
# (tests/cli/lib.sh: first_file). Pattern from the brief's CI rules.
. "$(dirname "$0")/lib.sh"
found=$(cd "$KILN_SRC" && grep -rnE --include='*.sh' --exclude-dir='build*' --exclude-dir=.git \
    '\|[[:space:]]*(head|grep[[:space:]]+(-[a-zA-Z]*[qm]|--quiet|--max-count))([^a-zA-Z_-]|$)' . || true)
[ -z "$found" ] || fail "pipes into an early-exiting reader:
$found"
# The check itself must see such a line (so a broken pattern cannot pass silently).
# (The probe lines are assembled at run time so this file does not match itself.)
probe=$(printf 'x=$(find . | sort | %s -n 1)\nif ls | %s -q y; then :; fi\nls | grep -c z\n' head grep |
    grep -cE '\|[[:space:]]*(head|grep[[:space:]]+(-[a-zA-Z]*[qm]|--quiet|--max-count))([^a-zA-Z_-]|$)' || true)
[ "$probe" = 2 ] || fail "the pattern matched $probe of the 2 probe lines"
echo ok
