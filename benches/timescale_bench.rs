//! Benchmark (not a test): hierax's ACF + the three ACF-threshold estimators
//! against a vectorised numpy rfft autocorrelation, in one run, on the same
//! matrices. Prints wall time of each, their ratio, hierax's peak memory
//! relative to the input array, and a cross-check of the estimates.
//!
//! Run: `cargo bench --bench timescale_bench` (needs numpy under `$HIERAX_REF_PYTHON`, default `python3`;
//! set HIERAX_BENCH_SMALL_ONLY=1 to skip the 91,282-region case).
//! The data are invented: AR(1) series with coefficients spread over
//! 0.3..0.95, seeded.

use hierax::timescale::acf::fast_fft_len;
use hierax::timescale::{estimate_timescales, Estimator, TimescaleParams};
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::path::Path;
use std::process::Command;
use std::time::Instant;

const TR_S: f64 = 0.72; // common multiband resting-state TR (common practice, no source)

fn make(n_frames: usize, n_regions: usize, seed: u64) -> Array2<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let phis: Vec<f64> = (0..n_regions).map(|_| rng.random_range(0.3..0.95)).collect();
    let mut x = Array2::<f64>::zeros((n_frames, n_regions));
    let mut prev: Vec<f64> = vec![0.0; n_regions];
    for t in 0..n_frames {
        let mut row = x.row_mut(t);
        for j in 0..n_regions {
            let e: f64 = StandardNormal.sample(&mut rng);
            prev[j] = phis[j] * prev[j] + e;
            row[j] = prev[j];
        }
    }
    x
}

fn vm_hwm_bytes() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024)
}

fn reset_hwm() -> bool {
    // Linux: writing 5 to clear_refs resets the peak resident set size.
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

fn case(label: &str, n_frames: usize, n_regions: usize, max_lag: usize, repeats: usize, dir: &Path) {
    println!("== {label}: {n_regions} regions x {n_frames} frames, lags 0..={max_lag}, TR {TR_S} s");
    let x = make(n_frames, n_regions, 42);
    let input_bytes = (x.len() * 8) as u64;
    let path = dir.join(format!("{label}.npy"));
    ndarray_npy::write_npy(&path, &x).expect("write npy");
    let nfft = fast_fft_len(n_frames + max_lag);
    let check = 200.min(n_regions);

    let out = Command::new(std::env::var("HIERAX_REF_PYTHON").unwrap_or_else(|_| "python3".into()))
        .arg(concat!(env!("CARGO_MANIFEST_DIR"), "/benches/timescale_numpy.py"))
        .arg(&path)
        .args([
            max_lag.to_string(),
            TR_S.to_string(),
            nfft.to_string(),
            repeats.to_string(),
            check.to_string(),
        ])
        .output()
        .expect("python runs");
    let command_s = command_seconds(&path, max_lag, repeats, dir);
    let _ = std::fs::remove_file(&path);
    let text = String::from_utf8_lossy(&out.stdout);
    let py: serde_json::Value = match serde_json::from_str(text.trim()) {
        Ok(v) => v,
        Err(_) => {
            eprintln!("numpy baseline failed:\n{}", String::from_utf8_lossy(&out.stderr));
            return;
        }
    };

    let names: Vec<String> = (0..n_regions).map(|j| format!("r{j}")).collect();
    let mut p = TimescaleParams::new(TR_S);
    p.estimators =
        vec![Estimator::named("initial-positive-sum"), Estimator::named("acw50"), Estimator::named("acw0")];
    p.max_lag = Some(max_lag);
    let v = p.check(n_frames).expect("params");
    let reset = reset_hwm();
    let mut best = f64::INFINITY;
    let mut res = None;
    for _ in 0..repeats {
        let t0 = Instant::now();
        let r = estimate_timescales(x.view(), &names, None, &[], &v).expect("runs");
        best = best.min(t0.elapsed().as_secs_f64());
        res = Some(r);
    }
    let hwm = vm_hwm_bytes();
    let res = res.expect("at least one repeat");

    let py_s = py["seconds"].as_f64().unwrap_or(f64::NAN);
    println!("  hierax  {:>10.4} s  (best of {repeats}, {} threads)", best, rayon::current_num_threads());
    println!(
        "  numpy   {:>10.4} s  (best of {repeats}, numpy {})",
        py_s,
        py["numpy"].as_str().unwrap_or("?")
    );
    println!("  ratio numpy / hierax = {:.2}x", py_s / best);
    println!(
        "  hierax timescales command {command_s:>8.4} s  (best of {repeats}: read or map, digest, validate, estimate, write)"
    );
    println!("  ratio numpy estimate alone / whole command = {:.2}x", py_s / command_s);
    match (reset, hwm) {
        (true, Some(h)) => println!(
            "  hierax peak RSS during estimation {:.1} MB = {:.3} x input ({:.1} MB)",
            h as f64 / 1e6,
            h as f64 / input_bytes as f64,
            input_bytes as f64 / 1e6
        ),
        _ => println!("  hierax peak RSS: not measurable here"),
    }
    if let Some(pk) = py["peak_rss_bytes"].as_f64() {
        println!("  numpy peak RSS {:.1} MB = {:.2} x input", pk / 1e6, pk / input_bytes as f64);
    }
    // Cross-check: both implement the same definitions.
    let mut worst = 0.0f64;
    for (key, get) in [
        (
            "acw0_interp",
            &(|r: &hierax::timescale::RegionResult| r.estimates.raw_value("acw0_interp_s"))
                as &dyn Fn(&_) -> f64,
        ),
        ("acw50_interp", &|r: &hierax::timescale::RegionResult| r.estimates.raw_value("acw50_interp_s")),
        ("ips", &|r: &hierax::timescale::RegionResult| r.estimates.raw_value("ips_tau_s")),
    ] {
        if let Some(vals) = py["check"][key].as_array() {
            for (r, pv) in res.regions.iter().zip(vals) {
                if let Some(pv) = pv.as_f64() {
                    worst = worst.max((get(r) - pv).abs());
                }
            }
        }
    }
    println!("  max |hierax - numpy| over the first {check} regions: {worst:.2e} s");
}

/// Best wall seconds of `hierax timescales` on the same file and estimators.
fn command_seconds(path: &Path, max_lag: usize, repeats: usize, dir: &Path) -> f64 {
    let out = dir.join("command-out");
    (0..repeats)
        .map(|_| {
            let t0 = Instant::now();
            let o = Command::new(env!("CARGO_BIN_EXE_hierax"))
                .arg("timescales")
                .arg(path)
                .args(["--tr", &TR_S.to_string(), "--orientation", "time-by-region", "--max-lag"])
                .arg(max_lag.to_string())
                .args(["--estimator", "initial-positive-sum,acw50,acw0", "--out"])
                .arg(&out)
                .output()
                .expect("run hierax");
            assert!(o.status.success(), "hierax timescales failed: {}", String::from_utf8_lossy(&o.stderr));
            t0.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn main() {
    let dir = std::env::temp_dir().join(format!("hierax-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    println!("(shared 2-core machine: timings are indicative)");
    case("small", 1200, 400, 300, 20, &dir);
    if std::env::var_os("HIERAX_BENCH_SMALL_ONLY").is_none() {
        case("large", 1200, 91_282, 300, 1, &dir);
    }
    let _ = std::fs::remove_dir_all(&dir);
}
