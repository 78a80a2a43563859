//! The controllability Gramian in square-root form, `W_T = RᵀR`, built
//! without ever forming `W_T`.
//!
//! Forming `W_T` and then factoring it loses the small eigenvalues to the
//! rounding of the large ones: an absolute error of about `ε‖W_T‖` lands on
//! every eigenvalue, so an energy, which is governed by the smallest, loses
//! up to `κ(W_T)·ε`. Updating a triangular factor by orthogonal (QR) steps
//! keeps each step backward stable in the factor, whose condition is only
//! `√κ(W_T)` (the square-root idea of Hammarling 1982, IMA J. Numer. Anal.
//! 2, 303–323, for Lyapunov equations; here for the finite-horizon Gramian).
//!
//! * Discrete time, exactly: `W_T = Σ_{t<T} Ã^tBBᵀ(Ãᵀ)^t = CCᵀ` with
//!   `C = [B, ÃB, …, Ã^{T−1}B]`, accumulated through the binary digits of
//!   `T` with `W_{2k} = W_k + Ã^kW_k(Ã^k)ᵀ` and `W_{k+1} = BBᵀ + ÃW_kÃᵀ`;
//!   each update `W' = [X; Y]ᵀ[X; Y]` is one QR of the stacked factors.
//! * Continuous time: on a short step `h = T/2^s` with `‖Ã‖h ≤ 1`,
//!   Gauss–Legendre quadrature with [`QUADRATURE_NODES`] nodes gives
//!   `W_h ≈ Σ_k w_k e^{Ãt_k}BBᵀe^{Ãᵀt_k} = ZZᵀ`; then `s` doublings
//!   `W_{2h} = W_h + e^{Ãh}W_he^{Ãᵀh}`. The quadrature error of `q` nodes on
//!   `[0, h]` is at most `h(q!)⁴/((2q+1)((2q)!)³)·max‖f^{(2q)}‖` (Davis &
//!   Rabinowitz 1984, Methods of Numerical Integration, §2.7) with
//!   `‖f^{(2q)}‖ ≤ (2‖Ã‖)^{2q}‖B‖²`; for `q = 16` and `2‖Ã‖h ≤ 2` that is
//!   below `2e-45·h‖B‖²`, far under any Gramian eigenvalue we accept.
//!
//! Undirected networks work in the eigenbasis of Ã, where `e^{Ãt}` is
//! diagonal; directed ones in the node basis with one matrix exponential
//! per quadrature node.

use super::system::System;
use super::TimeModel;
use crate::linalg;
use faer::{Mat, MatRef, Par};

/// Gauss–Legendre nodes per short step (see the module docs for the bound).
pub(crate) const QUADRATURE_NODES: usize = 16;

/// A factored Gramian `W̃ = RᵀR` in the working basis.
pub(crate) struct GramianFactor {
    /// Upper-triangular n × n factor.
    pub r: Mat<f64>,
}

/// The dynamics in the working basis: diagonal (eigenvalues of a
/// symmetric Ã) or a dense matrix.
pub(crate) enum Dynamics<'a> {
    Diagonal(&'a [f64]),
    Dense(MatRef<'a, f64>),
}

impl Dynamics<'_> {
    fn n(&self) -> usize {
        match self {
            Dynamics::Diagonal(l) => l.len(),
            Dynamics::Dense(a) => a.nrows(),
        }
    }

    /// An upper bound on ‖Ã‖₂.
    fn norm_bound(&self) -> f64 {
        match self {
            Dynamics::Diagonal(l) => l.iter().fold(0.0f64, |m, v| m.max(v.abs())),
            // ‖A‖₂ ≤ √(‖A‖₁‖A‖∞) ≤ max(‖A‖₁, ‖A‖∞).
            Dynamics::Dense(a) => linalg::norm1(*a).max(linalg::norm_inf(*a)),
        }
    }

    /// `Y Xᵀ` where X is the map over time `t` (`e^{Ãt}`), i.e. each row
    /// `y` of `rows` becomes `(X yᵀ)ᵀ`.
    fn propagate_rows(&self, rows: MatRef<'_, f64>, x: &Propagator, par: Par) -> Mat<f64> {
        match x {
            Propagator::Diagonal(d) => Mat::from_fn(rows.nrows(), rows.ncols(), |i, j| rows[(i, j)] * d[j]),
            Propagator::Dense(m) => linalg::mul(rows, m.as_ref().transpose(), par),
        }
    }

    fn exp(&self, t: f64, par: Par) -> Propagator {
        match self {
            Dynamics::Diagonal(l) => Propagator::Diagonal(l.iter().map(|v| (v * t).exp()).collect()),
            Dynamics::Dense(a) => {
                let at = Mat::from_fn(a.nrows(), a.ncols(), |i, j| a[(i, j)] * t);
                Propagator::Dense(linalg::expm(at.as_ref(), par))
            }
        }
    }

    fn matrix(&self) -> Propagator {
        match self {
            Dynamics::Diagonal(l) => Propagator::Diagonal(l.to_vec()),
            Dynamics::Dense(a) => Propagator::Dense(a.to_owned()),
        }
    }
}

/// A state-transition map: diagonal or dense.
pub(crate) enum Propagator {
    Diagonal(Vec<f64>),
    Dense(Mat<f64>),
}

impl Propagator {
    fn identity(n: usize, diagonal: bool) -> Propagator {
        if diagonal {
            Propagator::Diagonal(vec![1.0; n])
        } else {
            Propagator::Dense(Mat::identity(n, n))
        }
    }

    /// `self · other`.
    fn then(&self, other: &Propagator, par: Par) -> Propagator {
        match (self, other) {
            (Propagator::Diagonal(a), Propagator::Diagonal(b)) => {
                Propagator::Diagonal(a.iter().zip(b).map(|(x, y)| x * y).collect())
            }
            (Propagator::Dense(a), Propagator::Dense(b)) => {
                Propagator::Dense(linalg::mul(a.as_ref(), b.as_ref(), par))
            }
            // Never mixed: one system uses one kind throughout.
            (Propagator::Diagonal(a), Propagator::Dense(b)) => {
                Propagator::Dense(Mat::from_fn(b.nrows(), b.ncols(), |i, j| a[i] * b[(i, j)]))
            }
            (Propagator::Dense(a), Propagator::Diagonal(b)) => {
                Propagator::Dense(Mat::from_fn(a.nrows(), a.ncols(), |i, j| a[(i, j)] * b[j]))
            }
        }
    }
}

/// Stack `top` over `bottom` (same column count).
fn stack(top: MatRef<'_, f64>, bottom: MatRef<'_, f64>) -> Mat<f64> {
    let (r1, r2, n) = (top.nrows(), bottom.nrows(), top.ncols());
    let mut s = Mat::<f64>::zeros(r1 + r2, n);
    s.as_mut().submatrix_mut(0, 0, r1, n).copy_from(top);
    s.as_mut().submatrix_mut(r1, 0, r2, n).copy_from(bottom);
    s
}

/// `R'` with `R'ᵀR' = RᵀR + (RXᵀ)ᵀ(RXᵀ) = W + XWXᵀ`.
fn add_propagated(dynamics: &Dynamics<'_>, r: &Mat<f64>, x: &Propagator, par: Par) -> Mat<f64> {
    let rx = dynamics.propagate_rows(r.as_ref(), x, par);
    linalg::qr_r(stack(r.as_ref(), rx.as_ref()).as_ref(), par)
}

/// The factored Gramian of `(Ã, B)` over the horizon, in the working basis.
/// `input_rows` holds `Bᵀ` in that basis, one row per driver (m × n).
pub(crate) fn factor_gramian(
    dynamics: &Dynamics<'_>,
    input_rows: MatRef<'_, f64>,
    time_model: TimeModel,
    horizon: f64,
    par: Par,
) -> GramianFactor {
    let n = dynamics.n();
    let diagonal = matches!(dynamics, Dynamics::Diagonal(_));
    match time_model {
        TimeModel::Discrete => {
            // Binary digits of T, most significant first (as `gramian_discrete`).
            let steps = horizon as u64;
            let a = dynamics.matrix();
            let mut r = Mat::<f64>::zeros(n, n);
            let mut p = Propagator::identity(n, diagonal);
            let mut empty = true;
            for b in (0..(64 - steps.leading_zeros())).rev() {
                if !empty {
                    r = add_propagated(dynamics, &r, &p, par);
                    p = p.then(&p, par);
                }
                if (steps >> b) & 1 == 1 {
                    // W ← BBᵀ + ÃWÃᵀ.
                    let ra = dynamics.propagate_rows(r.as_ref(), &a, par);
                    r = linalg::qr_r(stack(input_rows, ra.as_ref()).as_ref(), par);
                    p = a.then(&p, par);
                    empty = false;
                }
            }
            GramianFactor { r }
        }
        TimeModel::Continuous => {
            let norm = dynamics.norm_bound() * horizon;
            let s = if norm > 1.0 { norm.log2().ceil() as i32 } else { 0 };
            let h = horizon / 2f64.powi(s);
            let (nodes, weights) = gauss_legendre(QUADRATURE_NODES);
            let m = input_rows.nrows();
            let mut zt = Mat::<f64>::zeros(QUADRATURE_NODES * m, n);
            for (k, (x, w)) in nodes.iter().zip(&weights).enumerate() {
                // Node on [0, h]: t = h(x + 1)/2, weight h·w/2.
                let e = dynamics.exp(0.5 * h * (x + 1.0), par);
                let block = dynamics.propagate_rows(input_rows, &e, par);
                let sw = (0.5 * h * w).sqrt();
                for i in 0..m {
                    for j in 0..n {
                        zt[(k * m + i, j)] = sw * block[(i, j)];
                    }
                }
            }
            let mut r = linalg::qr_r(zt.as_ref(), par);
            let mut phi = dynamics.exp(h, par);
            for _ in 0..s {
                r = add_propagated(dynamics, &r, &phi, par);
                phi = phi.then(&phi, par);
            }
            GramianFactor { r }
        }
    }
}

/// Gauss–Legendre nodes and weights on [−1, 1], ascending: Newton's method
/// on the Legendre recurrence `(k+1)P_{k+1} = (2k+1)xP_k − kP_{k−1}` from the
/// starting guesses `cos(π(i − 1/4)/(q + 1/2))`, weights
/// `2/((1 − x²)P_q'(x)²)` (Abramowitz & Stegun 1964, 25.4.29; Press et al.,
/// Numerical Recipes, §4.6).
pub(crate) fn gauss_legendre(q: usize) -> (Vec<f64>, Vec<f64>) {
    let mut x = vec![0.0; q];
    let mut w = vec![0.0; q];
    let qf = q as f64;
    for i in 0..q.div_ceil(2) {
        let mut z = (std::f64::consts::PI * (i as f64 + 0.75) / (qf + 0.5)).cos();
        let mut dp = 1.0;
        for _ in 0..100 {
            let (mut p0, mut p1) = (1.0, z);
            for k in 1..q {
                let kf = k as f64;
                let p2 = ((2.0 * kf + 1.0) * z * p1 - kf * p0) / (kf + 1.0);
                p0 = p1;
                p1 = p2;
            }
            // P_q'(z) = q(zP_q − P_{q−1})/(z² − 1).
            dp = qf * (z * p1 - p0) / (z * z - 1.0);
            let dz = p1 / dp;
            z -= dz;
            if dz.abs() <= 1e-16 {
                break;
            }
        }
        x[i] = -z;
        x[q - 1 - i] = z;
        let wi = 2.0 / ((1.0 - z * z) * dp * dp);
        w[i] = wi;
        w[q - 1 - i] = wi;
    }
    (x, w)
}

/// The rows of `Bᵀ` in the working basis: one row per driver node with a
/// non-zero weight, `b_d V[d, :]` in the eigenbasis, `b_d e_dᵀ` otherwise.
pub(crate) fn input_rows(sys: &System, eigen: bool) -> Mat<f64> {
    let drivers: Vec<usize> = (0..sys.n).filter(|&i| sys.params.input_weights[i] != 0.0).collect();
    let w = &sys.params.input_weights;
    match (&sys.eig, eigen) {
        (Some(e), true) => {
            Mat::from_fn(drivers.len(), sys.n, |i, j| w[drivers[i]] * e.vectors[(drivers[i], j)])
        }
        _ => Mat::from_fn(drivers.len(), sys.n, |i, j| if j == drivers[i] { w[j] } else { 0.0 }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gauss_legendre_integrates_polynomials_and_exponentials() {
        // Textbook: q nodes integrate x^p exactly for p ≤ 2q − 1; ∫_{-1}^{1} x^p = 2/(p+1) for even p.
        for q in [1, 2, 5, 16] {
            let (x, w) = gauss_legendre(q);
            assert!((w.iter().sum::<f64>() - 2.0).abs() < 1e-14, "q={q}");
            for p in 0..2 * q {
                let got: f64 = x.iter().zip(&w).map(|(x, w)| w * x.powi(p as i32)).sum();
                let want = if p % 2 == 0 { 2.0 / (p as f64 + 1.0) } else { 0.0 };
                assert!((got - want).abs() < 1e-14, "q={q}, p={p}: {got} vs {want}");
            }
        }
        // ∫_0^1 e^{zt} dt = expm1(z)/z with 16 nodes to rounding, |z| ≤ 4.
        let (x, w) = gauss_legendre(16);
        for z in [-4.0f64, -1.0, 0.5, 2.0] {
            let got: f64 = x.iter().zip(&w).map(|(x, w)| 0.5 * w * (z * 0.5 * (x + 1.0)).exp()).sum();
            let want = z.exp_m1() / z;
            assert!((got - want).abs() < 4e-16 * want.abs(), "z={z}: {got} vs {want}");
        }
    }
}
