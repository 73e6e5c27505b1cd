"""Writes the tiny .npy files of the bad-input corpus with NumPy (run once; outputs committed).

Every case directory whose site.toml names "snapshots.npy" gets a valid (T=5, ny=3, nx=4, C=2)
float64 file unless the case below writes a broken one. Keep every file a few KB.
Usage: python3 make_npy.py   (from any directory)
"""
import os
import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
T, NY, NX, C = 5, 3, 4, 2


def good(dtype="<f8", shape=(T, NY, NX, C)):
    n = int(np.prod(shape))
    return (5.0 + 0.01 * np.arange(n)).reshape(shape).astype(dtype)


def truncated(path):
    np.save(path, good())
    size = os.path.getsize(path)
    with open(path, "r+b") as f:
        f.truncate(size - 100)


def npy_nan(path):
    a = good()
    a[3, 1, 1, 0] = np.nan
    np.save(path, a)


def npy_inf(path):
    a = good("<f4")
    a[1, 2, 3, 1] = np.inf
    np.save(path, a)


def not_npy(path):
    with open(path, "w") as f:
        f.write("u,v\n1,2\n")


def npy_shape_overflow(path):
    # NumPy cannot make this array: the header claims 2**61 snapshots of 3 x 4 x 2 doubles,
    # whose byte count (3 * 2**67) wraps to 0 in 64-bit arithmetic. Written by hand
    # (NEP 1 format 1.0), followed by one value.
    d = "{'descr': '<f8', 'fortran_order': False, 'shape': (%d, %d, %d, %d), }" % (2**61, NY, NX, C)
    head = d + " " * (-(10 + len(d) + 1) % 64) + "\n"
    with open(path, "wb") as f:
        f.write(b"\x93NUMPY\x01\x00" + len(head).to_bytes(2, "little") + head.encode("ascii"))
        f.write(np.zeros(1, dtype="<f8").tobytes())


SNAPSHOTS = {
    "npy-shape-overflow": npy_shape_overflow,
    "npy-unsupported-dtype": lambda p: np.save(p, good("<c16")),
    "npy-integer-snapshots": lambda p: np.save(p, good("<i4")),
    "npy-big-endian": lambda p: np.save(p, good(">f8")),
    "npy-wrong-rank": lambda p: np.save(p, good(shape=(T, NY * NX, C))),
    "npy-truncated": truncated,
    "npy-fortran-order": lambda p: np.save(p, np.asfortranarray(good())),
    "npy-not-npy": not_npy,
    "npy-nan": npy_nan,
    "npy-inf": npy_inf,
    "npy-shape-vs-grid": lambda p: np.save(p, good(shape=(T, NY, 5, C))),
    "npy-channel-count": lambda p: np.save(p, good(shape=(T, NY, NX, 3))),
}

OTHER = {
    "solid-mask-shape": {"solid.npy": np.zeros((NX, NY), dtype="|b1")},
    "solid-mask-dtype": {"solid.npy": np.zeros((NY, NX), dtype="<i8")},
    "candidate-inside-solid": {"solid.npy": (np.arange(NY * NX).reshape(NY, NX) == NX + 1).astype("|u1")},
    "weights-negative": {"weights.npy": np.where(np.arange(NY * NX).reshape(NY, NX) == 6, -1.0, 100.0)},
    "basis-modes-shape": {
        "modes.npy": np.zeros((2, 4, NX, C)),
        "mean.npy": np.zeros((NY, NX, C)),
    },
}

for name in sorted(os.listdir(HERE)):
    case = os.path.join(HERE, name)
    if not os.path.isdir(case):
        continue
    target = os.path.join(case, "snapshots.npy")
    if name in SNAPSHOTS:
        SNAPSHOTS[name](target)
    else:
        toml = os.path.join(case, "site.toml")
        if os.path.exists(toml) and '"snapshots.npy"' in open(toml).read():
            np.save(target, good())
    for file_name, array in OTHER.get(name, {}).items():
        np.save(os.path.join(case, file_name), array)
