//! Benchmark of `hierax::control` (run with `cargo bench --bench control_energy`).
//!
//! 1. The full k = 20 energy matrix (continuous time, B = I) for n = 400 and
//!    n = 1000, against numpy's `linalg.eigh` of the same matrix, timed in the
//!    same run (benches/control_numpy.py under `$HIERAX_REF_PYTHON`, default `python3`).
//!    Target: hierax's whole energy matrix within 1.5x of that single eigh.
//! 2. 1000 networks of n = 200, each with its 16 x 16 energy matrix, rayon
//!    over networks on 2 threads with one thread per faer call: networks/s.
//! 3. The cost of the most accurate route for partial driver sets: the k = 16
//!    energy matrix with every third node driven (continuous, T = 1), by the
//!    chosen square-root route (`gramian-factor`) against forming the Gramian
//!    (`modal-gramian` for undirected, `block-exponential` for directed
//!    networks), one thread, the system's eigendecomposition excluded.
//!    Alone: `cargo bench --bench control_energy -- routes`.
//!
//! The machine is shared; figures are medians and indicative only.

use hierax::control::{energy_matrix, energy_matrix_by, Drivers, Par, Route, System, SystemParams};
use hierax::hierarchy::{build_states, StatesParams};
use ndarray::{Array1, Array2};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use std::time::Instant;

#[path = "support/numpy_eigh.rs"]
mod numpy_eigh;
#[path = "support/random_network.rs"]
mod random_network;
use random_network::network;

fn states(n: usize, k: usize, seed: u64) -> Array2<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5eed);
    let map = Array1::from_iter((0..n).map(|_| rng.random::<f64>()));
    build_states(map.as_slice().expect("contiguous"), &StatesParams::new(k)).expect("k <= n").matrix
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn full_energy(a: &Array2<f64>, x: &Array2<f64>, par: Par) -> f64 {
    let p = SystemParams::new().check(a.nrows()).expect("valid");
    let sys = System::new(a.view(), false, &p, par).expect("system");
    let (e, _) = energy_matrix(&sys, x.view()).expect("energy");
    e.sum()
}

fn main() {
    if std::env::args().any(|a| a == "routes") {
        partial_driver_routes();
        return;
    }
    let dir = std::env::temp_dir().join(format!("hierax-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    println!("hierax control benchmark (shared 2-core machine; medians)");
    for (n, reps) in [(400usize, 9usize), (1000, 5)] {
        let a = network(n, n as u64);
        let x = states(n, 20, n as u64);
        let path = dir.join(format!("a{n}.npy"));
        ndarray_npy::write_npy(&path, &a).expect("write npy");
        for (label, par, threads) in [("2 threads", Par::rayon(2), 2), ("1 thread", Par::Seq, 1)] {
            let numpy_s = numpy_eigh::eigh_seconds(&path, reps, threads);
            full_energy(&a, &x, par);
            let t: Vec<f64> = (0..reps)
                .map(|_| {
                    let t0 = Instant::now();
                    std::hint::black_box(full_energy(&a, &x, par));
                    t0.elapsed().as_secs_f64()
                })
                .collect();
            let h = median(t);
            match numpy_s {
                Some(np) => println!(
                    "n = {n:4}, k = 20, {label}: hierax energy matrix {:.2} ms, numpy eigh {:.2} ms, ratio {:.2}",
                    h * 1e3,
                    np * 1e3,
                    h / np
                ),
                None => println!("n = {n:4}, k = 20, {label}: hierax energy matrix {:.2} ms (numpy baseline unavailable)", h * 1e3),
            }
        }
    }
    let _ = std::fs::remove_dir_all(&dir);

    let pool = rayon::ThreadPoolBuilder::new().num_threads(2).build().expect("pool");
    let (count, n, k) = (1000usize, 200usize, 16usize);
    let t0 = Instant::now();
    let gen: f64 = pool.install(|| {
        (0..count)
            .into_par_iter()
            .map(|s| network(n, s as u64)[[0, 1]] + states(n, k, s as u64)[[0, 0]])
            .sum()
    });
    let gen_s = t0.elapsed().as_secs_f64();
    let t0 = Instant::now();
    let total: f64 = pool.install(|| {
        (0..count)
            .into_par_iter()
            .map(|s| full_energy(&network(n, s as u64), &states(n, k, s as u64), Par::Seq))
            .sum()
    });
    let all_s = t0.elapsed().as_secs_f64();
    std::hint::black_box((gen, total));
    println!(
        "{count} networks of n = {n}, {k} x {k} energies each, 2 threads: {:.1} networks/s \
         ({:.2} s in all, of which generating the random networks {:.2} s)",
        count as f64 / all_s,
        all_s,
        gen_s
    );
    partial_driver_routes();
}

/// Section 3 (also alone: `cargo bench --bench control_energy -- routes`).
fn partial_driver_routes() {
    for (n, directed, reps) in [(100usize, false, 9usize), (200, false, 7), (400, false, 5), (200, true, 5)] {
        let mut a = network(n, 7 * n as u64);
        if directed {
            // Break the symmetry with a seeded random scaling of each entry.
            let mut rng = ChaCha8Rng::seed_from_u64(n as u64);
            a.mapv_inplace(|v| v * (0.5 + rng.random::<f64>()));
        }
        let x = states(n, 16, n as u64);
        let mut p = SystemParams::new();
        p.drivers = Drivers::Nodes((0..n).step_by(3).collect());
        let sys = System::new(a.view(), directed, &p.check(n).expect("valid"), Par::Seq).expect("system");
        let formed = if directed { Route::BlockExponential } else { Route::ModalGramian };
        let mut line = format!(
            "n = {n:4}, {} drivers, {}:",
            n.div_ceil(3),
            if directed { "directed" } else { "undirected" }
        );
        for route in [Route::GramianFactor, formed] {
            let t: Vec<f64> = (0..reps)
                .map(|_| {
                    let t0 = Instant::now();
                    let r =
                        energy_matrix_by(&sys, x.view(), route).map(|(e, i)| (e.sum(), i.gramian_condition));
                    std::hint::black_box(&r);
                    t0.elapsed().as_secs_f64()
                })
                .collect();
            let cond = energy_matrix_by(&sys, x.view(), route)
                .map(|(_, i)| format!("condition {:.1e}", i.gramian_condition))
                .unwrap_or_else(|e| format!("refused: {e}"));
            line.push_str(&format!(" {} {:.2} ms ({cond});", route.name(), median(t) * 1e3));
        }
        println!("{line}");
    }
}
