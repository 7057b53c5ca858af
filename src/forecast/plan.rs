//! Conditioning one θ on the pins, and drawing conditional paths.
//!
//! Rows `R` (m×N, each scaled to unit norm, values `r` alike), `r̃ = r − Rμ`, `F = R M`.
//!
//! - **All shocks move: kriging** (Rue and Held 2005). `V = K⁻¹R'` by band solves,
//!   `G = R V`, `W = V G⁻¹`; a draw `y* ~ N(μ, K⁻¹)` from the precision sampler becomes
//!   `y = y* + W (r − R y*)`. Mean `μ + W r̃`, covariance `K⁻¹ − W R K⁻¹`; `R W = I`, so every
//!   draw meets every pin.
//! - **Drivers** `J` (Antolín-Díaz, Petrella and Rubio-Ramírez 2021). Shocks outside `J` keep
//!   `N(0, 1)`; given them, `ε_J ~ N(0, I)` conditioned on `F_J ε_J = r̃ − F_J̄ ε_J̄`. With a
//!   standard normal `ε*` this is `ε = ε* + E_J F_J⁺ (r̃ − F ε*)`, then `y = μ + M ε`.
//!   With `J` = all shocks it reduces to kriging (`M⁻¹W = F⁺`).

use nalgebra::{DMatrix, DVector};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use super::{
    ForecastError,
    conditions::{Conditions, PinTarget},
    reach,
    theta::Theta,
};

/// Condition-dependent objects for one θ.
#[derive(Debug, Clone)]
pub struct Plan {
    /// Scaled rows `R` (m×N) and values `r`.
    rows: DMatrix<f64>,
    values: DVector<f64>,
    /// `r̃ = r − R μ`.
    rtilde: DVector<f64>,
    route: Route,
}

#[derive(Debug, Clone)]
enum Route {
    /// `W = K⁻¹R'G⁻¹` (N×m).
    Kriging { w: DMatrix<f64> },
    /// `F` (m×N), driver cells `J` and `F_J⁺` (|J|×m).
    Drivers {
        f: DMatrix<f64>,
        cells: Vec<usize>,
        gain: DMatrix<f64>,
    },
}

impl Plan {
    /// Build the plan; `draw` names the posterior draw in messages.
    pub fn new(
        theta: &Theta,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<Plan, ForecastError> {
        let (rows, values) = pin_rows(theta, cond);
        let big_n = theta.len();
        let m = rows.nrows();
        let mut f = DMatrix::zeros(m, big_n);
        for i in 0..m {
            let row: Vec<f64> = rows.row(i).iter().copied().collect();
            f.set_row(
                i,
                &DVector::from_vec(theta.shock_map_transpose(&row)).transpose(),
            );
        }
        let mean = DVector::from_column_slice(&theta.mean);
        let rtilde = &values - &rows * &mean;
        let mask = cond.driver_cells(theta.n(), theta.h);
        let labels: Vec<String> = cond.pins.iter().map(|p| p.label.clone()).collect();
        reach::check(&f, mask.as_deref(), &rtilde).map_err(|(kind, involved)| {
            reach::explain(kind, &involved, &labels, &cond.driver_names(), draw)
        })?;
        let route = match mask {
            None => Route::Kriging {
                w: kriging_gain(theta, &rows)?,
            },
            Some(mask) => {
                let cells: Vec<usize> = (0..big_n).filter(|&c| mask[c]).collect();
                let fj = DMatrix::from_fn(m, cells.len(), |i, k| f[(i, cells[k])]);
                let gain = fj
                    .pseudo_inverse(0.0)
                    .map_err(|e| ForecastError::Singular(format!("F_J ({e})")))?;
                Route::Drivers { f, cells, gain }
            }
        };
        Ok(Plan {
            rows,
            values,
            rtilde,
            route,
        })
    }

    pub fn pin_count(&self) -> usize {
        self.rows.nrows()
    }

    /// One conditional path and the unconditional path it was made from.
    pub fn sample<R: Rng + ?Sized>(&self, theta: &Theta, rng: &mut R) -> (Vec<f64>, Vec<f64>) {
        match &self.route {
            Route::Kriging { w } => {
                let ystar = theta.sample_unconditional(rng);
                let y = DVector::from_column_slice(&ystar);
                let gap = &self.values - &self.rows * &y;
                let y = y + w * gap;
                (y.as_slice().to_vec(), ystar)
            }
            Route::Drivers { f, cells, gain } => {
                let estar: Vec<f64> = (0..theta.len())
                    .map(|_| StandardNormal.sample(rng))
                    .collect();
                let ystar = theta.path_from_shocks(&estar);
                let gap = &self.rtilde - f * DVector::from_column_slice(&estar);
                let step = gain * gap;
                let mut eps = estar;
                for (k, &c) in cells.iter().enumerate() {
                    eps[c] += step[k];
                }
                (theta.path_from_shocks(&eps), ystar)
            }
        }
    }

    /// Largest pin error of a path, relative: `max |ρ'y − r| / (1 + |r|)` on the scaled rows.
    pub fn pin_error(&self, y: &[f64]) -> f64 {
        let y = DVector::from_column_slice(y);
        let res = &self.rows * y - &self.values;
        res.iter()
            .zip(self.values.iter())
            .map(|(e, r)| e.abs() / (1.0 + r.abs()))
            .fold(0.0, f64::max)
    }

    /// Exact mean and covariance of the conditional path (dense; for tests and checks).
    /// Kriging: `μ + W r̃` and `K⁻¹ − W R K⁻¹`. Drivers: `ε = ε* + E_J F_J⁺ (r̃ − F ε*)` is
    /// affine in `ε* ~ N(0, I)`, so the path has mean `μ + M E_J F_J⁺ r̃` and covariance
    /// `M A A' M'` with `A = I − E_J F_J⁺ F`.
    pub fn exact_moments(&self, theta: &Theta) -> (DVector<f64>, DMatrix<f64>) {
        let big_n = theta.len();
        let mean = DVector::from_column_slice(&theta.mean);
        let rtilde = &self.rtilde;
        match &self.route {
            Route::Kriging { w } => {
                let mut kinv = DMatrix::zeros(big_n, big_n);
                for c in 0..big_n {
                    let mut e = vec![0.0; big_n];
                    e[c] = 1.0;
                    theta.precision.solve_in_place(&mut e);
                    kinv.set_column(c, &DVector::from_vec(e));
                }
                let cov = &kinv - w * (&self.rows * &kinv);
                (mean + w * rtilde, cov)
            }
            Route::Drivers { f, cells, gain } => {
                let mut m = DMatrix::zeros(big_n, big_n);
                for c in 0..big_n {
                    let mut e = vec![0.0; big_n];
                    e[c] = 1.0;
                    let col = DVector::from_vec(theta.path_from_shocks(&e)) - &mean;
                    m.set_column(c, &col);
                }
                let mut e_gain = DMatrix::zeros(big_n, gain.ncols());
                for (k, &c) in cells.iter().enumerate() {
                    e_gain.set_row(c, &gain.row(k));
                }
                let a = DMatrix::identity(big_n, big_n) - &e_gain * f;
                let ma = &m * a;
                (mean + &m * (&e_gain * rtilde), &ma * ma.transpose())
            }
        }
    }
}

/// `W = K⁻¹ R' G⁻¹` with `G = R K⁻¹ R'` (band solves, then a Cholesky of `G`).
fn kriging_gain(theta: &Theta, rows: &DMatrix<f64>) -> Result<DMatrix<f64>, ForecastError> {
    let (m, big_n) = rows.shape();
    let mut v = DMatrix::zeros(big_n, m);
    for i in 0..m {
        let mut col: Vec<f64> = rows.row(i).iter().copied().collect();
        theta.precision.solve_in_place(&mut col);
        v.set_column(i, &DVector::from_vec(col));
    }
    let g = rows * &v;
    let chol = g.cholesky().ok_or(ForecastError::Singular(
        "the pin Gram matrix G = R K⁻¹ R'".into(),
    ))?;
    // W' = G⁻¹ V'.
    Ok(chol.solve(&v.transpose()).transpose())
}

/// Rows of `R` and values `r` for this θ, each row scaled to unit Euclidean norm.
fn pin_rows(theta: &Theta, cond: &Conditions) -> (DMatrix<f64>, DVector<f64>) {
    let big_n = theta.len();
    let m = cond.pins.len();
    let mut rows = DMatrix::zeros(m, big_n);
    let mut values = DVector::zeros(m);
    for (i, pin) in cond.pins.iter().enumerate() {
        let (terms, value) = match &pin.target {
            PinTarget::Path { terms, value } => (terms.clone(), *value),
            PinTarget::Shock {
                horizon,
                shock,
                value,
            } => {
                let terms = theta.shock_row(*horizon, *shock);
                let offset: f64 = terms.iter().map(|(c, a)| a * theta.mean[*c]).sum();
                (terms, value + offset)
            }
        };
        for (c, a) in terms {
            rows[(i, c)] += a;
        }
        let norm = rows.row(i).norm();
        if norm > 0.0 {
            rows.row_mut(i).scale_mut(1.0 / norm);
            values[i] = value / norm;
        } else {
            values[i] = value;
        }
    }
    (rows, values)
}
