#!/usr/bin/env bash
# Installs what kiln needs, builds it, generates the bundled demo data set (glaze test tiles
# photographed on a bench camera) and packs it: `bash examples/demo.sh`. Outputs go to
# demo-out/ in the source tree.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
. "$here/tests/deps.sh"
kiln_deps_install "$KILN_BUILD_PACKAGES"

cmake -S "$here" -B "$here/build" -DKILN_TESTS=OFF >/dev/null
cmake --build "$here/build" -j"$(nproc)" --target kiln kiln-demo-data >/dev/null
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
echo "  train.kten val.kten test.kten   tensors (read with examples/read_kten.py)"
echo "  manifest.json items.csv catalog.csv SHA256SUMS   the record (check: sha256sum -c SHA256SUMS)"
