//! `X ~ N(0, Σ)` truncated to a box `l ≤ X ≤ u`: exact draws and the probability of the box,
//! by minimax exponential tilting (Botev 2017; ALGORITHMS §7.6–7.7).
//!
//! The proposal draws, for `k = 1 … d` in the order of [`super::reorder`], `w_k ~ N(μ_k, 1)`
//! truncated to `[l̃_k − c_k, ũ_k − c_k]`; the target-to-proposal log ratio is `ψ(w; μ*)`, never
//! above `ψ*` ([`super::tilting`]). Accept–reject with probability `exp(ψ(w) − ψ*)` is exact;
//! the acceptance rate is `ℓ e^{−ψ*}`. The same proposals without the rejection step give the
//! unbiased estimate `ℓ̂ = mean exp(ψ(w))`, and `e^{ψ*}` is a deterministic upper bound on `ℓ`.

use nalgebra::{DMatrix, DVector};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use super::{
    TruncError,
    reorder::{Ordered, in_order, reorder},
    tilting::{self, SolveStatus, Tilt},
    univariate,
};

/// Relative rounding allowed in `ψ(w) ≤ ψ*`: ψ sums `d` logarithms of probabilities and
/// quadratic terms, each exact to a few units of 1e-16; 1e-10 leaves room for d in the
/// thousands, and an excess that small changes an acceptance probability by 1e-10.
const BOUND_ROUNDING: f64 = 1e-10;

/// A truncated multivariate normal, ready to sample.
#[derive(Debug, Clone)]
pub struct TruncatedNormal {
    order: Ordered,
    /// Bounds in the factor's order and scale.
    lo: Vec<f64>,
    hi: Vec<f64>,
    tilt: Tilt,
}

/// The estimate of `ℓ = P(l ≤ X ≤ u)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Probability {
    /// `ln ℓ̂`.
    pub ln: f64,
    /// Relative standard error of `ℓ̂`.
    pub rel_err: f64,
    /// `ψ*`: `ln ℓ ≤ ψ*` always.
    pub ln_bound: f64,
    /// Number of proposals behind the estimate.
    pub proposals: usize,
}

/// An optional test that a point (in the variables' own order and scale) must pass.
pub type Keep<'a> = Option<&'a dyn Fn(&[f64]) -> bool>;

/// [`Keep`] for tests shared by the threads of an estimate.
type SyncKeep<'a> = Option<&'a (dyn Fn(&[f64]) -> bool + Sync)>;

/// Proposals per block of an estimate ([`TruncatedNormal::probability`]).
const TERM_BLOCK: usize = 250;

impl Probability {
    /// log10 of the estimate.
    pub fn log10(&self) -> f64 {
        self.ln / std::f64::consts::LN_10
    }

    /// Estimated acceptance rate of the exact sampler, `ℓ̂ e^{−ψ*}`.
    pub fn acceptance(&self) -> f64 {
        (self.ln - self.ln_bound).exp().min(1.0)
    }
}

impl TruncatedNormal {
    /// Prepare `N(0, Σ)` truncated to `[lower, upper]` (entries may be ∓∞; `lower < upper`).
    pub fn new(
        sigma: &DMatrix<f64>,
        lower: &[f64],
        upper: &[f64],
    ) -> Result<TruncatedNormal, TruncError> {
        let d = sigma.nrows();
        if sigma.ncols() != d || lower.len() != d || upper.len() != d {
            return Err(TruncError::Shape {
                sigma: sigma.shape(),
                lower: lower.len(),
                upper: upper.len(),
            });
        }
        if let Some(i) = (0..d).find(|&i| !sigma[(i, i)].is_finite() || sigma[(i, i)] <= 0.0) {
            return Err(TruncError::NotPositiveDefinite { index: i });
        }
        check_box(lower, upper)?;
        let order = reorder(sigma, lower, upper)?;
        let (lo, hi) = order.scale_bounds(lower, upper);
        let tilt = tilting::solve(
            &order,
            &lo,
            &hi,
            vec![tilting::cold_start(&order, &lo, &hi)],
        );
        Ok(TruncatedNormal {
            order,
            lo,
            hi,
            tilt,
        })
    }

    /// The same `Σ` (and variable order) on another box: the saddle point is solved again,
    /// warm-started from this one's when that is closer.
    pub fn with_bounds(&self, lower: &[f64], upper: &[f64]) -> Result<TruncatedNormal, TruncError> {
        self.resolve(self.order.clone(), lower, upper)
    }

    /// Another `Σ` of the same size in this one's variable order (a nearby problem, such as
    /// the same corridors under another posterior draw): no reordering search, and the saddle
    /// point warm-started from this one's when that is closer.
    pub fn like(
        &self,
        sigma: &DMatrix<f64>,
        lower: &[f64],
        upper: &[f64],
    ) -> Result<TruncatedNormal, TruncError> {
        if sigma.nrows() != self.dim() || sigma.ncols() != self.dim() {
            return Err(TruncError::Shape {
                sigma: sigma.shape(),
                lower: lower.len(),
                upper: upper.len(),
            });
        }
        self.resolve(in_order(sigma, &self.order.perm)?, lower, upper)
    }

    fn resolve(
        &self,
        order: Ordered,
        lower: &[f64],
        upper: &[f64],
    ) -> Result<TruncatedNormal, TruncError> {
        if lower.len() != self.dim() || upper.len() != self.dim() {
            return Err(TruncError::Shape {
                sigma: (self.dim(), self.dim()),
                lower: lower.len(),
                upper: upper.len(),
            });
        }
        check_box(lower, upper)?;
        let (lo, hi) = order.scale_bounds(lower, upper);
        let m = self.dim() - 1;
        let mut starts = vec![tilting::cold_start(&order, &lo, &hi)];
        if let SolveStatus::Converged { .. } = self.tilt.status {
            let mut warm = DVector::zeros(2 * m);
            warm.rows_mut(0, m).copy_from_slice(&self.tilt.x);
            warm.rows_mut(m, m).copy_from_slice(&self.tilt.mu[..m]);
            starts.push(warm);
        }
        let tilt = tilting::solve(&order, &lo, &hi, starts);
        Ok(TruncatedNormal {
            order,
            lo,
            hi,
            tilt,
        })
    }

    pub fn dim(&self) -> usize {
        self.order.dim()
    }

    /// How the saddle point was found (a fallback samples exactly but slowly).
    pub fn status(&self) -> SolveStatus {
        self.tilt.status
    }

    /// `ψ*`, the deterministic upper bound on `ln ℓ`.
    pub fn ln_bound(&self) -> f64 {
        self.tilt.psi_star
    }

    /// One proposal `w` (in the factor's order and scale) and `ψ(w; μ*)`. The last coordinate
    /// is drawn only when `whole` (the probability estimate needs its probability term only).
    fn propose<R: Rng + ?Sized>(&self, rng: &mut R, whole: bool) -> (Vec<f64>, f64) {
        let d = self.dim();
        let mut w = Vec::with_capacity(d);
        let mut lw = 0.0;
        for k in 0..d {
            let c = self.order.shift(k, &w);
            let mu = self.tilt.mu[k];
            let (a, b) = (self.lo[k] - c - mu, self.hi[k] - c - mu);
            lw += univariate::ln_prob(a, b);
            if k + 1 == d && !whole {
                break;
            }
            let wk = mu + univariate::sample(a, b, rng);
            lw += 0.5 * mu * mu - mu * wk;
            w.push(wk);
        }
        (w, lw)
    }

    /// One exact draw of `X` (original order), giving up after `max_proposals` rejections.
    pub fn sample<R: Rng + ?Sized>(
        &self,
        rng: &mut R,
        max_proposals: usize,
    ) -> Result<Vec<f64>, TruncError> {
        self.sample_where(rng, max_proposals, |_| true)
    }

    /// One exact draw of `X` restricted further to `keep(X)` (a subset of the box of positive
    /// probability), by rejecting proposals outside it as well.
    pub fn sample_where<R: Rng + ?Sized>(
        &self,
        rng: &mut R,
        max_proposals: usize,
        keep: impl Fn(&[f64]) -> bool,
    ) -> Result<Vec<f64>, TruncError> {
        for _ in 0..max_proposals {
            let (w, lw) = self.propose(rng, true);
            let u: f64 = rng.random();
            // Accept with probability exp(ψ(w) − ψ*) ≤ 1; a ratio above the bound (beyond
            // the rounding of ψ) would make that probability exceed one and bias the draw.
            let excess = lw - self.tilt.psi_star;
            if excess > BOUND_ROUNDING * (1.0 + self.tilt.psi_star.abs()) {
                return Err(TruncError::BoundExceeded { by: excess });
            }
            if u.ln() < excess {
                let x = self.order.unscale(&w);
                if keep(&x) {
                    return Ok(x);
                }
            }
        }
        Err(TruncError::TooImprobable {
            proposals: max_proposals,
        })
    }

    /// The unbiased estimate `ℓ̂` from `n` proposals, with its relative standard error.
    pub fn probability<R: Rng + ?Sized>(&self, rng: &mut R, n: usize) -> Probability {
        summarise(self.terms(rng, n, None), self.tilt.psi_star)
    }

    /// The unbiased estimate of `P(l ≤ X ≤ u, keep(X))`: whole proposals, each term times
    /// the indicator of `keep`.
    pub fn probability_where<R: Rng + ?Sized>(
        &self,
        rng: &mut R,
        n: usize,
        keep: impl Fn(&[f64]) -> bool + Sync,
    ) -> Probability {
        summarise(self.terms(rng, n, Some(&keep)), self.tilt.psi_star)
    }

    /// `max(n, 2)` terms of the estimates, in blocks of [`TERM_BLOCK`] proposals drawn on the
    /// threads there are: each block from its own stream, seeded in order from `rng`, so the
    /// terms do not depend on the threads.
    fn terms<R: Rng + ?Sized>(&self, rng: &mut R, n: usize, keep: SyncKeep) -> Vec<f64> {
        let n = n.max(2);
        let seeds: Vec<u64> = (0..n.div_ceil(TERM_BLOCK)).map(|_| rng.random()).collect();
        seeds
            .par_iter()
            .enumerate()
            .flat_map_iter(|(b, &seed)| {
                let mut stream = ChaCha8Rng::seed_from_u64(seed);
                let count = TERM_BLOCK.min(n - b * TERM_BLOCK);
                (0..count)
                    .map(|_| self.term(&mut stream, keep.map(|k| k as &dyn Fn(&[f64]) -> bool)))
                    .collect::<Vec<_>>()
            })
            .collect()
    }

    /// The acceptance rate [`Probability::acceptance`] of the estimate from `n` proposals
    /// (times `keep`, when given) when it is below `floor`; `None` when it is not. The terms
    /// `exp(ψ_i − ψ*)` are never negative, so once their running sum reaches `n · floor` the
    /// rest cannot bring the mean below `floor`: the proposals stop there, and the answer is
    /// the one all `n` would give.
    pub fn acceptance_below<R: Rng + ?Sized>(
        &self,
        rng: &mut R,
        n: usize,
        floor: f64,
        keep: Keep,
    ) -> Option<f64> {
        let n = n.max(2);
        let mut sum = 0.0;
        for _ in 0..n {
            sum += self.term(rng, keep);
            if sum >= n as f64 * floor {
                return None;
            }
        }
        Some((sum / n as f64).min(1.0))
    }

    /// One term of the estimates: `exp(ψ(w) − ψ*) ∈ (0, 1]` for a proposal `w` (no overflow,
    /// and the shift cancels in the ratio), times the indicator of `keep` when given (then
    /// the whole proposal is drawn).
    fn term<R: Rng + ?Sized>(&self, rng: &mut R, keep: Keep) -> f64 {
        let (w, lw) = self.propose(rng, keep.is_some());
        if keep.is_none_or(|keep| keep(&self.order.unscale(&w))) {
            (lw - self.tilt.psi_star).exp()
        } else {
            0.0
        }
    }
}

/// `ln ℓ̂ = ψ* + ln mean(t_i)` with the relative standard error of the mean.
fn summarise(terms: Vec<f64>, psi: f64) -> Probability {
    let n = terms.len();
    let mean = terms.iter().sum::<f64>() / n as f64;
    let var = terms.iter().map(|t| (t - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
    Probability {
        ln: psi + mean.ln(),
        rel_err: var.sqrt() / (mean * (n as f64).sqrt()),
        ln_bound: psi,
        proposals: n,
    }
}

fn check_box(lower: &[f64], upper: &[f64]) -> Result<(), TruncError> {
    for (i, (&l, &u)) in lower.iter().zip(upper).enumerate() {
        if l.is_nan() || u.is_nan() || l >= u || l == f64::INFINITY || u == f64::NEG_INFINITY {
            return Err(TruncError::EmptyInterval {
                index: i,
                lower: l,
                upper: u,
            });
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    /// The bound is checked: a sampler whose `ψ*` is below the maximum of `ψ` (here lowered
    /// on purpose by 5) refuses rather than accept with "probability" above one.
    #[test]
    fn a_proposal_above_the_bound_is_refused() {
        let sigma = DMatrix::from_row_slice(2, 2, &[1.0, 0.3, 0.3, 1.0]);
        let mut tn = TruncatedNormal::new(&sigma, &[0.5, -1.0], &[2.0, 1.0]).unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        assert!(tn.sample(&mut rng, 1000).is_ok());
        tn.tilt.psi_star -= 5.0;
        match tn.sample(&mut rng, 1000) {
            Err(TruncError::BoundExceeded { by }) => assert!(by > 0.0),
            other => panic!("expected the bound to be exceeded, got {other:?}"),
        }
    }

    /// The estimate's blocks run on the threads there are and give the same terms whatever
    /// their number (each block its own stream, seeded in order).
    #[test]
    fn the_estimate_does_not_depend_on_the_threads() {
        let sigma = DMatrix::from_row_slice(3, 3, &[1.0, 0.5, 0.2, 0.5, 2.0, -0.3, 0.2, -0.3, 1.5]);
        let tn =
            TruncatedNormal::new(&sigma, &[0.2, -1.0, -2.0], &[2.0, f64::INFINITY, 0.5]).unwrap();
        let with = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            pool.install(|| {
                let mut rng = ChaCha8Rng::seed_from_u64(9);
                let p = tn.probability(&mut rng, 1_001);
                (p.ln, p.rel_err, p.proposals)
            })
        };
        let one = with(1);
        assert_eq!(one.2, 1_001);
        assert_eq!(one, with(2));
        assert_eq!(one, with(3));
    }

    /// The screen with early stopping answers as the mean of all its `n` terms does:
    /// below a floor (then with that estimate) or not, for floors on both sides of it, with
    /// and without an extra inequality; far above the floor it stops at the first proposal.
    #[test]
    fn acceptance_screen_matches_the_full_estimate() {
        let sigma = DMatrix::from_row_slice(3, 3, &[1.0, 0.5, 0.2, 0.5, 2.0, -0.3, 0.2, -0.3, 1.5]);
        let (lo, hi) = ([0.2, -1.0, -2.0], [2.0, f64::INFINITY, 0.5]);
        let tn = TruncatedNormal::new(&sigma, &lo, &hi).unwrap();
        let half = |x: &[f64]| x[0] + x[2] > 0.0;
        let n = 16;
        for keep in [None, Some(&half as &dyn Fn(&[f64]) -> bool)] {
            // The mean of all n terms of one stream.
            let full = |seed| {
                let mut rng = ChaCha8Rng::seed_from_u64(seed);
                let sum: f64 = (0..n).map(|_| tn.term(&mut rng, keep)).sum();
                (sum / n as f64).min(1.0)
            };
            for seed in 0..20 {
                let a = full(seed);
                for floor in [a * 0.999, a * 1.001, 1e-5, 0.999] {
                    let mut rng = ChaCha8Rng::seed_from_u64(seed);
                    let got = tn.acceptance_below(&mut rng, n, floor, keep);
                    match got {
                        Some(b) => {
                            assert!(a < floor, "seed {seed}: below {floor} though {a}");
                            assert!((a - b).abs() <= 1e-12 * a, "{a} against {b}");
                        }
                        None => assert!(a >= floor, "seed {seed}: not below {floor} though {a}"),
                    }
                }
                // Far above the floor: one proposal, so the stream is where one term leaves it.
                let (mut once, mut screen) = (
                    ChaCha8Rng::seed_from_u64(seed),
                    ChaCha8Rng::seed_from_u64(seed),
                );
                let first = tn.term(&mut once, keep);
                if first >= n as f64 * 1e-5 {
                    assert!(tn.acceptance_below(&mut screen, n, 1e-5, keep).is_none());
                    assert_eq!(once.get_word_pos(), screen.get_word_pos());
                }
            }
        }
    }

    /// The last resort of the saddle-point search (`μ = 0`, `ψ* = 0`) is still exact: its draws
    /// have the moments of the tilted sampler's, and its probability estimate (then the
    /// separation-of-variables estimator of Genz 1992) agrees within the two relative errors.
    #[test]
    fn fallback_tilting_stays_exact() {
        let sigma = DMatrix::from_row_slice(3, 3, &[1.0, 0.5, 0.2, 0.5, 2.0, -0.3, 0.2, -0.3, 1.5]);
        let (lo, hi) = ([0.2, -1.0, -2.0], [2.0, f64::INFINITY, 0.5]);
        let tilted = TruncatedNormal::new(&sigma, &lo, &hi).unwrap();
        let mut fallback = tilted.clone();
        fallback.tilt = Tilt {
            mu: vec![0.0; 3],
            x: vec![0.0; 2],
            psi_star: 0.0,
            status: SolveStatus::Fallback,
        };
        let a = tilted.probability(&mut ChaCha8Rng::seed_from_u64(1), 40_000);
        let b = fallback.probability(&mut ChaCha8Rng::seed_from_u64(2), 40_000);
        let se = (a.rel_err.powi(2) + b.rel_err.powi(2)).sqrt();
        assert!((a.ln - b.ln).abs() < 4.0 * se, "{a:?} vs {b:?}");
        let n = 40_000;
        let mean = |tn: &TruncatedNormal, seed| {
            let mut r = ChaCha8Rng::seed_from_u64(seed);
            let mut m = DVector::zeros(3);
            let mut m2 = DVector::zeros(3);
            for _ in 0..n {
                let x = DVector::from_vec(tn.sample(&mut r, 1_000_000).unwrap());
                m2 += x.map(|v| v * v);
                m += x;
            }
            (m / n as f64, m2 / n as f64)
        };
        let ((m1, s1), (m2, _)) = (mean(&tilted, 3), mean(&fallback, 4));
        for i in 0..3 {
            let sd = (s1[i] - m1[i] * m1[i]).sqrt();
            let se = sd * (2.0 / n as f64).sqrt();
            assert!(
                (m1[i] - m2[i]).abs() < 4.0 * se,
                "mean {i}: {} vs {}",
                m1[i],
                m2[i]
            );
        }
    }
}
