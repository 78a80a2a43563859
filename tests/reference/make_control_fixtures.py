"""Reference fixtures for hierax's `control` module.

Run with the pinned reference environment:
    .venv-ref/bin/python tests/reference/make_control_fixtures.py
(numpy 2.1.3, scipy 1.14.1). Writes tests/data/control/*.npz.

Every quantity is computed independently of hierax from its definition:
  * state transition     scipy.linalg.expm(Ã T)
  * Gramian              scipy.integrate.quad_vec of e^{Ãt} B Bᵀ e^{Ãᵀt}
  * infinite horizon     scipy.linalg.solve_continuous_lyapunov(Ã, −BBᵀ)
  * discrete Gramian     direct sum Σ_{t<T} Ã^t BBᵀ (Ãᵀ)^t
  * energies             r ᵀ numpy.linalg.solve(W, r) per pair (a loop, on purpose)
  * trajectories         scipy.integrate.solve_ivp (DOP853) of dx/dt = Ãx + Bu*(t)
  * node-wise energies   scipy.integrate.quad_vec of u_i(t)²
  * state-penalised      scipy.integrate.solve_bvp on the Pontryagin system
The networks are random with fixed seeds, invented for testing.
"""
import pathlib

import numpy as np
from scipy import integrate, linalg

OUT = pathlib.Path(__file__).resolve().parents[1] / "data" / "control"
OUT.mkdir(parents=True, exist_ok=True)
QUAD = dict(epsabs=1e-14, epsrel=1e-13, norm="max")


def network(rng, n, directed):
    a = rng.uniform(0.0, 1.0, (n, n)) * (rng.uniform(size=(n, n)) < 0.7)
    if not directed:
        a = np.triu(a, 1)
        a = a + a.T
    np.fill_diagonal(a, 0.0)
    # Connect a ring so that no node is isolated.
    for i in range(n):
        a[i, (i + 1) % n] = max(a[i, (i + 1) % n], 0.2)
        if not directed:
            a[(i + 1) % n, i] = a[i, (i + 1) % n]
    return a


def normalise(a, c, model):
    rho = np.max(np.abs(np.linalg.eigvals(a)))
    an = a / (c + rho)
    return an - np.eye(len(a)) if model == "continuous" else an


def gramian_quad(at, bb, t):
    f = lambda s: linalg.expm(at * s) @ bb @ linalg.expm(at.T * s)
    w, _ = integrate.quad_vec(f, 0.0, t, **QUAD)
    return 0.5 * (w + w.T)


def energies(w, phi, x):
    k = x.shape[1]
    e = np.zeros((k, k))
    for i in range(k):
        for j in range(k):
            r = x[:, j] - phi @ x[:, i]
            e[i, j] = r @ np.linalg.solve(w, r)
    return e


def continuous_case(name, seed, n, directed, drivers, t=1.5, c=1.0, k=4):
    rng = np.random.default_rng(seed)
    a = network(rng, n, directed)
    at = normalise(a, c, "continuous")
    bb = np.diag(drivers**2)
    phi = linalg.expm(at * t)
    w = gramian_quad(at, bb, t)
    x = rng.normal(size=(n, k))
    e = energies(w, phi, x)
    # Infinite horizon: Ã W + W Ãᵀ = −BBᵀ; T_long chosen so e^{2 λ_max T} < 1e-14.
    w_inf = linalg.solve_continuous_lyapunov(at, -bb)
    lam = np.max(np.real(np.linalg.eigvals(at)))
    t_long = float(np.ceil(np.log(1e-14) / (2 * lam)))
    # Optimal input and ODE trajectory for the pair 0 -> 1.
    x0, xf = x[:, 0], x[:, 1]
    nu = np.linalg.solve(w, xf - phi @ x0)
    u = lambda s: np.diag(drivers) @ linalg.expm(at.T * (t - s)) @ nu
    times = np.linspace(0.0, t, 7)
    sol = integrate.solve_ivp(lambda s, y: at @ y + np.diag(drivers) @ u(s), (0.0, t), x0,
                              method="DOP853", t_eval=times, rtol=1e-12, atol=1e-12)
    node_energy, _ = integrate.quad_vec(lambda s: u(s) ** 2, 0.0, t, **QUAD)
    u_grid = np.array([u(s) for s in times])
    # Node metrics on the discrete normalisation Â = A/(c + ρ): average
    # controllability as the power series Σ_{t<4000} ‖Â^t e_i‖² (tail < 1e-30
    # here), modal controllability Σ_j (1 − λ_j²) v_ij² from numpy.linalg.eigh.
    ad = normalise(a, c, "discrete")
    p, avg = np.eye(n), np.zeros(n)
    for _ in range(4000):
        avg += np.sum(p * p, axis=0)
        p = ad @ p
    lam, vec = np.linalg.eigh(ad) if not directed else (np.zeros(n), np.zeros((n, n)))
    modal = np.sum((1 - lam**2) * vec**2, axis=1) if not directed else np.full(n, np.nan)
    np.savez(OUT / f"{name}.npz", average_controllability=avg, modal_controllability=modal, adjacency=a, normalised=at, drivers=drivers, horizon=t, offset=c,
             transition=phi, gramian=w, states=x, energy=e, gramian_infinite=w_inf, horizon_long=t_long,
             times=times, trajectory=sol.y.T, input=u_grid, node_energy=node_energy)


def discrete_case(name, seed, n, directed, drivers, t=6, c=1.0, k=4):
    rng = np.random.default_rng(seed)
    a = network(rng, n, directed)
    at = normalise(a, c, "discrete")
    bb = np.diag(drivers**2)
    w = sum(np.linalg.matrix_power(at, s) @ bb @ np.linalg.matrix_power(at.T, s) for s in range(t))
    phi = np.linalg.matrix_power(at, t)
    x = rng.normal(size=(n, k))
    e = energies(w, phi, x)
    np.savez(OUT / f"{name}.npz", adjacency=a, normalised=at, drivers=drivers, horizon=float(t), offset=c,
             transition=phi, gramian=w, states=x, energy=e)


def penalised_case(name, seed, n, penalised_nodes, rho=0.5, t=1.0, c=1.0):
    rng = np.random.default_rng(seed)
    a = network(rng, n, False)
    at = normalise(a, c, "continuous")
    s = np.zeros(n)
    s[penalised_nodes] = 1.0
    sm = np.diag(s)
    x0, xf = rng.normal(size=n), rng.normal(size=n)

    # Pontryagin: u = −p/(2ρ) (B = I); dx/dt = Ãx − p/(2ρ); dp/dt = −Ãᵀp − 2S(x − x_f).
    def rhs(_, z):
        xx, pp = z[:n], z[n:]
        return np.vstack([at @ xx - pp / (2 * rho), -at.T @ pp - 2 * sm @ (xx - xf[:, None])])

    def bc(za, zb):
        return np.concatenate([za[:n] - x0, zb[:n] - xf])

    mesh = np.linspace(0.0, t, 201)
    z0 = np.vstack([np.outer(x0, 1 - mesh / t) + np.outer(xf, mesh / t), np.zeros((n, mesh.size))])
    sol = integrate.solve_bvp(rhs, bc, mesh, z0, tol=1e-10, max_nodes=200000)
    assert sol.success, sol.message
    times = np.linspace(0.0, t, 6)
    energy, _ = integrate.quad_vec(lambda s_: np.sum((sol.sol(s_)[n:] / (2 * rho)) ** 2), 0.0, t, **QUAD)
    np.savez(OUT / f"{name}.npz", adjacency=a, offset=c, horizon=t, rho=rho, penalised=s, x0=x0, xf=xf,
             times=times, trajectory=sol.sol(times)[:n].T, costate0=sol.sol(0.0)[n:], energy=energy)


if __name__ == "__main__":
    n = 7
    continuous_case("continuous_symmetric_all", 11, n, False, np.ones(n))
    continuous_case("continuous_symmetric_subset", 12, n, False, np.array([1, 0, 1, 1, 0, 1, 1.0]))
    continuous_case("continuous_directed_weights", 13, n, True, np.array([1, 0.5, 1, 2, 0, 1, 0.7]))
    discrete_case("discrete_symmetric_all", 14, n, False, np.ones(n))
    discrete_case("discrete_directed_subset", 15, n, True, np.array([1, 1, 0, 1, 1, 0, 1.0]))
    penalised_case("penalised_symmetric", 16, 5, [0, 2])
    print("wrote", sorted(p.name for p in OUT.glob("*.npz")))
