//! The stacked forecast system for one parameter set θ, and everything about it that
//! does not depend on the conditions (the per-draw cache).
//!
//! Future path `y = (y_{T+1}', …, y_{T+h}')'` (N = n h, time-major: series `i` at horizon
//! `t` is index `(t−1) n + i`). `H y = c + u`, `u ~ N(0, I_h ⊗ Σ)`, with `H` unit lower
//! block-triangular (blocks `−B_j` at lag `j ≤ p`) and `c_t = b0 + Σ_{j≥t} B_j y_{T+t−j}`.
//! - mean `μ = H⁻¹ c` by the forward recursion `μ_t = b0 + Σ_j B_j μ_{t−j}` (data for `t ≤ 0`);
//! - structural shocks `u_t = L ε_t`, `L = P'·chol(P Σ P')·P` for the recursive ordering `π`
//!   (shocks indexed like the series they are labelled by), so `y = μ + M ε` with
//!   `M = H⁻¹(I ⊗ L)`: simulating the VAR forward from its shocks;
//! - the precision `K = H'(I ⊗ Σ⁻¹)H = G'G` has the exact triangular factor
//!   `G = M⁻¹ = (I ⊗ L⁻¹)H`, which needs no factorisation: `K⁻¹v = M M'v`, with `M'v` the
//!   backward recursion `x_t = v_t + Σ_j B_j' x_{t+j}` followed by `L'` (ALGORITHMS §3.6–3.7).
//!   `K` itself is never formed, so nothing squares the conditioning of `H`.
//!
//! Every product with `M` or `M'` runs block by block on an `N × k` matrix of `k` vectors at
//! once (one matrix product per lag and period), so many right-hand sides cost little more
//! than one.
//!
//! Kept per draw: `b0`, `B_1 … B_p`, `L` and `μ` (about 70 kB at 40 series, 4 lags and 20
//! periods): what an edit of the conditions needs.

use nalgebra::{DMatrix, DVector};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use super::{
    ForecastError,
    product::{SparseRows, add_product},
};
use crate::model::Params;

/// θ-level cache: coefficients, identification and the unconditional mean.
#[derive(Debug, Clone)]
pub struct Theta {
    /// Intercept `b0` (n).
    pub intercept: DVector<f64>,
    /// `lags[j−1] = B_j` (n×n).
    pub lags: Vec<DMatrix<f64>>,
    /// Impact matrix `L` (`L L' = Σ`), column `j` = shock labelled by series `j`.
    pub impact: DMatrix<f64>,
    /// Unconditional mean `μ` (N).
    pub mean: Vec<f64>,
    pub h: usize,
}

impl Theta {
    /// Build the cache. `tail` holds the last `p` observed rows in model units, oldest first
    /// (`tail[p−1]` is period T); `ordering[k]` is the series of the k-th shock.
    pub fn new(
        params: Params,
        ordering: &[usize],
        tail: &[Vec<f64>],
        h: usize,
    ) -> Result<Theta, ForecastError> {
        let impact = recursive_impact(&params.sigma, ordering)?;
        let mean = mean_path(&params, tail, h);
        Ok(Theta {
            intercept: params.intercept,
            lags: params.lags,
            impact,
            mean,
            h,
        })
    }

    pub fn n(&self) -> usize {
        self.intercept.len()
    }

    pub fn p(&self) -> usize {
        self.lags.len()
    }

    pub fn len(&self) -> usize {
        self.n() * self.h
    }

    pub fn is_empty(&self) -> bool {
        self.h == 0
    }

    /// `Σ = L L'`.
    pub fn sigma(&self) -> DMatrix<f64> {
        &self.impact * self.impact.transpose()
    }

    /// `L⁻¹` (L is triangular up to the ordering's permutation, so this is exact to rounding).
    pub fn impact_inverse(&self) -> Result<DMatrix<f64>, ForecastError> {
        self.impact
            .clone()
            .try_inverse()
            .ok_or(ForecastError::Singular("the impact matrix L".into()))
    }

    /// `[B_p … B_1]` (n × pn), the lags side by side oldest first, or their transposes
    /// `[B_1' … B_p']`: the recursions' sum over lags is then one matrix product with the
    /// block of neighbouring periods, which lie next to each other in the stacked rows.
    fn lags_side_by_side(&self, transposed: bool) -> DMatrix<f64> {
        let (n, p) = (self.n(), self.p());
        let mut out = DMatrix::zeros(n, n * p);
        for (j, b) in self.lags.iter().enumerate() {
            if transposed {
                out.view_mut((0, j * n), (n, n)).tr_copy_from(b);
            } else {
                out.view_mut((0, (p - 1 - j) * n), (n, n)).copy_from(b);
            }
        }
        out
    }

    /// `X ← H⁻¹ X` for `N × k` blocks: `x_t += Σ_{j=1}^{min(p,t−1)} B_j x_{t−j}`, `t = 1 … h`.
    pub fn forward_in_place(&self, x: &mut DMatrix<f64>) {
        let (n, p) = (self.n(), self.p());
        let lags = self.lags_side_by_side(false);
        for t in 1..self.h {
            let m = p.min(t);
            let (mut now, past) = x.rows_range_pair_mut(t * n..(t + 1) * n, (t - m) * n..t * n);
            add_product(&mut now, &lags.columns((p - m) * n, m * n), &past.into());
        }
    }

    /// `X ← H⁻ᵀ X` for `N × k` blocks: `x_t += Σ_{j=1}^{min(p,h−t)} B_j' x_{t+j}`, `t = h … 1`.
    pub fn backward_in_place(&self, x: &mut DMatrix<f64>) {
        self.backward_staircase(x, &vec![self.h; x.ncols()]);
    }

    /// [`Theta::backward_in_place`] for columns zero after their first `reach[c]` periods,
    /// `reach` non-increasing: `H⁻ᵀ` keeps them so (it is block upper triangular), and each
    /// period's step runs on the leading columns still non-zero after it.
    fn backward_staircase(&self, x: &mut DMatrix<f64>, reach: &[usize]) {
        let (n, p) = (self.n(), self.p());
        // A product with transposed copies runs as a matrix product, where a transposed
        // product would run as dot products.
        let lags_t = self.lags_side_by_side(true);
        for t in (0..self.h.saturating_sub(1)).rev() {
            let m = p.min(self.h - 1 - t);
            let active = reach.partition_point(|&r| r > t + 1);
            if active == 0 {
                continue;
            }
            let (mut now, future) =
                x.rows_range_pair_mut(t * n..(t + 1) * n, (t + 1) * n..(t + 1 + m) * n);
            add_product(
                &mut now.columns_mut(0, active),
                &lags_t.columns(0, m * n),
                &future.columns(0, active),
            );
        }
    }

    /// `X ← (I ⊗ A) X` block by block.
    fn each_period(&self, x: &mut DMatrix<f64>, a: &DMatrix<f64>) {
        let n = self.n();
        let mut tmp = DMatrix::zeros(n, x.ncols());
        for t in 0..self.h {
            tmp.gemm(1.0, a, &x.rows(t * n, n), 0.0);
            x.rows_mut(t * n, n).copy_from(&tmp);
        }
    }

    /// `E ← M E` (paths' departures from the mean made by the shocks in each column).
    pub fn shocks_to_paths(&self, e: &mut DMatrix<f64>) {
        self.each_period(e, &self.impact);
        self.forward_in_place(e);
    }

    /// `V ← M' V = (I ⊗ L') H⁻ᵀ V`. A column zero after some period stays so (`M'` is block
    /// upper triangular), as the stacked rows of conditions at early periods are: the columns
    /// are taken in order of their last non-zero period, latest first, and each period's
    /// products run on those still non-zero there.
    pub fn adjoint_in_place(&self, v: &mut DMatrix<f64>) {
        let (n, k) = (self.n(), v.ncols());
        let reach_of = |c: usize| {
            v.column(c)
                .iter()
                .rposition(|x| *x != 0.0)
                .map_or(0, |r| r / n + 1)
        };
        let mut order: Vec<(usize, usize)> = (0..k).map(|c| (reach_of(c), c)).collect();
        order.sort_by_key(|&(reach, c)| (std::cmp::Reverse(reach), c));
        let reach: Vec<usize> = order.iter().map(|&(r, _)| r).collect();
        let mut w = DMatrix::zeros(v.nrows(), k);
        for (to, &(_, from)) in order.iter().enumerate() {
            w.column_mut(to).copy_from(&v.column(from));
        }
        self.backward_staircase(&mut w, &reach);
        let lt = self.impact.transpose();
        let mut tmp = DMatrix::zeros(n, k);
        for t in 0..self.h {
            let active = reach.partition_point(|&r| r > t);
            if active == 0 {
                break;
            }
            let mut now = tmp.columns_mut(0, active);
            now.gemm(1.0, &lt, &w.view((t * n, 0), (n, active)), 0.0);
            w.view_mut((t * n, 0), (n, active)).copy_from(&now);
        }
        for (from, &(_, to)) in order.iter().enumerate() {
            v.column_mut(to).copy_from(&w.column(from));
        }
    }

    /// `F' = M'𝒢'` (N × k) for rows `𝒢` given by their non-zeros. `M` is block lower
    /// Toeplitz (`M_ts = Ψ_{t−s} L`, the VAR's moving-average form), so the column of a row
    /// with weight `a` on series `i` at period `t` is made of the moving-average rows
    /// `φ_{i,k} = e_i'Ψ_k L` shifted: block `s ≤ t` of it is `a φ_{i,t−s}'`. The rows
    /// `r_k = e_i'Ψ_k` follow `r_k = Σ_{j ≤ min(p,k)} r_{k−j} B_j` (`Ψ(z) = B(z)⁻¹` from either
    /// side), for the series the rows involve only — a few, for pins and corridors. Rows that
    /// involve so many series that this would cost more than the adjoint recursion (such as
    /// conditions on shocks) take [`Theta::adjoint_in_place`].
    pub fn conditions_in_shocks(&self, rows: &SparseRows) -> DMatrix<f64> {
        let (n, p, h) = (self.n(), self.p(), self.h);
        let mut slot = vec![usize::MAX; n];
        let mut series = Vec::new();
        let (mut assemble, mut adjoint) = (0, 0);
        for row in rows.iter() {
            let mut reach = 0;
            for &(cell, _) in row {
                let i = cell % n;
                if slot[i] == usize::MAX {
                    slot[i] = series.len();
                    series.push(i);
                }
                assemble += (cell / n + 1) * n;
                reach = reach.max(cell / n + 1);
            }
            adjoint += reach * n * (n * p + n);
        }
        let s = series.len();
        if h * (p + 1) * s * n * n + assemble > adjoint {
            let mut v = rows.transposed(self.len());
            self.adjoint_in_place(&mut v);
            return v;
        }
        // The rows as columns, c_k = r_k' = Σ_j B_j' c_{k−j} (n × s each, stacked by k, as
        // many columns as the blocked product needs), then φ_k' = L' c_k in place.
        let width = s.max(6);
        let mut lags_t = DMatrix::zeros(n, n * p);
        for (j, b) in self.lags.iter().enumerate() {
            lags_t
                .view_mut((0, (p - 1 - j) * n), (n, n))
                .tr_copy_from(b);
        }
        let mut phi = DMatrix::zeros(self.len(), width);
        for (a, &i) in series.iter().enumerate() {
            phi[(i, a)] = 1.0;
        }
        for k in 1..h {
            let m = p.min(k);
            let (mut now, past) = phi.rows_range_pair_mut(k * n..(k + 1) * n, (k - m) * n..k * n);
            add_product(&mut now, &lags_t.columns((p - m) * n, m * n), &past.into());
        }
        let l_t = self.impact.transpose();
        let mut tmp = DMatrix::zeros(n, width);
        for k in 0..h {
            tmp.fill(0.0);
            add_product(&mut tmp.as_view_mut(), &l_t.as_view(), &phi.rows(k * n, n));
            phi.rows_mut(k * n, n).copy_from(&tmp);
        }
        let big_n = self.len();
        let phi = phi.as_slice();
        let mut out = DMatrix::zeros(self.len(), rows.nrows());
        for (k, row) in rows.iter().enumerate() {
            let col = out.column_mut(k).data.into_slice_mut();
            for &(cell, a) in row {
                let (t, at) = (cell / n, slot[cell % n]);
                for from in 0..=t {
                    let src = &phi[at * big_n + (t - from) * n..][..n];
                    for (d, v) in col[from * n..(from + 1) * n].iter_mut().zip(src) {
                        *d += a * v;
                    }
                }
            }
        }
        out
    }

    /// `V ← K⁻¹ V = M M' V`: the unconditional forecast covariance times `V`.
    pub fn covariance_in_place(&self, v: &mut DMatrix<f64>) {
        self.adjoint_in_place(v);
        self.shocks_to_paths(v);
    }

    /// Path from shocks: `y = μ + M ε`.
    pub fn path_from_shocks(&self, eps: &[f64]) -> Vec<f64> {
        let mut d = DMatrix::from_column_slice(eps.len(), 1, eps);
        self.shocks_to_paths(&mut d);
        d.iter().zip(&self.mean).map(|(di, m)| di + m).collect()
    }

    /// `M' v`.
    pub fn shock_map_transpose(&self, v: &[f64]) -> Vec<f64> {
        let mut x = DMatrix::from_column_slice(v.len(), 1, v);
        self.adjoint_in_place(&mut x);
        x.as_slice().to_vec()
    }

    /// Structural shocks of paths: `ε_t = L⁻¹ (d_t − Σ_j B_j d_{t−j})`, `d = y − μ`.
    pub fn shocks_from_paths(&self, ys: &[Vec<f64>]) -> Result<Vec<Vec<f64>>, ForecastError> {
        let d = DMatrix::from_fn(self.len(), ys.len(), |r, c| ys[c][r] - self.mean[r]);
        Ok(self
            .shocks_from_departures(&d)?
            .column_iter()
            .map(|c| c.iter().copied().collect())
            .collect())
    }

    /// The structural shocks behind observed rows (model units, oldest first): for each row
    /// from the `p`-th on, `ε_t = L⁻¹ (y_t − b₀ − Σ_j B_j y_{t−j})`, one value per shock
    /// (labelled by series). The model's own historical shocks, at this θ.
    pub fn shocks_of_history(&self, rows: &[Vec<f64>]) -> Result<Vec<Vec<f64>>, ForecastError> {
        let linv = self.impact_inverse()?;
        let p = self.p();
        Ok((p..rows.len())
            .map(|t| {
                let mut u = DVector::from_column_slice(&rows[t]) - &self.intercept;
                for (j, b) in self.lags.iter().enumerate() {
                    u.gemv(-1.0, b, &DVector::from_column_slice(&rows[t - 1 - j]), 1.0);
                }
                (&linv * u).iter().copied().collect()
            })
            .collect())
    }

    /// `M⁻¹ D` for departures `D = y − μ` in the columns: `ε_t = L⁻¹ (d_t − Σ_j B_j d_{t−j})`,
    /// every period and column solved with one LU factor of `L` (the blocks `u_t` of a column
    /// lie one after another, so the columns are read as `n × (h·c)` right-hand sides).
    pub fn shocks_from_departures(&self, d: &DMatrix<f64>) -> Result<DMatrix<f64>, ForecastError> {
        let n = self.n();
        let mut u = d.clone();
        for t in 0..self.h {
            for (j, b) in self.lags.iter().enumerate() {
                let Some(s) = t.checked_sub(j + 1) else { break };
                u.rows_mut(t * n, n).gemm(-1.0, b, &d.rows(s * n, n), 1.0);
            }
        }
        let (rows, cols) = u.shape();
        let mut blocks = DMatrix::from_vec(n, rows / n.max(1) * cols, u.data.into());
        if !self.impact.clone().lu().solve_mut(&mut blocks) {
            return Err(ForecastError::Singular("the impact matrix L".into()));
        }
        Ok(DMatrix::from_vec(rows, cols, blocks.data.into()))
    }

    /// The path row of a shock cell: `ρ' = e'(I ⊗ L⁻¹) H`, so that `ε_{j,t} = ρ'(y − μ)`.
    /// Returned sparse over future cells (blocks `t−p … t`).
    pub fn shock_row(
        &self,
        horizon: usize,
        shock: usize,
    ) -> Result<Vec<(usize, f64)>, ForecastError> {
        let n = self.n();
        let t = horizon - 1;
        let linv = self.impact_inverse()?;
        let linv = linv.row(shock);
        let mut terms: Vec<(usize, f64)> = (0..n).map(|c| (t * n + c, linv[c])).collect();
        for (j, b) in self.lags.iter().enumerate() {
            let Some(s) = t.checked_sub(j + 1) else { break };
            let coef = linv * b;
            terms.extend((0..n).map(|c| (s * n + c, -coef[c])));
        }
        Ok(terms)
    }

    /// One unconditional path, `y = μ + M ε` with `ε ~ N(0, I)`: the VAR simulated forward.
    pub fn sample_unconditional<R: Rng + ?Sized>(&self, rng: &mut R) -> Vec<f64> {
        let eps: Vec<f64> = (0..self.len())
            .map(|_| StandardNormal.sample(rng))
            .collect();
        self.path_from_shocks(&eps)
    }
}

/// `L = P'·chol(P Σ P')·P` for the ordering `π` (`(P y)_k = y_{π(k)}`).
pub fn recursive_impact(
    sigma: &DMatrix<f64>,
    ordering: &[usize],
) -> Result<DMatrix<f64>, ForecastError> {
    let n = sigma.nrows();
    let permuted = DMatrix::from_fn(n, n, |a, b| sigma[(ordering[a], ordering[b])]);
    let c = permuted
        .cholesky()
        .ok_or(ForecastError::Singular("the residual covariance Σ".into()))?
        .l();
    let mut l = DMatrix::zeros(n, n);
    for a in 0..n {
        for b in 0..n {
            l[(ordering[a], ordering[b])] = c[(a, b)];
        }
    }
    Ok(l)
}

/// `μ_t = b0 + Σ_j B_j μ_{t−j}`, with observed rows for `t ≤ 0`.
fn mean_path(params: &Params, tail: &[Vec<f64>], h: usize) -> Vec<f64> {
    let mut rows: Vec<DVector<f64>> = tail.iter().map(|r| DVector::from_column_slice(r)).collect();
    for _ in 0..h {
        let mut m = params.intercept.clone();
        for (j, b) in params.lags.iter().enumerate() {
            m += b * &rows[rows.len() - 1 - j];
        }
        rows.push(m);
    }
    rows[tail.len()..]
        .iter()
        .flat_map(|r| r.iter().copied())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    /// A random stable-ish VAR(p) with a random SPD Σ.
    fn random_params(n: usize, p: usize, seed: u64) -> Params {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut draw = || -> f64 { StandardNormal.sample(&mut rng) };
        let intercept = DVector::from_fn(n, |_, _| draw());
        let lags = (0..p)
            .map(|l| DMatrix::from_fn(n, n, |_, _| 0.3 * draw() / (n as f64 * (l + 1) as f64)))
            .collect();
        let g = DMatrix::from_fn(n, n, |_, _| draw());
        let sigma = &g * g.transpose() + DMatrix::identity(n, n);
        Params {
            intercept,
            lags,
            sigma,
        }
    }

    /// Rows simulated from known shocks (`y_t = b₀ + Σ_j B_j y_{t−j} + L ε_t`, the VAR's
    /// defining equation) give those shocks back.
    #[test]
    fn historical_shocks_are_the_shocks_that_made_the_rows() {
        for (n, p, seed) in [(1, 1, 7), (3, 2, 8), (5, 4, 9)] {
            let params = random_params(n, p, seed);
            let ordering: Vec<usize> = (0..n).rev().collect();
            let tail = vec![vec![0.0; n]; p];
            let theta = Theta::new(params.clone(), &ordering, &tail, 1).unwrap();
            let mut rng = ChaCha8Rng::seed_from_u64(seed + 100);
            let mut rows: Vec<DVector<f64>> = (0..p)
                .map(|_| DVector::from_fn(n, |_, _| StandardNormal.sample(&mut rng)))
                .collect();
            let mut made = Vec::new();
            for _ in 0..40 {
                let eps = DVector::from_fn(n, |_, _| StandardNormal.sample(&mut rng));
                let t = rows.len();
                let mut y = &params.intercept + &theta.impact * &eps;
                for (j, b) in params.lags.iter().enumerate() {
                    y += b * &rows[t - 1 - j];
                }
                rows.push(y);
                made.push(eps);
            }
            let plain: Vec<Vec<f64>> = rows.iter().map(|r| r.iter().copied().collect()).collect();
            let got = theta.shocks_of_history(&plain).unwrap();
            assert_eq!(got.len(), made.len());
            for (g, m) in got.iter().zip(&made) {
                for (a, b) in g.iter().zip(m.iter()) {
                    assert!((a - b).abs() < 1e-10 * (1.0 + b.abs()), "{a} vs {b}");
                }
            }
        }
    }

    /// Dense `M` from unit shocks.
    fn dense_m(theta: &Theta) -> DMatrix<f64> {
        let mut m = DMatrix::identity(theta.len(), theta.len());
        theta.shocks_to_paths(&mut m);
        m
    }

    fn dense_h(params: &Params, h: usize) -> DMatrix<f64> {
        let n = params.n();
        let mut hm = DMatrix::identity(n * h, n * h);
        for t in 0..h {
            for (j, b) in params.lags.iter().enumerate() {
                if t > j {
                    hm.view_mut((t * n, (t - j - 1) * n), (n, n))
                        .copy_from(&(-b));
                }
            }
        }
        hm
    }

    /// Identities of ALGORITHMS §3, against dense matrices built here from their definitions:
    /// `M = H⁻¹(I ⊗ L)`, `G = (I ⊗ L⁻¹)H` with `G'G = K = H'(I ⊗ Σ⁻¹)H` and `M = G⁻¹`, so
    /// `M M' = K⁻¹`; `L L' = Σ`; the block recursions agree with dense `M'` and `K⁻¹`, and
    /// shocks recovered from a path are the shocks that made it.
    #[test]
    fn stacked_system_identities() {
        for (n, p, h, seed) in [
            (1, 1, 1, 1),
            (2, 1, 5, 2),
            (3, 2, 6, 3),
            (4, 4, 3, 4),
            (5, 3, 12, 5),
        ] {
            let params = random_params(n, p, seed);
            let tail: Vec<Vec<f64>> = (0..p)
                .map(|r| (0..n).map(|i| (r + i) as f64).collect())
                .collect();
            let ordering: Vec<usize> = (0..n).rev().collect();
            let theta = Theta::new(params.clone(), &ordering, &tail, h).unwrap();
            let big_n = n * h;
            let tol = 1e-10 * big_n as f64;
            assert!((theta.sigma() - &params.sigma).amax() < tol);
            let hm = dense_h(&params, h);
            let sigma_inv = params.sigma.clone().try_inverse().unwrap();
            let linv = theta.impact_inverse().unwrap();
            let mut block = DMatrix::zeros(big_n, big_n);
            let mut block_linv = DMatrix::zeros(big_n, big_n);
            let mut block_l = DMatrix::zeros(big_n, big_n);
            for t in 0..h {
                block.view_mut((t * n, t * n), (n, n)).copy_from(&sigma_inv);
                block_linv.view_mut((t * n, t * n), (n, n)).copy_from(&linv);
                block_l
                    .view_mut((t * n, t * n), (n, n))
                    .copy_from(&theta.impact);
            }
            let k = hm.transpose() * block * &hm;
            let g = &block_linv * &hm;
            assert!((g.transpose() * &g - &k).amax() < tol * k.amax(), "G'G = K");
            let m = dense_m(&theta);
            let m_def = hm.clone().try_inverse().unwrap() * &block_l;
            assert!((&m - &m_def).amax() < tol * m_def.amax(), "M = H⁻¹(I ⊗ L)");
            assert!(
                (&g * &m - DMatrix::identity(big_n, big_n)).amax() < tol,
                "G M = I"
            );
            let kinv = k.clone().try_inverse().unwrap();
            assert!(
                (&m * m.transpose() - &kinv).amax() < tol * kinv.amax(),
                "M M' = K⁻¹"
            );
            let v = DMatrix::from_fn(big_n, 3, |i, c| ((i + 7 * c) as f64 * 0.37).sin());
            let mut kv = v.clone();
            theta.covariance_in_place(&mut kv);
            assert!(
                (&kv - &kinv * &v).amax() < tol * (1.0 + kinv.amax()),
                "K⁻¹ V"
            );
            let col: Vec<f64> = v.column(0).iter().copied().collect();
            let mt = m.transpose() * DVector::from_column_slice(&col);
            let got = DVector::from_vec(theta.shock_map_transpose(&col));
            assert!((got - mt).amax() < tol * (1.0 + m.amax()), "M' v");
            // Columns zero after some period (in no order, one zero throughout), as the rows
            // of conditions at early periods are: the recursion skips their zero blocks.
            let reach = [h, 1, 0, h.div_ceil(2), h, 1];
            let mut stairs = DMatrix::from_fn(big_n, reach.len(), |i, c| {
                if i < reach[c] * n {
                    ((i + 5 * c) as f64 * 0.73).cos()
                } else {
                    0.0
                }
            });
            let want = m_def.transpose() * &stairs;
            theta.adjoint_in_place(&mut stairs);
            assert!(
                (&stairs - &want).amax() < tol * (1.0 + m_def.amax()),
                "M' V for staircase columns"
            );
            // Rows of conditions (a few non-zeros, on one series or a few; one on every
            // cell, which takes the adjoint route): F' = M'𝒢' either way.
            let mut g = DMatrix::zeros(5, big_n);
            g[(0, big_n - 1)] = 1.0;
            g[(1, 0)] = 0.5;
            g[(2, (h - 1) * n)] = 2.0;
            g[(2, (h / 2) * n + n - 1)] = -1.5;
            g[(3, n - 1)] = -0.3;
            for c in 0..big_n {
                g[(4, c)] = (c as f64 * 0.41).sin();
            }
            for take in [4, 5] {
                let rows = SparseRows::new(&g.rows(0, take).into_owned());
                let want = m_def.transpose() * g.rows(0, take).transpose();
                let got = theta.conditions_in_shocks(&rows);
                assert!(
                    (&got - &want).amax() < tol * (1.0 + want.amax()),
                    "M'𝒢' from the moving-average rows ({take} rows)"
                );
            }
            let eps: Vec<f64> = (0..big_n).map(|i| (i as f64 * 0.91).cos()).collect();
            let y = theta.path_from_shocks(&eps);
            let back = theta.shocks_from_paths(std::slice::from_ref(&y)).unwrap();
            assert!(back[0].iter().zip(&eps).all(|(a, b)| (a - b).abs() < tol));
            // Shock rows: ε_{j,t} = ρ'(y − μ) for every cell.
            for t in 1..=h {
                for j in 0..n {
                    let row = theta.shock_row(t, j).unwrap();
                    let val: f64 = row.iter().map(|(c, a)| a * (y[*c] - theta.mean[*c])).sum();
                    assert!((val - eps[(t - 1) * n + j]).abs() < tol);
                }
            }
        }
    }

    /// Recursive identification: in the permuted order the impact matrix is lower triangular,
    /// so the first-ordered series moves only with its own shock on impact.
    #[test]
    fn ordering_gives_triangular_impact() {
        let params = random_params(3, 1, 9);
        let ordering = [2, 0, 1];
        let l = recursive_impact(&params.sigma, &ordering).unwrap();
        for a in 0..3 {
            for b in a + 1..3 {
                assert_eq!(
                    l[(ordering[a], ordering[b])],
                    0.0,
                    "shock {} moves {} on impact",
                    ordering[b],
                    ordering[a]
                );
            }
            assert!(l[(ordering[a], ordering[a])] > 0.0);
        }
    }
}
