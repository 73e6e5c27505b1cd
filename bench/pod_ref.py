"""NumPy reference for bench/pod.rs (run by bench/pod.sh).

  python3 pod_ref.py make FILE      writes the 1,000 x 65,536 float64 input (rows = snapshots)
  python3 pod_ref.py run FILE       times the NumPy routes on it:
      eigh route: centre, G = Xc Xc^T (NumPy's A @ A.T), numpy.linalg.eigh, lift X^T V / sigma
      svd route:  numpy.linalg.svd(Xc^T, full_matrices=False)

Run with OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE unset (pod.sh does) so OpenBLAS picks its
fastest kernel for this processor.
"""

import sys
import time

import numpy as np

N_SNAPSHOTS, N_DOF = 1000, 65536


def make(path):
    rng = np.random.default_rng(2026)
    rank = 200
    temporal = rng.standard_normal((N_SNAPSHOTS, rank)) / np.arange(1, rank + 1)
    spatial = rng.standard_normal((rank, N_DOF))
    x = temporal @ spatial
    x += 0.05 * rng.standard_normal((N_SNAPSHOTS, N_DOF))
    x += 8.0 + rng.standard_normal(N_DOF)
    np.save(path, x)


def best_of(n, fn):
    """Best wall time over n runs and the CPU time (all threads) of that run."""
    best = (float("inf"), float("inf"))
    for _ in range(n):
        wall, cpu = time.perf_counter(), time.process_time()
        fn()
        sample = (time.perf_counter() - wall, time.process_time() - cpu)
        best = min(best, sample)
    return best


def run(path):
    x = np.load(path)
    try:
        from threadpoolctl import threadpool_info

        info = [(i.get("internal_api"), i.get("architecture"), i.get("num_threads")) for i in threadpool_info()]
        print(f"numpy {np.__version__}, BLAS {info}")
    except ImportError:
        print(f"numpy {np.__version__}")

    def eigh_route():
        xc = x - x.mean(axis=0)
        gram = xc @ xc.T
        values, vectors = np.linalg.eigh(gram)
        values, vectors = values[::-1][:-1], vectors[:, ::-1][:, :-1]
        modes = xc.T @ (vectors / np.sqrt(values))
        return modes

    def svd_route():
        xc = x - x.mean(axis=0)
        return np.linalg.svd(xc.T, full_matrices=False)

    eigh_seconds, eigh_cpu = best_of(2, eigh_route)
    print(f"numpy eigh route (X^T X, eigh, lift {N_SNAPSHOTS - 1} modes): "
          f"{eigh_seconds:.3f} s wall, {eigh_cpu:.2f} s CPU")
    svd_seconds, svd_cpu = best_of(1, svd_route)
    print(f"numpy svd(X, full_matrices=False): {svd_seconds:.3f} s wall, {svd_cpu:.2f} s CPU")
    print(f"RESULT eigh_seconds {eigh_seconds:.4f}")
    print(f"RESULT eigh_cpu {eigh_cpu:.4f}")
    print(f"RESULT svd_seconds {svd_seconds:.4f}")
    print(f"RESULT svd_cpu {svd_cpu:.4f}")


if __name__ == "__main__":
    {"make": make, "run": run}[sys.argv[1]](sys.argv[2])
