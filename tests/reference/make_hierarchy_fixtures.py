"""Reference fixtures for the `hierarchy` module (tests/hierarchy.rs).

Run with the pinned reference environment (numpy 2.1.3, scipy 1.14.1; see
tests/reference/requirements.txt):

    .venv-ref/bin/python tests/reference/make_hierarchy_fixtures.py

Writes tests/data/hierarchy/binning.json and tests/data/hierarchy/diffusion.json.
All data are invented (seeded random numbers).
"""

import json
import pathlib

import numpy as np
import scipy
import scipy.linalg

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "hierarchy"


def binning_cases(rng):
    cases = []
    for n, k, decimals in [(10, 3, None), (17, 4, 1), (400, 7, None), (33, 33, None), (25, 5, 0), (12, 1, None)]:
        x = rng.normal(size=n)
        if decimals is not None:
            x = np.round(x, decimals)  # creates ties on purpose
        asc = np.argsort(x, kind="stable")
        desc = np.argsort(-x, kind="stable")
        cases.append(
            {
                "values": x.tolist(),
                "k": k,
                "order_ascending": asc.tolist(),
                "bins_ascending": [b.tolist() for b in np.array_split(asc, k)],
                "order_descending": desc.tolist(),
                "bins_descending": [b.tolist() for b in np.array_split(desc, k)],
            }
        )
    return cases


def normalised_diffusion_matrix(x, sparsity, alpha):
    """The symmetric matrix whose eigenvalues the diffusion map uses, with the
    conventions documented in src/hierarchy/gradient.rs."""
    n, p = x.shape
    keep = int(np.ceil((1.0 - sparsity) * p - 1e-9))
    t = np.zeros_like(x)
    idx = np.argsort(-x, axis=1, kind="stable")[:, :keep]
    rows = np.arange(n)[:, None]
    t[rows, idx] = x[rows, idx]
    t[t < 0] = 0.0
    y = t / np.linalg.norm(t, axis=1, keepdims=True)
    k = y @ y.T
    d = k.sum(axis=1)
    ka = k / np.outer(d**alpha, d**alpha)
    da = ka.sum(axis=1)
    return ka / np.sqrt(np.outer(da, da))


def diffusion_case(rng):
    n, t = 40, 200
    ts = rng.normal(size=(t, n)) + 0.5 * rng.normal(size=(t, 1))
    fc = np.corrcoef(ts.T)
    s = normalised_diffusion_matrix(fc, 0.9, 0.5)
    w = scipy.linalg.eigh(s, eigvals_only=True)[::-1]
    return {"affinity_source": fc.tolist(), "sparsity": 0.9, "alpha": 0.5, "eigenvalues_descending": w.tolist()}


def variogram_case(rng):
    """Smoothed empirical variogram as documented in src/hierarchy/variogram.rs
    (pairs up to the 25th percentile, numpy's default linear percentile, 25
    distances, truncated Gaussian kernel, bandwidth 3 bin spacings)."""
    pts = rng.uniform(size=(60, 2))
    d = np.sqrt(((pts[:, None, :] - pts[None, :, :]) ** 2).sum(-1))
    x = np.sin(3 * pts[:, 0]) + pts[:, 1] ** 2 + 0.1 * rng.normal(size=60)
    iu = np.triu_indices(60, 1)
    dist = d[iu]
    cut = np.percentile(dist, 25)
    keep = dist <= cut
    dp, pi, pj = dist[keep], iu[0][keep], iu[1][keep]
    h = np.linspace(dp.min(), cut, 25)
    b = 3 * (h[1] - h[0])
    g = 0.5 * (x[pi] - x[pj]) ** 2
    out = []
    for hh in h:
        u = np.abs(dp - hh) / b
        w = np.exp(-0.5 * (2.68 * u) ** 2)
        w[u > 1] = 0
        out.append((w * g).sum() / w.sum())
    return {"distances": d.tolist(), "map": x.tolist(), "h": h.tolist(), "variogram": out}


def main():
    rng = np.random.default_rng(20240605)
    OUT.mkdir(parents=True, exist_ok=True)
    meta = {"numpy": np.__version__, "scipy": scipy.__version__, "note": "invented data, seeded"}
    (OUT / "binning.json").write_text(json.dumps({"meta": meta, "cases": binning_cases(rng)}) + "\n")
    (OUT / "diffusion.json").write_text(json.dumps({"meta": meta, **diffusion_case(rng)}) + "\n")
    (OUT / "variogram.json").write_text(json.dumps({"meta": meta, **variogram_case(rng)}) + "\n")


if __name__ == "__main__":
    main()
