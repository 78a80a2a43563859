"""Baseline for benches/subject_nulls.rs: the per-subject null job written the
plain way with numpy/scipy (numpy 2.1.3, scipy 1.14.1, under $HIERAX_REF_PYTHON).

For each null: degree-preserving double-edge swaps (Maslov & Sneppen 2002) in
a Python loop, 10 attempts per edge; continuous-time normalisation
A/(1 + lambda_max) - I; one numpy.linalg.eigh for the Gramian
W = V diag((e^{2 lambda T} - 1) / (2 lambda)) V^T and Phi = e^{A T}; then the
16 x 16 minimum energies with a per-pair loop and numpy.linalg.solve
(E = v^T W^{-1} v, v = x_f - Phi x_0); then the summary statistics
(bottom-up / top-down means, line, Spearman and Pearson of the asymmetry
against distance and against the timescale shift).

Usage: subject_nulls_numpy.py NETWORK.npy STATES.npy TAU.npy NULLS SEED ENERGY_OUT.npy

Prints `key value` lines: nulls, swap_s_per_null, energy_s_per_null,
total_s_per_null (seconds). ENERGY_OUT.npy receives the energy matrix of the
unrewired network, so the Rust side can check both computed the same thing.
Set OPENBLAS_NUM_THREADS / OMP_NUM_THREADS before starting (the bench does).
"""
import sys
import time

import numpy as np
import scipy.stats

T = 1.0  # horizon, as hierax's default
C = 1.0  # stability offset, as hierax's default


def degree_preserving(w, swaps_per_edge, rng):
    n = w.shape[0]
    iu, ju = np.nonzero(np.triu(w, 1))
    edges = [[int(a), int(b), float(w[a, b])] for a, b in zip(iu, ju)]
    adj = w > 0
    m = len(edges)
    attempts = swaps_per_edge * m
    picks = rng.integers(0, m, size=(attempts, 2))
    flips = rng.random(attempts) < 0.5
    for t in range(attempts):
        i, j = picks[t]
        if i == j:
            continue
        a, b, w1 = edges[i]
        c, d, w2 = edges[j]
        if flips[t]:
            c, d = d, c
        if a == d or c == b or a == c or b == d or adj[a, d] or adj[c, b]:
            continue
        adj[a, b] = adj[b, a] = adj[c, d] = adj[d, c] = False
        adj[a, d] = adj[d, a] = adj[c, b] = adj[b, c] = True
        edges[i] = [min(a, d), max(a, d), w1]
        edges[j] = [min(c, b), max(c, b), w2]
    out = np.zeros((n, n))
    for a, b, wt in edges:
        out[a, b] = out[b, a] = wt
    return out


def energy_matrix(w, x):
    n = w.shape[0]
    lam_max = np.max(np.abs(np.linalg.eigvalsh(w)))
    a = w / (C + lam_max) - np.eye(n)
    lam, v = np.linalg.eigh(a)
    s = 2.0 * lam
    g = np.where(np.abs(s) > 1e-14, np.expm1(s * T) / np.where(s == 0, 1, s), T)
    gram = (v * g) @ v.T
    phi = (v * np.exp(lam * T)) @ v.T
    k = x.shape[1]
    e = np.zeros((k, k))
    for i in range(k):
        for j in range(k):
            d = x[:, j] - phi @ x[:, i]
            e[i, j] = d @ np.linalg.solve(gram, d)
    return e


def summarise(e, tau):
    k = e.shape[0]
    iu, ju = np.triu_indices(k, 1)
    bu = e[iu, ju]
    td = e[ju, iu]
    asym = bu - td
    dist = (ju - iu).astype(float)
    shift = tau[ju] - tau[iu]
    slope, intercept = np.polyfit(dist, asym, 1)
    return (
        bu.mean(),
        td.mean(),
        bu.mean() - td.mean(),
        slope,
        intercept,
        scipy.stats.spearmanr(dist, asym),
        scipy.stats.pearsonr(dist, asym),
        scipy.stats.spearmanr(asym, shift),
        scipy.stats.pearsonr(asym, shift),
    )


def main():
    w = np.load(sys.argv[1])
    x = np.load(sys.argv[2])
    tau = np.load(sys.argv[3])
    nulls = int(sys.argv[4])
    seed = int(sys.argv[5])
    np.save(sys.argv[6], energy_matrix(w, x))
    swap_s = 0.0
    energy_s = 0.0
    for i in range(nulls):
        rng = np.random.default_rng([seed, 1 + i])
        t0 = time.perf_counter()
        null = degree_preserving(w, 10, rng)
        t1 = time.perf_counter()
        summarise(energy_matrix(null, x), tau)
        t2 = time.perf_counter()
        swap_s += t1 - t0
        energy_s += t2 - t1
    print(f"nulls {nulls}")
    print(f"swap_s_per_null {swap_s / nulls:.6e}")
    print(f"energy_s_per_null {energy_s / nulls:.6e}")
    print(f"total_s_per_null {(swap_s + energy_s) / nulls:.6e}")


if __name__ == "__main__":
    main()
