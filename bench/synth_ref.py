"""Reference for bench/synth.sh: one D2Q9 lattice Boltzmann step written the usual vectorised
NumPy way (np.roll streaming on a periodic box, TRT collision with the Smagorinsky relaxation
time in closed form, float64), at the lattice sizes of the demo sites. The same arithmetic per
node as crowsnest's fused step (`src/synth/solver.rs`, `src/synth/lattice.rs`) minus the
boundary rules, so it flatters NumPy slightly. Prints `RESULT <name> <value>` lines: node
updates per second of wall and of CPU time.
Usage: python3 bench/synth_ref.py NX NY N_STEPS [NAME]
"""

import sys
import time

import numpy as np

nx, ny, n_steps = (int(a) for a in sys.argv[1:4])
name = sys.argv[4] if len(sys.argv) > 4 else f"{nx}x{ny}"

cx = np.array([0, 1, 0, -1, 0, 1, -1, -1, 1])
cy = np.array([0, 0, 1, 0, -1, 1, 1, -1, -1])
w = np.array([4 / 9] + [1 / 9] * 4 + [1 / 36] * 4)
opp = np.array([0, 3, 4, 1, 2, 7, 8, 5, 6])
tau0, magic, c_s = 0.506, 0.25, 0.15  # the demo settings (src/synth/setup.rs)


def equilibrium(rho, ux, uy):
    cu = 3.0 * (cx[:, None, None] * ux + cy[:, None, None] * uy)
    usq = 1.5 * (ux * ux + uy * uy)
    return w[:, None, None] * rho * (1.0 + cu + 0.5 * cu * cu - usq)


def step(f):
    for q in range(1, 9):
        f[q] = np.roll(np.roll(f[q], cx[q], axis=1), cy[q], axis=0)
    rho = f.sum(axis=0)
    ux = (cx[:, None, None] * f).sum(axis=0) / rho
    uy = (cy[:, None, None] * f).sum(axis=0) / rho
    feq = equilibrium(rho, ux, uy)
    neq = f - feq
    pxx = (cx[:, None, None] ** 2 * neq).sum(axis=0)
    pyy = (cy[:, None, None] ** 2 * neq).sum(axis=0)
    pxy = ((cx * cy)[:, None, None] * neq).sum(axis=0)
    qn = np.sqrt(2.0 * (pxx * pxx + pyy * pyy + 2.0 * pxy * pxy))
    tau_p = 0.5 * (tau0 + np.sqrt(tau0 * tau0 + 18.0 * c_s * c_s * qn / rho))
    tau_m = 0.5 + magic / (tau_p - 0.5)
    fo = f[opp]
    feo = feq[opp]
    plus = 0.5 * (f + fo) - 0.5 * (feq + feo)
    minus = 0.5 * (f - fo) - 0.5 * (feq - feo)
    return f - plus / tau_p - minus / tau_m


rng = np.random.default_rng(7)
y, x = np.mgrid[0:ny, 0:nx]
ux0 = 0.04 + 0.005 * np.sin(2 * np.pi * y / ny) + 1e-4 * rng.standard_normal((ny, nx))
uy0 = 0.005 * np.sin(2 * np.pi * x / nx)
f = equilibrium(np.ones((ny, nx)), ux0, uy0)
f = step(f)  # warm-up
start_cpu, start = time.process_time(), time.perf_counter()
for _ in range(n_steps):
    f = step(f)
wall, cpu = time.perf_counter() - start, time.process_time() - start_cpu
assert np.isfinite(f).all()
updates = nx * ny * n_steps
print(f"RESULT numpy_{name}_updates_per_s {updates / wall:.4g}")
print(f"RESULT numpy_{name}_updates_per_cpu_s {updates / cpu:.4g}")
