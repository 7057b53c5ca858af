//! Reproducible random streams: every posterior draw and every path gets its own ChaCha8
//! stream derived from `(seed, purpose, index)`, so results do not depend on how work is
//! split across threads.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

/// What a stream is used for (keeps the streams of different purposes apart).
#[derive(Debug, Clone, Copy)]
pub enum Purpose {
    Parameters = 1,
    Paths = 2,
    /// Corridor-probability estimates behind importance weights.
    Weights = 3,
    /// The scenario checks' own estimates.
    Checks = 4,
    /// Each θ's acceptance estimate before sampling.
    Acceptance = 5,
}

/// SplitMix64 finaliser (Steele, Lea and Flood 2014): spreads nearby seeds apart.
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The stream for `(seed, purpose, index)`.
pub fn stream(seed: u64, purpose: Purpose, index: u64) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(mix(seed ^ mix(purpose as u64)));
    rng.set_stream(index);
    rng
}
