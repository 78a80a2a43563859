//! What each network null model does to a dense, real-like connectome (the
//! invented demo's sub-01: 100 regions, 93 % dense) and to a directed one
//! (invented from it: every ordered pair kept with probability 0.3, weights
//! jittered independently per direction): accepted-swap share, share of
//! edges changed, strength error, the null spread of two outcomes
//! (bottom-up minus top-down energy, asymmetry potential share; k = 10 states
//! from the demo map), refusals, and a planted-null calibration on the same
//! connectome (a random map independent of the network per seed, statistic
//! Σ w_ab h_a h_b, one-sided permutation p-values, KS test for uniformity).
//! Time per null is printed as a ratio to degree-swap in the same run.
//!
//! Run: `cargo bench --bench nulls` (figures are indicative on a shared machine).

use hierax::control::{energy_matrix, Par, System, SystemParams};
use hierax::hierarchy::{build_states, StatesParams};
use hierax::io::{read_array, InputSpec};
use hierax::link::{pair_table, summarise};
use hierax::stats::inference::{ks_uniform, permutation_p_value, Alternative};
use hierax::stats::nulls::{assess, rewire, Network, NullModel, NullParams};
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use std::time::Instant;

const NULLS: usize = 100;
const CAL_SEEDS: u64 = 100;
const CAL_NULLS: usize = 99;
const K: usize = 10;

fn demo(rel: &str) -> Array2<f64> {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data").join(rel);
    read_array(&InputSpec::new(path, None)).expect("demo data").matrix().expect("a matrix")
}

fn directed_from(w: &Array2<f64>, seed: u64) -> Array2<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let n = w.nrows();
    let mut d = Array2::from_shape_fn((n, n), |(a, b)| {
        if a != b && rng.random_bool(0.3) {
            w[[a, b]] * (0.5 * (rng.random::<f64>() - 0.5)).exp()
        } else {
            0.0
        }
    });
    // A directed ring keeps every region reachable.
    for a in 0..n {
        let b = (a + 1) % n;
        d[[a, b]] = d[[a, b]].max(w[[a, b]]).max(1e-3);
    }
    d
}

fn outcomes(w: &Array2<f64>, directed: bool, x: &Array2<f64>) -> Option<(f64, f64)> {
    let p = SystemParams::new().check(w.nrows()).ok()?;
    let sys = System::new(w.view(), directed, &p, Par::Seq).ok()?;
    let (e, _) = energy_matrix(&sys, x.view()).ok()?;
    let s = summarise(&pair_table(&e, None).ok()?).ok()?;
    Some((s.bottom_up_minus_top_down, s.asymmetry_decomposition.potential_share))
}

fn sd(v: &[f64]) -> f64 {
    let m = v.iter().sum::<f64>() / v.len() as f64;
    (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (v.len() as f64 - 1.0)).sqrt()
}

fn report(name: &str, w: &Array2<f64>, d: &Array2<f64>, directed: bool, x: &Array2<f64>) {
    let net = Network::new(w.view(), Some(d.view()), directed).expect("valid network");
    let observed = outcomes(w, directed, x).expect("observed outcomes");
    println!(
        "\n{name}: {} regions, {} edges, density {:.3}; observed bottom-up minus top-down {:.4e}, potential share {:.4}",
        net.n_regions(),
        net.n_edges(),
        net.density(),
        observed.0,
        observed.1
    );
    println!(
        "{:<20} {:>9} {:>9} {:>9} {:>12} {:>12} {:>8} {:>10}  verdict",
        "model", "accepted", "changed", "s_error", "sd(bu-td)", "sd(share)", "KS p", "t/null"
    );
    let params = NullParams::default();
    let mut baseline = None;
    for model in NullModel::ALL {
        let t0 = Instant::now();
        let runs: Vec<_> = (0..NULLS)
            .into_par_iter()
            .map(|i| {
                let mut rng = ChaCha8Rng::seed_from_u64(1000 + i as u64);
                rewire(model, &net, &params, &mut rng).expect("rewire")
            })
            .collect();
        let per_null = t0.elapsed().as_secs_f64() / NULLS as f64;
        let base = *baseline.get_or_insert(per_null);
        let infos: Vec<_> = runs.iter().map(|r| r.1.clone()).collect();
        let verdict = assess(model, &net, &infos);
        let mean = |f: &dyn Fn(&hierax::stats::nulls::RewireInfo) -> f64| {
            infos.iter().map(f).sum::<f64>() / NULLS as f64
        };
        let accepted = infos[0].swaps_attempted.map(|_| {
            infos.iter().map(|i| i.swaps_accepted.unwrap() as f64).sum::<f64>()
                / infos.iter().map(|i| i.swaps_attempted.unwrap() as f64).sum::<f64>()
        });
        let (spread_bu, spread_share, ks_p) = match &verdict {
            Ok(_) => {
                let vals: Vec<(f64, f64)> =
                    runs.par_iter().filter_map(|(m, _)| outcomes(m, directed, x)).collect();
                let bu: Vec<f64> = vals.iter().map(|v| v.0).collect();
                let share: Vec<f64> = vals.iter().map(|v| v.1).collect();
                (sd(&bu), sd(&share), calibration(model, &net, w))
            }
            Err(_) => (f64::NAN, f64::NAN, f64::NAN),
        };
        println!(
            "{:<20} {:>9} {:>9.3} {:>9.4} {:>12.4e} {:>12.4e} {:>8.3} {:>9.2}x  {}",
            model.label(),
            accepted.map_or("-".to_string(), |a| format!("{a:.4}")),
            mean(&|i| i.edges_changed),
            mean(&|i| i.strength_error),
            spread_bu,
            spread_share,
            ks_p,
            per_null / base,
            match verdict {
                Ok(_) => "used".to_string(),
                Err(e) => format!("refused: {e}"),
            }
        );
    }
}

/// KS p-value of the planted-null p-values over random maps independent of the network.
fn calibration(model: NullModel, net: &Network<'_>, w: &Array2<f64>) -> f64 {
    let n = w.nrows();
    let ps: Vec<f64> = (0..CAL_SEEDS)
        .into_par_iter()
        .map(|seed| {
            let mut rng = ChaCha8Rng::seed_from_u64(77 + seed);
            let h: Vec<f64> = (0..n).map(|_| rng.random::<f64>() - 0.5).collect();
            let stat = |m: &Array2<f64>| m.indexed_iter().map(|((a, b), v)| v * h[a] * h[b]).sum::<f64>();
            let null: Vec<f64> = (0..CAL_NULLS)
                .map(|_| stat(&rewire(model, net, &NullParams::default(), &mut rng).expect("rewire").0))
                .collect();
            permutation_p_value(stat(w), &null, Alternative::Greater).expect("p")
        })
        .collect();
    ks_uniform(&ps).expect("ks").1
}

fn main() {
    let mut w = demo("sub-01/sub-01_connectome.csv");
    for i in 0..w.nrows() {
        w[[i, i]] = 0.0;
    }
    let d = demo("atlas/distances.npy");
    let map = read_array(&InputSpec::new(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/atlas/hierarchy.csv"),
        None,
    ))
    .expect("map")
    .vector()
    .expect("a vector")
    .to_vec();
    let x = build_states(&map, &StatesParams::new(K)).expect("states").matrix;
    println!("network nulls: {NULLS} nulls per model, calibration over {CAL_SEEDS} random maps x {CAL_NULLS} nulls");
    report("dense undirected (invented demo sub-01)", &w, &d, false, &x);
    report("directed (invented from demo sub-01)", &directed_from(&w, 5), &d, true, &x);
}
