//! Closed-form posterior of the natural-conjugate prior and exact i.i.d. draws.
//!
//! `Ω̄ = (Ω0⁻¹ + X'X)⁻¹`, `B̄ = Ω̄(Ω0⁻¹B0 + X'Y)`, `S̄ = S0 + Ẽ'Ẽ`, `ν̄ = ν0 + T`, computed
//! stably by a thin QR of the augmented `X̃ = [X; Ω0^{-1/2}]`, `Ỹ = [Y; Ω0^{-1/2} B0]`
//! (`X̃ = Q R_x`, `B̄ = R_x⁻¹ Q'Ỹ`, `Ẽ = Ỹ − X̃ B̄`, `Ω̄ = R_x⁻¹R_x⁻ᵀ`); `X'X` is never formed.
//! Posterior: `Σ | Y ~ IW(S̄, ν̄)`, `vec(B) | Σ, Y ~ N(vec(B̄), Σ ⊗ Ω̄)` (Kadiyala and
//! Karlsson 1997). The flat prior `p(B, Σ) ∝ |Σ|^{-(n+1)/2}` gives the OLS limit
//! `IW(Ê'Ê, T − k)` around `B̂`.
//!
//! Draws (Bartlett decomposition): `A` lower with `A_ii = sqrt(χ²_{ν̄−i+1})`, `A_ij ~ N(0,1)`;
//! `Λ = F_S A⁻ᵀ` with `F_S = chol(S̄)`, `Σ = ΛΛ'`; then `B = B̄ + R_x⁻¹ Z Λ'`, `Z` k×n standard
//! normal, whose covariance is `Σ ⊗ Ω̄`.

use nalgebra::{DMatrix, DVector};
use rand::Rng;
use rand_distr::{ChiSquared, Distribution, StandardNormal};

use super::{ModelError, Params, prior::PriorMoments};
use crate::forecast::product::{add_product, gram, upper_times};

/// Posterior of `(B, Σ)`: everything needed for draws and for the marginal likelihood.
#[derive(Debug, Clone)]
pub struct Posterior {
    pub b_bar: DMatrix<f64>,
    /// Upper-triangular `R_x` with `Ω̄ = R_x⁻¹ R_x⁻ᵀ`.
    pub r_x: DMatrix<f64>,
    /// `R_x⁻¹` (upper triangular), formed at the first draw (the tightness search builds
    /// many posteriors and draws from none): a draw multiplies by it, a matrix product that
    /// runs many times faster than the triangular solve it replaces. `None` inside: `R_x` is
    /// singular.
    r_x_inv: std::sync::OnceLock<Option<DMatrix<f64>>>,
    pub s_bar: DMatrix<f64>,
    /// `F_S = chol(S̄)` (lower).
    pub s_bar_chol: DMatrix<f64>,
    pub nu_bar: f64,
}

impl Posterior {
    pub fn n(&self) -> usize {
        self.b_bar.ncols()
    }

    /// Posterior mean `θ̄ = (B̄, S̄ / (ν̄ − n − 1))`, when the mean of Σ exists.
    pub fn mean(&self) -> Option<Params> {
        let dof = self.nu_bar - self.n() as f64 - 1.0;
        (dof > 0.0).then(|| Params::from_stacked(&self.b_bar, &self.s_bar / dof))
    }

    /// `ln|Ω̄| = −2 Σ ln|R_x,ii|`.
    pub fn log_det_omega(&self) -> f64 {
        -2.0 * self
            .r_x
            .diagonal()
            .iter()
            .map(|r| r.abs().ln())
            .sum::<f64>()
    }

    /// `ln|S̄|` from its Cholesky factor.
    pub fn log_det_s(&self) -> f64 {
        2.0 * self
            .s_bar_chol
            .diagonal()
            .iter()
            .map(|r| r.ln())
            .sum::<f64>()
    }

    /// One exact draw of `(B, Σ)`: `Σ = Λ Λ'` with `Λ' = A⁻¹ F_S'` (Bartlett's `A`, lower
    /// triangular), `B = B̄ + R_x⁻¹ Z Λ'`. An error only when `A` is singular, which has
    /// probability zero (a χ² draw of exactly zero).
    pub fn draw<R: Rng + ?Sized>(&self, rng: &mut R) -> Result<Params, ModelError> {
        let n = self.n();
        let k = self.b_bar.nrows();
        let mut a = DMatrix::zeros(n, n);
        for i in 0..n {
            // ν̄ − i > n − 1 − i ≥ 0, checked when the posterior was built.
            let chi = ChiSquared::new(self.nu_bar - i as f64)
                .map(|d| d.sample(rng))
                .map_err(|_| ModelError::BadSetting {
                    field: "posterior degrees of freedom".into(),
                    why: format!("{} is too small for {n} series", self.nu_bar),
                })?;
            a[(i, i)] = chi.sqrt();
            for j in 0..i {
                a[(i, j)] = StandardNormal.sample(rng);
            }
        }
        let lambda_t = a
            .solve_lower_triangular(&self.s_bar_chol.transpose())
            .filter(|l| l.iter().all(|v| v.is_finite()))
            .ok_or_else(|| ModelError::SigmaNotPositiveDefinite {
                what: "a posterior draw of Σ (its Bartlett factor is singular)".into(),
            })?;
        // Σ = Λ'Λ, symmetric as computed.
        let sigma = gram(&lambda_t, &vec![n; n]);
        let z = DMatrix::from_fn(k, n, |_, _| StandardNormal.sample(rng));
        let mut z_lambda = DMatrix::zeros(k, n);
        add_product(
            &mut z_lambda.as_view_mut(),
            &z.as_view(),
            &lambda_t.as_view(),
        );
        let r_x_inv = self
            .r_x_inv
            .get_or_init(|| {
                self.r_x
                    .solve_upper_triangular(&DMatrix::identity(k, k))
                    .filter(|m| m.iter().all(|v| v.is_finite()))
            })
            .as_ref()
            .ok_or(ModelError::Collinear)?;
        let shift = upper_times(r_x_inv, &z_lambda);
        Ok(Params::from_stacked(&(&self.b_bar + shift), sigma))
    }
}

pub(crate) fn symmetrise(m: &mut DMatrix<f64>) {
    let t = m.transpose();
    *m += t;
    *m *= 0.5;
}

/// Conjugate update of the prior `moments` by the rows `(y, x)`.
pub fn conjugate(
    y: &DMatrix<f64>,
    x: &DMatrix<f64>,
    prior: &PriorMoments,
) -> Result<Posterior, ModelError> {
    let (t, k, n) = (x.nrows(), x.ncols(), y.ncols());
    let mut xa = DMatrix::zeros(t + k, k);
    let mut ya = DMatrix::zeros(t + k, n);
    xa.rows_mut(0, t).copy_from(x);
    ya.rows_mut(0, t).copy_from(y);
    for i in 0..k {
        let w = 1.0 / prior.omega0[i].sqrt();
        xa[(t + i, i)] = w;
        for j in 0..n {
            ya[(t + i, j)] = w * prior.b0[(i, j)];
        }
    }
    let (b_bar, r_x, resid) = least_squares(&xa, &ya)?;
    let s_bar = &prior.s0 + resid.transpose() * resid;
    finish(b_bar, r_x, s_bar, prior.nu0 + t as f64)
}

/// Flat-prior (OLS) posterior: `IW(Ê'Ê, T − k)` around `B̂`.
pub fn flat(y: &DMatrix<f64>, x: &DMatrix<f64>) -> Result<Posterior, ModelError> {
    let (t, k, n) = (x.nrows(), x.ncols(), y.ncols());
    // ν̄ = T − k degrees of freedom; the posterior mean of Σ, S̄/(ν̄ − n − 1), which the checks
    // use, exists only when ν̄ > n + 1: T ≥ k + n + 2.
    let needed = k + n + 2;
    if t < needed {
        return Err(ModelError::TooFewObservations {
            rows: t,
            needed,
            why: format!(
                "the flat prior needs at least k + n + 2 = {k} + {n} + 2 usable rows (k = 1 + lags × series coefficients per equation, and more than n + 1 degrees of freedom left for the mean of Σ to exist); use a Minnesota prior, fewer lags or fewer series"
            ),
        });
    }
    let (b_hat, r_x, resid) = least_squares(x, y)?;
    let s_bar = resid.transpose() * resid;
    finish(b_hat, r_x, s_bar, (t - k) as f64)
}

/// Coefficients, the triangular factor `R` of `X = QR`, and residuals.
type LeastSquares = (DMatrix<f64>, DMatrix<f64>, DMatrix<f64>);

/// Least squares by Householder QR of `X` with its columns scaled to unit length first
/// (`X = X̃ D`), so that collinearity is judged on each column's own scale: a regressor near
/// 1e-9 beside one near 1e12 is not collinear. `R = R̃ D` is the factor of `X` itself.
fn least_squares(x: &DMatrix<f64>, y: &DMatrix<f64>) -> Result<LeastSquares, ModelError> {
    let norms: Vec<f64> = x.column_iter().map(|c| c.norm()).collect();
    if norms.iter().any(|&d| !(d.is_finite() && d > 0.0)) {
        return Err(ModelError::Collinear);
    }
    let mut scaled = x.clone();
    for (mut col, d) in scaled.column_iter_mut().zip(&norms) {
        col.unscale_mut(*d);
    }
    let qr = scaled.qr();
    let r_scaled = qr.r();
    // Unit columns: |R̃_ii| is column i's distance from the span of those before it, relative
    // to its own length; below 1e-13 it is a copy of them to rounding.
    if r_scaled
        .diagonal()
        .iter()
        .any(|d| d.abs() <= 1e-13 || d.is_nan())
    {
        return Err(ModelError::Collinear);
    }
    // Q'Y by the Householder reflections themselves (Q itself is never formed).
    let mut qty = y.clone();
    qr.q_tr_mul(&mut qty);
    let k = x.ncols();
    let mut b = r_scaled
        .solve_upper_triangular(&qty.rows(0, k).into_owned())
        .ok_or(ModelError::Collinear)?;
    for (mut row, d) in b.row_iter_mut().zip(&norms) {
        row.unscale_mut(*d);
    }
    let mut r = r_scaled;
    for (mut col, d) in r.column_iter_mut().zip(&norms) {
        col.scale_mut(*d);
    }
    let resid = y - x * &b;
    Ok((b, r, resid))
}

fn finish(
    b_bar: DMatrix<f64>,
    r_x: DMatrix<f64>,
    mut s_bar: DMatrix<f64>,
    nu_bar: f64,
) -> Result<Posterior, ModelError> {
    let n = s_bar.ncols();
    if nu_bar <= n as f64 - 1.0 {
        return Err(ModelError::TooFewObservations {
            rows: 0,
            needed: n,
            why: format!(
                "posterior degrees of freedom {nu_bar} must exceed n − 1 = {}",
                n - 1
            ),
        });
    }
    symmetrise(&mut s_bar);
    let s_bar_chol = s_bar
        .clone()
        .cholesky()
        .ok_or(ModelError::SigmaNotPositiveDefinite {
            what: "the posterior scale matrix S̄ (too few observations for the model size?)".into(),
        })?
        .l();
    Ok(Posterior {
        b_bar,
        r_x,
        r_x_inv: std::sync::OnceLock::new(),
        s_bar,
        s_bar_chol,
        nu_bar,
    })
}

/// `ln|Ω0|` for a diagonal `Ω0`.
pub fn log_det_diag(d: &DVector<f64>) -> f64 {
    d.iter().map(|v| v.ln()).sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;

    /// Draws against the closed-form moments of the Normal–inverse-Wishart posterior:
    /// `E[Σ] = S̄/(ν̄ − n − 1)` (inverse-Wishart mean, e.g. Gelman et al., Bayesian Data
    /// Analysis, appendix A), `E[B] = B̄`, `Var(B_ij) = E[Σ_jj] Ω̄_ii`. Means within
    /// 4 Monte Carlo standard errors (sample s.d. / √draws).
    #[test]
    fn draws_have_the_posterior_moments() {
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let (t, k, n) = (40, 3, 2);
        let x = DMatrix::from_fn(t, k, |r, c| {
            if c == 0 {
                1.0
            } else {
                ((r * (c + 2)) as f64 * 0.7).sin()
            }
        });
        let y = DMatrix::from_fn(t, n, |r, c| {
            ((r + 3 * c) as f64 * 0.3).cos() + 0.1 * r as f64
        });
        let post = flat(&y, &x).unwrap();
        let draws = 20_000;
        let samples: Vec<Params> = (0..draws).map(|_| post.draw(&mut rng).unwrap()).collect();
        let sigma_mean = &post.s_bar / (post.nu_bar - n as f64 - 1.0);
        let omega = {
            let rinv = post.r_x.clone().try_inverse().unwrap();
            &rinv * rinv.transpose()
        };
        let check = |name: &str, values: Vec<f64>, expect: f64| {
            let m = values.iter().sum::<f64>() / draws as f64;
            let sd =
                (values.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (draws - 1) as f64).sqrt();
            let se = sd / (draws as f64).sqrt();
            assert!(
                (m - expect).abs() < 4.0 * se,
                "{name}: {m} vs {expect} (se {se:e})"
            );
        };
        for i in 0..n {
            for j in 0..n {
                check(
                    "Σ",
                    samples.iter().map(|p| p.sigma[(i, j)]).collect(),
                    sigma_mean[(i, j)],
                );
            }
        }
        // B row 1 (lag 1 of series 0), equation 1: coefficient lags[0][(1, 0)].
        let b = |p: &Params| p.lags[0][(1, 0)];
        let expect_b = post.b_bar[(1, 1)];
        check("B", samples.iter().map(b).collect(), expect_b);
        let var_expect = sigma_mean[(1, 1)] * omega[(1, 1)];
        check(
            "Var B",
            samples.iter().map(|p| (b(p) - expect_b).powi(2)).collect(),
            var_expect,
        );
    }
}
