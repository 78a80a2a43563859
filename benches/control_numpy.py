"""Baseline for benches/control_energy.rs: numpy.linalg.eigh (LAPACK syevd)
of the same matrix, median wall time over REPS runs.

Usage: control_numpy.py MATRIX.npy REPS   (prints seconds)
Run by the Rust bench under $HIERAX_REF_PYTHON (numpy 2.1.3).
"""
import sys
import time

import numpy as np

a = np.load(sys.argv[1])
reps = int(sys.argv[2])
np.linalg.eigh(a)  # warm-up
times = []
for _ in range(reps):
    t0 = time.perf_counter()
    np.linalg.eigh(a)
    times.append(time.perf_counter() - t0)
print(f"{np.median(times):.6e}")
