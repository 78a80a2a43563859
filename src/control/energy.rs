//! Minimum control energy for every ordered pair of states at once.

use super::linalg;
use super::system::{gram_kernel, mode_transition, System};
use super::ControlError;
use faer::{Mat, MatRef};
use ndarray::{Array2, ArrayView1, ArrayView2};
use serde::Serialize;

/// Condition number of the Gramian above which results carry a warning.
/// Beyond ~1e12 about four of the sixteen significant digits of an energy
/// are lost to rounding (rule of thumb: relative error ≈ cond · ε); chosen
/// on purpose, not from a source.
pub const CONDITION_WARNING: f64 = 1e12;

/// How the energies were computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum Route {
    /// Symmetric Ã with B = I: everything diagonal in the eigenbasis of Ã,
    /// no n × n solve at all.
    Eigenbasis,
    /// Dense Gramian, one Cholesky factorisation `W_T = L Lᵀ`.
    Cholesky,
}

/// Numerical quality of an energy computation, written with every result.
#[derive(Clone, Debug, Serialize)]
pub struct EnergyInfo {
    /// Route taken.
    pub route: Route,
    /// 2-norm condition number of W_T (largest / smallest eigenvalue).
    pub gramian_condition: f64,
    /// Largest `‖x(T) − x_f‖₂` over all pairs, where `x(T) = Φx₀ + W_T ν`
    /// is the end state the optimal input actually reaches.
    pub terminal_error_max: f64,
    /// Largest `‖x_f‖₂` over the states, the scale for the error above.
    pub state_norm_max: f64,
    /// Pairs whose energy was recomputed from the whitened difference
    /// because the expanded quadratic form cancelled (see [`energy_matrix`]).
    pub refined_pairs: usize,
    /// Warnings a user must see (near-singular Gramian, large terminal error).
    pub warnings: Vec<String>,
}

/// Check a state matrix (n × k, one state per column) against the system.
pub(crate) fn check_states(sys: &System, states: ArrayView2<'_, f64>) -> Result<(), ControlError> {
    if states.nrows() != sys.n {
        return Err(ControlError::States(format!(
            "each state needs one value for each of {} nodes, found {}",
            sys.n,
            states.nrows()
        )));
    }
    if states.ncols() == 0 {
        return Err(ControlError::States("expected at least one state, found none".into()));
    }
    if let Some(((i, j), v)) = states.indexed_iter().find(|(_, v)| !v.is_finite()) {
        return Err(ControlError::States(format!(
            "expected finite values, found {v} at node {}, state {}",
            i + 1,
            j + 1
        )));
    }
    Ok(())
}

/// Minimum control energy of every ordered pair of the `k` states (columns
/// of the n × k matrix `states`): `E[i, j]` moves state `i` to state `j`
/// in the horizon `T`, diagonal included.
///
/// $$E_{ij} = (x_j − Φx_i)^\top W_T^{-1} (x_j − Φx_i) = x_j^\top M x_j − 2x_j^\top MΦx_i + x_i^\top Φ^\top MΦ x_i,$$
/// `M = W_T⁻¹`, `Φ = e^{ÃT}` (continuous) or `Ã^T` (discrete)
/// (Kirk 1970, Optimal Control Theory, §5; Gu et al. 2015, Nat. Commun. 6, 8414;
/// Betzel et al. 2016, Sci. Rep. 6, 30770).
///
/// All k² energies come from one factorisation and k × k matrix products:
/// whitened states `a = L⁻¹X` and `b = L⁻¹ΦX` (with `W_T = LLᵀ`, or in
/// the eigenbasis `a = G^{-1/2}VᵀX`, `b = G^{-1/2}e^{ΛT}VᵀX` when Ã is
/// symmetric and B = I) give `E = 1‖a‖² − 2bᵀa + ‖b‖²1ᵀ`. Where that
/// expansion cancels (E below 1e-6 of its terms) the entry is recomputed as
/// `‖a_j − b_i‖²` from the same whitened vectors, which costs O(n) and no solve.
///
/// # Complexity
/// Eigenbasis route O(n²k + nk²) after the system's eigendecomposition;
/// Cholesky route O(n³) for the Gramian, its factorisation and its
/// eigenvalues (condition number). Memory O(n² + nk).
///
/// # Errors
/// [`ControlError::States`] for a wrong row count, no state or a non-finite
/// value; [`ControlError::SingularGramian`] when `W_T` is not numerically
/// positive definite (Cholesky breaks down).
pub fn energy_matrix(
    sys: &System,
    states: ArrayView2<'_, f64>,
) -> Result<(Array2<f64>, EnergyInfo), ControlError> {
    check_states(sys, states)?;
    let x = linalg::to_faer(states);
    let par = sys.par;
    let t = sys.params.horizon;
    let tm = sys.params.time_model;
    let (n, k) = (sys.n, states.ncols());
    // Whitened states a (targets) and b (propagated sources), and the
    // residual pieces alpha_j, beta_i with x(T) − x_f = alpha_j − beta_i.
    let (route, cond, a, b, alpha, beta);
    match (&sys.eig, sys.params.identity_input) {
        (Some(e), true) => {
            route = Route::Eigenbasis;
            let g: Vec<f64> = e.values.iter().map(|&l| gram_kernel(tm, l, l, t)).collect();
            let ef: Vec<f64> = e.values.iter().map(|&l| mode_transition(tm, l, t)).collect();
            let gmax = g.iter().fold(0.0f64, |m, v| m.max(*v));
            let gmin = g.iter().fold(f64::INFINITY, |m, v| m.min(*v));
            cond = if gmin > 0.0 { gmax / gmin } else { f64::INFINITY };
            let v = e.vectors.as_ref();
            let y = linalg::mul(v.transpose(), x.as_ref(), par);
            a = Mat::from_fn(n, k, |m, j| y[(m, j)] / g[m].sqrt());
            b = Mat::from_fn(n, k, |m, i| ef[m] * y[(m, i)] / g[m].sqrt());
            // x(T) = V(e∘y_i + g∘ν), ν = (y_j − e∘y_i)/g.
            let ga = Mat::from_fn(n, k, |m, j| g[m] * (y[(m, j)] / g[m]));
            let ey = Mat::from_fn(n, k, |m, i| ef[m] * y[(m, i)]);
            let gb = Mat::from_fn(n, k, |m, i| g[m] * (ey[(m, i)] / g[m]));
            let mut al = linalg::mul(v, ga.as_ref(), par);
            al -= &x;
            let mut be = linalg::mul(v, gb.as_ref(), par);
            be -= &linalg::mul(v, ey.as_ref(), par);
            alpha = al;
            beta = be;
        }
        _ => {
            route = Route::Cholesky;
            let w = sys.gramian_faer(t);
            let phi = sys.transition_faer(t);
            let ev = linalg::sym_eigenvalues(w.as_ref(), par)
                .map_err(|e| ControlError::Eigen(format!("{e:?}")))?;
            let (lo, hi) = (ev[0], ev[n - 1]);
            cond = if lo > 0.0 { hi / lo } else { f64::INFINITY };
            let l =
                linalg::cholesky(w.as_ref(), par).ok_or(ControlError::SingularGramian { condition: cond })?;
            let d = linalg::mul(phi.as_ref(), x.as_ref(), par);
            let mut xd = Mat::<f64>::zeros(n, 2 * k);
            xd.as_mut().submatrix_mut(0, 0, n, k).copy_from(&x);
            xd.as_mut().submatrix_mut(0, k, n, k).copy_from(&d);
            let z = linalg::solve_lower(l.as_ref(), xd.as_ref(), par);
            a = z.as_ref().submatrix(0, 0, n, k).to_owned();
            b = z.as_ref().submatrix(0, k, n, k).to_owned();
            let mut mz = z.clone();
            faer::linalg::triangular_solve::solve_upper_triangular_in_place(
                l.as_ref().transpose(),
                mz.as_mut(),
                par,
            );
            let mut wm = linalg::mul(w.as_ref(), mz.as_ref(), par);
            wm -= &xd;
            alpha = wm.as_ref().submatrix(0, 0, n, k).to_owned();
            beta = wm.as_ref().submatrix(0, k, n, k).to_owned();
        }
    }
    let (energy, refined) = pair_quadratic(a.as_ref(), b.as_ref(), par);
    let (res, _) = pair_quadratic(alpha.as_ref(), beta.as_ref(), par);
    let terminal = res.iter().fold(0.0f64, |m, v| m.max(v.max(0.0).sqrt()));
    let state_norm_max =
        (0..k).map(|j| (0..n).map(|i| x[(i, j)].powi(2)).sum::<f64>().sqrt()).fold(0.0, f64::max);
    let mut warnings = Vec::new();
    if cond.is_nan() || cond > CONDITION_WARNING {
        warnings.push(format!(
            "the controllability Gramian is near-singular (condition {cond:.3e} > {CONDITION_WARNING:.0e}): \
             energies may have lost {:.0} of 16 digits; add driver nodes, lengthen the horizon, or compare \
             energies only within this driver set",
            cond.log10().min(16.0)
        ));
    }
    if terminal.is_nan() || terminal > 1e-6 * state_norm_max.max(f64::MIN_POSITIVE) {
        warnings.push(format!(
            "the optimal input misses the target state by up to {terminal:.3e} (states have norm up to \
             {state_norm_max:.3e}); treat these energies as unreliable"
        ));
    }
    let info = EnergyInfo {
        route,
        gramian_condition: cond,
        terminal_error_max: terminal,
        state_norm_max,
        refined_pairs: refined,
        warnings,
    };
    Ok((energy, info))
}

/// `Q[i, j] = ‖a_j − b_i‖²` for all i, j by `‖a_j‖² − 2 b_iᵀa_j + ‖b_i‖²`
/// (one k × k product), recomputing entries that cancel. Returns the count
/// of recomputed entries.
fn pair_quadratic(a: MatRef<'_, f64>, b: MatRef<'_, f64>, par: faer::Par) -> (Array2<f64>, usize) {
    let (n, k) = (a.nrows(), a.ncols());
    let na: Vec<f64> = (0..k).map(|j| (0..n).map(|m| a[(m, j)].powi(2)).sum()).collect();
    let nb: Vec<f64> = (0..k).map(|i| (0..n).map(|m| b[(m, i)].powi(2)).sum()).collect();
    let cross = linalg::mul(b.transpose(), a, par);
    let mut refined = 0;
    let q = Array2::from_shape_fn((k, k), |(i, j)| {
        let v = na[j] - 2.0 * cross[(i, j)] + nb[i];
        if v > 1e-6 * (na[j] + nb[i]) {
            v
        } else {
            refined += 1;
            (0..n).map(|m| (a[(m, j)] - b[(m, i)]).powi(2)).sum()
        }
    });
    (q, refined)
}

/// Minimum control energy of one transition `x0 → xf`
/// (same formula and QC as [`energy_matrix`]).
///
/// # Errors
/// As [`energy_matrix`].
pub fn minimum_energy(
    sys: &System,
    x0: ArrayView1<'_, f64>,
    xf: ArrayView1<'_, f64>,
) -> Result<(f64, EnergyInfo), ControlError> {
    if x0.len() != sys.n || xf.len() != sys.n {
        return Err(ControlError::States(format!(
            "each state needs {} values, found {} and {}",
            sys.n,
            x0.len(),
            xf.len()
        )));
    }
    let mut xs = Array2::zeros((sys.n, 2));
    xs.column_mut(0).assign(&x0);
    xs.column_mut(1).assign(&xf);
    let (e, info) = energy_matrix(sys, xs.view())?;
    Ok((e[[0, 1]], info))
}

/// Asymmetry `E − Eᵀ`: entry (i, j) is `E[i, j] − E[j, i]`.
pub fn asymmetry(energy: ArrayView2<'_, f64>) -> Array2<f64> {
    &energy - &energy.t()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::control::{Drivers, SystemParams, TimeModel};
    use faer::Par;
    use ndarray::array;

    fn scalar(a: f64, t: f64, tm: TimeModel) -> System {
        // A 2-node network whose normalised matrix is diagonal in the
        // basis (1, ±1)/√2; the scalar test uses the mode (1, 1)/√2.
        let _ = a;
        let mut p = SystemParams::new();
        p.horizon = t;
        p.time_model = tm;
        System::new(array![[0.0, 1.0], [1.0, 0.0]].view(), false, &p.check(2).unwrap(), Par::Seq).unwrap()
    }

    #[test]
    fn scalar_mode_matches_textbook_closed_form() {
        // Kirk 1970: for dx/dt = ax + u, W_T = (e^{2aT} − 1)/(2a) and
        // E = (x_f − e^{aT}x_0)² / W_T. With A = [[0,1],[1,0]], c = 1:
        // λ_max = 1, Ã = A/2 − I has mode a = −1/2 along (1,1)/√2.
        let t = 1.7;
        let sys = scalar(-0.5, t, TimeModel::Continuous);
        let a: f64 = -0.5;
        let w = ((2.0 * a * t).exp() - 1.0) / (2.0 * a);
        let s = 1.0 / 2f64.sqrt();
        let (x0, xf) = (0.3, -1.2);
        let x = array![[x0 * s, xf * s], [x0 * s, xf * s]];
        let (e, info) = energy_matrix(&sys, x.view()).unwrap();
        let want = (xf - (a * t).exp() * x0).powi(2) / w;
        assert!((e[[0, 1]] - want).abs() <= 1e-13 * want, "{} vs {want}", e[[0, 1]]);
        let want_back = (x0 - (a * t).exp() * xf).powi(2) / w;
        assert!((e[[1, 0]] - want_back).abs() <= 1e-13 * want_back);
        assert_eq!(info.route, Route::Eigenbasis);
        assert!(info.terminal_error_max < 1e-14);
        // Same values through the Cholesky route (all drivers given as weights).
        let mut p = SystemParams::new();
        p.horizon = t;
        p.drivers = Drivers::Weights(vec![1.0, 1.0]);
        let sys2 = System::new(array![[0.0, 1.0], [1.0, 0.0]].view(), false, &p.check(2).unwrap(), Par::Seq)
            .unwrap();
        let (e2, info2) = energy_matrix(&sys2, x.view()).unwrap();
        assert_eq!(info2.route, Route::Cholesky);
        for (u, v) in e.iter().zip(e2.iter()) {
            assert!((u - v).abs() <= 1e-12 * v.abs().max(1e-300), "{u} vs {v}");
        }
    }

    #[test]
    fn diagonal_energy_is_zero_when_the_state_is_the_origin_and_asymmetry_is_antisymmetric() {
        let sys = scalar(-0.5, 1.0, TimeModel::Continuous);
        let x = array![[0.0, 1.0, 0.2], [0.0, 0.0, 0.7]];
        let (e, _) = energy_matrix(&sys, x.view()).unwrap();
        assert_eq!(e[[0, 0]], 0.0);
        let d = asymmetry(e.view());
        for i in 0..3 {
            for j in 0..3 {
                assert_eq!(d[[i, j]], -d[[j, i]]);
            }
        }
    }

    #[test]
    fn single_pair_api_equals_the_matrix_entry() {
        let sys = scalar(-0.5, 1.3, TimeModel::Continuous);
        let x = array![[0.4, -1.0], [0.9, 0.3]];
        let (e, _) = energy_matrix(&sys, x.view()).unwrap();
        let (one, _) = minimum_energy(&sys, x.column(1), x.column(0)).unwrap();
        assert!((one - e[[1, 0]]).abs() <= 1e-14 * e[[1, 0]]);
    }

    #[test]
    fn wrong_state_length_is_refused() {
        let sys = scalar(-0.5, 1.0, TimeModel::Continuous);
        let x = Array2::<f64>::zeros((3, 2));
        let e = energy_matrix(&sys, x.view()).unwrap_err().to_string();
        assert!(e.contains("each of 2 nodes, found 3"), "{e}");
    }
}
