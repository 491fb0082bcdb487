# The Debian packages kiln needs, in one place. Sourced by examples/demo.sh, tests/run.sh,
# tests/fuzz/run.sh and .ci/run.
# kiln_deps_install: installs what is missing when root, otherwise prints the exact command.
KILN_BUILD_PACKAGES="build-essential cmake pkg-config libpng-dev libjpeg62-turbo-dev zlib1g-dev \
libarchive-dev libssl-dev libjansson-dev libtiff-dev libdeflate-dev libfreetype-dev libfontconfig-dev fonts-dejavu-core"
# The Python client (examples/python/, docs/training.md): what examples/python/install.sh and the demo's
# examples/train_torch.py need.
KILN_PYTHON_PACKAGES="python3-numpy python3-pip python3-setuptools python3-wheel python3-torch"
# Tests: reference libraries, scikit-learn's digits and scikit-image's pictures as published
# real images, and chromium for the report's browser test (tests/cli/report_browser.sh).
KILN_TEST_PACKAGES="libcmocka-dev python3-numpy python3-pil zip xz-utils bzip2 zstd libarchive-tools \
$KILN_PYTHON_PACKAGES python3-sklearn python3-skimage python-matplotlib-data python3-tifffile \
chromium"
# tests/fuzz/run.sh: clang with libFuzzer and the sanitizer run-times
KILN_FUZZ_PACKAGES="clang libclang-rt-14-dev"

kiln_deps_install() {
    local pkgs="$1" missing="" p
    for p in $pkgs; do
        dpkg -s "$p" >/dev/null 2>&1 || missing="$missing $p"
    done
    [ -z "$missing" ] && return 0
    if [ "$(id -u)" != 0 ]; then
        echo "kiln: these Debian packages are missing:$missing" >&2
        echo "install them as root with:" >&2
        echo "  apt-get update && apt-get install -y$missing" >&2
        return 1
    fi
    echo "installing:$missing" >&2
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -q >/dev/null && apt-get install -y -q $missing >/dev/null
}
