#!/usr/bin/env python3
"""Write the .npy fixtures of tests/npy_numpy.rs with NumPy itself.

Run from this folder: `python3 make.py` (NumPy >= 1.17; these were written with the
version printed into versions.txt). Every file holds the same 3 x 4 array of means,
A[i, j] = (4 i + j) / 4 - 1.125 (exact in float32 and float64), in one memory order, byte
order, element type and .npy format version; cov-*.npy hold a 2 x 2 x 2 stack of
covariance matrices. The test loads each file and checks the numbers.
"""
import numpy as np
from numpy.lib import format as npf

A = (np.arange(12, dtype=np.float64).reshape(3, 4)) / 4.0 - 1.125
COV = np.array([[[2.0, 0.5], [0.5, 1.0]], [[1.5, -0.25], [-0.25, 0.75]]])

def write(name, arr, version):
    with open(name, "wb") as f:
        npf.write_array(f, arr, version=version, allow_pickle=False)

for order in ("C", "F"):
    for descr in ("<f4", ">f4", "<f8", ">f8"):
        for version in ((1, 0), (2, 0), (3, 0)):
            arr = np.array(A, dtype=np.dtype(descr), order=order)
            assert arr.flags["F_CONTIGUOUS" if order == "F" else "C_CONTIGUOUS"]
            write(f"means-{order}-{descr[0] == '<' and 'le' or 'be'}{descr[2]}-v{version[0]}.npy", arr, version)
    cov = np.array(COV, dtype="<f8", order=order)
    write(f"cov-{order}-le8-v1.npy", cov, (1, 0))
    cov = np.array(COV, dtype=">f4", order=order)
    write(f"cov-{order}-be4-v2.npy", cov, (2, 0))

with open("versions.txt", "w") as f:
    f.write(f"numpy {np.__version__}\n")
