//! `control` against outside references: scipy 1.14.1 / numpy 2.1.3 fixtures
//! from tests/reference/make_control_fixtures.py (see tests/data/control/README.md),
//! an independent RK4 integrator written here, and the `hierax energy`
//! command end to end.

use crate::util::{data, files_below, hierax, run, write};
use hierax::control::energy::CONDITION_LIMIT;
use hierax::control::penalised::{penalised_energy_matrix, penalised_transition, PenaltyParams};
use hierax::control::trajectory::optimal_transition;
use hierax::control::{
    energy_matrix, energy_matrix_by, state_potentials, state_quadratic_forms, ControlError, Drivers, Par,
    Route, System, SystemParams, TimeModel,
};
use hierax::io::{read_array, InputSpec};
use ndarray::{Array1, Array2};

fn load2(case: &str, key: &str) -> Array2<f64> {
    let spec = InputSpec::new(data(&format!("control/{case}.npz")), Some(key));
    read_array(&spec).unwrap().matrix().unwrap()
}

fn load1(case: &str, key: &str) -> Array1<f64> {
    let spec = InputSpec::new(data(&format!("control/{case}.npz")), Some(key));
    read_array(&spec).unwrap().vector().unwrap()
}

fn scalar(case: &str, key: &str) -> f64 {
    load1(case, key)[0]
}

/// max |a − b| ≤ tol · max |b|.
fn assert_rel(what: &str, a: &Array2<f64>, b: &Array2<f64>, tol: f64) {
    assert_eq!(a.dim(), b.dim(), "{what}: shape");
    let scale = b.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let err = a.iter().zip(b.iter()).fold(0.0f64, |m, (x, y)| m.max((x - y).abs()));
    eprintln!("{what}: relative error {:.1e} (tolerance {tol:.0e})", err / scale);
    assert!(err <= tol * scale, "{what}: max error {err:e} > {tol:e} x {scale:e}");
}

fn system(case: &str, tm: TimeModel, drivers: Drivers, directed: bool) -> System {
    let a = load2(case, "adjacency");
    let mut p = SystemParams::new();
    p.time_model = tm;
    p.horizon = scalar(case, "horizon");
    p.stability_offset = scalar(case, "offset");
    p.drivers = drivers;
    System::new(a.view(), directed, &p.check(a.nrows()).unwrap(), Par::Seq).unwrap()
}

fn drivers_for(case: &str, how: &str) -> Drivers {
    let w = load1(case, "drivers");
    match how {
        "all" => Drivers::All,
        "nodes" => Drivers::Nodes((0..w.len()).filter(|&i| w[i] == 1.0).collect()),
        _ => Drivers::Weights(w.to_vec()),
    }
}

const CONTINUOUS: [(&str, &str, bool); 3] = [
    ("continuous_symmetric_all", "all", false),
    ("continuous_symmetric_subset", "nodes", false),
    ("continuous_directed_weights", "weights", true),
];

#[test]
fn continuous_gramian_transition_and_energy_match_scipy() {
    // References: scipy.linalg.expm (Φ), scipy.integrate.quad_vec of
    // e^{Ãt}BBᵀe^{Ãᵀt} (W_T, epsrel 1e-13), numpy.linalg.solve per pair (E).
    // Tolerance 1e-8 relative: the target; the references are good to ~1e-12.
    for (case, how, directed) in CONTINUOUS {
        let sys = system(case, TimeModel::Continuous, drivers_for(case, how), directed);
        let t = sys.params().horizon();
        assert_rel(&format!("{case} normalised"), &sys.normalised(), &load2(case, "normalised"), 1e-12);
        assert_rel(
            &format!("{case} transition"),
            &sys.transition_matrix(t),
            &load2(case, "transition"),
            1e-8,
        );
        assert_rel(&format!("{case} gramian"), &sys.gramian(t), &load2(case, "gramian"), 1e-8);
        let (e, info) = energy_matrix(&sys, load2(case, "states").view()).unwrap();
        assert_rel(&format!("{case} energy"), &e, &load2(case, "energy"), 1e-8);
        assert!(info.terminal_error_max < 1e-9 * info.state_norm_max, "{case}: {info:?}");
    }
}

#[test]
fn long_horizon_gramian_matches_scipy_lyapunov_solution() {
    // scipy.linalg.solve_continuous_lyapunov(Ã, −BBᵀ) gives W_∞; at the
    // fixture's T_long the tail e^{2λ_max T} is below 1e-14, so W_T = W_∞ to 1e-8.
    for (case, how, directed) in CONTINUOUS {
        let sys = system(case, TimeModel::Continuous, drivers_for(case, how), directed);
        let t_long = scalar(case, "horizon_long");
        assert_rel(&format!("{case} W_inf"), &sys.gramian(t_long), &load2(case, "gramian_infinite"), 1e-8);
    }
}

#[test]
fn discrete_gramian_equals_direct_sum_and_energies_match_numpy() {
    // Reference: Σ_{t<T} Ã^t BBᵀ(Ãᵀ)^t summed term by term with numpy.linalg.matrix_power.
    for (case, how, directed) in
        [("discrete_symmetric_all", "all", false), ("discrete_directed_subset", "nodes", true)]
    {
        let sys = system(case, TimeModel::Discrete, drivers_for(case, how), directed);
        let t = sys.params().horizon();
        assert_rel(&format!("{case} normalised"), &sys.normalised(), &load2(case, "normalised"), 1e-12);
        assert_rel(
            &format!("{case} transition"),
            &sys.transition_matrix(t),
            &load2(case, "transition"),
            1e-10,
        );
        assert_rel(&format!("{case} gramian"), &sys.gramian(t), &load2(case, "gramian"), 1e-10);
        let (e, _) = energy_matrix(&sys, load2(case, "states").view()).unwrap();
        assert_rel(&format!("{case} energy"), &e, &load2(case, "energy"), 1e-8);
    }
}

#[test]
fn optimal_input_and_trajectory_match_scipy_solve_ivp() {
    // Reference: scipy.integrate.solve_ivp (DOP853, rtol = atol = 1e-12) of
    // dx/dt = Ãx + Bu*(t) from x₀ = state 1 towards x_f = state 2, and
    // quad_vec of u_i(t)² for node-wise energies. Tolerance 1e-8 relative.
    for (case, how, directed) in CONTINUOUS {
        let sys = system(case, TimeModel::Continuous, drivers_for(case, how), directed);
        let x = load2(case, "states");
        let times = load1(case, "times").to_vec();
        let tr = optimal_transition(&sys, x.column(0), x.column(1), &times).unwrap();
        assert_rel(&format!("{case} trajectory"), &tr.state, &load2(case, "trajectory"), 1e-8);
        assert_rel(&format!("{case} input"), &tr.input, &load2(case, "input"), 1e-8);
        let ne = tr.node_energy.clone().insert_axis(ndarray::Axis(1));
        let want = load1(case, "node_energy").insert_axis(ndarray::Axis(1));
        assert_rel(&format!("{case} node energy"), &ne, &want, 1e-8);
        // The node-wise energies sum to the total (identity ∫‖u‖² = Σ_i ∫u_i²).
        let total: f64 = tr.node_energy.sum();
        assert!((total - tr.energy).abs() <= 1e-10 * tr.energy, "{case}: {total} vs {}", tr.energy);
        let last = tr.state.row(times.len() - 1).to_owned();
        let miss = (&last - &x.column(1)).mapv(|v| v * v).sum().sqrt();
        assert!(miss < 1e-9, "{case}: x(T) misses x_f by {miss:e}");
    }
}

#[test]
fn independent_rk4_integration_of_the_optimal_input_reaches_the_target() {
    // Classical fourth-order Runge–Kutta (textbook, e.g. Press et al.,
    // Numerical Recipes §17.1), written here without hierax code, driven by
    // u*(t) sampled from the library at the RK stages. Step T/400: local error
    // O(h⁵) gives a global error ~1e-11 for these ‖Ã‖ ≤ 2 systems; tolerance 1e-8.
    for (case, how, directed) in CONTINUOUS {
        let sys = system(case, TimeModel::Continuous, drivers_for(case, how), directed);
        let a = sys.normalised();
        let b = Array1::from(sys.params().input_weights().to_vec());
        let t_end = sys.params().horizon();
        let x = load2(case, "states");
        let steps = 400;
        let h = t_end / steps as f64;
        let grid: Vec<f64> = (0..=2 * steps).map(|i| (i as f64 * h / 2.0).min(t_end)).collect();
        let tr = optimal_transition(&sys, x.column(0), x.column(1), &grid).unwrap();
        // dx/dt = Ãx + Bu with B = diag(b).
        let f = |xv: &Array1<f64>, idx: usize| a.dot(xv) + &(&b * &tr.input.row(idx));
        let mut xv = x.column(0).to_owned();
        for s in 0..steps {
            let (i0, i1, i2) = (2 * s, 2 * s + 1, 2 * s + 2);
            let k1 = f(&xv, i0);
            let k2 = f(&(&xv + &(&k1 * (h / 2.0))), i1);
            let k3 = f(&(&xv + &(&k2 * (h / 2.0))), i1);
            let k4 = f(&(&xv + &(&k3 * h)), i2);
            xv = &xv + &((&k1 + &(&k2 * 2.0) + &(&k3 * 2.0) + &k4) * (h / 6.0));
        }
        let miss = (&xv - &x.column(1)).mapv(|v| v * v).sum().sqrt();
        let scale = x.column(1).mapv(|v| v * v).sum().sqrt();
        assert!(miss < 1e-8 * scale, "{case}: RK4 end state misses x_f by {miss:e}");
    }
}

#[test]
fn state_penalised_control_matches_scipy_solve_bvp() {
    // Reference: scipy.integrate.solve_bvp (tol 1e-10) on the Pontryagin
    // system of Gu et al. 2017; energy by quad_vec of ‖u‖² on its dense
    // output. Tolerance 1e-8 relative, as for the other scipy checks
    // (solve_bvp's tol bounds the collocation residual, not the error; the
    // observed difference on this fixture is ~5e-15).
    let case = "penalised_symmetric";
    let a = load2(case, "adjacency");
    let n = a.nrows();
    let mut p = SystemParams::new();
    p.horizon = scalar(case, "horizon");
    p.stability_offset = scalar(case, "offset");
    let sys = System::new(a.view(), false, &p.check(n).unwrap(), Par::Seq).unwrap();
    let s = load1(case, "penalised");
    let pen =
        PenaltyParams { nodes: Some((0..n).filter(|&i| s[i] == 1.0).collect()), rho: scalar(case, "rho") }
            .check(n)
            .unwrap();
    let (x0, xf) = (load1(case, "x0"), load1(case, "xf"));
    let times = load1(case, "times").to_vec();
    let tr = penalised_transition(&sys, x0.view(), xf.view(), &pen, &times).unwrap();
    assert_rel("penalised trajectory", &tr.state, &load2(case, "trajectory"), 1e-8);
    let p0 = Array2::from_shape_vec((n, 1), tr.costate0.clone()).unwrap();
    assert_rel("penalised costate", &p0, &load1(case, "costate0").insert_axis(ndarray::Axis(1)), 1e-8);
    let want = scalar(case, "energy");
    assert!((tr.energy - want).abs() <= 1e-8 * want, "{} vs {want}", tr.energy);
    // Batched pairs agree with the single-pair route, and ρ → ∞ tends to the
    // unpenalised minimum energy from above (penalty ignored, inputs cheap-first).
    let mut xs = Array2::zeros((n, 2));
    xs.column_mut(0).assign(&x0);
    xs.column_mut(1).assign(&xf);
    let (em, info) = penalised_energy_matrix(&sys, xs.view(), &pen).unwrap();
    assert!((em[[0, 1]] - tr.energy).abs() <= 1e-10 * want);
    assert!(info.terminal_error_max < 1e-8);
    let big = PenaltyParams { nodes: None, rho: 1e8 }.check(n).unwrap();
    let (eb, _) = penalised_energy_matrix(&sys, xs.view(), &big).unwrap();
    let (e0, _) = energy_matrix(&sys, xs.view()).unwrap();
    assert!(
        eb[[0, 1]] >= e0[[0, 1]] * (1.0 - 1e-9) && eb[[0, 1]] <= e0[[0, 1]] * (1.0 + 1e-5),
        "{} vs {}",
        eb[[0, 1]],
        e0[[0, 1]]
    );
}

// ----- the command end to end -------------------------------------------

const GOOD: &str = "0,1,0.5,0.2\n1,0,0.3,0\n0.5,0.3,0,0.8\n0.2,0,0.8,0\n";

#[test]
fn energy_command_writes_all_tables() {
    let dir = tempfile::tempdir().unwrap();
    let c = write(dir.path(), "c.csv", GOOD);
    let m = write(dir.path(), "map.csv", "0.3\n0.1\n0.9\n0.5\n");
    let out = dir.path().join("out");
    let o = run(hierax().arg("energy").arg(&c).arg("--map").arg(&m).args(["--bins", "2", "--out"]).arg(&out));
    assert!(o.status.success());
    let files = files_below(&out);
    for f in [
        "energy.csv",
        "energy_matrix.csv",
        "asymmetry_matrix.csv",
        "node_metrics.csv",
        "qc.csv",
        "control.json",
    ] {
        assert!(files.iter().any(|p| p.to_str() == Some(f)), "{f} missing: {files:?}");
    }
    let tidy = std::fs::read_to_string(out.join("energy.csv")).unwrap();
    assert_eq!(tidy.lines().count(), 1 + 4, "{tidy}");
    assert!(tidy.starts_with("initial_state,target_state,energy,asymmetry"));
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("control.json")).unwrap()).unwrap();
    assert_eq!(json["provenance"]["command"], "energy");
    assert!(json["qc"]["gramian_condition"].as_f64().unwrap() >= 1.0);
    // The diagnostics of a result that passes: route, condition and its limit.
    assert_eq!(json["qc"]["route"], "eigenbasis");
    assert_eq!(json["qc"]["condition_limit"].as_f64(), Some(CONDITION_LIMIT));
    let qc = std::fs::read_to_string(out.join("qc.csv")).unwrap();
    for m in ["gramian_condition,", "gramian_condition_limit,", "terminal_error_relative,"] {
        assert!(qc.lines().any(|l| l.starts_with(m)), "{m} missing: {qc}");
    }
}

#[test]
fn energy_command_refuses_bad_input_with_one_line_and_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    let good = write(p, "good.csv", GOOD);
    let states3 = write(p, "s3.csv", "1,0,0\n0,1,0\n");
    let n_chain: usize = 40;
    let chain_rows: Vec<String> = (0..n_chain)
        .map(|i| {
            (0..n_chain).map(|j| if i.abs_diff(j) == 1 { "1" } else { "0" }).collect::<Vec<_>>().join(",")
        })
        .collect();
    let chain = write(p, "chain.csv", &(chain_rows.join("\n") + "\n"));
    let half: Vec<String> =
        (0..n_chain).map(|i| if i < n_chain / 2 { "1" } else { "0" }.to_string()).collect();
    let chain_states = write(p, "chain_states.csv", &(half.join(",") + "\n"));
    let cases: Vec<(Vec<String>, &str)> = vec![
        (vec![write(p, "ns.csv", "0,1,1\n1,0,1\n").display().to_string()], "expected a square matrix"),
        (
            vec![write(p, "as.csv", "0,1,0\n2,0,1\n0,1,0\n").display().to_string()],
            "expected a symmetric matrix",
        ),
        (vec![write(p, "neg.csv", "0,-1,1\n-1,0,1\n1,1,0\n").display().to_string()], "non-negative"),
        (vec![write(p, "nan.csv", "0,nan,1\nnan,0,1\n1,1,0\n").display().to_string()], "finite"),
        (vec![write(p, "iso.csv", "0,1,0\n1,0,0\n0,0,0\n").display().to_string()], "no connection"),
        (
            vec![good.display().to_string(), "--states".into(), states3.display().to_string()],
            "neither dimension matches",
        ),
        (
            vec![good.display().to_string(), "--horizon".into(), "0".into()],
            "--horizon 0: expected a finite number > 0",
        ),
        (
            vec![good.display().to_string(), "--horizon".into(), "-1".into()],
            "--horizon -1: expected a finite number > 0",
        ),
        (vec![good.display().to_string(), "--drivers".into(), ",".into()], "driver set is empty"),
        (
            ["--time-model", "discrete", "--horizon", "1", "--drivers", "1,3"]
                .iter()
                .map(|s| s.to_string())
                .chain([good.display().to_string()])
                .collect(),
            "rank at most drivers x steps = 2 < 4 nodes",
        ),
        // A 40-node path driven from one end: condition far above the limit.
        (
            vec![
                chain.display().to_string(),
                "--drivers".into(),
                "1".into(),
                "--states".into(),
                chain_states.display().to_string(),
            ],
            "the controllability Gramian is numerically singular",
        ),
    ];
    let states = write(p, "s.csv", "1,0,0,0\n0,0,1,1\n");
    for (i, (args, want)) in cases.iter().enumerate() {
        let out = p.join(format!("out{i}"));
        let mut cmd = hierax();
        cmd.arg("energy").args(args);
        if !args.iter().any(|a| a == "--states") {
            cmd.arg("--states").arg(&states);
        }
        let o = run(cmd.arg("--out").arg(&out));
        assert_eq!(o.status.code(), Some(2), "case {i}");
        let err = String::from_utf8(o.stderr).unwrap();
        assert_eq!(err.lines().count(), 1, "case {i}: {err}");
        assert!(err.contains(want), "case {i}: expected `{want}` in {err}");
        assert!(!out.exists() || files_below(&out).is_empty(), "case {i}: output left behind");
    }
}

#[test]
fn node_metrics_match_numpy_power_series_and_eigh() {
    // Average controllability: Σ_{t<4000} ‖Â^t e_i‖² summed in numpy (definition,
    // Gu et al. 2015); modal: Σ_j (1 − λ_j²) v_ij² from numpy.linalg.eigh
    // (Pasqualetti et al. 2014). Tolerance 1e-10 relative: both are sums of
    // well-conditioned positive terms.
    for (case, how, directed) in CONTINUOUS {
        let sys = system(case, TimeModel::Continuous, drivers_for(case, how), directed);
        let m = hierax::control::node_metrics(&sys).unwrap();
        let avg = m.average.clone().insert_axis(ndarray::Axis(1));
        let want = load1(case, "average_controllability").insert_axis(ndarray::Axis(1));
        assert_rel(&format!("{case} average controllability"), &avg, &want, 1e-10);
        match m.modal {
            Some(modal) => {
                let want = load1(case, "modal_controllability").insert_axis(ndarray::Axis(1));
                assert_rel(&format!("{case} modal"), &modal.insert_axis(ndarray::Axis(1)), &want, 1e-10);
            }
            None => assert!(directed && m.notes.iter().any(|n| n.contains("undirected networks only"))),
        }
    }
}

#[test]
fn a_single_driver_on_a_long_chain_is_refused_with_its_condition() {
    // A path of 40 nodes driven from one end: the Gramian's condition number
    // grows exponentially with the distance from the driver (a known property
    // of chains; no published value is used), far beyond the limit, so the
    // result must be a typed refusal carrying the condition, never output.
    let n = 40;
    let mut a = Array2::zeros((n, n));
    for i in 0..n - 1 {
        a[[i, i + 1]] = 1.0;
        a[[i + 1, i]] = 1.0;
    }
    let mut p = SystemParams::new();
    p.drivers = Drivers::Nodes(vec![0]);
    let sys = System::new(a.view(), false, &p.check(n).unwrap(), Par::Seq).unwrap();
    let x = Array2::from_shape_fn((n, 2), |(i, j)| if (i < n / 2) == (j == 0) { 1.0 } else { 0.0 });
    match energy_matrix(&sys, x.view()) {
        Err(ControlError::SingularGramian { condition, limit }) => {
            assert!(condition > limit && limit == CONDITION_LIMIT, "{condition:e} vs {limit:e}");
        }
        other => panic!("expected SingularGramian, got {other:?}"),
    }
    // The same rule refuses the optimal trajectory of the same system.
    let t = optimal_transition(&sys, x.column(0), x.column(1), &[0.5]).unwrap_err();
    assert!(matches!(t, ControlError::SingularGramian { .. }), "{t}");
}

// The invented seeded network of the control benches (a ring, so no node is isolated).
#[path = "../benches/support/random_network.rs"]
mod random_network;
use random_network::network as random_network;

#[test]
fn discrete_time_with_too_few_drivers_for_the_horizon_is_refused_by_its_rank_bound() {
    // 30 of 94 nodes driven for T = 3 steps: W_T = CCᵀ with C = [B, ÃB, Ã²B]
    // (n x 90) has rank <= 90 < 94 (linear algebra; no tolerance involved).
    // Refused for every seed, before any arithmetic, with why and what to change.
    let n = 94;
    for seed in 0..4 {
        let a = random_network(n, seed);
        let mut p = SystemParams::new();
        p.time_model = TimeModel::Discrete;
        p.horizon = 3.0;
        p.drivers = Drivers::Nodes((0..30).map(|i| (i * 3 + seed as usize) % n).collect());
        let sys = System::new(a.view(), false, &p.check(n).unwrap(), Par::Seq).unwrap();
        let x = Array2::from_shape_fn((n, 3), |(i, j)| ((i + 7 * j) % 5) as f64);
        let e = energy_matrix(&sys, x.view()).unwrap_err();
        assert!(
            matches!(
                e,
                ControlError::RankDeficientGramian { drivers: 30, steps: 3, rank_bound: 90, nodes: 94, .. }
            ),
            "{e:?}"
        );
        let msg = e.to_string();
        assert!(msg.contains("rank at most drivers x steps = 90 < 94 nodes"), "{msg}");
        assert!(
            msg.contains("at least 32 driver nodes, a horizon of at least 4 steps, or continuous time"),
            "{msg}"
        );
        // The remedies it names do work here: 4 steps, or continuous time.
        for (tm, t) in [(TimeModel::Discrete, 4.0), (TimeModel::Continuous, 3.0)] {
            p.time_model = tm;
            p.horizon = t;
            let sys = System::new(a.view(), false, &p.check(n).unwrap(), Par::Seq).unwrap();
            match energy_matrix(&sys, x.view()) {
                Ok((_, info)) => assert!(info.gramian_condition <= CONDITION_LIMIT),
                // A remedy may still leave the Gramian too ill-conditioned; then it says so.
                Err(e) => assert!(matches!(e, ControlError::SingularGramian { .. }), "{e:?}"),
            }
        }
    }
}

#[test]
fn energies_that_overflow_are_an_error_not_output() {
    // States of size 1e200 give energies ~1e400, beyond f64: refused with the
    // (finite) state scale and the remedy, never returned as infinities.
    let case = "continuous_symmetric_subset";
    let sys = system(case, TimeModel::Continuous, drivers_for(case, "nodes"), false);
    let x = load2(case, "states") * 1e200;
    let e = energy_matrix(&sys, x.view()).unwrap_err();
    match e {
        ControlError::EnergyOverflow { state_norm_max, .. } => {
            assert!(state_norm_max.is_finite() && state_norm_max > 1e200, "{state_norm_max:e}")
        }
        _ => panic!("expected EnergyOverflow, got {e:?}"),
    }
    assert!(e.to_string().contains("rescale the states"), "{e}");
    eprintln!("refusal: {e}");
}

// ----- accuracy of the Gramian routes against a 60-digit reference ------

/// Cases of tests/data/control/precision_*.npz inside the condition limit.
const PRECISION: [&str; 7] = [
    "sym_cont_1e5",
    "sym_cont_1e9",
    "sym_cont_1e11",
    "sym_cont_1e12",
    "dir_cont_1e8",
    "dir_cont_1e12",
    "sym_disc_1e12",
];

fn precision_system(case: &str) -> System {
    let c = format!("precision_{case}");
    let a = load2(&c, "adjacency");
    let w = load1(&c, "drivers");
    let mut p = SystemParams::new();
    p.time_model = if scalar(&c, "discrete") == 1.0 { TimeModel::Discrete } else { TimeModel::Continuous };
    p.horizon = scalar(&c, "horizon");
    p.stability_offset = scalar(&c, "offset");
    p.drivers = Drivers::Nodes((0..w.len()).filter(|&i| w[i] == 1.0).collect());
    System::new(a.view(), scalar(&c, "directed") == 1.0, &p.check(a.nrows()).unwrap(), Par::Seq).unwrap()
}

/// max_ij |e_ij − r_ij| / |r_ij| (every energy of these cases is > 0).
fn max_rel_entrywise(e: &Array2<f64>, r: &Array2<f64>) -> f64 {
    e.iter().zip(r.iter()).fold(0.0f64, |m, (x, y)| m.max((x - y).abs() / y.abs()))
}

#[test]
fn chosen_gramian_route_matches_a_60_digit_mpmath_reference_and_beats_forming_the_gramian() {
    // Reference: mpmath 1.4.1 at 60 digits (tests/reference/make_control_precision_fixtures.py):
    // closed-form / block-exponential / summed Gramian and rᵀW⁻¹r per pair.
    // Bound on the chosen (factored) route: n·√κ·ε + 10·floor, where √κ = κ(R) is
    // the condition of the triangular factor actually solved with and n·κ(R)·ε the
    // textbook forward-error scale of a triangular solve (Higham 2002, §8.2); the
    // floor is what rounding the input alone moves the energies (mpmath, recorded
    // per case). Forming W_T instead is bounded only by κ·ε; each other route that
    // applies is measured and the chosen one must not be worse.
    for case in PRECISION {
        let c = format!("precision_{case}");
        let sys = precision_system(case);
        let x = load2(&c, "states");
        let want = load2(&c, "energy");
        let (kappa, floor, n) = (scalar(&c, "condition"), scalar(&c, "floor"), sys.n() as f64);
        let (e, info) = energy_matrix(&sys, x.view()).unwrap();
        assert_eq!(info.route, Route::GramianFactor, "{case}");
        // The condition number the refusal rule rests on, against mpmath's eigenvalues
        // (relative 1e-3: κ(R)² from singular values is good to ~κ(R)·ε).
        let kerr = (info.gramian_condition - kappa).abs() / kappa;
        assert!(kerr < 1e-3, "{case}: condition {:.3e} vs mpmath {kappa:.3e}", info.gramian_condition);
        let err = max_rel_entrywise(&e, &want);
        let bound = n * kappa.sqrt() * f64::EPSILON + 10.0 * floor;
        let mut line = format!(
            "{case}: condition {kappa:.1e}, input floor {floor:.0e}; gramian-factor {err:.1e} (bound {bound:.0e})"
        );
        assert!(err <= bound, "{case}: relative error {err:e} > bound {bound:e}");
        for other in [Route::ModalGramian, Route::BlockExponential, Route::PowerSum] {
            match energy_matrix_by(&sys, x.view(), other) {
                Ok((eo, _)) => {
                    let eo_err = max_rel_entrywise(&eo, &want);
                    line.push_str(&format!("; {} {eo_err:.1e}", other.name()));
                    assert!(
                        err <= eo_err,
                        "{case}: chosen route {err:e} worse than {} {eo_err:e}",
                        other.name()
                    );
                }
                Err(ControlError::RouteUnavailable { .. }) => {}
                Err(e) => line.push_str(&format!("; {} refused ({e})", other.name())),
            }
        }
        eprintln!("{line}");
    }
}

#[test]
fn beyond_the_condition_limit_the_reference_case_is_refused() {
    // mpmath gives κ(W_T) ≈ 1.4e13 > 1e-3/ε for this case: refused, carrying the
    // condition, which agrees with mpmath's to 1e-3 relative.
    let c = "precision_sym_cont_1e13";
    let sys = precision_system("sym_cont_1e13");
    let kappa = scalar(c, "condition");
    assert!(kappa > CONDITION_LIMIT);
    match energy_matrix(&sys, load2(c, "states").view()) {
        Err(e @ ControlError::SingularGramian { condition, limit }) => {
            eprintln!("refusal: {e}");
            assert_eq!(limit, CONDITION_LIMIT);
            assert!((condition - kappa).abs() < 1e-3 * kappa, "{condition:e} vs {kappa:e}");
        }
        other => panic!("expected SingularGramian, got {other:?}"),
    }
}

#[test]
fn asymmetry_equals_the_state_quadratic_forms_exactly_when_the_predicate_holds() {
    // Closed form (DESIGN §5; derivation in `state_potentials`): symmetric Ã,
    // B = βI: continuous E_ij − E_ji = 2(q_i − q_j)/β² with q = xᵀÃx; discrete
    // p_j − p_i with p = (‖x‖² − ‖Ãx‖²)/β². Checked for several horizons and
    // weights; tolerance 1e-10 of max |E| (a difference of energies computed
    // to ~1e-15 relative on this well-conditioned B = cI system).
    let case = "continuous_symmetric_all";
    let a = load2(case, "adjacency");
    let n = a.nrows();
    let x = load2(case, "states");
    for (tm, t, beta) in [
        (TimeModel::Continuous, 0.5, 1.0),
        (TimeModel::Continuous, 3.0, 2.0),
        (TimeModel::Discrete, 1.0, 1.0),
        (TimeModel::Discrete, 7.0, 0.5),
    ] {
        let mut p = SystemParams::new();
        p.time_model = tm;
        p.horizon = t;
        p.drivers = if beta == 1.0 { Drivers::All } else { Drivers::Weights(vec![beta; n]) };
        let sys = System::new(a.view(), false, &p.check(n).unwrap(), Par::Seq).unwrap();
        assert!(sys.asymmetry_is_potential());
        let (e, _) = energy_matrix(&sys, x.view()).unwrap();
        let pot = state_potentials(&sys, x.view()).unwrap();
        let q = state_quadratic_forms(&sys, x.view()).unwrap();
        let scale = e.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        for i in 0..x.ncols() {
            for j in 0..x.ncols() {
                let d = e[[i, j]] - e[[j, i]];
                assert!(
                    (d - (pot[j] - pot[i])).abs() <= 1e-10 * scale,
                    "{tm:?} T={t}: {d} vs {}",
                    pot[j] - pot[i]
                );
                if tm == TimeModel::Continuous {
                    let via_q = 2.0 * (q[i] - q[j]) / (beta * beta);
                    assert!((d - via_q).abs() <= 1e-10 * scale, "{d} vs {via_q}");
                }
            }
        }
    }
    // Not the exact case: partial drivers, or a directed network.
    assert!(!system(
        "continuous_symmetric_subset",
        TimeModel::Continuous,
        drivers_for("continuous_symmetric_subset", "nodes"),
        false
    )
    .asymmetry_is_potential());
    assert!(!system("continuous_directed_weights", TimeModel::Continuous, Drivers::All, true)
        .asymmetry_is_potential());
}

#[test]
fn discrete_optimal_input_reaches_the_target_and_sums_to_the_energy() {
    // x_{t+1} = Ãx_t + Bu_t iterated with the returned inputs must end at x_f,
    // and Σ_t ‖u_t‖² must equal the numpy-solved energy of the fixture (1e-8).
    for (case, how, directed) in
        [("discrete_symmetric_all", "all", false), ("discrete_directed_subset", "nodes", true)]
    {
        let sys = system(case, TimeModel::Discrete, drivers_for(case, how), directed);
        let x = load2(case, "states");
        let tr = optimal_transition(&sys, x.column(0), x.column(1), &[]).unwrap();
        let a = sys.normalised();
        let b = Array1::from(sys.params().input_weights().to_vec());
        let mut xv = x.column(0).to_owned();
        for t in 0..sys.params().horizon() as usize {
            xv = a.dot(&xv) + &(&b * &tr.input.row(t));
        }
        let miss = (&xv - &x.column(1)).mapv(|v| v * v).sum().sqrt();
        assert!(miss < 1e-9, "{case}: misses x_f by {miss:e}");
        let want = load2(case, "energy")[[0, 1]];
        assert!(
            (tr.node_energy.sum() - want).abs() <= 1e-8 * want,
            "{case}: {} vs {want}",
            tr.node_energy.sum()
        );
    }
}

#[test]
fn energy_help_has_a_worked_example() {
    let o = run(hierax().args(["energy", "--help"]));
    assert!(o.status.success());
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(text.contains("hierax energy demo-data/sub-01/sub-01_connectome.csv"), "{text}");
    assert!(text.contains("not for clinical decisions"), "{text}");
}

#[test]
fn energy_command_options_run_and_match_the_library() {
    let dir = tempfile::tempdir().unwrap();
    let c = write(dir.path(), "c.csv", GOOD);
    let s = write(dir.path(), "s.csv", "1,0,0,0\n0,0,1,1\n0.5,0.5,0,0\n");
    write(dir.path(), "w.csv", "1\n0.5\n0\n2\n");
    let runs: Vec<Vec<&str>> = vec![
        vec!["--drivers", "1,3-4", "--horizon", "2"],
        vec!["--drivers", "w.csv", "--directed"],
        vec!["--time-model", "discrete", "--horizon", "5", "--stability-offset", "0.5"],
        vec!["--state-penalty", "1-2", "--rho", "0.5"],
    ];
    for (i, extra) in runs.iter().enumerate() {
        let out = dir.path().join(format!("o{i}"));
        let mut cmd = hierax();
        cmd.current_dir(dir.path())
            .arg("energy")
            .arg(&c)
            .arg("--states")
            .arg(&s)
            .args(extra)
            .arg("--out")
            .arg(&out);
        let o = run(&mut cmd);
        assert!(o.status.success(), "run {i}");
        let tidy = std::fs::read_to_string(out.join("energy.csv")).unwrap();
        assert_eq!(tidy.lines().count(), 10, "run {i}: {tidy}");
        assert_eq!(tidy.starts_with("initial_state,target_state,energy,asymmetry,penalised_energy"), i == 3);
    }
    // Run 0 against the library: E[1, 2] of the same system.
    let a = Array2::from_shape_vec(
        (4, 4),
        GOOD.split([',', '\n']).filter(|t| !t.is_empty()).map(|t| t.parse().unwrap()).collect(),
    )
    .unwrap();
    let mut p = SystemParams::new();
    p.drivers = Drivers::Nodes(vec![0, 2, 3]);
    p.horizon = 2.0;
    let sys = System::new(a.view(), false, &p.check(4).unwrap(), Par::Seq).unwrap();
    let x = Array2::from_shape_vec((3, 4), vec![1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0, 1.0, 0.5, 0.5, 0.0, 0.0])
        .unwrap();
    let (e, _) = energy_matrix(&sys, x.t()).unwrap();
    let tidy = std::fs::read_to_string(dir.path().join("o0").join("energy.csv")).unwrap();
    let row: Vec<&str> = tidy.lines().nth(2).unwrap().split(',').collect();
    assert_eq!(row[0..2], ["1", "2"]);
    let v: f64 = row[2].parse().unwrap();
    // Not bit-exact: the command runs faer multi-threaded, which may change last bits.
    assert!((v - e[[0, 1]]).abs() <= 1e-12 * e[[0, 1]], "{v} vs {}", e[[0, 1]]);
}
