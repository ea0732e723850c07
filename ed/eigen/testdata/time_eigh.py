#!/usr/bin/env python3
"""Reference timing for the dense-solver benchmark BenchmarkDenseAgainstNumpy
(ed/eigen/numpy_bench_test.go): numpy.linalg.eigvalsh (values) or
numpy.linalg.eigh (vectors) on the matrix that the Go side wrote.

Usage: time_eigh.py PATH N real|complex values|vectors [REPEATS]

PATH holds the full n x n matrix, row-major, raw little-endian float64
(real) or complex128 (complex). Only the numpy call is timed, best of
REPEATS (default 1). Prints one JSON line: the seconds, the lowest and
highest eigenvalues, the OpenBLAS (or other BLAS/LAPACK) libraries mapped
into this process after the call, and numpy's version. Needs Debian's
python3-numpy (a reference library, not part of Frustum); its LAPACK is
whatever liblapack.so.3 points to (update-alternatives), OpenBLAS on the
development machine.
"""
import json
import sys
import time

import numpy as np


def mapped_linalg_libraries():
    """Paths of the BLAS/LAPACK shared objects mapped into this process."""
    out = set()
    try:
        with open("/proc/self/maps") as f:
            for line in f:
                path = line.split()[-1]
                name = path.rsplit("/", 1)[-1]
                if any(s in name for s in ("openblas", "blas", "lapack", "mkl")):
                    out.add(path)
    except OSError:
        pass
    return sorted(out)


def main():
    path, n, kind, job = sys.argv[1], int(sys.argv[2]), sys.argv[3], sys.argv[4]
    repeats = int(sys.argv[5]) if len(sys.argv) > 5 else 1
    dtype = "<f8" if kind == "real" else "<c16"
    a = np.fromfile(path, dtype=dtype).reshape(n, n)
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        if job == "values":
            w = np.linalg.eigvalsh(a)
        else:
            w, v = np.linalg.eigh(a)
        best = min(best, time.perf_counter() - t0)
    print(json.dumps({"seconds": best, "lowest": float(w[0]), "highest": float(w[-1]),
                      "libraries": mapped_linalg_libraries(), "numpy": np.__version__}))


if __name__ == "__main__":
    main()
