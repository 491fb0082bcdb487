#!/usr/bin/env bash
# Installs what kiln needs, builds it, installs the kten Python package (examples/python/, for
# training), generates the bundled demo data set (glaze test tiles photographed on a bench
# camera) and packs it: `bash examples/demo.sh`. Outputs go to demo-out/ in the source tree.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
. "$here/tests/deps.sh"
kiln_deps_install "$KILN_BUILD_PACKAGES $KILN_PYTHON_PACKAGES"

cmake -S "$here" -B "$here/build" -DKILN_TESTS=OFF >/dev/null
cmake --build "$here/build" -j"$(nproc)" --target kiln kiln-demo-data >/dev/null
# For Debian's python3, where the Debian packages went: for every user as root, else ~/.local.
bash "$here/examples/python/install.sh"
rm -rf "$here/demo-data" "$here/demo-out"
"$here/build/kiln-demo-data" "$here/demo-data"
echo
# Shots of one tile share the tile number: the group rule keeps them in one split.
"$here/build/kiln" build "$here/demo-data/glaze-tiles" -o "$here/demo-out" \
    --group-regex '/(T[0-9]+)_' --seed 2026 --ratios 70:15:15 --stratify \
    --size 128x128 --fit pad --channels 3
echo
"$here/build/kiln" verify "$here/demo-out"
echo
echo "Outputs are in $here/demo-out:"
echo "  train.kten val.kten test.kten   tensors (import kten; docs/training.md)"
echo "  manifest.json items.csv catalog.csv SHA256SUMS   the record (check: sha256sum -c SHA256SUMS)"
echo "Train a small network on them (CPU, a few minutes; docs/training.md):"
echo "  python3 $here/examples/train_torch.py $here/demo-out/"
