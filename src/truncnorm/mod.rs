//! Truncated normals. [`univariate`]: the standard normal on an interval — tail
//! probabilities in log space, moments and exact sampling. On top of it, the
//! multivariate normal on a box by minimax exponential tilting (Botev 2017):
//! [`reorder`] (variable order and scaled Cholesky factor), [`tilting`] (the
//! saddle point) and [`multivariate`] (exact accept–reject draws and the unbiased
//! probability estimate with its relative error).
//!
//! # Formulas
//!
//! With φ the standard normal density, Φ its distribution function and
//! Φ̄(x) = 1 − Φ(x):
//!
//! * ln Φ̄(x), x ≥ 0: `−x²/2 − ln 2 + ln erfcx(x/√2)`, where
//!   erfcx(t) = e^{t²} erfc(t) is evaluated with Cody's rational Chebyshev
//!   approximations (no underflow); for x > 37 the asymptotic series
//!   `−x²/2 − ln(x√(2π)) + ln(1 − x⁻² + 3x⁻⁴ − 15x⁻⁶ + 105x⁻⁸ − 945x⁻¹⁰)`.
//!   For x < 0: `ln1p(−Φ̄(−x))`.
//! * ln P(a, b) = ln(Φ(b) − Φ(a)): for a > 0,
//!   `ln Φ̄(a) + ln(−expm1(ln Φ̄(b) − ln Φ̄(a)))`; for b < 0 the mirror image;
//!   otherwise `ln1p(−Φ(a) − Φ̄(b))` (or, when that sum exceeds ½, the
//!   cancellation-free `ln(½ erf(−a/√2) + ½ erf(b/√2))`); for a very narrow
//!   interval (h = b − a, m = (a + b)/2, h·max(1, |m|) ≤ 10⁻³) the midpoint
//!   expansion `ln h + ln φ(m) + ln1p((m² − 1)h²/24)`.
//! * Moments of N(0,1) truncated to [a, b], with P = Φ(b) − Φ(a):
//!   mean = (φ(a) − φ(b))/P, variance = 1 + (aφ(a) − bφ(b))/P − mean², the
//!   ratios formed as `exp(−x²/2 − ln P)/√(2π)`; one-sided tails use the Mills
//!   ratio directly.
//! * Sampling: Marsaglia's exponential-proposal tail sampler for a > 0.66 (and
//!   its mirror for b < −0.66), plain rejection from N(0,1) for wide boxes and
//!   inverse transform with an accurate normal quantile otherwise (Botev 2017).
//!
//! # Sources
//!
//! * Z. I. Botev (2017), "The normal law under linear restrictions: simulation
//!   and estimation via minimax tilting", J. R. Stat. Soc. B 79, 125–148.
//! * G. Marsaglia (1964), "Generating a variable from the tail of the normal
//!   distribution", Technometrics 6, 101–102.
//! * W. J. Cody (1969), "Rational Chebyshev approximations for the error
//!   function", Math. Comp. 23, 631–637.
//! * M. J. Wichura (1988), "Algorithm AS 241: the percentage points of the
//!   normal distribution", Appl. Statist. 37, 477–484 (`PPND16`).

//! * Gibson, G. J., Glasbey, C. A. and Elston, D. A. (1994), "Monte Carlo
//!   evaluation of multivariate normal integrals and sensitivity to variate
//!   ordering" (the variable order).
//! * Genz, A. (1992), "Numerical computation of multivariate normal
//!   probabilities", J. Comput. Graph. Statist. 1, 141–149 (the estimator at μ = 0).

pub mod multivariate;
pub mod reorder;
#[cfg(test)]
mod tests;
pub mod tilting;
pub mod univariate;

pub use multivariate::{Probability, TruncatedNormal};
pub use tilting::SolveStatus;
pub use univariate::{ln_phi_upper, ln_prob, mean_var, normal_quantile, sample};

/// What can go wrong with a truncated multivariate normal. Indices are 0-based positions of
/// the variables as given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum TruncError {
    #[error("sizes disagree: covariance {sigma:?}, {lower} lower and {upper} upper bounds")]
    Shape {
        sigma: (usize, usize),
        lower: usize,
        upper: usize,
    },
    #[error("variable {index}: the interval [{lower}, {upper}] is empty")]
    EmptyInterval {
        index: usize,
        lower: f64,
        upper: f64,
    },
    #[error("the covariance is not positive definite (at variable {index})")]
    NotPositiveDefinite { index: usize },
    #[error("the covariance is singular: variable {index} is a combination of the others")]
    Singular { index: usize },
    #[error("no draw accepted in {proposals} proposals: the box is too improbable to sample")]
    TooImprobable { proposals: usize },
    #[error(
        "a proposal's log ratio exceeded the sampler's bound ψ* by {by:.2e}: the saddle point is not the maximum, and accepting would bias the draw"
    )]
    BoundExceeded { by: f64 },
}
