#!/usr/bin/env bash
# Demo-site generation speed: `crowsnest synth SITE` (default) and `--quick` on copies of the
# three demo sites, wall and CPU time, lattice node updates per second; then the same-size
# vectorised NumPy D2Q9 step (bench/synth_ref.py) as a named reference, and the ratio.
# Targets (issue 3): default < 2 min and --quick < 20 s on 2 cores.
# Usage: bash bench/synth.sh [quick]   ("quick" skips the default runs)
set -euo pipefail
cd "$(dirname "$0")/.."
mode="${1:-all}"
work="${TMPDIR:-/tmp}/crowsnest-synth-bench"
rm -rf "$work" && mkdir -p "$work"
cargo build --release
bin="$(pwd)/${CARGO_TARGET_DIR:-target}/release/crowsnest"
echo "== load average at the start: $(cut -d' ' -f1-3 /proc/loadavg) (2 cores; > 2 means shared)"

sites="harbour-quay harbour-quay-2031 escarpment"
runs="--quick"
[ "$mode" = quick ] || runs="--quick default"
printf "%-18s %-8s %-10s %7s %8s %8s %8s %13s\n" site run lattice steps wall_s cpu_s peak_Ma updates/cpu_s
for site in $sites; do
  for run in $runs; do
    dir="$work/$site$run"
    mkdir -p "$dir"
    cp "demo-sites/$site/site.toml" "demo-sites/$site/candidates.csv" "$dir/"
    flag=""; [ "$run" = default ] || flag="$run"
    /usr/bin/time -f "%e %U %S" -o "$dir/time.txt" "$bin" synth "$dir" $flag --force > "$dir/out.txt"
    read -r wall user sys < "$dir/time.txt"
    # "lattice 121 × 61 at 5.00 m, time step …, 51300 steps; Mach 0.069 (mean wind) / 0.227 (peak)"
    line=$(grep "lattice" "$dir/out.txt")
    lnx=$(echo "$line" | awk '{print $2}'); lny=$(echo "$line" | awk '{print $4}')
    steps=$(echo "$line" | sed -E 's/.* ([0-9]+) steps;.*/\1/')
    peak=$(echo "$line" | sed -E 's/.* \/ ([0-9.]+) \(peak\).*/\1/')
    awk -v s="$site" -v r="${run#--}" -v nx="$lnx" -v ny="$lny" -v n="$steps" -v w="$wall" \
        -v u="$user" -v y="$sys" -v p="$peak" 'BEGIN {
      printf "%-18s %-8s %4dx%-5d %7d %8.1f %8.1f %8.3f %13.3g\n", s, r, nx, ny, n, w, u + y, p, nx * ny * n / (u + y) }' \
      | tee -a "$work/table.txt"
  done
done
echo "== load average at the end: $(cut -d' ' -f1-3 /proc/loadavg)"

echo "== NumPy reference step (bench/synth_ref.py), same lattice sizes"
ref() { env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE OPENBLAS_NUM_THREADS=1 python3 bench/synth_ref.py "$@"; }
ref 121 61 400 quay | tee "$work/ref.txt"
ref 401 61 200 slice | tee -a "$work/ref.txt"
get() { awk -v k="$1" '$1 == "RESULT" && $2 == k {print $3}' "$work/ref.txt"; }
awk -v q="$(get numpy_quay_updates_per_cpu_s)" -v s="$(get numpy_slice_updates_per_cpu_s)" '
  $1 == "harbour-quay" && $2 == "default" { printf "ratio crowsnest / NumPy, CPU time, 121x61: %.0fx\n", $8 / q }
  $1 == "escarpment" && $2 == "default" { printf "ratio crowsnest / NumPy, CPU time, 401x61: %.0fx\n", $8 / s }
  $1 == "harbour-quay" && $2 == "quick" && !seen { seen = 1; printf "ratio crowsnest (quick, 61x31) / NumPy 121x61, CPU time: %.0fx\n", $8 / q }' "$work/table.txt"
