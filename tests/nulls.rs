//! Network null models: calibration under planted nulls (p-values uniform by
//! the one-sample Kolmogorov–Smirnov test, whose implementation is checked
//! against scipy.stats.kstest in `stats.rs`), planted effects detected, and
//! the degenerate connectomes refused end to end.

use hierax::stats::inference::{ks_uniform, permutation_p_value, Alternative};
use hierax::stats::nulls::{rewire, Network, NullModel, NullParams};
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

const NULLS: usize = 99;
const SEEDS: u64 = 150;

/// Σ w_ab h_a h_b over edges: how strongly weight joins regions of like `h`.
fn assortativity(w: &Array2<f64>, h: &[f64]) -> f64 {
    w.indexed_iter().map(|((a, b), v)| v * h[a] * h[b]).sum()
}

/// Σ w_ab (h_b − h_a) over ordered edges: net weight flowing up `h`.
fn upward_flow(w: &Array2<f64>, h: &[f64]) -> f64 {
    w.indexed_iter().map(|((a, b), v)| v * (h[b] - h[a])).sum()
}

/// One-sided permutation p-value (Phipson & Smyth 2010) of `stat` on `w` against `model`.
fn p_value(
    model: NullModel,
    w: &Array2<f64>,
    d: Option<&Array2<f64>>,
    directed: bool,
    stat: &dyn Fn(&Array2<f64>) -> f64,
    rng: &mut ChaCha8Rng,
) -> f64 {
    let net = Network::new(w.view(), d.map(|d| d.view()), directed).unwrap();
    let null: Vec<f64> =
        (0..NULLS).map(|_| stat(&rewire(model, &net, &NullParams::default(), rng).unwrap().0)).collect();
    permutation_p_value(stat(w), &null, Alternative::Greater).unwrap()
}

fn random_positions(n: usize, rng: &mut ChaCha8Rng) -> Array2<f64> {
    let p: Vec<(f64, f64)> = (0..n).map(|_| (rng.random(), rng.random())).collect();
    Array2::from_shape_fn((n, n), |(i, j)| ((p[i].0 - p[j].0).powi(2) + (p[i].1 - p[j].1).powi(2)).sqrt())
}

/// A complete weighted graph: weights i.i.d. log-normal-like, independent of `h` (planted null), or
/// raised between regions of like sign of `h` (planted effect).
fn dense_graph(n: usize, h: &[f64], effect: bool, rng: &mut ChaCha8Rng) -> Array2<f64> {
    let mut w = Array2::zeros((n, n));
    for a in 0..n {
        for b in (a + 1)..n {
            let base: f64 = (rng.random::<f64>() * 2.0).exp();
            let v = if effect && h[a] * h[b] > 0.0 { 3.0 * base } else { base };
            w[[a, b]] = v;
            w[[b, a]] = v;
        }
    }
    w
}

/// A sparse directed graph (density 0.2): weights i.i.d. (planted null), or tripled on edges
/// that point up `h` (planted effect).
fn directed_graph(n: usize, h: &[f64], effect: bool, rng: &mut ChaCha8Rng) -> Array2<f64> {
    Array2::from_shape_fn((n, n), |(a, b)| {
        if a == b || !rng.random_bool(0.2) {
            return 0.0;
        }
        let base: f64 = rng.random_range(0.5..1.5);
        if effect && h[b] > h[a] {
            3.0 * base
        } else {
            base
        }
    })
}

fn normal(rng: &mut ChaCha8Rng) -> f64 {
    // Box–Muller.
    let (u, v): (f64, f64) = (rng.random(), rng.random());
    (-2.0 * (1.0 - u).ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

#[test]
fn weight_models_are_calibrated_on_a_dense_weighted_graph_and_detect_a_planted_effect() {
    let n = 16;
    for model in [NullModel::named("weight-permutation"), NullModel::named("length-bin-shuffle")] {
        let mut rng = ChaCha8Rng::seed_from_u64(21);
        let mut ps = Vec::new();
        for _ in 0..SEEDS {
            let h: Vec<f64> = (0..n).map(|_| normal(&mut rng)).collect();
            let w = dense_graph(n, &h, false, &mut rng);
            let d = random_positions(n, &mut rng);
            ps.push(p_value(model, &w, Some(&d), false, &|m| assortativity(m, &h), &mut rng));
        }
        // Level 0.01 (common practice, no source): with 150 seeds a miscalibrated null shows.
        let (ks, p) = ks_uniform(&ps).unwrap();
        assert!(p > 0.01, "{model:?}: p-values not uniform, KS D = {ks}, p = {p}");
        let mut detected = 0;
        for _ in 0..10 {
            let h: Vec<f64> = (0..n).map(|_| normal(&mut rng)).collect();
            let w = dense_graph(n, &h, true, &mut rng);
            let d = random_positions(n, &mut rng);
            if p_value(model, &w, Some(&d), false, &|m| assortativity(m, &h), &mut rng) <= 0.05 {
                detected += 1;
            }
        }
        assert!(detected >= 9, "{model:?}: planted effect detected in {detected} of 10");
    }
}

#[test]
fn directed_swaps_are_calibrated_on_a_directed_graph_and_detect_upward_weight() {
    let n = 30;
    let mut rng = ChaCha8Rng::seed_from_u64(22);
    let mut ps = Vec::new();
    for _ in 0..SEEDS {
        let h: Vec<f64> = (0..n).map(|_| normal(&mut rng)).collect();
        let w = directed_graph(n, &h, false, &mut rng);
        ps.push(p_value(NullModel::named("degree-swap"), &w, None, true, &|m| upward_flow(m, &h), &mut rng));
    }
    let (ks, p) = ks_uniform(&ps).unwrap();
    assert!(p > 0.01, "directed degree-swap: p-values not uniform, KS D = {ks}, p = {p}");
    let mut detected = 0;
    for _ in 0..10 {
        let h: Vec<f64> = (0..n).map(|_| normal(&mut rng)).collect();
        let w = directed_graph(n, &h, true, &mut rng);
        if p_value(NullModel::named("degree-swap"), &w, None, true, &|m| upward_flow(m, &h), &mut rng) <= 0.05
        {
            detected += 1;
        }
    }
    assert!(detected >= 9, "planted upward weight detected in {detected} of 10");
}

#[test]
fn mirrored_nulls_of_a_directed_graph_would_be_biased() {
    // Why directed nulls matter: symmetrising a directed graph with planted upward weight and
    // comparing against its (undirected) nulls cannot see the effect at all, since the mirrored
    // statistic is identically zero.
    let n = 30;
    let mut rng = ChaCha8Rng::seed_from_u64(23);
    let h: Vec<f64> = (0..n).map(|_| normal(&mut rng)).collect();
    let w = directed_graph(n, &h, true, &mut rng);
    let mirrored = Array2::from_shape_fn((n, n), |(a, b)| if a < b { w[[a, b]] } else { w[[b, a]] });
    assert!(upward_flow(&mirrored, &h).abs() < 1e-9 * w.sum());
    assert!(upward_flow(&w, &h) > 0.0);
}

#[test]
fn the_subject_job_refuses_swap_nulls_on_a_complete_graph_and_says_why() {
    use crate::util::{hierax, run, write};
    let dir = tempfile::tempdir().unwrap();
    let n = 12;
    let mut conn = String::new();
    let mut map = String::new();
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let mut bold = String::new();
    for i in 0..n {
        let row: Vec<&str> = (0..n).map(|j| if i == j { "0" } else { "1" }).collect();
        conn += &format!("{}\n", row.join(","));
        map += &format!("{}\n", i);
    }
    for _ in 0..200 {
        let row: Vec<String> = (0..n).map(|_| format!("{:.6}", normal(&mut rng))).collect();
        bold += &format!("{}\n", row.join(","));
    }
    let c = write(dir.path(), "sub-01_connectome.csv", &conn);
    let m = write(dir.path(), "map.csv", &map);
    let b = write(dir.path(), "sub-01_bold.csv", &bold);
    let out = dir.path().join("out");
    let o = run(hierax()
        .args(["subject", "--tr", "2", "--bins", "4", "--network-nulls", "50"])
        .arg("--connectome")
        .arg(&c)
        .arg("--map")
        .arg(&m)
        .arg("--series")
        .arg(&b)
        .arg("--out")
        .arg(&out));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success(), "{err}");
    assert!(
        err.contains("degree-swap nulls cannot randomise this network: the connectome is 100 % dense"),
        "{err}"
    );
    assert!(err.contains("use the weight-permutation or length-bin-shuffle null model"), "{err}");
    assert!(!err.contains("p = 1") && !out.join("sub-01").exists(), "{err}");
    // And equal weights cannot be permuted either.
    let o = run(hierax()
        .args([
            "subject",
            "--tr",
            "2",
            "--bins",
            "4",
            "--network-nulls",
            "50",
            "--null-model",
            "weight-permutation",
        ])
        .arg("--connectome")
        .arg(&c)
        .arg("--map")
        .arg(&m)
        .arg("--series")
        .arg(&b)
        .arg("--out")
        .arg(&out));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success(), "{err}");
    assert!(err.contains("all 66 edge weights are equal, so reassigning them changes nothing"), "{err}");
}
