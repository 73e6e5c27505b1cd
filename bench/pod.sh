#!/usr/bin/env bash
# POD speed: crowsnest's method of snapshots against NumPy's eigh and SVD routes on the same
# 65,536-dof x 1,000-snapshot float64 matrix, plus the Gram step's GFLOP/s and the peak memory
# of the chunked path. Usage: bash bench/pod.sh [WORK_DIR]   (needs ~1.5 GB of disk in WORK_DIR)
set -euo pipefail
cd "$(dirname "$0")/.."
work="${1:-${TMPDIR:-/tmp}/crowsnest-pod-bench}"
mkdir -p "$work"
input="$work/snapshots.npy"
numpy() { env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python3 bench/pod_ref.py "$@"; }

[ -f "$input" ] || numpy make "$input"
cargo build --release --bench pod
bin=$(ls -t "${CARGO_TARGET_DIR:-target}"/release/deps/pod-* | grep -v '\.d$' | head -n1)

echo "== crowsnest, whole matrix in memory"
"$bin" memory "$input" | tee "$work/rust.txt"
echo "== crowsnest, chunked from the .npy file, 100 modes"
/usr/bin/time -v "$bin" chunked "$input" 100 2> "$work/time.txt" | tee "$work/chunked.txt"
grep "Maximum resident set size" "$work/time.txt"
echo "== NumPy"
numpy run "$input" | tee "$work/numpy.txt"

result() { awk -v k="$2" '$1 == "RESULT" && $2 == k {print $3}' "$work/$1"; }
echo "== load average during the run: $(cut -d' ' -f1-3 /proc/loadavg) (2 cores; >2 means shared)"
for kind in seconds cpu; do
  awk -v o="$(result rust.txt pod_$kind)" -v e="$(result numpy.txt eigh_$kind)" \
      -v s="$(result numpy.txt svd_$kind)" -v k="$kind" 'BEGIN {
    printf "%-7s crowsnest / numpy eigh route: %.2f (target <= 1)\n", k, o / e;
    printf "%-7s crowsnest / numpy svd:        %.3f (target < 0.2)\n", k, o / s }'
done
