"""Reference for bench/sensors_blocks.rs: the vectorised NumPy/SciPy way to build the point
measurement rows of 1,000,000 candidates x 50 modes on a 500 x 500 grid with two channels:
bilinear weights computed with array operations (renormalised over fluid nodes), a
scipy.sparse CSR interpolation matrix, and one sparse x dense product with the modes.
Prints `name seconds` lines like the Rust benchmark."""

import time

import numpy as np
import scipy.sparse as sp

NX, NY, N_MODES, N_CANDIDATES, SPACING = 500, 500, 50, 1_000_000, 2.0


def build(px, py, solid, modes, mean):
    n_channels = 2
    sx, sy = px / SPACING, py / SPACING
    i0 = np.minimum(np.floor(sx).astype(np.int64), NX - 2)
    j0 = np.minimum(np.floor(sy).astype(np.int64), NY - 2)
    fx, fy = sx - i0, sy - j0
    nodes = np.stack([j0 * NX + i0, j0 * NX + i0 + 1, (j0 + 1) * NX + i0, (j0 + 1) * NX + i0 + 1], axis=1)
    w = np.stack([(1 - fx) * (1 - fy), fx * (1 - fy), (1 - fx) * fy, fx * fy], axis=1)
    w = np.where(solid[nodes], 0.0, w)
    w /= w.sum(axis=1, keepdims=True)
    n = px.size
    rows = np.repeat(np.arange(n), 4)
    cols = (nodes * n_channels).ravel()  # channel 0 (u)
    interp = sp.csr_matrix((w.ravel(), (rows, cols)), shape=(n, NX * NY * n_channels))
    h = interp @ modes
    offset = interp @ mean
    return h, offset


def main():
    rng = np.random.default_rng(2024)
    solid = np.zeros(NX * NY, dtype=bool)
    solid.reshape(NY, NX)[100:140, 200:260] = True
    extent = ((NX - 1) * SPACING, (NY - 1) * SPACING)
    px = rng.uniform(0, extent[0], N_CANDIDATES)
    py = rng.uniform(0, extent[1], N_CANDIDATES)
    keep = ~solid[np.round(py / SPACING).astype(int) * NX + np.round(px / SPACING).astype(int)]
    px, py = px[keep], py[keep]
    n_dof = NX * NY * 2
    modes = rng.standard_normal((n_dof, N_MODES))
    mean = rng.standard_normal(n_dof)
    print(f"# {px.size} candidates, {N_MODES} modes")
    best = np.inf
    for _ in range(3):
        start = time.perf_counter()
        h, _ = build(px, py, solid, modes, mean)
        best = min(best, time.perf_counter() - start)
    print(f"numpy_scipy {best:.4f}")
    order = np.lexsort((px, np.floor(py / SPACING)))
    sx, sy = px[order], py[order]
    best_sorted = np.inf
    for _ in range(3):
        start = time.perf_counter()
        build(sx, sy, solid, modes, mean)
        best_sorted = min(best_sorted, time.perf_counter() - start)
    print(f"numpy_scipy_sorted {best_sorted:.4f}")
    print(f"# shape {h.shape}")


if __name__ == "__main__":
    main()
