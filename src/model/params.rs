//! One set of VAR parameters θ = (B, Σ).
//!
//! `y_t = b0 + B_1 y_{t-1} + … + B_p y_{t-p} + u_t`, `u_t ~ N(0, Σ)`.
//! Stacked coefficients `B` (k×n, k = 1 + n p): row 0 is `b0'`, row `1 + (l-1) n + j`,
//! column `i` is `(B_l)_{ij}`, the effect of series `j` at lag `l` on series `i`.

use nalgebra::{DMatrix, DVector};

use super::ModelError;

/// VAR coefficients and innovation covariance, with the lag matrices unpacked.
#[derive(Debug, Clone)]
pub struct Params {
    /// Intercept `b0` (n).
    pub intercept: DVector<f64>,
    /// `lags[l-1] = B_l` (n×n), `(B_l)_{ij}` = effect of series j at lag l on series i.
    pub lags: Vec<DMatrix<f64>>,
    /// Innovation covariance `Σ` (n×n).
    pub sigma: DMatrix<f64>,
}

impl Params {
    /// Unpack a stacked k×n coefficient matrix.
    pub fn from_stacked(coefs: &DMatrix<f64>, sigma: DMatrix<f64>) -> Params {
        let n = coefs.ncols();
        let p = (coefs.nrows() - 1) / n;
        let intercept = coefs.row(0).transpose();
        let lags = (0..p)
            .map(|l| coefs.rows(1 + l * n, n).transpose())
            .collect();
        Params {
            intercept,
            lags,
            sigma,
        }
    }

    /// Build from fixed coefficients given by the user, checking shapes and Σ.
    pub fn fixed(
        intercept: Vec<f64>,
        lags: Vec<Vec<Vec<f64>>>,
        sigma: Vec<Vec<f64>>,
    ) -> Result<Params, ModelError> {
        let n = intercept.len();
        let square = |name: &str, rows: &[Vec<f64>]| -> Result<DMatrix<f64>, ModelError> {
            if rows.len() != n || rows.iter().any(|r| r.len() != n) {
                return Err(ModelError::Shape {
                    what: name.to_string(),
                    expected: format!("{n}×{n} (one row per series, {n} numbers each)"),
                });
            }
            if rows.iter().flatten().any(|v| !v.is_finite()) {
                return Err(ModelError::NotFinite {
                    what: name.to_string(),
                });
            }
            Ok(DMatrix::from_fn(n, n, |i, j| rows[i][j]))
        };
        if lags.is_empty() {
            return Err(ModelError::Shape {
                what: "lags".into(),
                expected: "at least one lag matrix".into(),
            });
        }
        if intercept.iter().any(|v| !v.is_finite()) {
            return Err(ModelError::NotFinite {
                what: "intercept".into(),
            });
        }
        let lag_mats = lags
            .iter()
            .enumerate()
            .map(|(l, m)| square(&format!("lags[{}] (lag {})", l, l + 1), m))
            .collect::<Result<Vec<_>, _>>()?;
        let sigma = square("sigma", &sigma)?;
        if (&sigma - sigma.transpose()).amax() > 1e-10 * sigma.amax().max(1.0) {
            return Err(ModelError::SigmaNotSymmetric);
        }
        if sigma.clone().cholesky().is_none() {
            return Err(ModelError::SigmaNotPositiveDefinite {
                what: "the fixed residual covariance sigma".into(),
            });
        }
        Ok(Params {
            intercept: DVector::from_vec(intercept),
            lags: lag_mats,
            sigma,
        })
    }

    pub fn n(&self) -> usize {
        self.intercept.len()
    }

    pub fn p(&self) -> usize {
        self.lags.len()
    }

    /// Largest modulus of the companion matrix's eigenvalues (≥ 1: explosive or unit root).
    pub fn spectral_radius(&self) -> f64 {
        super::roots::spectral_radius(super::roots::companion(&self.lags))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Closed forms: a triangular VAR(1) has its diagonal as roots; a scalar AR(2)
    /// `y_t = a y_{t−1} + b y_{t−2}` has the roots of `z² − a z − b`, here
    /// `a = 1.1, b = −0.3`: z = 0.6 and 0.5; `a = 0.2, b = −0.5`: a complex pair of modulus
    /// `√0.5`.
    #[test]
    fn spectral_radius_matches_closed_forms() {
        let var1 = |m: &[f64]| Params {
            intercept: DVector::zeros(2),
            lags: vec![DMatrix::from_row_slice(2, 2, m)],
            sigma: DMatrix::identity(2, 2),
        };
        assert!((var1(&[0.7, 3.0, 0.0, -1.2]).spectral_radius() - 1.2).abs() < 1e-14);
        let ar2 = |a: f64, b: f64| Params {
            intercept: DVector::zeros(1),
            lags: vec![
                DMatrix::from_element(1, 1, a),
                DMatrix::from_element(1, 1, b),
            ],
            sigma: DMatrix::identity(1, 1),
        };
        assert!((ar2(1.1, -0.3).spectral_radius() - 0.6).abs() < 1e-14);
        assert!((ar2(0.2, -0.5).spectral_radius() - 0.5f64.sqrt()).abs() < 1e-14);
    }
}
