"""Check the effects planted in the INVENTED demo cohort (demo-data/).

Independent of hierax: reads the committed files with numpy and recomputes
everything with numpy 2.1.3 / scipy 1.14.1 (.venv-ref/bin/python).

Control energy (Karrer et al. 2020, J Neural Eng; Gu et al. 2015, Nat Commun):
  A~ = A / (1 + lambda_max(A)) - I, continuous time, B = I, T = 1,
  Phi = expm(A~ T)                       (scipy.linalg.expm)
  W_T = int_0^T e^{A~ t} e^{A~' t} dt    (eigenvalue closed form; checked
                                          against scipy.integrate.quad_vec)
  E(x0 -> xf) = (xf - Phi x0)' W_T^{-1} (xf - Phi x0)  (solve, not invert)
States: regions ranked by the hierarchy map (stable sort, ties by region
order), 10 equal-count bins, state k = indicator of bin k (not normalised).
Asymmetry dE_ij = E_ij - E_ji for i < j (i lower on the hierarchy), so a
negative dE means the bottom-up transition is cheaper. Also checks the
identity dE_ij = 2 (x_i'A x_i - x_j'A x_j) / (1 + lambda_max) that the
generator's design relies on (derived in examples/make_demo.rs).

Timescales: lag-1 autocorrelation per region (numpy), as a quick check that
the planted hierarchy gradient is visible, with and without confound
regression (OLS on global signal + six motion parameters + intercept) and
censoring (frames with FD > 0.5 mm and the one after, Power et al. 2012).

Run from the repository root:
  .venv-ref/bin/python tests/reference/check_demo_effects.py
"""

import csv
import json
import os
import sys

import numpy as np
import scipy
from scipy import integrate, linalg, stats

ROOT = sys.argv[1] if len(sys.argv) > 1 else "demo-data"
N_BINS = 10
T = 1.0
FD_THRESHOLD_MM = 0.5  # Power et al. 2012


def read_tsv(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f, delimiter="\t"))


def gramian_closed_form(at, t):
    lam, v = np.linalg.eigh(at)
    s = lam[:, None] + lam[None, :]
    with np.errstate(divide="ignore", invalid="ignore"):
        g = np.where(np.abs(s) > 1e-14, np.expm1(s * t) / s, t)
    # B = I: W = V (G o V'V) V' = V diag(G_ii) V'
    return (v * np.diag(g)) @ v.T


def energies(a, x):
    lam_max = np.max(np.abs(np.linalg.eigvalsh(a)))
    n = a.shape[0]
    at = a / (1.0 + lam_max) - np.eye(n)
    phi = linalg.expm(at * T)
    w = gramian_closed_form(at, T)
    k = x.shape[1]
    e = np.empty((k, k))
    for i in range(k):
        d = x - (phi @ x[:, i])[:, None]  # columns: x_j - Phi x_i
        mw = linalg.solve(w, d, assume_a="pos")
        e[i, :] = np.einsum("nj,nj->j", d, mw)
    return e, at, lam_max, w


def main():
    meta = json.load(open(os.path.join(ROOT, "dataset.json")))
    assert meta["invented"] is True
    regions = read_tsv(os.path.join(ROOT, "atlas", "regions.tsv"))
    names = [r["region"] for r in regions]
    with open(os.path.join(ROOT, "atlas", "hierarchy.csv"), newline="") as f:
        hrows = list(csv.DictReader(f))
    assert [r["region"] for r in hrows] == names
    h = np.array([float(r["value"]) for r in hrows])
    n = len(h)
    order = np.argsort(h, kind="stable")
    x = np.zeros((n, N_BINS))
    for b, chunk in enumerate(np.array_split(order, N_BINS)):
        x[chunk, b] = 1.0

    parts = read_tsv(os.path.join(ROOT, "participants.tsv"))
    ages = np.array([float(p["age"]) for p in parts])
    print(f"numpy {np.__version__}, scipy {scipy.__version__}; {len(parts)} INVENTED participants")

    tr = meta["repetition_time_s"]
    per_dist = {d: [] for d in range(1, N_BINS)}
    mean_asym, rel_asym, frac_bu, mean_e = [], [], [], []
    max_identity_err = 0.0
    rho_raw, rho_clean, censored = [], [], []
    for s, p in enumerate(parts):
        sid = p["participant_id"]
        a = np.loadtxt(os.path.join(ROOT, sid, f"{sid}_connectome.csv"), delimiter=",", skiprows=1)
        assert np.array_equal(a, a.T) and np.all(np.diag(a) == 0)
        e, at, lam_max, w = energies(a, x)
        if s == 0:
            wq, _ = integrate.quad_vec(lambda t: linalg.expm(at * t) @ linalg.expm(at.T * t), 0.0, T,
                                       epsabs=1e-13, epsrel=1e-12)
            gram_err = np.max(np.abs(wq - w)) / np.max(np.abs(w))
            print(f"Gramian closed form vs quad_vec ({sid}): max rel diff {gram_err:.1e}")
        de = e - e.T
        s_in = np.einsum("ni,nm,mi->i", x, a, x)
        predicted = 2.0 * (s_in[:, None] - s_in[None, :]) / (1.0 + lam_max)
        max_identity_err = max(max_identity_err, np.max(np.abs(de - predicted)) / np.max(np.abs(de)))
        iu = np.triu_indices(N_BINS, 1)
        for i, j in zip(*iu):
            per_dist[j - i].append(de[i, j])
        mean_asym.append(np.mean(de[iu]))
        rel_asym.append(np.mean(de[iu] / (e[iu] + e.T[iu])))
        frac_bu.append(np.mean(de[iu] < 0))
        mean_e.append(np.mean(e[~np.eye(N_BINS, dtype=bool)]))

        bold = np.load(os.path.join(ROOT, sid, f"{sid}_bold.npy"))
        conf = read_tsv(os.path.join(ROOT, sid, f"{sid}_confounds.tsv"))
        fd = np.array([np.nan if c["framewise_displacement"] == "n/a" else float(c["framewise_displacement"])
                       for c in conf])
        cols = ["global_signal", "trans_x", "trans_y", "trans_z", "rot_x", "rot_y", "rot_z"]
        z = np.column_stack([np.ones(len(conf))] + [[float(c[k]) for c in conf] for k in cols])
        beta, *_ = np.linalg.lstsq(z, bold, rcond=None)
        resid = bold - z @ beta
        bad = np.nan_to_num(fd) > FD_THRESHOLD_MM
        bad = bad | np.concatenate([[False], bad[:-1]])
        censored.append(bad.sum())
        rho_raw.append(stats.spearmanr(h, lag1_acf(bold, np.ones(len(fd), bool))).statistic)
        rho_clean.append(stats.spearmanr(h, lag1_acf(resid, ~bad)).statistic)

    print(f"identity dE = 2(S_i - S_j)/(1 + lambda_max): max rel error {max_identity_err:.1e}")
    print("\nasymmetry dE_ij = E_ij - E_ji (i < j; negative = bottom-up cheaper), all participants")
    print("distance  n_pairs  mean_dE    sd_dE   fraction<0")
    for d, vals in per_dist.items():
        v = np.array(vals)
        print(f"{d:8d}  {len(v):7d}  {v.mean():8.3f}  {v.std(ddof=1):7.3f}  {np.mean(v < 0):9.3f}")
    dists = np.concatenate([[d] * len(v) for d, v in per_dist.items()])
    allv = np.concatenate([v for v in per_dist.values()])
    r = stats.spearmanr(dists, allv)
    print(f"Spearman(distance, dE) = {r.statistic:.3f} (p = {r.pvalue:.1e})")

    mean_asym, rel_asym = np.array(mean_asym), np.array(rel_asym)
    print(f"\nfraction of bottom-up cheaper pairs per participant: min {min(frac_bu):.3f}, mean {np.mean(frac_bu):.3f}")
    ra = stats.spearmanr(ages, mean_asym)
    rr = stats.spearmanr(ages, rel_asym)
    fit = stats.linregress(ages, mean_asym)
    print(f"Spearman(age, mean dE) = {ra.statistic:.3f} (p = {ra.pvalue:.1e}); "
          f"OLS slope {fit.slope:.4f} per year (mean dE {mean_asym.mean():.3f})")
    print(f"Spearman(age, mean dE/(E_ij+E_ji)) = {rr.statistic:.3f} (p = {rr.pvalue:.1e}); "
          f"mean relative asymmetry {rel_asym.mean():.4f}, mean energy {np.mean(mean_e):.2f}")
    young, old = ages < np.median(ages), ages >= np.median(ages)
    print(f"mean dE, younger half {mean_asym[young].mean():.3f} vs older half {mean_asym[old].mean():.3f}")

    # The planted effects must be there (exit non-zero otherwise).
    means = [np.mean(v) for v in per_dist.values()]
    assert max_identity_err < 1e-10, max_identity_err
    assert all(m < 0 for m in means), "bottom-up transitions must be cheaper at every distance"
    assert all(b < a for a, b in zip(means, means[1:])), "asymmetry must grow with bin distance"
    assert ra.statistic > 0 and ra.pvalue < 0.01, "asymmetry must shrink with age"

    print(f"\ntimescales: Spearman(hierarchy, lag-1 ACF) per participant, mean over participants")
    print(f"  raw series:                        {np.mean(rho_raw):.3f} (min {np.min(rho_raw):.3f})")
    print(f"  confound-regressed and censored:   {np.mean(rho_clean):.3f} (min {np.min(rho_clean):.3f})")
    print(f"  censored frames (FD > {FD_THRESHOLD_MM} mm and next): mean {np.mean(censored):.1f}, "
          f"Spearman with age {stats.spearmanr(ages, censored).statistic:.3f}")
    assert np.mean(rho_clean) > np.mean(rho_raw) > 0, "timescale gradient, clearer after cleaning"
    print("\nall planted effects present")


def lag1_acf(y, keep):
    """Lag-1 autocorrelation per column over pairs of kept frames (biased, demeaned over kept frames)."""
    yk = np.where(keep[:, None], y, np.nan)
    yk = yk - np.nanmean(yk, axis=0)
    num = np.nansum(yk[1:] * yk[:-1], axis=0)
    den = np.nansum(yk * yk, axis=0)
    return num / den


if __name__ == "__main__":
    main()
