//! The dense Gaussian engine (ALGORITHMS §11.1): the full forecast covariance `C = M M'`
//! (N × N) formed and factored, conditioning by the textbook formulas.
//!
//! - every shock free: `V = C 𝒢'`, `Γ = 𝒢 V`, `W = V Γ⁻¹`; the corridor quantities given
//!   the pins are `N(Sμ + Γ_SR Γ_RR⁻¹ r̃, Γ_SS − Γ_SR Γ_RR⁻¹ Γ_RS)`; a path is
//!   `y* = μ + chol(C) z`, then `y = y* + W((r; z) − 𝒢 y*)`;
//! - drivers `J`: `F = 𝒢 M` dense, `F_J⁺` by a singular value decomposition; given the
//!   non-driver shocks the corridor quantities are Gaussian with mean
//!   `Sμ + F_SJ F_RJ⁺ r̃ + (F_SJ̄ − F_SJ F_RJ⁺ F_RJ̄) ε*_J̄` and covariance
//!   `F_SJ (I − F_RJ⁺ F_RJ) F_SJ'`; `ε = ε* + E_J F_J⁺((r̃; z − Sμ) − F ε*)`, `y = μ + M ε`.
//!
//! It shares with the main engine only the rows of the conditions, the shock map `M` (built
//! here as a dense matrix) and the truncated-normal sampler; its cost is `O(N³)` per θ.

use nalgebra::{DMatrix, DVector};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use crate::forecast::{
    ForecastError, Theta, conditions::Conditions, corridor::CorridorLaw, plan::Drawn, product::mul,
    rows::Rows,
};

#[derive(Debug, Clone)]
pub struct DensePlan {
    rows: Rows,
    stacked: DMatrix<f64>,
    mean: DVector<f64>,
    smean: DVector<f64>,
    rtilde: DVector<f64>,
    route: Route,
    law: Option<CorridorLaw>,
    draw: Option<usize>,
}

#[derive(Debug, Clone)]
enum Route {
    /// `chol(C)` and `W = C𝒢'Γ⁻¹`.
    Free { chol: DMatrix<f64>, w: DMatrix<f64> },
    /// Dense `M`, `F = 𝒢M`, the driver cells, the others, and `F_J⁺`.
    Drivers {
        m: DMatrix<f64>,
        f: DMatrix<f64>,
        cells: Vec<usize>,
        rest: Vec<usize>,
        gain: DMatrix<f64>,
    },
}

fn pinv(a: &DMatrix<f64>) -> Result<DMatrix<f64>, ForecastError> {
    if a.nrows() == 0 {
        return Ok(DMatrix::zeros(a.ncols(), 0));
    }
    a.clone()
        .pseudo_inverse(1e-14 * a.amax())
        .map_err(|e| ForecastError::Singular(format!("the dense engine's F_J ({e})")))
}

fn columns(f: &DMatrix<f64>, cols: &[usize]) -> DMatrix<f64> {
    DMatrix::from_fn(f.nrows(), cols.len(), |i, k| f[(i, cols[k])])
}

impl DensePlan {
    pub fn new(
        theta: &Theta,
        rows: Rows,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<DensePlan, ForecastError> {
        let big_n = theta.len();
        let g = rows.stacked();
        let (m, q) = (rows.pins.nrows(), rows.corridors.nrows());
        let mean = DVector::from_column_slice(&theta.mean);
        let rtilde = &rows.values - &rows.pins * &mean;
        let smean = &rows.corridors * &mean;
        let mut dense_m = DMatrix::identity(big_n, big_n);
        theta.shocks_to_paths(&mut dense_m);
        let singular = |what: &str| {
            ForecastError::Singular(format!(
                "{what} in the dense engine (not positive definite to working precision: a long horizon or an explosive draw; the main engine does not need it)"
            ))
        };
        let (route, law) = match cond.driver_cells(theta.n(), theta.h) {
            None => {
                let c = &dense_m * dense_m.transpose();
                let chol = c
                    .clone()
                    .cholesky()
                    .ok_or_else(|| singular("the forecast covariance C = M M'"))?
                    .l();
                let v = &c * g.transpose();
                let gamma = &g * &v;
                let gchol =
                    gamma
                        .clone()
                        .cholesky()
                        .ok_or_else(|| ForecastError::NearlyDependent {
                            conditions: rows.labels(),
                            draw,
                        })?;
                let w = gchol.solve(&v.transpose()).transpose();
                let law = (q > 0)
                    .then(|| {
                        let gss = gamma.view((m, m), (q, q)).into_owned();
                        let gsr = gamma.view((m, 0), (q, m)).into_owned();
                        let (law_mean, cov) = if m == 0 {
                            (smean.clone(), gss)
                        } else {
                            let grr = gamma.view((0, 0), (m, m)).into_owned();
                            let c = grr
                                .cholesky()
                                .ok_or_else(|| singular("the pins' Gram matrix"))?;
                            let solved = c.solve(&gsr.transpose());
                            (&smean + solved.transpose() * &rtilde, gss - &gsr * solved)
                        };
                        CorridorLaw::new(cov, law_mean, None, rows.law_rows().clone(), None)
                    })
                    .transpose()?;
                (Route::Free { chol, w }, law)
            }
            Some(mask) => {
                let f = &g * &dense_m;
                let cells: Vec<usize> = (0..big_n).filter(|&c| mask[c]).collect();
                let rest: Vec<usize> = (0..big_n).filter(|&c| !mask[c]).collect();
                let fj = columns(&f, &cells);
                let gain = pinv(&fj)?;
                let law = (q > 0)
                    .then(|| {
                        let (frj, fsj) = (fj.rows(0, m).into_owned(), fj.rows(m, q).into_owned());
                        let fr_rest = columns(&f, &rest).rows(0, m).into_owned();
                        let fs_rest = columns(&f, &rest).rows(m, q).into_owned();
                        let pr = pinv(&frj)?;
                        let fsj_pr = &fsj * &pr;
                        let cov = &fsj * fsj.transpose() - &fsj_pr * (&frj * fsj.transpose());
                        let m0 = &smean + &fsj_pr * &rtilde;
                        let shift = fs_rest - &fsj_pr * fr_rest;
                        CorridorLaw::new(cov, m0, Some(shift), rows.law_rows().clone(), None)
                    })
                    .transpose()?;
                let route = Route::Drivers {
                    m: dense_m,
                    f,
                    cells,
                    rest,
                    gain,
                };
                (route, law)
            }
        };
        Ok(DensePlan {
            rows,
            stacked: g,
            mean,
            smean,
            rtilde,
            route,
            law,
            draw,
        })
    }

    pub fn rows(&self) -> &Rows {
        &self.rows
    }

    /// The textbook pinned mean and covariance, `μ + W r̃` and `C − W 𝒢 C`, every shock free
    /// and no corridors (`None` otherwise).
    pub fn exact_moments(&self) -> Option<(DVector<f64>, DMatrix<f64>)> {
        let Route::Free { chol, w } = &self.route else {
            return None;
        };
        if self.law.is_some() {
            return None;
        }
        let c = chol * chol.transpose();
        let mean = &self.mean + w * &self.rtilde;
        let cov = &c - w * (&self.stacked * &c);
        Some((mean, cov))
    }

    /// One path per random stream (its N normals, then its corridor quantities), the
    /// products over all of them at once.
    pub fn sample_many<R: Rng + ?Sized>(&self, rngs: &mut [&mut R]) -> Vec<Drawn> {
        let (big_n, count, m) = (self.mean.len(), rngs.len(), self.rows.pins.nrows());
        let k = self.stacked.nrows();
        let mut normals = DMatrix::zeros(big_n, count);
        let mut target = DMatrix::zeros(k, count);
        let mut failed: Vec<Option<ForecastError>> = vec![None; count];
        let rest: &[usize] = match &self.route {
            Route::Free { .. } => &[],
            Route::Drivers { rest, .. } => rest,
        };
        let free = matches!(self.route, Route::Free { .. });
        for (j, rng) in rngs.iter_mut().enumerate() {
            for i in 0..big_n {
                normals[(i, j)] = StandardNormal.sample(&mut **rng);
            }
            let pins = if free {
                &self.rows.values
            } else {
                &self.rtilde
            };
            target.view_mut((0, j), (m, 1)).copy_from(pins);
            if let Some(law) = &self.law {
                let nondrivers: Vec<f64> = rest.iter().map(|&c| normals[(c, j)]).collect();
                match law.draw(&nondrivers, &mut **rng, self.draw) {
                    Ok(z) => {
                        let z = if free { z } else { z - &self.smean };
                        target.view_mut((m, j), (z.len(), 1)).copy_from(&z);
                    }
                    Err(e) => failed[j] = Some(e),
                }
            }
        }
        let add_mean = |mut x: DMatrix<f64>| {
            for mut col in x.column_iter_mut() {
                col += &self.mean;
            }
            x
        };
        let (y, ystar) = match &self.route {
            Route::Free { chol, w } => {
                let ystar = add_mean(chol * &normals);
                let y = &ystar + mul(w, &(target - mul(&self.stacked, &ystar)));
                (y, ystar)
            }
            Route::Drivers {
                m: dense_m,
                f,
                cells,
                gain,
                ..
            } => {
                let ystar = add_mean(dense_m * &normals);
                let step = mul(gain, &(target - mul(f, &normals)));
                let mut eps = normals;
                for (k, &c) in cells.iter().enumerate() {
                    let row = eps.row(c) + step.row(k);
                    eps.set_row(c, &row);
                }
                (add_mean(dense_m * eps), ystar)
            }
        };
        failed
            .into_iter()
            .enumerate()
            .map(|(j, f)| match f {
                Some(e) => Err(e),
                None => Ok((
                    y.column(j).as_slice().to_vec(),
                    ystar.column(j).as_slice().to_vec(),
                )),
            })
            .collect()
    }
}
