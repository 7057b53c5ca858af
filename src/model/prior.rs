//! Minnesota-type natural-conjugate Normal–inverse-Wishart prior (Litterman 1986;
//! Kadiyala and Karlsson 1997) and its optional dummy observations.
//!
//! `Σ ~ IW(S0, ν0)`, `vec(B) | Σ ~ N(vec(B0), Σ ⊗ Ω0)` with
//! - `ν0 = n + 2`, `S0 = (ν0 − n − 1) diag(s²)` so that `E[Σ] = diag(s²)`;
//! - `B0` zero except `B0[1 + i, i] = δ_i` (first own lag: 1 random walk, 0 white noise);
//! - `Ω0` diagonal: `κ0²` for the intercept, `λ² / (l^{2α} s_j²)` for lag `l` of series `j`.
//!
//! Scales `s_i² = SSR_i / (T − 2)` from an AR(1) with intercept per series over the same rows.
//! Dummy observations: sum of coefficients (Doan, Litterman and Sims 1984) and a single
//! unit root (Sims 1993; Sims and Zha 1998), built around the mean `ȳ0` of the presample rows.

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

use super::data::Regression;

/// How the overall tightness `λ` is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Tightness {
    /// Maximise the closed-form marginal likelihood (Giannone, Lenza and Primiceri 2015).
    Auto,
    /// A value set by the user.
    Fixed(f64),
}

/// A fully specified prior for one estimation.
#[derive(Debug, Clone, PartialEq)]
pub struct MinnesotaPrior {
    pub lambda: f64,
    pub lag_decay: f64,
    pub intercept_scale: f64,
    /// Prior mean of each series' first own lag.
    pub delta: Vec<f64>,
    /// Residual scales `s_i²`.
    pub s2: Vec<f64>,
    /// Sum-of-coefficients tightness `μ_soc` (smaller is tighter).
    pub sum_of_coefficients: Option<f64>,
    /// Single-unit-root tightness `δ_sur`.
    pub single_unit_root: Option<f64>,
}

/// Prior moments in the form the conjugate update needs.
pub struct PriorMoments {
    pub b0: DMatrix<f64>,
    pub omega0: DVector<f64>,
    pub s0: DMatrix<f64>,
    pub nu0: f64,
}

impl MinnesotaPrior {
    pub fn moments(&self, p: usize) -> PriorMoments {
        let n = self.delta.len();
        let k = 1 + n * p;
        let mut b0 = DMatrix::zeros(k, n);
        for (i, d) in self.delta.iter().enumerate() {
            b0[(1 + i, i)] = *d;
        }
        let mut omega0 = DVector::zeros(k);
        omega0[0] = self.intercept_scale.powi(2);
        for l in 1..=p {
            let decay = (l as f64).powf(2.0 * self.lag_decay);
            for j in 0..n {
                omega0[1 + (l - 1) * n + j] = self.lambda.powi(2) / (decay * self.s2[j]);
            }
        }
        let nu0 = n as f64 + 2.0;
        let s0 = DMatrix::from_diagonal(&DVector::from_iterator(
            n,
            self.s2.iter().map(|s| (nu0 - n as f64 - 1.0) * s),
        ));
        PriorMoments {
            b0,
            omega0,
            s0,
            nu0,
        }
    }

    /// Dummy rows `(Y_d, X_d)`, or `None` when neither dummy is used.
    pub fn dummies(&self, reg: &Regression) -> Option<(DMatrix<f64>, DMatrix<f64>)> {
        let (n, p) = (reg.n(), reg.p);
        let ybar = &reg.presample_mean;
        let mut rows: Vec<(DVector<f64>, DVector<f64>)> = Vec::new();
        if let Some(mu) = self.sum_of_coefficients {
            for i in (0..n).filter(|&i| self.delta[i] == 1.0) {
                let mut yd = DVector::zeros(n);
                yd[i] = ybar[i] / mu;
                let mut xd = DVector::zeros(1 + n * p);
                for l in 0..p {
                    xd[1 + l * n + i] = ybar[i] / mu;
                }
                rows.push((yd, xd));
            }
        }
        if let Some(d) = self.single_unit_root {
            let yd = ybar / d;
            let mut xd = DVector::zeros(1 + n * p);
            xd[0] = 1.0 / d;
            for l in 0..p {
                xd.rows_mut(1 + l * n, n).copy_from(&yd);
            }
            rows.push((yd, xd));
        }
        if rows.is_empty() {
            return None;
        }
        let yd = DMatrix::from_fn(rows.len(), n, |r, c| rows[r].0[c]);
        let xd = DMatrix::from_fn(rows.len(), 1 + n * p, |r, c| rows[r].1[c]);
        Some((yd, xd))
    }
}

/// `s_i²` of an AR(1) with intercept fitted to each series over the regression rows,
/// floored at `(1e-8 · max |y_i|)²`, relative to the series' own size (a series that is
/// identically zero: `1e-16`). Returns the scales and the series floored (constant over the
/// rows to eight digits).
pub fn residual_scales(reg: &Regression) -> (Vec<f64>, Vec<usize>) {
    let t = reg.t();
    let mut floored = Vec::new();
    let s2 = (0..reg.n())
        .map(|i| {
            let y = reg.y.column(i);
            let x = reg.x.column(1 + i);
            let (my, mx) = (y.mean(), x.mean());
            let sxx: f64 = x.iter().map(|v| (v - mx).powi(2)).sum();
            let sxy: f64 = x
                .iter()
                .zip(y.iter())
                .map(|(a, b)| (a - mx) * (b - my))
                .sum();
            let slope = if sxx > 0.0 { sxy / sxx } else { 0.0 };
            let ssr: f64 = x
                .iter()
                .zip(y.iter())
                .map(|(a, b)| (b - my - slope * (a - mx)).powi(2))
                .sum();
            let s2 = ssr / (t as f64 - 2.0);
            let size = y.amax();
            let floor = (1e-8 * if size > 0.0 { size } else { 1.0 }).powi(2);
            if s2.is_nan() || s2 <= floor {
                floored.push(i);
                floor
            } else {
                s2
            }
        })
        .collect();
    (s2, floored)
}
