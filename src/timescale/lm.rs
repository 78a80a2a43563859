//! Levenberg–Marquardt nonlinear least squares for models of two or three
//! parameters (the exponential-decay and spectral-knee fits).
//!
//! Minimises $\tfrac12\lVert r(p)\rVert^2$ with steps
//! $(J^\top J+\lambda\,\mathrm{diag}(J^\top J))\,\delta=-J^\top r$
//! (Levenberg 1944; Marquardt 1963, with Marquardt's diagonal scaling as in
//! MINPACK `lmder`, which scipy `optimize.curve_fit` calls). The damping
//! update after a successful step follows Nielsen (1999):
//! $\lambda\leftarrow\lambda\max(1/3,1-(2\varrho-1)^3)$, and after a failed
//! step $\lambda\leftarrow\nu\lambda$, $\nu\leftarrow2\nu$. A trial point whose
//! residuals are not finite counts as a failed step.

/// Stopping rules. Defaults: 200 iterations, relative cost change 1e-14,
/// relative step 1e-12, gradient 1e-14 (tight so that converged fits agree
/// with MINPACK to well below the tolerances the tests state).
#[derive(Clone, Copy, Debug)]
pub struct LmOptions {
    /// Maximum accepted-or-rejected iterations.
    pub max_iter: usize,
    /// Stop when an accepted step lowers the cost by less than `ftol * cost`.
    pub ftol: f64,
    /// Stop when the step is below `xtol * (|p| + xtol)`.
    pub xtol: f64,
    /// Stop when the largest gradient entry is below `gtol`.
    pub gtol: f64,
}

impl Default for LmOptions {
    fn default() -> Self {
        LmOptions { max_iter: 200, ftol: 1e-14, xtol: 1e-12, gtol: 1e-14 }
    }
}

/// Result of a fit, with its diagnostics.
#[derive(Clone, Debug, PartialEq)]
pub struct LmReport {
    /// Final parameters.
    pub params: Vec<f64>,
    /// Final cost $\tfrac12\lVert r\rVert^2$.
    pub cost: f64,
    /// Iterations used.
    pub iterations: usize,
    /// Whether a stopping rule other than the iteration limit was met.
    pub converged: bool,
}

/// Fit by Levenberg–Marquardt from `p0`.
///
/// `eval(p, r, j)` fills the `m` residuals `r` and the Jacobian `j`
/// (`m × p.len()`, row-major, $\partial r_i/\partial p_j$) and returns
/// `false` when the model is not defined at `p`.
pub fn levenberg_marquardt<F>(p0: &[f64], m: usize, mut eval: F, opts: LmOptions) -> LmReport
where
    F: FnMut(&[f64], &mut [f64], &mut [f64]) -> bool,
{
    let np = p0.len();
    let mut p = p0.to_vec();
    let mut r = vec![0.0; m];
    let mut j = vec![0.0; m * np];
    let fail = |p: Vec<f64>, it| LmReport { params: p, cost: f64::NAN, iterations: it, converged: false };
    if !eval(&p, &mut r, &mut j) || !r.iter().chain(&j).all(|v| v.is_finite()) {
        return fail(p, 0);
    }
    let mut cost = 0.5 * r.iter().map(|v| v * v).sum::<f64>();
    let (mut a, mut g) = normal_equations(&r, &j, np);
    let mut lambda = 1e-3 * (0..np).map(|i| a[i * np + i]).fold(0.0, f64::max);
    let mut nu = 2.0;
    let mut rt = vec![0.0; m];
    let mut jt = vec![0.0; m * np];
    let mut pt = vec![0.0; np];
    for it in 1..=opts.max_iter {
        if g.iter().all(|v| v.abs() <= opts.gtol) {
            return LmReport { params: p, cost, iterations: it - 1, converged: true };
        }
        let mut lhs = a.clone();
        for i in 0..np {
            // Marquardt scaling, floored so a parameter with zero sensitivity
            // does not make the system singular.
            let d = a[i * np + i].max(1e-300);
            lhs[i * np + i] += lambda * d;
        }
        let rhs: Vec<f64> = g.iter().map(|v| -v).collect();
        let Some(delta) = solve_small(&lhs, &rhs, np) else {
            lambda *= nu;
            nu *= 2.0;
            continue;
        };
        let pnorm = p.iter().map(|v| v * v).sum::<f64>().sqrt();
        let dnorm = delta.iter().map(|v| v * v).sum::<f64>().sqrt();
        for i in 0..np {
            pt[i] = p[i] + delta[i];
        }
        let ok = eval(&pt, &mut rt, &mut jt) && rt.iter().chain(&jt).all(|v| v.is_finite());
        let cost_t = if ok { 0.5 * rt.iter().map(|v| v * v).sum::<f64>() } else { f64::INFINITY };
        if cost_t < cost {
            // Gain ratio against the linear model's predicted reduction.
            let pred: f64 = (0..np)
                .map(|i| 0.5 * delta[i] * (lambda * a[i * np + i].max(1e-300) * delta[i] - g[i]))
                .sum();
            let rho = if pred > 0.0 { (cost - cost_t) / pred } else { 1.0 };
            let small_gain = cost - cost_t <= opts.ftol * cost;
            p.copy_from_slice(&pt);
            std::mem::swap(&mut r, &mut rt);
            std::mem::swap(&mut j, &mut jt);
            cost = cost_t;
            (a, g) = normal_equations(&r, &j, np);
            lambda *= (1.0 - (2.0 * rho - 1.0).powi(3)).max(1.0 / 3.0);
            nu = 2.0;
            if small_gain || dnorm <= opts.xtol * (pnorm + opts.xtol) {
                return LmReport { params: p, cost, iterations: it, converged: true };
            }
        } else {
            if dnorm <= opts.xtol * (pnorm + opts.xtol) {
                return LmReport { params: p, cost, iterations: it, converged: true };
            }
            lambda *= nu;
            nu *= 2.0;
        }
    }
    LmReport { params: p, cost, iterations: opts.max_iter, converged: false }
}

/// $J^\top J$ (row-major) and $J^\top r$.
fn normal_equations(r: &[f64], j: &[f64], np: usize) -> (Vec<f64>, Vec<f64>) {
    let mut a = vec![0.0; np * np];
    let mut g = vec![0.0; np];
    for (i, ri) in r.iter().enumerate() {
        let row = &j[i * np..(i + 1) * np];
        for c in 0..np {
            g[c] += row[c] * ri;
            for d in 0..np {
                a[c * np + d] += row[c] * row[d];
            }
        }
    }
    (a, g)
}

/// Solve a small dense system by Gaussian elimination with partial pivoting;
/// `None` when a pivot vanishes.
pub(crate) fn solve_small(a: &[f64], b: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut m = a.to_vec();
    let mut x = b.to_vec();
    for col in 0..n {
        let piv = (col..n).max_by(|&i, &k| m[i * n + col].abs().total_cmp(&m[k * n + col].abs()))?;
        if m[piv * n + col].abs() == 0.0 || !m[piv * n + col].is_finite() {
            return None;
        }
        if piv != col {
            for c in 0..n {
                m.swap(piv * n + c, col * n + c);
            }
            x.swap(piv, col);
        }
        for row in col + 1..n {
            let f = m[row * n + col] / m[col * n + col];
            for c in col..n {
                m[row * n + c] -= f * m[col * n + c];
            }
            x[row] -= f * x[col];
        }
    }
    for col in (0..n).rev() {
        let mut s = x[col];
        for c in col + 1..n {
            s -= m[col * n + c] * x[c];
        }
        x[col] = s / m[col * n + col];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fits_a_planted_exponential_exactly() {
        // y = 2 exp(-0.3 t): noiseless, so the minimum is the planted point.
        let t: Vec<f64> = (0..20).map(f64::from).collect();
        let y: Vec<f64> = t.iter().map(|t| 2.0 * (-0.3 * t).exp()).collect();
        let rep = levenberg_marquardt(
            &[1.0, 0.1],
            t.len(),
            |p, r, j| {
                for i in 0..t.len() {
                    let e = (-p[1] * t[i]).exp();
                    r[i] = p[0] * e - y[i];
                    j[2 * i] = e;
                    j[2 * i + 1] = -p[0] * t[i] * e;
                }
                true
            },
            LmOptions::default(),
        );
        assert!(rep.converged);
        assert!((rep.params[0] - 2.0).abs() < 1e-10 && (rep.params[1] - 0.3).abs() < 1e-10, "{rep:?}");
    }

    #[test]
    fn small_solver_pivots_and_detects_singularity() {
        let x = solve_small(&[0.0, 1.0, 1.0, 0.0], &[2.0, 3.0], 2).unwrap();
        assert_eq!(x, vec![3.0, 2.0]);
        assert!(solve_small(&[1.0, 2.0, 2.0, 4.0], &[1.0, 1.0], 2).is_none());
    }
}
