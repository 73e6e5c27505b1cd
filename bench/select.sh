#!/usr/bin/env bash
# Selection speed (issue 4, item 6): k = 50 of 1,000,000 single-row point candidates, r = 50.
# crowsnest's lazy greedy D against a vectorised NumPy greedy (target >= 10x faster) and its
# lazy pivoted QR against scipy.linalg.qr(Phi.T, pivoting=True, mode='r') (target <= 1/4 of
# the time), both with the same picks, and the time of the Joshi-Boyd optimality bound at the
# same shape. Both sides run in this one script; `uptime` load is printed before each side
# (the cores are shared, so CPU-time ratios are the fairer figure).
# Usage: [CARGO_TARGET_DIR=...] bash bench/select.sh [WORK_DIR] (~0.5 GB disk)
set -euo pipefail
cd "$(dirname "$0")/.."
work="${1:-${TMPDIR:-/tmp}/crowsnest-select-bench}"
mkdir -p "$work"
numpy() { env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python3 bench/select_ref.py "$@"; }

[ -f "$work/phi.npy" ] || numpy make "$work"
cargo build --release --bench select
bin=$(ls -t "${CARGO_TARGET_DIR:-target}"/release/deps/select-* | grep -v '\.d$' | head -n1)
echo "== NumPy / SciPy   load: $(uptime)"
numpy run "$work" | tee "$work/numpy.txt"
echo "== crowsnest       load: $(uptime)"
"$bin" "$work" | tee "$work/rust.txt"
echo "== done            load: $(uptime)"

get() { awk -v k="$2" '$1 == "RESULT" && $2 == k {print $3}' "$work/$1"; }
for clock in seconds cpu_seconds; do
  awk -v g="$(get rust.txt greedy_$clock)" -v q="$(get rust.txt qr_$clock)" \
      -v ng="$(get numpy.txt numpy_greedy_$clock)" -v sq="$(get numpy.txt scipy_qr_$clock)" -v c="$clock" 'BEGIN {
    printf "[%s] speed-up greedy D, numpy / crowsnest: %.1fx (target >= 10)\n", c, ng / g;
    printf "[%s] time ratio qr, crowsnest / scipy:     %.3f (target <= 0.25)\n", c, q / sq }'
done
grep -E "same_picks|bound_" "$work/rust.txt"
