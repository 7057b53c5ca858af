//! Banded symmetric positive-definite matrices, their Cholesky factor and the
//! triangular solves, as used for sampling Gaussian Markov random fields.
//!
//! A symmetric `N×N` matrix `A` has (half-)bandwidth `bw` when `A[i][j] = 0`
//! for `|i − j| > bw`. Its Cholesky factor `A = P Pᵀ` is lower triangular with
//! the same bandwidth (no fill-in outside the band), so
//!
//! * factorisation costs about `N·bw²/2` multiply-adds instead of `N³/6`,
//! * each triangular solve `P x = v` or `Pᵀ x = v` costs about `N·bw`,
//! * `ln|A| = 2 Σ_j ln P[j][j]`.
//!
//! Module tree (follows the maths):
//!
//! * [`storage`]: [`SymBand`], LAPACK-style lower band storage of `A`
//!   (`data[(i − j)·N + j] = A[i][j]`, shape `(bw + 1)·N`).
//! * [`cholesky`]: [`BandCholesky::factor`], the band Cholesky algorithm.
//! * [`solve`]: forward/backward substitution with `P`, `Pᵀ`, `A⁻¹`, and `P x`.
//!
//! Sources: H. Rue (2001), "Fast sampling of Gaussian Markov random fields",
//! JRSS-B 63(2), 325–338 (factor the band precision `Q = P Pᵀ`, then sample
//! `x = μ + P⁻ᵀ z` by one back solve); G. H. Golub and C. F. Van Loan,
//! *Matrix Computations*, §4.3 "Banded systems" (band Cholesky; band forward
//! and back substitution).

pub mod cholesky;
pub mod solve;
pub mod storage;
#[cfg(test)]
mod test_support;

pub use cholesky::BandCholesky;
pub use storage::SymBand;

/// Failure of a banded factorisation.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum BandedError {
    /// The pivot `A[j][j] − Σ_k P[j][k]²` at row `index` was `<= 0` or not finite,
    /// so the matrix (or its leading `(index + 1)×(index + 1)` block) is not
    /// numerically positive definite.
    #[error("matrix is not positive definite: pivot {pivot:e} at row {index}")]
    NotPositiveDefinite {
        /// Row (and column) of the failing pivot, 0-based.
        index: usize,
        /// The value whose square root would have been `P[index][index]`.
        pivot: f64,
    },
}
