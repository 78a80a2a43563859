//! End-to-end benchmark of the `hierax energy` command (run with
//! `cargo bench --bench energy_command`).
//!
//! The whole command (read and validate the connectome, digest the inputs,
//! build k = 20 states from a map, decompose, all 400 energies, node metrics,
//! write six files) on an invented random network of n = 400 and n = 1000
//! regions, stored as `.npy` and as `.csv`, against numpy's `linalg.eigh` of
//! the same matrix in the same run (benches/control_numpy.py under
//! `$HIERAX_REF_PYTHON`, default `python3`), with the thread count pinned
//! equal on both sides. Goal: the command within 1.5x of that single eigh.
//!
//! A second table times the command's stages in process through the library
//! (the same calls `hierax energy` makes), each as a share of the system's
//! eigendecomposition (faer `self_adjoint_evd`, values and vectors) timed in
//! the same run: what stands between the command and one eigendecomposition.
//!
//! The machine is shared; figures are medians of 7 and indicative only.

use hierax::control::{energy_matrix, node_metrics, Par, System, SystemParams};
use hierax::export;
use hierax::hierarchy::{build_states, StatesParams};
use hierax::io::provenance::InputRecord;
use hierax::io::validate::{self, ConnectomeRules};
use hierax::io::{read_array, InputSpec};
use ndarray::{Array1, Array2};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::io::Write;
use std::path::Path;
use std::process::Command;
use std::time::Instant;

#[path = "support/numpy_eigh.rs"]
mod numpy_eigh;
#[path = "support/random_network.rs"]
mod random_network;
use random_network::network;

const REPS: usize = 7;

/// A headerless CSV with numbers in Rust's shortest round-trip form (as long
/// as numpy's `%.17g`), zeros written `0`.
fn write_csv(path: &Path, a: &Array2<f64>) {
    let mut out = std::io::BufWriter::new(std::fs::File::create(path).expect("create csv"));
    for row in a.rows() {
        let cells: Vec<String> = row.iter().map(|v| format!("{v}")).collect();
        writeln!(out, "{}", cells.join(",")).expect("write csv");
    }
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Median wall seconds of `hierax energy CONNECTOME --map MAP --bins 20`.
fn command_seconds(conn: &Path, map: &Path, out: &Path, threads: usize) -> f64 {
    let run = || {
        let t = Instant::now();
        let o = Command::new(env!("CARGO_BIN_EXE_hierax"))
            .arg("energy")
            .arg(conn)
            .args(["--map".as_ref(), map.as_os_str(), "--bins".as_ref(), "20".as_ref(), "--out".as_ref()])
            .arg(out)
            .env("RAYON_NUM_THREADS", threads.to_string())
            .output()
            .expect("run hierax");
        assert!(o.status.success(), "hierax energy failed: {}", String::from_utf8_lossy(&o.stderr));
        t.elapsed().as_secs_f64()
    };
    run(); // warm-up (page cache)
    median((0..REPS).map(|_| run()).collect())
}

/// Median seconds of `f` over [`REPS`] runs after one warm-up.
fn time<T>(mut f: impl FnMut() -> T) -> f64 {
    std::hint::black_box(f());
    median(
        (0..REPS)
            .map(|_| {
                let t = Instant::now();
                std::hint::black_box(f());
                t.elapsed().as_secs_f64()
            })
            .collect(),
    )
}

/// The command's stages, one at a time, on one thread.
fn stages(conn: &Path, map: &Path, out: &Path) {
    let spec = InputSpec::new(conn, None);
    let mspec = InputSpec::new(map, None);
    let la = read_array(&spec).expect("read");
    let c = validate::connectome(&la, &ConnectomeRules::default()).expect("valid");
    let n = c.weights.nrows();
    let values = read_array(&mspec).expect("map").vector().expect("vector").to_vec();
    let x = build_states(&values, &StatesParams::new(20)).expect("states").matrix;
    let p = SystemParams::new().check(n).expect("params");
    let sys = System::new(c.weights.view(), false, &p, Par::Seq).expect("system");
    let (e, _) = energy_matrix(&sys, x.view()).expect("energy");
    let metrics = node_metrics(&sys).expect("metrics");
    let eig = time(|| {
        let a = faer::Mat::from_fn(n, n, |i, j| c.weights[[i, j]]);
        a.self_adjoint_eigen(faer::Side::Lower).expect("eig")
    });
    let names = hierax::io::default_region_names(n);
    let rows: Vec<(&str, f64)> = vec![
        ("read (with digest)", time(|| read_array(&spec).expect("read"))),
        ("digest again (file pass)", time(|| InputRecord::of("connectome", &spec).expect("digest"))),
        ("validate", time(|| validate::connectome(&la, &ConnectomeRules::default()).expect("valid"))),
        (
            "system (eig + checks)",
            time(|| System::new(c.weights.view(), false, &p, Par::Seq).expect("system")),
        ),
        ("energy matrix, k = 20", time(|| energy_matrix(&sys, x.view()).expect("energy"))),
        ("node metrics", time(|| node_metrics(&sys).expect("metrics"))),
        (
            "tables written",
            time(|| {
                std::fs::create_dir_all(out).expect("out");
                export::energy::pairs_table(e.view(), None).write_csv(&out.join("energy.csv")).expect("w");
                export::energy::state_matrix_table(e.view()).write_csv(&out.join("m.csv")).expect("w");
                export::energy::node_metrics_table(&names, p.input_weights(), &metrics)
                    .write_csv(&out.join("nodes.csv"))
                    .expect("w");
            }),
        ),
    ];
    println!("  n = {n}, {}: faer eigendecomposition {:.4} s", spec.path.display(), eig);
    for (stage, s) in rows {
        println!("    {stage:<28} {s:>9.4} s {:>7.2}x eig", s / eig);
    }
}

fn main() {
    let dir = std::env::temp_dir().join(format!("hierax-energy-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    println!("hierax energy command against numpy eigh of the same matrix (shared 2-core machine; medians of {REPS})");
    println!(
        "{:>6} {:>8} {:>7} {:>12} {:>12} {:>7}",
        "n", "threads", "input", "hierax s", "numpy s", "ratio"
    );
    for n in [400usize, 1000] {
        let a = network(n, n as u64);
        let npy = dir.join(format!("conn{n}.npy"));
        let csv = dir.join(format!("conn{n}.csv"));
        ndarray_npy::write_npy(&npy, &a).expect("write npy");
        write_csv(&csv, &a);
        let mut rng = ChaCha8Rng::seed_from_u64(n as u64 ^ 0x5eed);
        let map = Array1::from_iter((0..n).map(|_| rng.random::<f64>()));
        let map_path = dir.join(format!("map{n}.npy"));
        ndarray_npy::write_npy(&map_path, &map).expect("write map");
        for threads in [1usize, 2] {
            let numpy = numpy_eigh::eigh_seconds(&npy, REPS, threads);
            for (label, conn) in [("npy", &npy), ("csv", &csv)] {
                let out = dir.join(format!("out-{n}-{threads}-{label}"));
                let ours = command_seconds(conn, &map_path, &out, threads);
                match numpy {
                    Some(np) => {
                        println!("{n:>6} {threads:>8} {label:>7} {ours:>12.4} {np:>12.4} {:>6.2}x", ours / np)
                    }
                    None => println!("{n:>6} {threads:>8} {label:>7} {ours:>12.4} {:>12} {:>7}", "n/a", "-"),
                }
            }
        }
    }
    println!("stages in process, 1 thread (medians of {REPS}):");
    for n in [400usize, 1000] {
        for ext in ["npy", "csv"] {
            stages(
                &dir.join(format!("conn{n}.{ext}")),
                &dir.join(format!("map{n}.npy")),
                &dir.join("stages"),
            );
        }
    }
    std::fs::remove_dir_all(&dir).ok();
}
