#!/usr/bin/env bash
# Packs the demo data set with a gcc -O3 build and a clang -O0 build (and --jobs 1 vs 2) and
# checks that every tensor file is byte-identical: the resampler's integer arithmetic must not
# depend on the compiler, its optimiser or the thread count.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cmake -S "$here" -B "$work/gcc" -DCMAKE_C_COMPILER=gcc -DCMAKE_BUILD_TYPE=Release \
    -DKILN_TESTS=OFF -DKILN_WERROR=ON >/dev/null
cmake --build "$work/gcc" -j"$(nproc)" >/dev/null
cmake -S "$here" -B "$work/clang" -DCMAKE_C_COMPILER=clang -DCMAKE_BUILD_TYPE=Debug \
    -DCMAKE_C_FLAGS_DEBUG=-O0 -DKILN_TESTS=OFF -DKILN_WERROR=ON >/dev/null
cmake --build "$work/clang" -j"$(nproc)" >/dev/null
"$work/gcc/kiln-demo-data" "$work/data" >/dev/null
for f in bilinear lanczos3; do
    "$work/gcc/kiln" build "$work/data/glaze-tiles" -o "$work/out-gcc-$f" -q --jobs 2 --seed 1 \
        --group-regex '/(T[0-9]+)_' --size 96x64 --filter "$f" --fit crop
    "$work/clang/kiln" build "$work/data/glaze-tiles" -o "$work/out-clang-$f" -q --jobs 1 --seed 1 \
        --group-regex '/(T[0-9]+)_' --size 96x64 --filter "$f" --fit crop
    for k in train val test; do
        a=$(sha256sum < "$work/out-gcc-$f/$k.kten") b=$(sha256sum < "$work/out-clang-$f/$k.kten")
        if [ "$a" != "$b" ]; then
            echo "FAIL: $k.kten differs between gcc -O3 --jobs 2 and clang -O0 --jobs 1 ($f)"
            exit 1
        fi
    done
    echo "ok: $f tensors identical across compilers, optimisation levels and thread counts"
done
