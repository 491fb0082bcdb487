#!/usr/bin/env bash
# Installs the kten Python package (the .kten reader and PyTorch Dataset) for Debian's
# /usr/bin/python3, offline: `bash examples/python/install.sh [--user]`. As root it installs for every
# user (/usr/local/lib/python3.*/dist-packages), like the Debian packages kiln needs; otherwise,
# or with --user, into ~/.local. Needs python3-pip, python3-setuptools, python3-wheel and
# python3-numpy (tests/deps.sh: KILN_PYTHON_PACKAGES). PYTHON overrides the interpreter.
#
# Debian marks its Python "externally managed" (PEP 668) and pip refuses to install beside it
# unless told --break-system-packages. That is safe here: kten is pure Python, pip is run with
# --no-deps and --no-index, so it adds kten's own files under /usr/local or ~/.local and never
# removes or replaces a Debian package. (In a virtual environment none of this applies:
# `pip install --no-build-isolation ./examples/python` there.)
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
py=${PYTHON:-/usr/bin/python3}
where=(--user)
if [ "${1:-}" != "--user" ] && [ "$(id -u)" = 0 ]; then
    where=()
fi
for m in numpy pip setuptools wheel; do
    "$py" -c "import $m" 2>/dev/null || {
        echo "kten: $py cannot import $m (Debian: python3-$m)" >&2
        exit 1
    }
done
# pip builds in the source folder (build/, *.egg-info): build from a scratch copy instead, so
# the checkout stays clean and two installs never race.
scratch=$(mktemp -d)
trap 'rm -rf "$scratch"' EXIT
cp -r "$here/pyproject.toml" "$here/kten" "$scratch/"
"$py" -m pip --isolated install --quiet --no-index --no-deps --no-build-isolation \
    --no-cache-dir --root-user-action=ignore --break-system-packages --force-reinstall \
    "${where[@]}" "$scratch" >&2
# Import it from elsewhere than the source tree, as a user's script will.
(cd / && "$py" -c 'import kten, sys; print("kten", kten.__version__, "installed for", sys.executable, "in", kten.__path__[0])')
