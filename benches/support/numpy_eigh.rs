//! The numpy `eigh` baseline shared by the benches: benches/control_numpy.py
//! under `$HIERAX_REF_PYTHON` (default `python3`), OpenBLAS pinned to the
//! same thread count as the hierax side so neither is oversubscribed.

/// Median seconds of numpy's `linalg.eigh` of the matrix in `npy` over
/// `reps` runs on `threads` threads, or `None` when the baseline cannot run.
pub fn eigh_seconds(npy: &std::path::Path, reps: usize, threads: usize) -> Option<f64> {
    let python = std::env::var("HIERAX_REF_PYTHON").unwrap_or_else(|_| "python3".into());
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/benches/control_numpy.py");
    let o = std::process::Command::new(python)
        .arg(script)
        .arg(npy)
        .arg(reps.to_string())
        .env("OPENBLAS_NUM_THREADS", threads.to_string())
        .env("OMP_NUM_THREADS", threads.to_string())
        .output()
        .ok()?;
    if !o.status.success() {
        return None;
    }
    String::from_utf8_lossy(&o.stdout).trim().parse::<f64>().ok()
}
