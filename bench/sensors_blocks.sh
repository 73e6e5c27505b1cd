#!/usr/bin/env bash
# Runs the sensors benchmark and its NumPy/SciPy reference in one go and prints the ratio.
# Usage: bench/sensors_blocks.sh   (from the repository root)
set -euo pipefail
cd "$(dirname "$0")/.."
rust_out=$(cargo bench --bench sensors_blocks 2>/dev/null)
ref_out=$(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python3 bench/sensors_blocks_ref.py)
echo "$rust_out"
echo "$ref_out"
rust=$(awk '$1 == "build_packed" {print $2}' <<<"$rust_out")
ref=$(awk '$1 == "numpy_scipy" {print $2}' <<<"$ref_out")
awk -v r="$rust" -v p="$ref" 'BEGIN { printf "ratio numpy_scipy / build_packed = %.2f\n", p / r }'
rust=$(awk '$1 == "build_packed_sorted" {print $2}' <<<"$rust_out")
ref=$(awk '$1 == "numpy_scipy_sorted" {print $2}' <<<"$ref_out")
awk -v r="$rust" -v p="$ref" 'BEGIN { printf "ratio numpy_scipy_sorted / build_packed_sorted = %.2f\n", p / r }'
