//! Minimum control energy for every ordered pair of states at once, the
//! route that computes it, and the one rule that refuses a result.
//!
//! # When a result is refused
//! One rule, applied by every caller (the library, the `energy` command and
//! the per-subject job all go through [`energy_matrix`]):
//!
//! 1. **Structurally singular.** In discrete time the Gramian
//!    `Σ_{t<T} Ã^tBBᵀ(Ãᵀ)^t = CCᵀ`, `C = [B, ÃB, …, Ã^{T−1}B]`, has rank at
//!    most `m·T` for `m` driver nodes, so `m·T < n` is refused before any
//!    arithmetic ([`ControlError::RankDeficientGramian`]).
//! 2. **Numerically singular.** The 2-norm condition number `κ(W_T)` above
//!    [`CONDITION_LIMIT`] `= 10⁻³/ε` (ε = `f64::EPSILON`, so ≈ 4.5e12) is
//!    refused ([`ControlError::SingularGramian`]). Reasoning: `κ·ε` bounds the
//!    relative error that rounding of an explicitly formed Gramian passes on
//!    to an energy (Higham 2002, Accuracy and Stability of Numerical
//!    Algorithms, §10.1); at the limit that bound is 10⁻³, three correct
//!    digits in the worst case. The routes used here do much better than
//!    the bound (the factored route ≈ `√κ·ε`; measured figures in
//!    `tests/data/control/README.md`). Our choice, not from a source.
//! 3. **Target missed.** The end state the optimal input reaches,
//!    `x(T) = Φx₀ + W_Tν`, is compared with `x_f`; the largest
//!    `‖x(T) − x_f‖` over pairs, relative to the largest `‖x_f‖`, above
//!    [`TERMINAL_TOLERANCE`] is refused ([`ControlError::TerminalMiss`]).
//!
//! States so large that the energies exceed `f64` are refused as well
//! ([`ControlError::EnergyOverflow`]), with the state scale to change.
//!
//! A result that passes carries its diagnostics in [`EnergyInfo`]
//! (route, condition, terminal error); nothing is returned with a warning
//! instead of an error.

use super::factor::{self, Dynamics};
use super::system::{gram_kernel, gramian_discrete, gramian_van_loan, mode_transition, System};
use super::{ControlError, TimeModel};
use crate::linalg;
use faer::{Mat, MatRef};
use ndarray::{Array2, ArrayView1, ArrayView2};
use serde::Serialize;

/// Largest accepted 2-norm condition number of the controllability
/// Gramian: `10⁻³/ε ≈ 4.5e12` (see the module docs for the reasoning;
/// our choice).
pub const CONDITION_LIMIT: f64 = 1e-3 / f64::EPSILON;

/// Largest accepted terminal error `max ‖x(T) − x_f‖ / max ‖x_f‖`:
/// `CONDITION_LIMIT · ε = 10⁻³`, the same budget as the condition rule.
/// Reasoning: even a backward-stable solve leaves a residual
/// `‖W_Tν − r‖ ≲ c·n·ε‖W_T‖‖ν‖` (Higham 2002, §7.1) with `‖ν‖ ≤ ‖r‖/λ_min`,
/// i.e. a miss up to about `κ·ε` of the state scale, which is real (the
/// optimal input's large, cancelling parts are rounded); a miss beyond the
/// value allowed at the condition limit means the solve itself failed.
/// Measured misses are far smaller (3e-6 at κ ≈ 2e11, below 1e-14 for
/// well-conditioned systems). Our choice.
pub const TERMINAL_TOLERANCE: f64 = CONDITION_LIMIT * f64::EPSILON;

/// `value ≤ limit`, false for NaN: checks are written positively so that a
/// NaN condition or error fails them.
pub(crate) fn within(value: f64, limit: f64) -> bool {
    value <= limit
}

/// `‖x‖₂` scaled by the largest `|x_i|`, so that it stays finite for any
/// finite `x` whose norm is representable.
pub(crate) fn norm2(x: impl Iterator<Item = f64> + Clone) -> f64 {
    let m = x.clone().fold(0.0f64, |m, v| m.max(v.abs()));
    if m == 0.0 || !m.is_finite() {
        return m;
    }
    m * x.map(|v| (v / m).powi(2)).sum::<f64>().sqrt()
}

/// How the energies were computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum Route {
    /// Symmetric Ã with B = I: everything diagonal in the eigenbasis of Ã,
    /// no n × n solve at all; exact to rounding.
    Eigenbasis,
    /// Square-root Gramian `W_T = RᵀR` by orthogonal updates, never formed
    /// (discrete time exactly, continuous time by Gauss–Legendre quadrature
    /// on a short step and doubling; see [`crate::control::energy`] docs and
    /// the `factor` source). Chosen for every system except symmetric B = I.
    GramianFactor,
    /// For comparison: symmetric Ã, Gramian formed by the closed form
    /// `V(G ∘ VᵀBBᵀV)Vᵀ`, then Cholesky.
    ModalGramian,
    /// For comparison: continuous time, Gramian formed by Van Loan's block
    /// exponential (Van Loan 1978) with doubling, then Cholesky.
    BlockExponential,
    /// For comparison: discrete time, Gramian formed as the sum
    /// `Σ_{t<T} Ã^tBBᵀ(Ãᵀ)^t` by doubling, then Cholesky.
    PowerSum,
}

impl Route {
    /// The route's name as written in outputs (`eigenbasis`, `gramian-factor`, ...).
    pub fn name(self) -> &'static str {
        match self {
            Route::Eigenbasis => "eigenbasis",
            Route::GramianFactor => "gramian-factor",
            Route::ModalGramian => "modal-gramian",
            Route::BlockExponential => "block-exponential",
            Route::PowerSum => "power-sum",
        }
    }
}

/// The route [`energy_matrix`] takes: [`Route::Eigenbasis`] for a
/// symmetric Ã with B = I (exact and O(n²k)), otherwise
/// [`Route::GramianFactor`], which kept the most digits against a
/// 60-digit reference at every condition number measured (1e6 to 1e16;
/// `tests/data/control/README.md`).
pub fn select_route(sys: &System) -> Route {
    if sys.eig.is_some() && sys.params.identity_input {
        Route::Eigenbasis
    } else {
        Route::GramianFactor
    }
}

/// Numerical quality of an energy computation, written with every result.
#[derive(Clone, Debug, Serialize)]
pub struct EnergyInfo {
    /// Route taken.
    pub route: Route,
    /// 2-norm condition number of W_T (largest / smallest eigenvalue).
    pub gramian_condition: f64,
    /// The limit it was checked against ([`CONDITION_LIMIT`]).
    pub condition_limit: f64,
    /// Largest `‖x(T) − x_f‖₂` over all pairs, where `x(T) = Φx₀ + W_T ν`
    /// is the end state the optimal input actually reaches.
    pub terminal_error_max: f64,
    /// `terminal_error_max / state_norm_max`, checked against [`TERMINAL_TOLERANCE`].
    pub terminal_error_relative: f64,
    /// Largest `‖x_f‖₂` over the states, the scale for the error above.
    pub state_norm_max: f64,
    /// Pairs whose energy was recomputed from the whitened difference
    /// because the expanded quadratic form cancelled (see [`energy_matrix`]).
    pub refined_pairs: usize,
    /// Remarks a user should see; empty on every route today (a result
    /// that fails the rule is an error, not a warning).
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
/// All k² energies come from one factor `W̃ = LLᵀ` of the Gramian in a
/// working basis (the eigenbasis of Ã when it is symmetric) and k × k matrix
/// products: whitened states `a = L⁻¹X̃` and `b = L⁻¹Φ̃X̃` give
/// `E = 1‖a‖² − 2bᵀa + ‖b‖²1ᵀ`. Where that expansion cancels (E below 1e-6
/// of its terms) the entry is recomputed as `‖a_j − b_i‖²` from the same
/// whitened vectors, which costs O(n) and no solve. The route is chosen by
/// [`select_route`]; [`energy_matrix_by`] takes any route, for comparisons.
///
/// # Complexity
/// Eigenbasis route O(n²k + nk²) after the system's eigendecomposition;
/// factored route O(n²·16m) for the quadrature plus O(n³) per doubling
/// (`log₂(‖Ã‖T)` of them; `log₂ T` in discrete time) and the condition
/// number (singular values of the factor). Memory O(n² + 16nm + nk).
///
/// # Errors
/// [`ControlError::States`] for a wrong row count, no state or a non-finite
/// value; [`ControlError::RankDeficientGramian`],
/// [`ControlError::SingularGramian`] and [`ControlError::TerminalMiss`]
/// by the rule in the [module docs](crate::control::energy);
/// [`ControlError::EnergyOverflow`] when states so large that the energies
/// exceed `f64` would otherwise come back as infinities.
pub fn energy_matrix(
    sys: &System,
    states: ArrayView2<'_, f64>,
) -> Result<(Array2<f64>, EnergyInfo), ControlError> {
    energy_matrix_by(sys, states, select_route(sys))
}

/// [`energy_matrix`] by a given route, under the same refusal rule: for
/// measuring one route against another. [`Route::Eigenbasis`] needs a
/// symmetric Ã with B = I, [`Route::ModalGramian`] a symmetric Ã,
/// [`Route::BlockExponential`] continuous time, [`Route::PowerSum`]
/// discrete time.
///
/// # Errors
/// As [`energy_matrix`], plus [`ControlError::RouteUnavailable`] when the
/// route does not apply to the system.
pub fn energy_matrix_by(
    sys: &System,
    states: ArrayView2<'_, f64>,
    route: Route,
) -> Result<(Array2<f64>, EnergyInfo), ControlError> {
    check_states(sys, states)?;
    let wh = Whitening::new(sys, route)?;
    let par = sys.par;
    let (n, k) = (sys.n, states.ncols());
    let x = wh.to_working(sys, linalg::to_faer(states).as_ref());
    let d = wh.transition(sys, x.as_ref());
    let mut xd = Mat::<f64>::zeros(n, 2 * k);
    xd.as_mut().submatrix_mut(0, 0, n, k).copy_from(&x);
    xd.as_mut().submatrix_mut(0, k, n, k).copy_from(&d);
    let z = wh.half_solve(xd.as_ref());
    let a = z.as_ref().submatrix(0, 0, n, k).to_owned();
    let b = z.as_ref().submatrix(0, k, n, k).to_owned();
    // x(T) − x_f = (W̃ν_j − x̃_j) − (W̃ν_i' − Φ̃x̃_i) with ν = L⁻ᵀz: residual pieces.
    let mut wm = wh.gram_apply(wh.half_solve_transpose(z.as_ref()).as_ref());
    wm -= &xd;
    let alpha = wm.as_ref().submatrix(0, 0, n, k).to_owned();
    let beta = wm.as_ref().submatrix(0, k, n, k).to_owned();
    let (energy, refined) = pair_quadratic(a.as_ref(), b.as_ref(), par);
    let (res, _) = pair_quadratic(alpha.as_ref(), beta.as_ref(), par);
    let terminal =
        res.iter().fold(0.0f64, |m, v| if v.is_nan() { f64::NAN } else { m.max(v.max(0.0).sqrt()) });
    let state_norm_max = (0..k).map(|j| norm2(states.column(j).iter().copied())).fold(0.0, f64::max);
    let relative = if state_norm_max > 0.0 { terminal / state_norm_max } else { terminal };
    if !terminal.is_finite() || energy.iter().any(|v| !v.is_finite()) {
        return Err(ControlError::EnergyOverflow { state_norm_max, condition: wh.condition });
    }
    if !within(relative, TERMINAL_TOLERANCE) {
        return Err(ControlError::TerminalMiss {
            terminal_error: terminal,
            relative,
            tolerance: TERMINAL_TOLERANCE,
            condition: wh.condition,
        });
    }
    let info = EnergyInfo {
        route,
        gramian_condition: wh.condition,
        condition_limit: CONDITION_LIMIT,
        terminal_error_max: terminal,
        terminal_error_relative: relative,
        state_norm_max,
        refined_pairs: refined,
        warnings: Vec::new(),
    };
    Ok((energy, info))
}

/// A factor `W̃ = LLᵀ` of the Gramian in a working basis, checked by the
/// refusal rule; shared by the energies and the optimal trajectories.
pub(crate) struct Whitening {
    /// Work in the eigenbasis of Ã (`x̃ = Vᵀx`) rather than the node basis.
    eigen: bool,
    factor: Factor,
    /// κ(W_T).
    pub condition: f64,
    par: faer::Par,
}

enum Factor {
    /// `W̃ = diag(g)`, `L = diag(√g)` (symmetric Ã, B = I).
    Diagonal(Vec<f64>),
    /// Lower-triangular `L`; `W̃` itself when it was formed, else `W̃ = LLᵀ`.
    Lower { l: Mat<f64>, w: Option<Mat<f64>> },
}

impl Whitening {
    /// Build the factor by `route` and apply the refusal rule.
    pub(crate) fn new(sys: &System, route: Route) -> Result<Whitening, ControlError> {
        let par = sys.par;
        let (n, t, tm) = (sys.n, sys.params.horizon, sys.params.time_model);
        let unavailable = |reason: &'static str| Err(ControlError::RouteUnavailable { route, reason });
        match route {
            Route::Eigenbasis if !(sys.eig.is_some() && sys.params.identity_input) => {
                return unavailable("needs an undirected network with every node driven at weight 1")
            }
            Route::ModalGramian if sys.eig.is_none() => return unavailable("needs an undirected network"),
            Route::BlockExponential if tm != TimeModel::Continuous => {
                return unavailable("needs continuous time")
            }
            Route::PowerSum if tm != TimeModel::Discrete => return unavailable("needs discrete time"),
            _ => {}
        }
        // Rule 1: the rank bound of the discrete Gramian, before any arithmetic.
        let drivers = sys.params.input_weights.iter().filter(|w| **w != 0.0).count();
        if tm == TimeModel::Discrete && (drivers as f64) * t < n as f64 {
            let steps = t as u64;
            return Err(ControlError::RankDeficientGramian {
                drivers,
                steps,
                rank_bound: drivers * steps as usize,
                nodes: n,
                drivers_needed: n.div_ceil(steps as usize),
                steps_needed: n.div_ceil(drivers),
            });
        }
        let (eigen, factor, condition) = match route {
            Route::Eigenbasis => {
                let e = sys
                    .eig
                    .as_ref()
                    .ok_or(ControlError::RouteUnavailable { route, reason: "needs an undirected network" })?;
                let g: Vec<f64> = e.values.iter().map(|&l| gram_kernel(tm, l, l, t)).collect();
                let gmax = g.iter().fold(0.0f64, |m, v| m.max(*v));
                let gmin = g.iter().fold(f64::INFINITY, |m, v| m.min(*v));
                let cond = if gmin > 0.0 { gmax / gmin } else { f64::INFINITY };
                (true, Factor::Diagonal(g), cond)
            }
            Route::GramianFactor => {
                let eigen = sys.eig.is_some();
                let rows = factor::input_rows(sys, eigen);
                let f = match &sys.eig {
                    Some(e) => {
                        factor::factor_gramian(&Dynamics::Diagonal(&e.values), rows.as_ref(), tm, t, par)
                    }
                    None => {
                        factor::factor_gramian(&Dynamics::Dense(sys.a.as_ref()), rows.as_ref(), tm, t, par)
                    }
                };
                let sv = linalg::singular_values(f.r.as_ref(), par)
                    .map_err(|e| ControlError::Eigen(format!("{e:?}")))?;
                let (hi, lo) = (sv[0], sv[n - 1]);
                let cond = if lo > 0.0 { (hi / lo).powi(2) } else { f64::INFINITY };
                (eigen, Factor::Lower { l: f.r.transpose().to_owned(), w: None }, cond)
            }
            Route::ModalGramian | Route::BlockExponential | Route::PowerSum => {
                let w = match route {
                    Route::ModalGramian => sys.gramian_faer(t),
                    Route::BlockExponential => {
                        let q = Mat::from_fn(n, n, |i, j| if i == j { sys.b2[i] } else { 0.0 });
                        gramian_van_loan(sys.a.as_ref(), q.as_ref(), t, par).1
                    }
                    _ => {
                        let q = Mat::from_fn(n, n, |i, j| if i == j { sys.b2[i] } else { 0.0 });
                        gramian_discrete(sys.a.as_ref(), q.as_ref(), t as u64, par)
                    }
                };
                let ev = linalg::sym_eigenvalues(w.as_ref(), par)
                    .map_err(|e| ControlError::Eigen(format!("{e:?}")))?;
                let cond = if ev[0] > 0.0 { ev[n - 1] / ev[0] } else { f64::INFINITY };
                if !within(cond, CONDITION_LIMIT) {
                    return Err(ControlError::SingularGramian { condition: cond, limit: CONDITION_LIMIT });
                }
                let l = linalg::cholesky(w.as_ref(), par)
                    .ok_or(ControlError::SingularGramian { condition: cond, limit: CONDITION_LIMIT })?;
                (false, Factor::Lower { l, w: Some(w) }, cond)
            }
        };
        // Rule 2, the same limit on every route.
        if !within(condition, CONDITION_LIMIT) {
            return Err(ControlError::SingularGramian { condition, limit: CONDITION_LIMIT });
        }
        Ok(Whitening { eigen, factor, condition, par })
    }

    /// `x̃ = Vᵀx` in the eigenbasis, `x` otherwise.
    pub(crate) fn to_working(&self, sys: &System, x: MatRef<'_, f64>) -> Mat<f64> {
        match (&sys.eig, self.eigen) {
            (Some(e), true) => linalg::mul(e.vectors.as_ref().transpose(), x, sys.par),
            _ => x.to_owned(),
        }
    }

    /// `x = Vx̃` in the eigenbasis, `x̃` otherwise.
    pub(crate) fn to_node_basis(&self, sys: &System, x: MatRef<'_, f64>) -> Mat<f64> {
        match (&sys.eig, self.eigen) {
            (Some(e), true) => linalg::mul(e.vectors.as_ref(), x, sys.par),
            _ => x.to_owned(),
        }
    }

    /// `Φ̃x̃` over the horizon.
    pub(crate) fn transition(&self, sys: &System, x: MatRef<'_, f64>) -> Mat<f64> {
        let (t, tm) = (sys.params.horizon, sys.params.time_model);
        match (&sys.eig, self.eigen) {
            (Some(e), true) => {
                let f: Vec<f64> = e.values.iter().map(|&l| mode_transition(tm, l, t)).collect();
                Mat::from_fn(x.nrows(), x.ncols(), |i, j| f[i] * x[(i, j)])
            }
            _ => linalg::mul(sys.transition_faer(t).as_ref(), x, sys.par),
        }
    }

    /// `L⁻¹y`.
    pub(crate) fn half_solve(&self, y: MatRef<'_, f64>) -> Mat<f64> {
        match &self.factor {
            Factor::Diagonal(g) => Mat::from_fn(y.nrows(), y.ncols(), |i, j| y[(i, j)] / g[i].sqrt()),
            Factor::Lower { l, .. } => linalg::solve_lower(l.as_ref(), y, self.par),
        }
    }

    /// `L⁻ᵀz`.
    pub(crate) fn half_solve_transpose(&self, z: MatRef<'_, f64>) -> Mat<f64> {
        match &self.factor {
            Factor::Diagonal(g) => Mat::from_fn(z.nrows(), z.ncols(), |i, j| z[(i, j)] / g[i].sqrt()),
            Factor::Lower { l, .. } => {
                let mut x = z.to_owned();
                faer::linalg::triangular_solve::solve_upper_triangular_in_place(
                    l.as_ref().transpose(),
                    x.as_mut(),
                    self.par,
                );
                x
            }
        }
    }

    /// `W̃ν`: with the formed Gramian when there is one, else `L(Lᵀν)`.
    pub(crate) fn gram_apply(&self, nu: MatRef<'_, f64>) -> Mat<f64> {
        let par = self.par;
        match &self.factor {
            Factor::Diagonal(g) => Mat::from_fn(nu.nrows(), nu.ncols(), |i, j| g[i] * nu[(i, j)]),
            Factor::Lower { w: Some(w), .. } => linalg::mul(w.as_ref(), nu, par),
            Factor::Lower { l, w: None } => {
                let ltn = linalg::mul(l.as_ref().transpose(), nu, par);
                linalg::mul(l.as_ref(), ltn.as_ref(), par)
            }
        }
    }
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

/// The quadratic form `q_j = x_jᵀÃx_j` of every state (columns of the
/// n × k matrix `states`).
///
/// For a symmetric Ã with B = I in continuous time these produce the
/// asymmetry exactly, for every horizon T:
/// $$E_{ij} − E_{ji} = 2\,(x_i^\top Ã x_i − x_j^\top Ã x_j) = 2(q_i − q_j),$$
/// because W_T and Φ = e^{ÃT} commute and `(I − Φ²)W_T⁻¹ = −2Ã`
/// (`W_T = (e^{2ÃT} − I)(2Ã)⁻¹`; Kirk 1970 for W_T, the algebra ours). With
/// `B = βI` the right side is divided by β². In discrete time the same
/// argument gives a different form, `(I − Φ²)W_T⁻¹ = I − Ã²`; use
/// [`state_potentials`] there. [`System::asymmetry_is_potential`] tells
/// whether a system is in the exact case.
///
/// # Errors
/// [`ControlError::States`] as in [`energy_matrix`].
pub fn state_quadratic_forms(sys: &System, states: ArrayView2<'_, f64>) -> Result<Vec<f64>, ControlError> {
    check_states(sys, states)?;
    let x = linalg::to_faer(states);
    let ax = linalg::mul(sys.a.as_ref(), x.as_ref(), sys.par);
    Ok((0..x.ncols()).map(|j| (0..sys.n).map(|i| x[(i, j)] * ax[(i, j)]).sum()).collect())
}

/// The potential `p_j` of every state with `E_ij − E_ji = p_j − p_i`
/// exactly when [`System::asymmetry_is_potential`] holds (symmetric Ã,
/// `B = βI`), in either time model:
/// $$p_j = x_j^\top (I − Φ^2) W_T^{-1} x_j = \begin{cases} −2\,x_j^\top Ã x_j/β^2 & \text{continuous} \\ (‖x_j‖^2 − ‖Ãx_j‖^2)/β^2 & \text{discrete.}\end{cases}$$
/// Discrete: `W_T = β²Σ_{t<T}Ã^{2t}` gives `W_T(I − Ã²) = β²(I − Ã^{2T})`
/// (geometric sum). For other systems the numbers are still returned but
/// are not the asymmetry; β is taken as the first node's weight.
///
/// # Errors
/// [`ControlError::States`] as in [`energy_matrix`].
pub fn state_potentials(sys: &System, states: ArrayView2<'_, f64>) -> Result<Vec<f64>, ControlError> {
    let beta2 = sys.b2[0];
    match sys.params.time_model {
        TimeModel::Continuous => {
            Ok(state_quadratic_forms(sys, states)?.iter().map(|q| -2.0 * q / beta2).collect())
        }
        TimeModel::Discrete => {
            check_states(sys, states)?;
            let x = linalg::to_faer(states);
            let ax = linalg::mul(sys.a.as_ref(), x.as_ref(), sys.par);
            Ok((0..x.ncols())
                .map(|j| (0..sys.n).map(|i| x[(i, j)].powi(2) - ax[(i, j)].powi(2)).sum::<f64>() / beta2)
                .collect())
        }
    }
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
        assert_eq!(info2.route, Route::GramianFactor);
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
