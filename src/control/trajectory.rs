//! The optimal input of one transition, its trajectory and node-wise energy.

use super::energy::{check_states, norm2, select_route, within, Whitening, TERMINAL_TOLERANCE};
use super::system::{gram_kernel, gramian_van_loan, mode_transition, System};
use super::{ControlError, TimeModel};
use crate::linalg;
use faer::Mat;
use ndarray::{Array1, Array2, ArrayView1};

/// An optimal transition sampled on a time grid.
#[derive(Clone, Debug)]
pub struct Trajectory {
    /// Sample times (continuous) or steps `0..=T` (discrete).
    pub times: Vec<f64>,
    /// `x(t)`, one row per time.
    pub state: Array2<f64>,
    /// `u*(t)`, one row per time (discrete: `u_t` for `t < T`, last row 0).
    pub input: Array2<f64>,
    /// `∫_0^T u_i(t)² dt` per node (discrete: `Σ_t u_{t,i}²`).
    pub node_energy: Array1<f64>,
    /// `(x_f − Φx₀)ᵀW_T⁻¹(x_f − Φx₀)`.
    pub energy: f64,
    /// `‖x(T) − x_f‖₂` of the closed-form end state.
    pub terminal_error: f64,
}

/// Optimal input, trajectory and node-wise energy of `x0 → xf`.
///
/// Continuous time (Kirk 1970, §5.2): with `ν = W_T⁻¹(x_f − Φ(T)x₀)`,
/// $$u^*(t) = B^\top e^{Ã^\top(T-t)}ν,\qquad x(t) = e^{Ãt}x_0 + W_t\,e^{Ã^\top(T-t)}ν,$$
/// and `∫u_i² = b_i² [∫_0^T e^{Ãᵀs}νν ᵀe^{Ãs}ds]_ii`, whose sum over nodes is
/// the energy. Undirected networks evaluate all three in the eigenbasis of Ã
/// (`G(t) ∘ …` closed forms, O(n²) per time point after O(n³) set-up);
/// directed ones use one matrix exponential per time point.
///
/// Discrete time: `u_t = Bᵀ(Ãᵀ)^{T−1−t}ν` for `t = 0..T−1` and the
/// recursion `x_{t+1} = Ãx_t + Bu_t`; `times` is ignored and the steps
/// `0..=T` are returned.
///
/// # Errors
/// [`ControlError::States`] for states of the wrong length or non-finite;
/// [`ControlError::Param`] for a time outside `[0, T]`;
/// [`ControlError::RankDeficientGramian`], [`ControlError::SingularGramian`]
/// and [`ControlError::TerminalMiss`] by the same rule as
/// [`super::energy_matrix`] (the same Gramian route and limits).
pub fn optimal_transition(
    sys: &System,
    x0: ArrayView1<'_, f64>,
    xf: ArrayView1<'_, f64>,
    times: &[f64],
) -> Result<Trajectory, ControlError> {
    let n = sys.n;
    let mut xs = Array2::zeros((n, 2));
    if x0.len() != n || xf.len() != n {
        return Err(ControlError::States(format!(
            "each state needs {n} values, found {} and {}",
            x0.len(),
            xf.len()
        )));
    }
    xs.column_mut(0).assign(&x0);
    xs.column_mut(1).assign(&xf);
    check_states(sys, xs.view())?;
    let par = sys.par;
    let t_end = sys.params.horizon;
    let tm = sys.params.time_model;
    let b: Vec<f64> = sys.params.input_weights.clone();
    // The Gramian factor and the refusal rule shared with `energy_matrix`.
    let wh = Whitening::new(sys, select_route(sys))?;
    let phi = sys.transition_faer(t_end);
    let x0m = Mat::from_fn(n, 1, |i, _| x0[i]);
    let px0 = linalg::mul(phi.as_ref(), x0m.as_ref(), par);
    let r = Mat::from_fn(n, 1, |i, _| xf[i] - px0[(i, 0)]);
    let z = wh.half_solve(wh.to_working(sys, r.as_ref()).as_ref());
    let nu_w = wh.half_solve_transpose(z.as_ref());
    let energy: f64 = (0..n).map(|i| z[(i, 0)].powi(2)).sum();
    let wnu = wh.to_node_basis(sys, wh.gram_apply(nu_w.as_ref()).as_ref());
    let nu = wh.to_node_basis(sys, nu_w.as_ref());
    let terminal_error = (0..n).map(|i| (px0[(i, 0)] + wnu[(i, 0)] - xf[i]).powi(2)).sum::<f64>().sqrt();
    // The same scale as `energy_matrix` on the two states: the larger norm.
    let scale = norm2(x0.iter().copied()).max(norm2(xf.iter().copied()));
    let relative = if scale > 0.0 { terminal_error / scale } else { terminal_error };
    if !terminal_error.is_finite() || !energy.is_finite() {
        return Err(ControlError::EnergyOverflow { state_norm_max: scale, condition: wh.condition });
    }
    if !within(relative, TERMINAL_TOLERANCE) {
        return Err(ControlError::TerminalMiss {
            terminal_error,
            relative,
            tolerance: TERMINAL_TOLERANCE,
            condition: wh.condition,
        });
    }

    if tm == TimeModel::Discrete {
        let steps = t_end as usize;
        let a = sys.a.as_ref();
        // c_t = (Ãᵀ)^{T−1−t} ν, built backwards.
        let mut cs = vec![nu.clone(); steps];
        for t in (0..steps.saturating_sub(1)).rev() {
            cs[t] = linalg::mul(a.transpose(), cs[t + 1].as_ref(), par);
        }
        let mut state = Array2::zeros((steps + 1, n));
        let mut input = Array2::zeros((steps + 1, n));
        let mut node_energy = Array1::zeros(n);
        let mut x = x0m;
        for t in 0..=steps {
            for i in 0..n {
                state[[t, i]] = x[(i, 0)];
            }
            if t < steps {
                let bu = Mat::from_fn(n, 1, |i, _| b[i] * b[i] * cs[t][(i, 0)]);
                for i in 0..n {
                    input[[t, i]] = b[i] * cs[t][(i, 0)];
                    node_energy[i] += input[[t, i]].powi(2);
                }
                let mut next = linalg::mul(a, x.as_ref(), par);
                next += &bu;
                x = next;
            }
        }
        let times = (0..=steps).map(|s| s as f64).collect();
        return Ok(Trajectory { times, state, input, node_energy, energy, terminal_error });
    }

    if let Some(&bad) = times.iter().find(|&&t| !(t >= 0.0 && t <= t_end)) {
        return Err(ControlError::param("time", bad, format!("a time within [0, {t_end}]")));
    }
    let nt = times.len();
    let mut state = Array2::zeros((nt, n));
    let mut input = Array2::zeros((nt, n));
    let node_energy;
    match &sys.eig {
        Some(e) => {
            let v = e.vectors.as_ref();
            let lam = &e.values;
            let kb = sys.input_in_eigenbasis(e);
            let nut = linalg::mul(v.transpose(), nu.as_ref(), par);
            let x0t = linalg::mul(v.transpose(), x0m.as_ref(), par);
            for (ti, &t) in times.iter().enumerate() {
                let c: Vec<f64> =
                    (0..n).map(|m| mode_transition(tm, lam[m], t_end - t) * nut[(m, 0)]).collect();
                // x̃(t) = e^{Λt}x̃₀ + (G(t) ∘ VᵀBBᵀV) c.
                let xt = Mat::from_fn(n, 1, |m, _| {
                    let mut s = mode_transition(tm, lam[m], t) * x0t[(m, 0)];
                    for l in 0..n {
                        s += gram_kernel(tm, lam[m], lam[l], t) * kb[(m, l)] * c[l];
                    }
                    s
                });
                let x = linalg::mul(v, xt.as_ref(), par);
                let cm = Mat::from_fn(n, 1, |m, _| c[m]);
                let u = linalg::mul(v, cm.as_ref(), par);
                for i in 0..n {
                    state[[ti, i]] = x[(i, 0)];
                    input[[ti, i]] = b[i] * u[(i, 0)];
                }
            }
            // ∫ e^{Ãᵀs}νν ᵀe^{Ãs} ds = V (G(T) ∘ ν̃ν̃ᵀ) Vᵀ; only its diagonal is needed.
            let h =
                Mat::from_fn(n, n, |m, l| gram_kernel(tm, lam[m], lam[l], t_end) * nut[(m, 0)] * nut[(l, 0)]);
            let vh = linalg::mul(v, h.as_ref(), par);
            node_energy = Array1::from_iter(
                (0..n).map(|i| b[i] * b[i] * (0..n).map(|m| vh[(i, m)] * v[(i, m)]).sum::<f64>()),
            );
        }
        None => {
            let q = Mat::from_fn(n, n, |i, j| if i == j { sys.b2[i] } else { 0.0 });
            for (ti, &t) in times.iter().enumerate() {
                let (phi_t, w_t) = gramian_van_loan(sys.a.as_ref(), q.as_ref(), t, par);
                let back = linalg::expm(Mat::from_fn(n, n, |i, j| sys.a[(j, i)] * (t_end - t)).as_ref(), par);
                let c = linalg::mul(back.as_ref(), nu.as_ref(), par);
                let mut x = linalg::mul(phi_t.as_ref(), x0m.as_ref(), par);
                x += &linalg::mul(w_t.as_ref(), c.as_ref(), par);
                for i in 0..n {
                    state[[ti, i]] = x[(i, 0)];
                    input[[ti, i]] = b[i] * c[(i, 0)];
                }
            }
            let nn = linalg::mul(nu.as_ref(), nu.as_ref().transpose(), par);
            let at = sys.a.as_ref().transpose().to_owned();
            let (_, obs) = gramian_van_loan(at.as_ref(), nn.as_ref(), t_end, par);
            node_energy = Array1::from_iter((0..n).map(|i| b[i] * b[i] * obs[(i, i)]));
        }
    }
    Ok(Trajectory { times: times.to_vec(), state, input, node_energy, energy, terminal_error })
}
