"""Reference for bench/twin.sh: the same twin work as crowsnest's Kalman Monte Carlo, done the
usual way with a per-step filterpy.kalman.KalmanFilter loop (predict + update every step,
covariance recomputed in every run), at the shape of issue 5: r = 20 modes, 16 readings,
1,000 steps. Per run: a background draw, noisy readings, the filter, the field RMSE of every
step and a free run. Invented system (a stable linear model with random H), like the Rust
side's synthetic case. Prints `RESULT <name> <value>` lines.
Usage: python3 bench/twin_ref.py [N_RUNS]
"""

import sys
import time

import numpy as np
from filterpy.kalman import KalmanFilter

n_runs = int(sys.argv[1]) if len(sys.argv) > 1 else 20
r, p, n_steps = 20, 16, 1000
rng = np.random.default_rng(5)

A = np.zeros((r, r))
for blk in range(r // 2):
    th = 0.05 * (blk + 1)
    A[2 * blk : 2 * blk + 2, 2 * blk : 2 * blk + 2] = 0.97 * np.array([[np.cos(th), -np.sin(th)], [np.sin(th), np.cos(th)]])
forcing = 0.5 / (1.0 + np.arange(r))
Q = np.diag(forcing**2)
H = 0.3 * rng.normal(size=(p, r))
R = np.diag(np.full(p, 0.2**2))
offset = 5.0 + 0.1 * np.arange(p)
truth = np.zeros((n_steps, r))
a = 3 * forcing * rng.normal(size=r)
for t in range(n_steps):
    truth[t] = a
    a = A @ a + forcing * rng.normal(size=r)
clean = offset + truth @ H.T
field_norm, residual_sq = 100.0, 0.25
bg_sd = 0.5 * np.sqrt(field_norm / r)

start_cpu, start = time.process_time(), time.perf_counter()
mean_rmse = []
for run in range(n_runs):
    kf = KalmanFilter(dim_x=r, dim_z=p)
    kf.F, kf.H, kf.Q, kf.R = A.copy(), H.copy(), Q.copy(), R.copy()
    kf.P = np.eye(r) * bg_sd**2
    x0 = truth[0] + bg_sd * rng.normal(size=r)
    kf.x = x0.reshape(r, 1).copy()
    free = x0.copy()
    errs = np.empty(n_steps)
    free_errs = np.empty(n_steps)
    for t in range(n_steps):
        if t > 0:
            kf.predict()
            free = A @ free
        z = clean[t] + 0.2 * rng.normal(size=p)
        kf.update((z - offset).reshape(p, 1))
        errs[t] = np.sqrt((np.sum((kf.x.ravel() - truth[t]) ** 2) + residual_sq) / field_norm)
        free_errs[t] = np.sqrt((np.sum((free - truth[t]) ** 2) + residual_sq) / field_norm)
    mean_rmse.append(errs.mean())
wall, cpu = time.perf_counter() - start, time.process_time() - start_cpu
print(f"filterpy: {n_runs} runs in {wall:.2f} s wall, {cpu:.2f} s cpu, mean RMSE {np.mean(mean_rmse):.4f}")
print(f"RESULT filterpy_runs_per_s {n_runs / wall:.2f}")
print(f"RESULT filterpy_runs_per_cpu_s {n_runs / cpu:.2f}")
