//! Symmetric eigensolver candidates (all pure Rust, `cargo build` only)
//! against numpy's `linalg.eigh` (LAPACK syevd through OpenBLAS) on the same
//! matrices, at n = 400, 1,000 and 2,000, with 1 and 2 threads pinned equal
//! on both sides:
//!
//! - faer `self_adjoint_evd` with its default tuning, sequential and on 2 threads;
//! - the same on 2 threads with the tridiagonalisation kept parallel down to
//!   small trailing blocks (`par_threshold` 64², faer's default is 192 × 256);
//! - the same with a larger divide-and-conquer base case (`recursion_threshold`
//!   256, faer's default 128).
//!
//! ```text
//! HIERAX_REF_PYTHON=/path/to/venv/bin/python cargo bench --bench eigensolver
//! ```
//! numpy runs benches/control_numpy.py under `$HIERAX_REF_PYTHON` (default
//! `python3`; numpy 2.1.3 when measured). Medians over repeats; the machine is
//! shared, so the figures are indicative. Invented random matrices.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::evd::{self, ComputeEigenvectors, SelfAdjointEvdParams};
use faer::{Auto, Mat, Par};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::time::Instant;

#[path = "support/numpy_eigh.rs"]
mod numpy_eigh;

/// Random symmetric matrix with entries uniform in [0, 1) (invented).
fn matrix(n: usize, seed: u64) -> Mat<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut a = Mat::<f64>::zeros(n, n);
    for i in 0..n {
        for j in i..n {
            let v: f64 = rng.random();
            a[(i, j)] = v;
            a[(j, i)] = v;
        }
    }
    a
}

fn eig(a: &Mat<f64>, par: Par, params: SelfAdjointEvdParams) -> f64 {
    let n = a.nrows();
    let mut u = Mat::<f64>::zeros(n, n);
    let mut s = faer::diag::Diag::<f64>::zeros(n);
    let req = evd::self_adjoint_evd_scratch::<f64>(n, ComputeEigenvectors::Yes, par, params.into());
    let mut buf = MemBuffer::new(req);
    evd::self_adjoint_evd(
        a.as_ref(),
        s.as_mut(),
        Some(u.as_mut()),
        par,
        MemStack::new(&mut buf),
        params.into(),
    )
    .expect("evd");
    s.column_vector()[0] + u[(0, 0)]
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn time(reps: usize, f: impl Fn() -> f64) -> f64 {
    std::hint::black_box(f());
    median(
        (0..reps)
            .map(|_| {
                let t0 = Instant::now();
                std::hint::black_box(f());
                t0.elapsed().as_secs_f64()
            })
            .collect(),
    )
}

fn main() {
    let dir = std::env::temp_dir().join(format!("hierax-eig-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    let default: SelfAdjointEvdParams = Auto::<f64>::auto();
    let mut eager = default;
    eager.tridiag.par_threshold = 64 * 64;
    let mut big_base = eager;
    big_base.recursion_threshold = 256;
    println!("symmetric eigendecomposition with eigenvectors (medians; ratio = candidate / numpy eigh, same threads)");
    println!(
        "{:>6} {:>8} {:>44} {:>10} {:>10} {:>7}",
        "n", "threads", "candidate", "ms", "numpy ms", "ratio"
    );
    for (n, reps) in [(400usize, 9usize), (1000, 5), (2000, 3)] {
        let a = matrix(n, n as u64);
        let path = dir.join(format!("a{n}.npy"));
        let arr = ndarray::Array2::from_shape_fn((n, n), |(i, j)| a[(i, j)]);
        ndarray_npy::write_npy(&path, &arr).expect("write npy");
        for threads in [1usize, 2] {
            let numpy = numpy_eigh::eigh_seconds(&path, reps, threads);
            let par = if threads == 1 { Par::Seq } else { Par::rayon(threads) };
            let mut candidates: Vec<(&str, SelfAdjointEvdParams)> = vec![("faer default", default)];
            if threads > 1 {
                candidates.push(("faer, parallel tridiagonalisation to 64²", eager));
                candidates.push(("faer, as above + D&C base case 256", big_base));
            }
            for (label, params) in candidates {
                let t = time(reps, || eig(&a, par, params));
                match numpy {
                    Some(np) => println!(
                        "{n:>6} {threads:>8} {label:>44} {:>10.1} {:>10.1} {:>7.2}",
                        t * 1e3,
                        np * 1e3,
                        t / np
                    ),
                    None => println!(
                        "{n:>6} {threads:>8} {label:>44} {:>10.1} {:>10} {:>7}",
                        t * 1e3,
                        "n/a",
                        "n/a"
                    ),
                }
            }
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
}
