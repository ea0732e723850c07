"""Times numpy.linalg.eigvalsh on a complex Hermitian matrix written by the
Go benchmark BenchmarkSpectrum10SiteDMFieldXAgainstNumpy (raw little-endian
complex128, row-major, n x n). Prints the best wall time in seconds of
`repeats` runs and the lowest eigenvalue, as JSON."""
import json
import sys
import time

import numpy as np

path, n, repeats = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
a = np.fromfile(path, dtype="<c16").reshape(n, n)
best = float("inf")
for _ in range(repeats):
    t0 = time.perf_counter()
    w = np.linalg.eigvalsh(a)
    best = min(best, time.perf_counter() - t0)
print(json.dumps({"seconds": best, "lowest": float(w[0])}))
