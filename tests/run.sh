#!/usr/bin/env bash
# Builds kiln and runs the whole test suite: `bash tests/run.sh` (add --sanitize for an
# AddressSanitizer + UndefinedBehaviorSanitizer build in build-san/). Installs missing Debian
# packages when run as root; otherwise prints the apt-get line to run.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
. "$here/tests/deps.sh"
kiln_deps_install "$KILN_BUILD_PACKAGES $KILN_TEST_PACKAGES"

dir=build flags=()
if [ "${1:-}" = "--sanitize" ]; then
    dir=build-san
    flags=(-DKILN_SANITIZE=address,undefined -DCMAKE_BUILD_TYPE=Debug)
fi
cmake -S "$here" -B "$here/$dir" -DKILN_WERROR=ON -DKILN_TESTS=ON "${flags[@]}" >/dev/null
cmake --build "$here/$dir" -j"$(nproc)"
cd "$here/$dir"
ctest --output-on-failure -j"$(nproc)"
