//! Test fixtures for the banded module: seeded random band SPD matrices.
//!
//! `A = G Gᵀ` with `G` lower triangular of half-bandwidth `w`, so `A` has
//! half-bandwidth exactly `w` and, by uniqueness of the Cholesky factor with
//! positive diagonal, `chol(A) = G` up to rounding. `G` is row diagonally
//! dominant (`G[i][i] >= w + 1 > Σ_k |G[i][k]|`), so `A` is well conditioned
//! and the tolerances below are not eaten by conditioning.

use nalgebra::DMatrix;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::SymBand;

/// `(N, bw)` pairs exercised by the tests: empty band, diagonal, narrow, wide,
/// and full (`bw = N − 1`).
pub const CASES: [(usize, usize); 7] = [
    (1, 0),
    (5, 0),
    (7, 2),
    (30, 5),
    (96, 39),
    (200, 99),
    (50, 49),
];

/// Relative tolerance per unit of size: rounding error of a length-`N` dot
/// product grows like `N·ε` with machine epsilon `ε ≈ 2.2e-16`; `1e-12` is
/// `ε` times a margin of ~4500 for the (bounded) conditioning of the fixtures.
pub const REL_TOL_PER_N: f64 = 1e-12;

/// Relative tolerance for a problem of size `n`: machine epsilon times size
/// (with the margin of [`REL_TOL_PER_N`]).
pub fn tol(n: usize) -> f64 {
    REL_TOL_PER_N * n.max(1) as f64
}

/// Largest absolute value of an iterator (0 for an empty one).
pub fn max_abs(it: impl IntoIterator<Item = f64>) -> f64 {
    it.into_iter().fold(0.0, |m, v| m.max(v.abs()))
}

/// Max-norm relative difference `max|a − b| / max(max|b|, tiny)`.
pub fn rel_diff(a: &DMatrix<f64>, b: &DMatrix<f64>) -> f64 {
    assert_eq!(a.shape(), b.shape());
    let err = max_abs(a.iter().zip(b.iter()).map(|(x, y)| x - y));
    err / max_abs(b.iter().copied()).max(f64::MIN_POSITIVE)
}

/// Seeded random lower band `G` (`N×N`, half-bandwidth `w`) and `A = G Gᵀ`.
pub fn random_spd_band(n: usize, w: usize, seed: u64) -> (DMatrix<f64>, SymBand) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut g = DMatrix::<f64>::zeros(n, n);
    for i in 0..n {
        for k in i.saturating_sub(w)..i {
            g[(i, k)] = rng.random_range(-1.0..1.0);
        }
        g[(i, i)] = w as f64 + 1.0 + rng.random_range(0.0..1.0);
    }
    let a = &g * g.transpose();
    (g, SymBand::from_dense(&a, w))
}

/// Seeded random vector with entries in `[-1, 1)`.
pub fn random_vec(n: usize, seed: u64) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n).map(|_| rng.random_range(-1.0..1.0)).collect()
}
