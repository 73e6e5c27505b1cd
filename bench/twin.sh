#!/usr/bin/env bash
# Twin Monte Carlo speed: crowsnest's Kalman runs (gains shared by all runs, runs batched) on
# 1 and 2 threads against a per-step filterpy KalmanFilter loop doing the same work, plus the
# EnKF's runs per second. Shape of issue 5: r = 20, 16 readings, 1,000 steps.
# Target: Kalman runs/s >= 100x the filterpy loop.
# Usage: bash bench/twin.sh [N_KALMAN_RUNS] [N_ENKF_RUNS] [N_FILTERPY_RUNS]
set -euo pipefail
cd "$(dirname "$0")/.."
n_kalman="${1:-1000}"
n_enkf="${2:-40}"
n_ref="${3:-20}"
work="${TMPDIR:-/tmp}/crowsnest-twin-bench"
mkdir -p "$work"

cargo build --release --bench twin
bin=$(ls -t "${CARGO_TARGET_DIR:-target}"/release/deps/twin-* | grep -v '\.d$' | head -n1)
echo "== load before: $(uptime)"
echo "== crowsnest"
"$bin" "$n_kalman" "$n_enkf" | tee "$work/rust.txt"
echo "== filterpy"
env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE OPENBLAS_NUM_THREADS=1 python3 bench/twin_ref.py "$n_ref" | tee "$work/ref.txt"

echo "== load after: $(uptime)"
get() { awk -v k="$1" '$1 == "RESULT" && $2 == k {print $3}' "$work/$2"; }
awk -v w1="$(get kalman_runs_per_s_1t rust.txt)" -v w2="$(get kalman_runs_per_s_2t rust.txt)" \
    -v c1="$(get kalman_runs_per_cpu_s_1t rust.txt)" -v c2="$(get kalman_runs_per_cpu_s_2t rust.txt)" \
    -v rw="$(get filterpy_runs_per_s ref.txt)" -v rc="$(get filterpy_runs_per_cpu_s ref.txt)" 'BEGIN {
  printf "ratio crowsnest / filterpy, wall time: 1 thread %.0fx, 2 threads %.0fx (target >= 100x)\n", w1 / rw, w2 / rw;
  printf "ratio crowsnest / filterpy, CPU time:  1 thread %.0fx, 2 threads %.0fx\n", c1 / rc, c2 / rc;
  printf "2-thread scaling (wall): %.2fx\n", w2 / w1 }'
