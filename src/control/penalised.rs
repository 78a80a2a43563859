//! State-penalised control (Gu et al. 2017, NeuroImage 155, 129–142).
//!
//! Minimise
//! $$J = \int_0^T \big[(x_f - x)^\top S (x_f - x) + ρ\,u^\top u\big]\,dt,\qquad \dot x = Ãx + Bu,\; x(0)=x_0,\; x(T)=x_f.$$
//! Pontryagin's principle with `H = (x_f−x)ᵀS(x_f−x) + ρuᵀu + pᵀ(Ãx + Bu)`
//! gives `u = −Bᵀp/(2ρ)` and the linear Hamiltonian system
//! $$\dot x = Ãx − \tfrac{1}{2ρ}BB^\top p,\qquad \dot p = −2Sx − Ã^\top p + 2Sx_f.$$
//! Carrying `x_f` as a constant third block, `w = (x, p, x_f)` obeys
//! `ẇ = Fw` with `F = [[Ã, −BBᵀ/(2ρ), 0], [−2S, −Ãᵀ, 2S], [0, 0, 0]]`, so one
//! exponential `e^{FT}` (3n × 3n; its top-left 2n × 2n block is the
//! Hamiltonian flow) serves every pair: `x(T) = E₁₁x₀ + E₁₂p₀ + E₁₃x_f = x_f`
//! fixes `p₀ = E₁₂⁻¹((I − E₁₃)x_f − E₁₁x₀)` through one LU factorisation.
//! The input energy `∫uᵀu dt = w₀ᵀNw₀` with `N = ∫_0^T e^{Fᵀt}Qe^{Ft}dt`,
//! `Q = diag(0, BBᵀ/(4ρ²), 0)`, from Van Loan's block exponential.
//! Continuous time only.

use super::energy::check_states;
use super::system::{gramian_van_loan, System};
use super::{ControlError, TimeModel};
use crate::linalg;
use faer::Mat;
use ndarray::{Array2, ArrayView1, ArrayView2};
use serde::Serialize;

/// Unchecked state-penalty parameters.
#[derive(Clone, Debug, Serialize)]
pub struct PenaltyParams {
    /// Penalised nodes (0-based); `None` penalises all nodes (`S = I`).
    pub nodes: Option<Vec<usize>>,
    /// Weight `ρ > 0` of the input energy against the state penalty.
    pub rho: f64,
}

impl PenaltyParams {
    /// All nodes penalised, `ρ = 1` (a neutral default, no source).
    pub fn new() -> Self {
        PenaltyParams { nodes: None, rho: 1.0 }
    }

    /// Check for a network of `n` nodes.
    ///
    /// # Errors
    /// [`ControlError::Param`] when `ρ` is not finite and > 0, or a node is
    /// outside `0..n`, repeated, or the list is empty.
    pub fn check(&self, n: usize) -> Result<ValidPenaltyParams, ControlError> {
        if !(self.rho.is_finite() && self.rho > 0.0) {
            return Err(ControlError::param("rho", self.rho, "a finite number > 0"));
        }
        let mut s = vec![0.0; n];
        match &self.nodes {
            None => s.fill(1.0),
            Some(list) => {
                if list.is_empty() {
                    return Err(ControlError::param("state_penalty", "[]", "at least one node"));
                }
                for &i in list {
                    if i >= n || s[i] != 0.0 {
                        return Err(ControlError::param(
                            "state_penalty",
                            i + 1,
                            format!("distinct nodes within 1..={n}"),
                        ));
                    }
                    s[i] = 1.0;
                }
            }
        }
        Ok(ValidPenaltyParams { s, rho: self.rho })
    }
}

impl Default for PenaltyParams {
    fn default() -> Self {
        PenaltyParams::new()
    }
}

/// Checked state-penalty parameters.
#[derive(Clone, Debug, Serialize)]
pub struct ValidPenaltyParams {
    /// Diagonal of `S`.
    pub(crate) s: Vec<f64>,
    /// `ρ`.
    pub(crate) rho: f64,
}

impl ValidPenaltyParams {
    /// Diagonal of `S`.
    pub fn s(&self) -> &[f64] {
        &self.s
    }
    /// `ρ`.
    pub fn rho(&self) -> f64 {
        self.rho
    }
}

/// Quality figures of a state-penalised solve.
#[derive(Clone, Debug, Serialize)]
pub struct PenaltyInfo {
    /// Smallest over largest |pivot| of the LU of `E₁₂`.
    pub costate_pivot_ratio: f64,
    /// Largest `‖x(T) − x_f‖` over pairs.
    pub terminal_error_max: f64,
    /// Warnings.
    pub warnings: Vec<String>,
}

struct Flow {
    e: Mat<f64>,
    n_mat: Mat<f64>,
}

fn flow(sys: &System, pen: &ValidPenaltyParams) -> Result<Flow, ControlError> {
    if sys.params.time_model != TimeModel::Continuous {
        return Err(ControlError::param(
            "time_model",
            "discrete",
            "continuous time for state-penalised control",
        ));
    }
    if pen.s.len() != sys.n {
        return Err(ControlError::param("state_penalty", pen.s.len(), format!("{} nodes", sys.n)));
    }
    let n = sys.n;
    let t = sys.params.horizon;
    let rho = pen.rho;
    let mut f = Mat::<f64>::zeros(3 * n, 3 * n);
    for i in 0..n {
        for j in 0..n {
            f[(i, j)] = sys.a[(i, j)];
            f[(n + i, n + j)] = -sys.a[(j, i)];
        }
        f[(i, n + i)] = -sys.b2[i] / (2.0 * rho);
        f[(n + i, i)] = -2.0 * pen.s[i];
        f[(n + i, 2 * n + i)] = 2.0 * pen.s[i];
    }
    let ft = Mat::from_fn(3 * n, 3 * n, |i, j| f[(i, j)] * t);
    let e = linalg::expm(ft.as_ref(), sys.par);
    let q = Mat::from_fn(3 * n, 3 * n, |i, j| {
        if i == j && i >= n && i < 2 * n {
            sys.b2[i - n] / (4.0 * rho * rho)
        } else {
            0.0
        }
    });
    let fta = f.as_ref().transpose().to_owned();
    let (_, n_mat) = gramian_van_loan(fta.as_ref(), q.as_ref(), t, sys.par);
    Ok(Flow { e, n_mat })
}

/// Input energy `∫_0^T uᵀu dt` of the state-penalised optimal transition
/// for every ordered pair of states (columns of `states`), `E[i, j]` from
/// state `i` to state `j`, batched over pairs as in [`super::energy_matrix`].
///
/// # Errors
/// [`ControlError::Param`] in discrete time; [`ControlError::States`];
/// [`ControlError::SingularCostate`] when `E₁₂` is numerically singular.
pub fn penalised_energy_matrix(
    sys: &System,
    states: ArrayView2<'_, f64>,
    pen: &ValidPenaltyParams,
) -> Result<(Array2<f64>, PenaltyInfo), ControlError> {
    check_states(sys, states)?;
    let fl = flow(sys, pen)?;
    let (n, k) = (sys.n, states.ncols());
    let par = sys.par;
    let x = linalg::to_faer(states);
    let e = fl.e.as_ref();
    let e11 = e.submatrix(0, 0, n, n);
    let e12 = e.submatrix(0, n, n, n);
    let e13 = e.submatrix(0, 2 * n, n, n);
    let e13x = linalg::mul(e13, x.as_ref(), par);
    let e11x = linalg::mul(e11, x.as_ref(), par);
    let mut rhs = Mat::<f64>::zeros(n, 2 * k);
    for j in 0..k {
        for i in 0..n {
            rhs[(i, j)] = x[(i, j)] - e13x[(i, j)];
            rhs[(i, k + j)] = e11x[(i, j)];
        }
    }
    let (sol, pivot) = linalg::lu_solve(e12, rhs.as_ref(), par);
    if pivot.is_nan() || pivot <= 1e-13 {
        return Err(ControlError::SingularCostate { pivot_ratio: pivot });
    }
    // p₀(i → j) = Pa_j − Pb_i; w₀ = U_i + Z_j with U_i = (x_i, −Pb_i, 0), Z_j = (0, Pa_j, x_j).
    let u = Mat::from_fn(3 * n, k, |r, i| match r / n {
        0 => x[(r, i)],
        1 => -sol[(r - n, k + i)],
        _ => 0.0,
    });
    let z = Mat::from_fn(3 * n, k, |r, j| match r / n {
        0 => 0.0,
        1 => sol[(r - n, j)],
        _ => x[(r - 2 * n, j)],
    });
    let nu = linalg::mul(fl.n_mat.as_ref(), u.as_ref(), par);
    let nz = linalg::mul(fl.n_mat.as_ref(), z.as_ref(), par);
    let cross = linalg::mul(u.as_ref().transpose(), nz.as_ref(), par);
    let du: Vec<f64> = (0..k).map(|i| (0..3 * n).map(|r| u[(r, i)] * nu[(r, i)]).sum()).collect();
    let dz: Vec<f64> = (0..k).map(|j| (0..3 * n).map(|r| z[(r, j)] * nz[(r, j)]).sum()).collect();
    let energy = Array2::from_shape_fn((k, k), |(i, j)| du[i] + 2.0 * cross[(i, j)] + dz[j]);
    // x(T) − x_f = (E₁₁x_i − E₁₂Pb_i) + (E₁₂Pa_j + E₁₃x_j − x_j).
    let e12s = linalg::mul(e12, sol.as_ref(), par);
    let mut worst = 0.0f64;
    for i in 0..k {
        for j in 0..k {
            let r2: f64 = (0..n)
                .map(|m| (e11x[(m, i)] - e12s[(m, k + i)] + e12s[(m, j)] + e13x[(m, j)] - x[(m, j)]).powi(2))
                .sum();
            worst = worst.max(r2.sqrt());
        }
    }
    let mut warnings = Vec::new();
    if pivot < 1e-8 {
        warnings.push(format!(
            "the costate map is ill-conditioned (pivot ratio {pivot:.2e}); energies may be inaccurate"
        ));
    }
    Ok((energy, PenaltyInfo { costate_pivot_ratio: pivot, terminal_error_max: worst, warnings }))
}

/// State and costate of one state-penalised transition on a time grid.
#[derive(Clone, Debug)]
pub struct PenalisedTrajectory {
    /// Sample times.
    pub times: Vec<f64>,
    /// `x(t)`, one row per time.
    pub state: Array2<f64>,
    /// `u(t) = −Bᵀp(t)/(2ρ)`, one row per time.
    pub input: Array2<f64>,
    /// `p(0)`.
    pub costate0: Vec<f64>,
    /// `∫uᵀu dt`.
    pub energy: f64,
}

/// One state-penalised transition `x0 → xf`, sampled at `times` ⊂ [0, T].
///
/// # Errors
/// As [`penalised_energy_matrix`], plus [`ControlError::Param`] for a time
/// outside `[0, T]`.
pub fn penalised_transition(
    sys: &System,
    x0: ArrayView1<'_, f64>,
    xf: ArrayView1<'_, f64>,
    pen: &ValidPenaltyParams,
    times: &[f64],
) -> Result<PenalisedTrajectory, ControlError> {
    let n = sys.n;
    if x0.len() != n || xf.len() != n {
        return Err(ControlError::States(format!(
            "each state needs {n} values, found {} and {}",
            x0.len(),
            xf.len()
        )));
    }
    let mut xs = Array2::zeros((n, 2));
    xs.column_mut(0).assign(&x0);
    xs.column_mut(1).assign(&xf);
    let (e, _) = penalised_energy_matrix(sys, xs.view(), pen)?;
    let fl = flow(sys, pen)?;
    let t_end = sys.params.horizon;
    let par = sys.par;
    let em = fl.e.as_ref();
    let rhs = Mat::from_fn(n, 1, |i, _| {
        let mut s = xf[i];
        for j in 0..n {
            s -= em[(i, 2 * n + j)] * xf[j] + em[(i, j)] * x0[j];
        }
        s
    });
    let (p0, _) = linalg::lu_solve(em.submatrix(0, n, n, n), rhs.as_ref(), par);
    let w0 = Mat::from_fn(3 * n, 1, |r, _| match r / n {
        0 => x0[r],
        1 => p0[(r - n, 0)],
        _ => xf[r - 2 * n],
    });
    let mut f = Mat::<f64>::zeros(3 * n, 3 * n);
    for i in 0..n {
        for j in 0..n {
            f[(i, j)] = sys.a[(i, j)];
            f[(n + i, n + j)] = -sys.a[(j, i)];
        }
        f[(i, n + i)] = -sys.b2[i] / (2.0 * pen.rho);
        f[(n + i, i)] = -2.0 * pen.s[i];
        f[(n + i, 2 * n + i)] = 2.0 * pen.s[i];
    }
    let mut state = Array2::zeros((times.len(), n));
    let mut input = Array2::zeros((times.len(), n));
    for (ti, &t) in times.iter().enumerate() {
        if !(t >= 0.0 && t <= t_end) {
            return Err(ControlError::param("time", t, format!("a time within [0, {t_end}]")));
        }
        let et = linalg::expm(Mat::from_fn(3 * n, 3 * n, |i, j| f[(i, j)] * t).as_ref(), par);
        let w = linalg::mul(et.as_ref(), w0.as_ref(), par);
        for i in 0..n {
            state[[ti, i]] = w[(i, 0)];
            input[[ti, i]] = -sys.params.input_weights[i] * w[(n + i, 0)] / (2.0 * pen.rho);
        }
    }
    Ok(PenalisedTrajectory {
        times: times.to_vec(),
        state,
        input,
        costate0: (0..n).map(|i| p0[(i, 0)]).collect(),
        energy: e[[0, 1]],
    })
}
