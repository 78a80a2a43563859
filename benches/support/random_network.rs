//! The invented random network shared by the control benches and `tests/control.rs`.

use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Random symmetric weighted network (invented), ~30 % density, a ring of
/// weight ≥ 0.1 so no region is isolated.
pub fn network(n: usize, seed: u64) -> Array2<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut a = Array2::zeros((n, n));
    for i in 0..n {
        for j in (i + 1)..n {
            if rng.random::<f64>() < 0.3 {
                let w: f64 = rng.random();
                a[[i, j]] = w;
                a[[j, i]] = w;
            }
        }
        let j = (i + 1) % n;
        a[[i, j]] = a[[i, j]].max(0.1);
        a[[j, i]] = a[[i, j]];
    }
    a
}
