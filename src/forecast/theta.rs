//! The stacked forecast system for one parameter set θ, and everything about it that
//! does not depend on the conditions (the per-draw cache).
//!
//! Future path `y = (y_{T+1}', …, y_{T+h}')'` (N = n h, time-major: series `i` at horizon
//! `t` is index `(t−1) n + i`). `H y = c + u`, `u ~ N(0, I_h ⊗ Σ)`, with `H` unit lower
//! block-triangular (blocks `−B_j` at lag `j ≤ p`) and `c_t = b0 + Σ_{j≥t} B_j y_{T+t−j}`.
//! - mean `μ = H⁻¹ c` by the forward recursion `μ_t = b0 + Σ_j B_j μ_{t−j}` (data for `t ≤ 0`);
//! - structural shocks `u_t = L ε_t`, `L = P'·chol(P Σ P')·P` for the recursive ordering `π`
//!   (shocks indexed like the series they are labelled by), so `y = μ + M ε`, `M = H⁻¹(I ⊗ L)`;
//! - precision `K = H'(I_h ⊗ Σ⁻¹)H`, symmetric banded with half-bandwidth `(p+1) n − 1`,
//!   factored `K = P P'` by the project's band Cholesky; unconditional draws by the
//!   precision sampler `y = μ + P⁻ᵀ z` (Rue 2001; Chan and Jeliazkov 2009).

use nalgebra::{DMatrix, DVector};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use super::ForecastError;
use crate::banded::{BandCholesky, SymBand};
use crate::model::Params;

/// θ-level cache: parameters, identification and the factored precision.
#[derive(Debug, Clone)]
pub struct Theta {
    pub params: Params,
    /// Impact matrix `L` (`L L' = Σ`), column `j` = shock labelled by series `j`.
    pub impact: DMatrix<f64>,
    /// `L⁻¹`.
    pub impact_inv: DMatrix<f64>,
    /// Unconditional mean `μ` (N).
    pub mean: Vec<f64>,
    /// Band Cholesky factor of the precision `K`.
    pub precision: BandCholesky,
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
        let impact_inv = impact
            .clone()
            .try_inverse()
            .ok_or(ForecastError::Singular("the impact matrix L".into()))?;
        let mean = mean_path(&params, tail, h);
        let band = precision_band(&params, h)?;
        let precision = BandCholesky::factor(&band)
            .map_err(|e| ForecastError::Singular(format!("the forecast precision K ({e})")))?;
        Ok(Theta {
            params,
            impact,
            impact_inv,
            mean,
            precision,
            h,
        })
    }

    pub fn n(&self) -> usize {
        self.params.n()
    }

    pub fn len(&self) -> usize {
        self.n() * self.h
    }

    pub fn is_empty(&self) -> bool {
        self.h == 0
    }

    /// `d = H⁻¹ u` in place: `d_t = u_t + Σ_{j=1}^{min(p,t−1)} B_j d_{t−j}`.
    pub fn h_inverse_in_place(&self, d: &mut [f64]) {
        let n = self.n();
        for t in 0..self.h {
            for (j, b) in self.params.lags.iter().enumerate() {
                let Some(s) = t.checked_sub(j + 1) else { break };
                let (past, now) = d.split_at_mut(t * n);
                let dp = &past[s * n..(s + 1) * n];
                for i in 0..n {
                    now[i] += (0..n).map(|c| b[(i, c)] * dp[c]).sum::<f64>();
                }
            }
        }
    }

    /// `x = H⁻ᵀ v` in place: `x_t = v_t + Σ_{j=1}^{min(p,h−t)} B_j' x_{t+j}`, `t = h … 1`.
    pub fn h_inverse_transpose_in_place(&self, x: &mut [f64]) {
        let n = self.n();
        for t in (0..self.h).rev() {
            for (j, b) in self.params.lags.iter().enumerate() {
                let s = t + j + 1;
                if s >= self.h {
                    break;
                }
                let (now, future) = x.split_at_mut((t + 1) * n);
                let xf = &future[(s - t - 1) * n..(s - t) * n];
                let xt = &mut now[t * n..];
                for c in 0..n {
                    xt[c] += (0..n).map(|i| b[(i, c)] * xf[i]).sum::<f64>();
                }
            }
        }
    }

    /// Path from shocks: `y = μ + M ε`.
    pub fn path_from_shocks(&self, eps: &[f64]) -> Vec<f64> {
        let n = self.n();
        let mut d = vec![0.0; self.len()];
        for t in 0..self.h {
            let e = DVector::from_column_slice(&eps[t * n..(t + 1) * n]);
            let u = &self.impact * e;
            d[t * n..(t + 1) * n].copy_from_slice(u.as_slice());
        }
        self.h_inverse_in_place(&mut d);
        for (di, m) in d.iter_mut().zip(&self.mean) {
            *di += m;
        }
        d
    }

    /// `M' v = (I ⊗ L') H⁻ᵀ v`.
    pub fn shock_map_transpose(&self, v: &[f64]) -> Vec<f64> {
        let n = self.n();
        let mut x = v.to_vec();
        self.h_inverse_transpose_in_place(&mut x);
        let lt = self.impact.transpose();
        let mut out = vec![0.0; x.len()];
        for t in 0..self.h {
            let seg = DVector::from_column_slice(&x[t * n..(t + 1) * n]);
            out[t * n..(t + 1) * n].copy_from_slice((&lt * seg).as_slice());
        }
        out
    }

    /// Structural shocks of a path: `ε_t = L⁻¹ (d_t − Σ_j B_j d_{t−j})`, `d = y − μ`.
    pub fn shocks_from_path(&self, y: &[f64]) -> Vec<f64> {
        let n = self.n();
        let d: Vec<f64> = y.iter().zip(&self.mean).map(|(a, b)| a - b).collect();
        let mut eps = vec![0.0; d.len()];
        for t in 0..self.h {
            let mut u = DVector::from_column_slice(&d[t * n..(t + 1) * n]);
            for (j, b) in self.params.lags.iter().enumerate() {
                let Some(s) = t.checked_sub(j + 1) else { break };
                u -= b * DVector::from_column_slice(&d[s * n..(s + 1) * n]);
            }
            eps[t * n..(t + 1) * n].copy_from_slice((&self.impact_inv * u).as_slice());
        }
        eps
    }

    /// The path row of a shock cell: `ρ' = e'(I ⊗ L⁻¹) H`, so that `ε_{j,t} = ρ'(y − μ)`.
    /// Returned sparse over future cells (blocks `t−p … t`).
    pub fn shock_row(&self, horizon: usize, shock: usize) -> Vec<(usize, f64)> {
        let n = self.n();
        let t = horizon - 1;
        let linv = self.impact_inv.row(shock);
        let mut terms: Vec<(usize, f64)> = (0..n).map(|c| (t * n + c, linv[c])).collect();
        for (j, b) in self.params.lags.iter().enumerate() {
            let Some(s) = t.checked_sub(j + 1) else { break };
            let coef = linv * b;
            terms.extend((0..n).map(|c| (s * n + c, -coef[c])));
        }
        terms
    }

    /// One unconditional path by the precision sampler.
    pub fn sample_unconditional<R: Rng + ?Sized>(&self, rng: &mut R) -> Vec<f64> {
        let mut z: Vec<f64> = (0..self.len())
            .map(|_| StandardNormal.sample(rng))
            .collect();
        self.precision.solve_upper_in_place(&mut z);
        for (zi, m) in z.iter_mut().zip(&self.mean) {
            *zi += m;
        }
        z
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

/// Assemble `K = H'(I_h ⊗ Σ⁻¹)H` in band storage: block `(t, s)` (`t ≥ s`) collects
/// `A_{r−t}' Σ⁻¹ A_{r−s}` over block rows `r`, with `A_0 = I`, `A_j = −B_j`.
fn precision_band(params: &Params, h: usize) -> Result<SymBand, ForecastError> {
    let (n, p) = (params.n(), params.p());
    let sigma_inv = params
        .sigma
        .clone()
        .cholesky()
        .ok_or(ForecastError::Singular("the residual covariance Σ".into()))?
        .inverse();
    let mut a = vec![DMatrix::identity(n, n)];
    a.extend(params.lags.iter().map(|b| -b));
    let q: Vec<DMatrix<f64>> = a.iter().map(|ai| &sigma_inv * ai).collect();
    let big_n = n * h;
    let bw = ((p + 1) * n - 1).min(big_n.saturating_sub(1));
    let mut band = SymBand::zeros(big_n, bw);
    for r in 0..h {
        for (j1, q1) in q.iter().enumerate().take(p.min(r) + 1) {
            for (j2, a2) in a.iter().enumerate().take(j1 + 1) {
                // block (t, s) with t = r − j2 ≥ s = r − j1: A_{j2}' Σ⁻¹ A_{j1}.
                let (t, s) = (r - j2, r - j1);
                let block = a2.transpose() * q1;
                for i in 0..n {
                    let cols = if t == s { i + 1 } else { n };
                    for c in 0..cols {
                        band.add(t * n + i, s * n + c, block[(i, c)]);
                    }
                }
            }
        }
    }
    Ok(band)
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

    /// Dense `M` from unit shocks, and dense `H`.
    fn dense_m(theta: &Theta) -> DMatrix<f64> {
        let big_n = theta.len();
        let mean = DVector::from_column_slice(&theta.mean);
        let mut m = DMatrix::zeros(big_n, big_n);
        for c in 0..big_n {
            let mut e = vec![0.0; big_n];
            e[c] = 1.0;
            m.set_column(c, &(DVector::from_vec(theta.path_from_shocks(&e)) - &mean));
        }
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

    /// Identities of ALGORITHMS §3: band `K = H'(I ⊗ Σ⁻¹)H` equals the dense product;
    /// `M = H⁻¹(I ⊗ L)` so `M M' = K⁻¹`; `L L' = Σ`; the recursions agree with dense `M'`,
    /// and shocks recovered from a path are the shocks that made it.
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
            let tol = 1e-10 * (n * h) as f64;
            assert!((&theta.impact * theta.impact.transpose() - &params.sigma).amax() < tol);
            let hm = dense_h(&params, h);
            let sigma_inv = params.sigma.clone().try_inverse().unwrap();
            let mut block = DMatrix::zeros(n * h, n * h);
            for t in 0..h {
                block.view_mut((t * n, t * n), (n, n)).copy_from(&sigma_inv);
            }
            let k = hm.transpose() * block * &hm;
            let kb = theta.precision.to_dense_lower();
            let k_from_factor = &kb * kb.transpose();
            assert!(
                (&k_from_factor - &k).amax() < tol * k.amax(),
                "K (n={n}, p={p}, h={h})"
            );
            let m = dense_m(&theta);
            let kinv = k.clone().try_inverse().unwrap();
            assert!(
                (&m * m.transpose() - &kinv).amax() < tol * kinv.amax(),
                "M M' = K⁻¹"
            );
            let v: Vec<f64> = (0..n * h).map(|i| (i as f64 * 0.37).sin()).collect();
            let mt = m.transpose() * DVector::from_column_slice(&v);
            let got = DVector::from_vec(theta.shock_map_transpose(&v));
            assert!((got - mt).amax() < tol * (1.0 + m.amax()), "M' v");
            let eps: Vec<f64> = (0..n * h).map(|i| (i as f64 * 0.91).cos()).collect();
            let back = theta.shocks_from_path(&theta.path_from_shocks(&eps));
            assert!(back.iter().zip(&eps).all(|(a, b)| (a - b).abs() < tol));
            // Shock rows: ε_{j,t} = ρ'(y − μ) for every cell.
            let y = theta.path_from_shocks(&eps);
            for t in 1..=h {
                for j in 0..n {
                    let row = theta.shock_row(t, j);
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
