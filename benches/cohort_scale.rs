//! Cohort scale: wall time and peak memory of `hierax cohort run` on
//! synthetic cohorts of 100, 1,000 and 10,000 units (n = 200 regions,
//! 1,200 frames, k = 16 states, no nulls), whose files are symlinks to four
//! generated subjects (invented data). Optionally the same with network nulls
//! per unit, for sizing cluster jobs.
//!
//! ```text
//! cargo bench --bench cohort_scale                      # 100, 1000, 10000 units
//! cargo bench --bench cohort_scale -- 100 1000          # chosen sizes
//! HIERAX_BENCH_NULLS=1000 cargo bench --bench cohort_scale -- 20
//! ```
//! Peak RSS is each child's own maximum resident set (wait4), one process per size.
//! Research software: results are not for clinical decisions.

use hierax::io::table::{Column, Table};
use ndarray::{Array2, ArrayD};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, LogNormal, Normal};
use std::path::Path;
use std::process::Command;
use std::time::Instant;

const N: usize = 200;
const FRAMES: usize = 1200;
const BASE: usize = 4;

fn make_base(dir: &Path) {
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let lognormal = LogNormal::new(0.0, 1.0).unwrap();
    let normal = Normal::new(0.0, 1.0).unwrap();
    let names: Vec<String> = hierax::io::default_region_names(N);
    let header = names.clone();
    let map: Vec<f64> = (0..N).map(|i| i as f64 / N as f64 + 0.05 * rng.random::<f64>()).collect();
    Table::new()
        .with("region", Column::Str(names))
        .with("value", Column::F64(map.clone()))
        .write_csv(&dir.join("map.csv"))
        .unwrap();
    for b in 0..BASE {
        let mut w = Array2::<f64>::zeros((N, N));
        for i in 0..N {
            for j in (i + 1)..N {
                let v = lognormal.sample(&mut rng);
                w[[i, j]] = v;
                w[[j, i]] = v;
            }
        }
        let mut t = Table::new();
        for (j, name) in header.iter().enumerate() {
            t = t.with(name, Column::F64(w.column(j).to_vec()));
        }
        t.write_csv(&dir.join(format!("base{b}_connectome.csv"))).unwrap();
        // AR(1) series whose coefficient rises along the map (a planted timescale gradient).
        let mut x = Array2::<f64>::zeros((FRAMES, N));
        for j in 0..N {
            let phi = 0.3 + 0.6 * map[j].min(1.0);
            let mut prev = 0.0;
            for t in 0..FRAMES {
                prev = phi * prev + normal.sample(&mut rng);
                x[[t, j]] = prev;
            }
        }
        hierax::io::npy::write_npy_f64(&dir.join(format!("base{b}_bold.npy")), &ArrayD::from(x.into_dyn()))
            .unwrap();
    }
}

fn make_cohort(base: &Path, dir: &Path, units: usize) {
    std::fs::create_dir_all(dir).unwrap();
    let mut p = String::from("participant_id\tage\n");
    for u in 0..units {
        let id = format!("sub-{:05}", u + 1);
        p.push_str(&format!("{id}\t{}\n", 8.0 + (u % 15) as f64));
        let s = dir.join(&id);
        std::fs::create_dir_all(&s).unwrap();
        let b = u % BASE;
        for (from, to) in [("connectome.csv", "connectome.csv"), ("bold.npy", "bold.npy")] {
            let link = s.join(format!("{id}_{to}"));
            if !link.exists() {
                std::os::unix::fs::symlink(base.join(format!("base{b}_{from}")), &link).unwrap();
            }
        }
    }
    std::fs::write(dir.join("participants.tsv"), p).unwrap();
}

/// Wait for child `pid` and return (exited 0, its own peak RSS in MB; Linux reports KiB).
fn wait_with_peak_rss_mb(pid: u32) -> (bool, f64) {
    let mut ru = std::mem::MaybeUninit::<libc::rusage>::zeroed();
    let mut status: libc::c_int = 0;
    // SAFETY: wait4 writes the status and the rusage of the reaped child into the given pointers.
    let r = unsafe { libc::wait4(pid as libc::pid_t, &mut status, 0, ru.as_mut_ptr()) };
    if r != pid as libc::pid_t {
        return (false, f64::NAN);
    }
    // SAFETY: initialised by the successful call above.
    let ru = unsafe { ru.assume_init() };
    (libc::WIFEXITED(status) && libc::WEXITSTATUS(status) == 0, ru.ru_maxrss as f64 / 1024.0)
}

fn main() {
    let sizes: Vec<usize> = std::env::args().skip(1).filter_map(|a| a.parse().ok()).collect();
    let sizes = if sizes.is_empty() { vec![100, 1_000, 10_000] } else { sizes };
    let nulls: usize = std::env::var("HIERAX_BENCH_NULLS").ok().and_then(|v| v.parse().ok()).unwrap_or(0);
    // The synthetic connectomes are complete graphs, where edge swaps are refused.
    let model = std::env::var("HIERAX_BENCH_NULL_MODEL").unwrap_or_else(|_| "weight-permutation".into());
    let exe = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/release/hierax");
    if !exe.is_file() {
        eprintln!("build the binary first: cargo build --release");
        std::process::exit(2);
    }
    let root = std::env::temp_dir().join("hierax-cohort-scale");
    let base = root.join("base");
    if !base.join("map.csv").exists() {
        std::fs::create_dir_all(&base).unwrap();
        make_base(&base);
    }
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get());
    println!(
        "cohort_scale: n = {N} regions, {FRAMES} frames, k = 16, {nulls} network nulls, {threads} threads"
    );
    println!(
        "{:>8} {:>10} {:>12} {:>12} {:>14}",
        "units", "wall s", "units/s", "peak RSS MB", "units/h/core"
    );
    for &units in &sizes {
        let data = root.join(format!("cohort-{units}"));
        make_cohort(&base, &data, units);
        let out = root.join(format!("out-{units}-{nulls}"));
        let _ = std::fs::remove_dir_all(&out);
        // One child per size, reaped with wait4 so that the peak RSS is that child's own.
        let start = Instant::now();
        #[allow(clippy::zombie_processes)] // reaped by wait4 in wait_with_peak_rss_mb
        let child = Command::new("/bin/sh")
            .arg("-c")
            .arg(format!(
                "exec {} cohort run --quiet --tr 0.8 --bins 16 --no-censoring --confounds-pattern none \
                 --map {} --data {} --out {} --network-nulls {nulls} --null-model {model} > /dev/null",
                exe.display(),
                base.join("map.csv").display(),
                data.display(),
                out.display()
            ))
            .spawn()
            .unwrap();
        let (ok, rss) = wait_with_peak_rss_mb(child.id());
        let wall = start.elapsed().as_secs_f64();
        assert!(ok, "cohort run failed at {units} units");
        println!(
            "{units:>8} {wall:>10.1} {:>12.1} {rss:>12.1} {:>14.0}",
            units as f64 / wall,
            units as f64 / wall * 3600.0 / threads as f64
        );
        let _ = std::fs::remove_dir_all(&out);
    }
}
