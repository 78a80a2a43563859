"""numpy baseline for benches/timescale_bench.rs (run by it; not a test).

Vectorised FFT autocorrelation of every column of a frames x regions .npy
matrix and the three ACF-threshold estimators (initial positive sum,
ACW-50, ACW-0, each plain and interpolated), with the same definitions and
FFT length as hierax. Prints one JSON line: seconds (best of REPEATS),
peak RSS, and the estimates of the first CHECK regions for a cross-check.

usage: python timescale_numpy.py MATRIX.npy MAX_LAG TR NFFT REPEATS CHECK
"""

import json
import resource
import sys
import time

import numpy as np


def first_crossing(acf, thr):
    below = acf[1:] <= thr
    has = below.any(axis=0)
    k = below.argmax(axis=0) + 1
    return k, has


def estimate(x, max_lag, tr, nfft):
    xc = x - x.mean(axis=0)
    spec = np.fft.rfft(xc, n=nfft, axis=0)
    del xc
    power = spec.real ** 2 + spec.imag ** 2
    del spec
    acf = np.fft.irfft(power, n=nfft, axis=0)[: max_lag + 1]
    del power
    acf = acf / acf[0]
    cols = np.arange(acf.shape[1])
    out = {}
    for name, thr in (("acw50", 0.5), ("acw0", 0.0)):
        k, has = first_crossing(acf, thr)
        a = acf[k - 1, cols]
        b = acf[k, cols]
        frac = np.where(a > b, (a - thr) / np.where(a > b, a - b, 1.0), 1.0)
        out[name] = np.where(has, k * tr, np.nan)
        out[name + "_interp"] = np.where(has, (k - 1 + frac) * tr, np.nan)
        if thr == 0.0:
            csum = np.cumsum(acf[1:], axis=0)
            ips = np.where(k >= 2, csum[np.maximum(k - 2, 0), cols], 0.0) * tr
            out["ips"] = np.where(has, ips, np.nan)
    return out


def main():
    path, max_lag, tr, nfft, repeats, check = sys.argv[1:7]
    max_lag, tr, nfft, repeats, check = int(max_lag), float(tr), int(nfft), int(repeats), int(check)
    x = np.load(path)
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = estimate(x, max_lag, tr, nfft)
        best = min(best, time.perf_counter() - t0)
    peak_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(json.dumps({
        "seconds": best,
        "peak_rss_bytes": peak_kib * 1024,
        "input_bytes": x.nbytes,
        "numpy": np.__version__,
        "check": {k: [None if np.isnan(v) else float(v) for v in out[k][:check]] for k in out},
    }))


if __name__ == "__main__":
    main()
