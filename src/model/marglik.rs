//! Closed-form marginal likelihood of the natural-conjugate prior and the choice of the
//! overall tightness `λ` by maximising it (Giannone, Lenza and Primiceri 2015).
//!
//! `ln p(Y) = −(nT/2) ln π + (n/2)(ln|Ω̄| − ln|Ω0|) + (ν0/2) ln|S0| − (ν̄/2) ln|S̄|
//!            + ln Γ_n(ν̄/2) − ln Γ_n(ν0/2)`,
//! `ln Γ_n(a) = n(n−1)/4 · ln π + Σ_{j=1}^{n} ln Γ(a + (1−j)/2)`.
//! With dummy rows the prior is the base prior updated by the dummies:
//! `ln p(Y) = ln p_base([Y_d; Y]) − ln p_base(Y_d)`.

use std::f64::consts::PI;

use nalgebra::DMatrix;
use rayon::prelude::*;
use statrs::function::gamma::ln_gamma;

use super::{
    ModelError,
    data::Regression,
    posterior::{Posterior, conjugate, log_det_diag},
    prior::{MinnesotaPrior, PriorMoments},
};

/// `ln Γ_n(a)`, the multivariate log-gamma function.
pub fn ln_mvgamma(n: usize, a: f64) -> f64 {
    let nf = n as f64;
    nf * (nf - 1.0) / 4.0 * PI.ln()
        + (1..=n)
            .map(|j| ln_gamma(a + (1.0 - j as f64) / 2.0))
            .sum::<f64>()
}

/// Posterior and log marginal likelihood of the base prior updated by `(y, x)`.
fn base(
    y: &DMatrix<f64>,
    x: &DMatrix<f64>,
    prior: &PriorMoments,
) -> Result<(f64, Posterior), ModelError> {
    let post = conjugate(y, x, prior)?;
    let (n, t) = (y.ncols(), y.nrows() as f64);
    let nf = n as f64;
    let s0_logdet: f64 = prior.s0.diagonal().iter().map(|v| v.ln()).sum();
    let value = -nf * t / 2.0 * PI.ln()
        + nf / 2.0 * (post.log_det_omega() - log_det_diag(&prior.omega0))
        + prior.nu0 / 2.0 * s0_logdet
        - post.nu_bar / 2.0 * post.log_det_s()
        + ln_mvgamma(n, post.nu_bar / 2.0)
        - ln_mvgamma(n, prior.nu0 / 2.0);
    Ok((value, post))
}

/// `ln p(Y)` of the base prior updated by `(y, x)`, as [`base`] gives it, computed in the
/// data's own dimension: `E = Y − X B0 ~ MN(0, V, Σ)` with `V = I_T + X Ω0 X'` (Giannone,
/// Lenza and Primiceri 2015, appendix), so that
/// `ln p(Y) = −(nT/2) ln π − (n/2) ln|V| + (ν0/2) ln|S0| − (ν̄/2) ln|S0 + E'V⁻¹E|
///            + ln Γ_n(ν̄/2) − ln Γ_n(ν0/2)`, `ν̄ = ν0 + T`.
/// One `T × T` Cholesky factor instead of a QR of `(T + k) × k`: far cheaper when there are
/// fewer rows than coefficients (many lags).
fn base_log_ml(
    y: &DMatrix<f64>,
    x: &DMatrix<f64>,
    prior: &PriorMoments,
) -> Result<f64, ModelError> {
    let (n, t) = (y.ncols(), y.nrows());
    let nf = n as f64;
    let mut scaled = x.clone();
    for (mut col, w) in scaled.column_iter_mut().zip(prior.omega0.iter()) {
        col.scale_mut(w.sqrt());
    }
    let mut v = &scaled * scaled.transpose();
    for i in 0..t {
        v[(i, i)] += 1.0;
    }
    let chol = v.cholesky().ok_or(ModelError::Collinear)?;
    let log_det_v = 2.0 * chol.l().diagonal().iter().map(|d| d.ln()).sum::<f64>();
    let e = y - x * &prior.b0;
    let mut s_bar = e.transpose() * chol.solve(&e) + &prior.s0;
    super::posterior::symmetrise(&mut s_bar);
    let s_bar_chol = s_bar
        .cholesky()
        .ok_or(ModelError::SigmaNotPositiveDefinite {
            what: "the posterior scale matrix S̄".into(),
        })?;
    let log_det_s = 2.0
        * s_bar_chol
            .l()
            .diagonal()
            .iter()
            .map(|d| d.ln())
            .sum::<f64>();
    let s0_logdet: f64 = prior.s0.diagonal().iter().map(|v| v.ln()).sum();
    let nu_bar = prior.nu0 + t as f64;
    Ok(
        -nf * t as f64 / 2.0 * PI.ln() - nf / 2.0 * log_det_v + prior.nu0 / 2.0 * s0_logdet
            - nu_bar / 2.0 * log_det_s
            + ln_mvgamma(n, nu_bar / 2.0)
            - ln_mvgamma(n, prior.nu0 / 2.0),
    )
}

/// `ln p(Y | prior)` alone, dummy observations included (the tightness search needs no
/// posterior): by [`base_log_ml`] when the rows are fewer than about the coefficients, else
/// by [`base`].
pub fn log_ml(reg: &Regression, prior: &MinnesotaPrior) -> Result<f64, ModelError> {
    let moments = prior.moments(reg.p);
    let one = |y: &DMatrix<f64>, x: &DMatrix<f64>| {
        // Flops: T²k for V against about 2k²(T + k) for the QR.
        let (t, k) = (x.nrows() as f64, x.ncols() as f64);
        if t * t * k <= 2.0 * k * k * (t + k) {
            base_log_ml(y, x, &moments)
        } else {
            base(y, x, &moments).map(|(v, _)| v)
        }
    };
    match prior.dummies(reg) {
        None => one(&reg.y, &reg.x),
        Some((yd, xd)) => Ok(one(&stack(&yd, &reg.y), &stack(&xd, &reg.x))? - one(&yd, &xd)?),
    }
}

/// Posterior and `ln p(Y | prior)`, dummy observations included.
pub fn posterior_and_log_ml(
    reg: &Regression,
    prior: &MinnesotaPrior,
) -> Result<(f64, Posterior), ModelError> {
    let moments = prior.moments(reg.p);
    match prior.dummies(reg) {
        None => base(&reg.y, &reg.x, &moments),
        Some((yd, xd)) => {
            let (ld, _) = base(&yd, &xd, &moments)?;
            let y = stack(&yd, &reg.y);
            let x = stack(&xd, &reg.x);
            let (lall, post) = base(&y, &x, &moments)?;
            Ok((lall - ld, post))
        }
    }
}

fn stack(top: &DMatrix<f64>, bottom: &DMatrix<f64>) -> DMatrix<f64> {
    let mut m = DMatrix::zeros(top.nrows() + bottom.nrows(), top.ncols());
    m.rows_mut(0, top.nrows()).copy_from(top);
    m.rows_mut(top.nrows(), bottom.nrows()).copy_from(bottom);
    m
}

/// Result of the tightness search.
#[derive(Debug, Clone, PartialEq)]
pub struct TightnessChoice {
    pub lambda: f64,
    pub log_ml: f64,
    /// The optimum sits at an end of the search range.
    pub on_boundary: bool,
}

/// Search range of `ln λ` and grid size (ALGORITHMS §2.7).
const LN_LAMBDA_RANGE: (f64, f64) = (-6.907755278982137, 1.6094379124341003);
const GRID: usize = 25;
const LN_LAMBDA_TOL: f64 = 1e-7;

/// Maximise `ln p(Y | λ)` over `λ ∈ [1e-3, 5]`: a grid of 25 values of `ln λ`, then
/// golden-section search in the bracket around the best grid point.
pub fn choose_tightness(
    reg: &Regression,
    template: &MinnesotaPrior,
) -> Result<TightnessChoice, ModelError> {
    let eval = |ln_lambda: f64| -> Result<f64, ModelError> {
        let prior = MinnesotaPrior {
            lambda: ln_lambda.exp(),
            ..template.clone()
        };
        log_ml(reg, &prior)
    };
    let (lo, hi) = LN_LAMBDA_RANGE;
    let step = (hi - lo) / (GRID - 1) as f64;
    // The grid's evaluations are independent: in parallel (in grid order, so the first of
    // equal maxima wins as before).
    let values = (0..GRID)
        .into_par_iter()
        .map(|g| eval(lo + step * g as f64))
        .collect::<Result<Vec<f64>, _>>()?;
    let mut best = (0, f64::NEG_INFINITY);
    for (g, &v) in values.iter().enumerate() {
        if v > best.1 {
            best = (g, v);
        }
    }
    let left = lo + step * best.0.saturating_sub(1) as f64;
    let right = (lo + step * (best.0 + 1) as f64).min(hi);
    let (x, fx) = golden_max(left, right, &eval)?;
    let (x, fx) = if fx >= best.1 {
        (x, fx)
    } else {
        (lo + step * best.0 as f64, best.1)
    };
    Ok(TightnessChoice {
        lambda: x.exp(),
        log_ml: fx,
        on_boundary: (x - lo).abs() < 1e-4 || (hi - x).abs() < 1e-4,
    })
}

fn golden_max(
    mut a: f64,
    mut b: f64,
    f: &dyn Fn(f64) -> Result<f64, ModelError>,
) -> Result<(f64, f64), ModelError> {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let mut c = b - g * (b - a);
    let mut d = a + g * (b - a);
    let (mut fc, mut fd) = (f(c)?, f(d)?);
    while b - a > LN_LAMBDA_TOL {
        if fc > fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = f(c)?;
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = f(d)?;
        }
    }
    Ok(if fc > fd { (c, fc) } else { (d, fd) })
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::DVector;

    /// The two forms of `ln p(Y)` — the augmented regression's QR ([`base`], itself checked
    /// against scipy's densities in `tests/reference_marglik.rs`) and the `T × T` form
    /// ([`base_log_ml`]) — agree to rounding with fewer rows than coefficients (k = 61,
    /// T = 12, as with many lags) and with more (T = 80, k = 9).
    #[test]
    fn the_data_dimension_form_equals_the_regression_form() {
        for (t, n, p) in [(12, 3, 20), (80, 2, 4)] {
            let k = 1 + n * p;
            let x = DMatrix::from_fn(t, k, |r, c| {
                if c == 0 {
                    1.0
                } else {
                    ((r * 7 + c * 3) as f64 * 0.37).sin() + 0.1 * c as f64
                }
            });
            let y = DMatrix::from_fn(t, n, |r, c| {
                ((r + 5 * c) as f64 * 0.29).cos() + 0.05 * r as f64
            });
            let prior = PriorMoments {
                b0: DMatrix::from_fn(k, n, |r, c| if r == 1 + c { 0.9 } else { 0.0 }),
                omega0: DVector::from_fn(k, |r, _| 0.5 / (1.0 + r as f64)),
                s0: DMatrix::from_diagonal(&DVector::from_fn(n, |i, _| 0.3 + 0.1 * i as f64)),
                nu0: n as f64 + 2.0,
            };
            let (qr, _) = base(&y, &x, &prior).unwrap();
            let dual = base_log_ml(&y, &x, &prior).unwrap();
            assert!(
                (qr - dual).abs() < 1e-11 * qr.abs(),
                "T = {t}, k = {k}: {qr} against {dual}"
            );
        }
    }
}
