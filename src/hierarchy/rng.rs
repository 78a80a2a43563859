//! Seeded random streams for surrogates.

use rand::SeedableRng;
use rand_chacha::ChaCha20Rng;

/// The generator of surrogate `index` under `seed`: ChaCha20 seeded from
/// `seed` (rand's `seed_from_u64`) on stream `index`, so every surrogate has
/// its own reproducible stream whatever the thread count or chunking.
pub fn stream(seed: u64, index: usize) -> ChaCha20Rng {
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    rng.set_stream(index as u64);
    rng
}
