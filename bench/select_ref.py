"""NumPy/SciPy references for bench/select.sh (issue 4, item 6).

  select_ref.py make DIR   writes DIR/phi.npy: 1,000,000 single-row point candidates x 50 modes
                           (smooth mode-like rows with decaying energies at scattered points)
  select_ref.py run DIR    times, on DIR/phi.npy,
      - a vectorised NumPy greedy D: keeps the posterior covariance P with rank-one updates and
        rescores every candidate each step (q = rowsum((Phi P) * Phi), pick argmax log(1 + q));
      prints wall and CPU (process_time, all threads) seconds;
      - scipy.linalg.qr(Phi.T, pivoting=True, mode='r') (LAPACK dgeqp3);
    prints RESULT lines and writes DIR/ref_greedy.txt and DIR/ref_qr.txt (first k picks).
"""
import sys
import time

import numpy as np
import scipy.linalg

N_CANDIDATES = 1_000_000
N_MODES = 50
K = 50


def make(path):
    rng = np.random.default_rng(7)
    pts = rng.uniform(0.0, 1000.0, size=(N_CANDIDATES, 2))
    energies = 0.9 ** np.arange(N_MODES)
    phi = np.empty((N_CANDIDATES, N_MODES))
    for j in range(N_MODES):
        # Wavenumber grows with the mode index, like POD modes of a turbulent flow.
        mag = 2.0 * np.pi * (1.0 + 0.5 * np.sqrt(j)) / 1000.0 * (1.0 + j / 10.0)
        ang = rng.uniform(0.0, np.pi)
        k = mag * np.array([np.cos(ang), np.sin(ang)])
        phi[:, j] = np.sqrt(energies[j]) * np.cos(pts @ k + rng.uniform(0.0, 2.0 * np.pi))
    np.save(path, phi)


def greedy_d(phi, k):
    n, r = phi.shape
    p = np.eye(r)
    chosen = []
    taken = np.zeros(n, dtype=bool)
    for _ in range(k):
        q = np.einsum("ij,ij->i", phi @ p, phi)
        q[taken] = -np.inf
        j = int(np.argmax(q))
        w = p @ phi[j]
        p -= np.outer(w, w) / (1.0 + q[j])
        chosen.append(j)
        taken[j] = True
    return chosen


def run(directory):
    phi = np.load(f"{directory}/phi.npy")
    t, c = time.perf_counter(), time.process_time()
    g = greedy_d(phi, K)
    t_greedy, c_greedy = time.perf_counter() - t, time.process_time() - c
    a = phi.T
    t, c = time.perf_counter(), time.process_time()
    _, piv = scipy.linalg.qr(a, pivoting=True, mode="r")
    t_qr, c_qr = time.perf_counter() - t, time.process_time() - c
    np.savetxt(f"{directory}/ref_greedy.txt", np.array(g)[None, :], fmt="%d", delimiter=",")
    np.savetxt(f"{directory}/ref_qr.txt", piv[None, :K], fmt="%d", delimiter=",")
    print(f"RESULT numpy_greedy_seconds {t_greedy:.4f}")
    print(f"RESULT numpy_greedy_cpu_seconds {c_greedy:.4f}")
    print(f"RESULT scipy_qr_seconds {t_qr:.4f}")
    print(f"RESULT scipy_qr_cpu_seconds {c_qr:.4f}")


if __name__ == "__main__":
    if sys.argv[1] == "make":
        make(f"{sys.argv[2]}/phi.npy")
    else:
        run(sys.argv[2])
