"""High-precision references for the accuracy of hierax's Gramian routes.

Run with the pinned reference environment:
    .venv-ref/bin/python tests/reference/make_control_precision_fixtures.py
(mpmath 1.4.1, numpy 2.1.3). Writes tests/data/control/precision_*.npz.

Every reference is computed in mpmath at mp.dps = 60 from the float64 inputs
taken as exact, independently of hierax:
  * normalisation   λ_max(A) by mpmath.eigsy (symmetric) or as the spectral
                    radius from mpmath.eig (directed); Ã = A/(c + λ_max) − I
                    (continuous) or A/(c + λ_max) (discrete)
  * Gramian         symmetric, continuous: closed form V(G ∘ VᵀBBᵀV)Vᵀ with
                    G_ij = expm1((λ_i+λ_j)T)/(λ_i+λ_j) (Karrer et al. 2020);
                    directed, continuous: Van Loan's block exponential
                    exp([[−Ã, BBᵀ], [0, Ãᵀ]]T) by mpmath.expm (Van Loan 1978);
                    discrete: the sum Σ_{t<T} Ã^t BBᵀ (Ãᵀ)^t term by term
  * transition      V e^{ΛT} Vᵀ, mpmath.expm(ÃT) or Ã^T
  * energies        rᵀ W⁻¹ r by mpmath.lu_solve for each ordered pair
  * condition       λ_max(W)/λ_min(W) by mpmath.eigsy
  * floor           the largest relative change of the energies when every
                    entry of A is perturbed by a random ±2⁻⁵³ (relative), all
                    in mpmath: what rounding the input alone can cause, so that
                    a route's error above it is the route's own.
As a self-check the script also computes the symmetric continuous Gramian by
the block exponential and asserts agreement to 1e-40.

The networks are random with fixed seeds (distance-dependent, log-normal
weights), invented for testing. The driver sets are chosen to span condition
numbers from ~1e5 to ~1e12 (inside hierax's refusal limit 1e-3/ε ≈ 4.5e12), and
one case beyond it (~1e13) that hierax must refuse.
"""
import pathlib

import mpmath as mp
import numpy as np

mp.mp.dps = 60
OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "control"
OUT.mkdir(parents=True, exist_ok=True)


def network(rng, n, directed):
    pos = rng.uniform(size=(n, 3))
    d = np.linalg.norm(pos[:, None] - pos[None], axis=2)
    mask = rng.uniform(size=(n, n)) < np.exp(-d / 0.25)
    w = rng.lognormal(0.0, 1.0, (n, n)) * mask
    if not directed:
        w = np.triu(w, 1)
        w = w + w.T
    np.fill_diagonal(w, 0.0)
    # A ring of weak links so that no node is isolated.
    for i in range(n):
        j = (i + 1) % n
        w[i, j] = max(w[i, j], 0.05)
        w[j, i] = max(w[j, i], 0.05) if directed else w[i, j]
    return w


def mpm(a):
    return mp.matrix(a.tolist())


def normalise(a, c, model, directed):
    n = a.rows
    if directed:
        ev = mp.eig(a, left=False, right=False)
    else:
        ev = mp.eigsy(a, eigvals_only=True)
    rho = max(abs(ev[i]) for i in range(n))
    at = a / (c + rho)
    if model == "continuous":
        at = at - mp.eye(n)
    return at


def gramian_modal(at, b2, t):
    n = at.rows
    lam, v = mp.eigsy(at)
    k = v.T * mp.diag(b2) * v
    h = mp.matrix(n, n)
    for i in range(n):
        for j in range(n):
            z = lam[i] + lam[j]
            g = mp.expm1(z * t) / z if z != 0 else mp.mpf(t)
            h[i, j] = g * k[i, j]
    phi = v * mp.diag([mp.exp(lam[i] * t) for i in range(n)]) * v.T
    return v * h * v.T, phi


def gramian_block(at, b2, t):
    n = at.rows
    c = mp.matrix(2 * n, 2 * n)
    for i in range(n):
        for j in range(n):
            c[i, j] = -at[i, j]
            c[i + n, j + n] = at[j, i]
        c[i, i + n] = b2[i]
    f = mp.expm(c * t)
    f22t = mp.matrix(n, n)
    f12 = mp.matrix(n, n)
    for i in range(n):
        for j in range(n):
            f22t[i, j] = f[j + n, i + n]
            f12[i, j] = f[i, j + n]
    return f22t * f12, f22t


def gramian_sum(at, b2, t):
    n = at.rows
    w = mp.matrix(n, n)
    p = mp.eye(n)
    bb = mp.diag(b2)
    for _ in range(int(t)):
        w += p * bb * p.T
        p = at * p
    return w, p


def energies(w, phi, x):
    k = x.cols
    e = np.zeros((k, k))
    for i in range(k):
        for j in range(k):
            r = x[:, j] - phi * x[:, i]
            e[i, j] = float((r.T * mp.lu_solve(w, r))[0])
    return e


def reference(a, drivers, c, t, model, directed, x):
    at = normalise(mpm(a), c, model, directed)
    b2 = [mp.mpf(float(v)) ** 2 for v in drivers]
    if model == "discrete":
        w, phi = gramian_sum(at, b2, t)
    elif directed:
        w, phi = gramian_block(at, b2, t)
    else:
        w, phi = gramian_modal(at, b2, t)
    return w, phi, energies(w, phi, mpm(x))


def case(name, seed, n, n_drivers, model, t, directed=False, c=1.0, k=4):
    rng = np.random.default_rng(seed)
    a = network(rng, n, directed)
    drivers = np.zeros(n)
    drivers[rng.choice(n, n_drivers, replace=False)] = 1.0
    x = rng.normal(size=(n, k))
    w, phi, e = reference(a, drivers, c, t, model, directed, x)
    ev = mp.eigsy((w + w.T) / 2, eigvals_only=True)
    cond = float(max(ev) / min(ev))
    # Input-rounding floor: A perturbed by ±2^-53 relative, symmetrically when undirected.
    s = rng.choice([-1.0, 1.0], size=(n, n))
    if not directed:
        s = np.triu(s, 1)
        s = s + s.T
    ap = mpm(a)
    for i in range(n):
        for j in range(n):
            ap[i, j] = ap[i, j] * (1 + mp.mpf(s[i, j]) * mp.mpf(2) ** -53)
    at_p = normalise(ap, c, model, directed)
    b2 = [mp.mpf(float(v)) ** 2 for v in drivers]
    if model == "discrete":
        wp, pp = gramian_sum(at_p, b2, t)
    elif directed:
        wp, pp = gramian_block(at_p, b2, t)
    else:
        wp, pp = gramian_modal(at_p, b2, t)
    ep = energies(wp, pp, mpm(x))
    floor = float(np.max(np.abs(ep - e) / np.abs(e)))
    if model == "continuous" and not directed:
        # Self-check of the two closed forms at 60 digits.
        at = normalise(mpm(a), c, model, directed)
        wb, _ = gramian_block(at, b2, t)
        diff = max(abs(wb[i, j] - w[i, j]) for i in range(n) for j in range(n))
        scale = max(abs(w[i, j]) for i in range(n) for j in range(n))
        assert diff < mp.mpf(10) ** -40 * scale, (name, diff)
    np.savez(
        OUT / f"precision_{name}.npz",
        adjacency=a,
        drivers=drivers,
        horizon=np.array([float(t)]),
        offset=np.array([c]),
        discrete=np.array([1.0 if model == "discrete" else 0.0]),
        directed=np.array([1.0 if directed else 0.0]),
        states=x,
        gramian=np.array(w.tolist(), dtype=float),
        energy=e,
        condition=np.array([cond]),
        floor=np.array([floor]),
    )
    print(f"{name}: n {n}, drivers {n_drivers}, {model}, T {t}, condition {cond:.2e}, floor {floor:.1e}", flush=True)


if __name__ == "__main__":
    # (name, network seed, n, drivers, time model, horizon); conditions as printed.
    case("sym_cont_1e5", 5, 30, 20, "continuous", 1.0)
    case("sym_cont_1e9", 5, 30, 12, "continuous", 1.0)
    case("sym_cont_1e11", 5, 30, 9, "continuous", 1.0)
    case("sym_cont_1e12", 6, 30, 9, "continuous", 1.0)
    case("sym_cont_1e13", 5, 30, 8, "continuous", 1.0)  # beyond the limit: must be refused
    case("dir_cont_1e8", 7, 30, 12, "continuous", 1.0, directed=True)
    case("dir_cont_1e12", 7, 30, 10, "continuous", 1.0, directed=True)
    case("sym_disc_1e12", 9, 30, 8, "discrete", 4.0)
