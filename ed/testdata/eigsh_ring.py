#!/usr/bin/env python3
"""Reference timing for the Lanczos benchmarks: the S^z = 0 sector of a
periodic spin-1/2 Heisenberg ring H = J sum_i S_i . S_{i+1} (J = 1), built
as a scipy.sparse CSR matrix with numpy and solved with
scipy.sparse.linalg.eigsh (ARPACK) for its lowest eigenvalue.

Usage: eigsh_ring.py N [TOL]

Prints one JSON line: the sector dimension, the nonzeros, the ground-state
energy, and the seconds spent building the matrix and in eigsh. Needs
Debian's python3-numpy and python3-scipy (a reference library, not part of
Frustum).
"""
import json
import sys
import time

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as sla


def sector_states(n):
    """All n-bit states with n/2 bits set, ascending."""
    x = np.arange(1 << n, dtype=np.int64)
    count = np.zeros_like(x)
    y = x.copy()
    for _ in range(n):
        count += y & 1
        y >>= 1
    return x[count == n // 2]


def ring_hamiltonian(n):
    states = sector_states(n)
    dim = len(states)
    diag = np.zeros(dim)
    rows, cols = [], []
    idx = np.arange(dim, dtype=np.int64)
    for i in range(n):
        j = (i + 1) % n
        bi = (states >> i) & 1
        bj = (states >> j) & 1
        same = bi == bj
        diag += np.where(same, 0.25, -0.25)
        flip = ~same
        new = states[flip] ^ ((1 << i) | (1 << j))
        rows.append(idx[flip])
        cols.append(np.searchsorted(states, new))
    rows = np.concatenate(rows)
    cols = np.concatenate(cols)
    vals = np.full(len(rows), 0.5)
    off = sp.csr_matrix((vals, (rows, cols)), shape=(dim, dim))
    return (off + sp.diags(diag)).tocsr()


def main():
    n = int(sys.argv[1])
    tol = float(sys.argv[2]) if len(sys.argv) > 2 else 1e-12
    t0 = time.perf_counter()
    h = ring_hamiltonian(n)
    t1 = time.perf_counter()
    vals = sla.eigsh(h, k=1, which="SA", tol=tol, return_eigenvectors=False)
    t2 = time.perf_counter()
    print(json.dumps({"n": n, "dimension": h.shape[0], "nonzeros": int(h.nnz),
                      "e0": float(vals[0]), "build_seconds": t1 - t0, "eigsh_seconds": t2 - t1}))


if __name__ == "__main__":
    main()
