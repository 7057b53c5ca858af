//! Conditioning one θ on the pins and corridors, and drawing conditional paths.
//!
//! Stacked rows `𝒢 = [R; S]` (pins, then independent corridor rows; [`super::rows`]), pin values
//! `r`, `r̃ = r − Rμ`, `Γ = 𝒢 K⁻¹ 𝒢'`, `F = 𝒢 M`.
//!
//! - **All shocks move: kriging** (Rue and Held 2005). `V = K⁻¹𝒢'` by band solves,
//!   `W = V Γ⁻¹`. The corridor quantities `z = S y` given the pins are
//!   `N(Sμ + Γ_SR Γ_RR⁻¹ r̃, Γ_SS − Γ_SR Γ_RR⁻¹ Γ_RS)`, drawn truncated to the corridors
//!   ([`super::corridor`]); a draw `y* ~ N(μ, K⁻¹)` from the precision sampler becomes
//!   `y = y* + W ((r; z) − 𝒢 y*)`, which meets `R y = r` and `S y = z` exactly (ALGORITHMS §6.2).
//! - **Drivers** `J` (Antolín-Díaz, Petrella and Rubio-Ramírez 2021). Shocks outside `J` keep
//!   `N(0, 1)`; given them, `ε_J ~ N(0, I)` conditioned on the pins and corridors. With a
//!   standard normal `ε*`, the corridor quantities given `ε*_J̄` are Gaussian with mean
//!   `Sμ + F_SJ F_RJ⁺ r̃ + (F_SJ̄ − F_SJ F_RJ⁺ F_RJ̄) ε*_J̄` and covariance
//!   `F_SJ (I − F_RJ⁺F_RJ) F_SJ'`; with `z` drawn from it truncated to the corridors,
//!   `ε = ε* + E_J F_J⁺ ((r̃; z − Sμ) − F ε*)` and `y = μ + M ε` (ALGORITHMS §5.3–5.4).
//!   With `J` = all shocks it reduces to kriging (`M⁻¹W = F⁺`).

use nalgebra::{DMatrix, DVector};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use super::{
    ForecastError,
    conditions::Conditions,
    corridor::{CorridorLaw, LawRows},
    reach,
    rows::Rows,
    theta::Theta,
};
use crate::truncnorm::Probability;

/// The pins-only shock law in low-rank form: `ε = mean + (I − gain · rows) ε*`.
#[derive(Debug, Clone)]
pub struct ShockLaw {
    /// `μ_ε` (N).
    pub mean: DVector<f64>,
    /// `U` (N×m).
    pub gain: DMatrix<f64>,
    /// `F_R = R M` (m×N).
    pub rows: DMatrix<f64>,
}

/// Condition-dependent objects for one θ.
#[derive(Debug, Clone)]
pub struct Plan {
    rows: Rows,
    /// `𝒢 = [R; S]`.
    stacked: DMatrix<f64>,
    /// `r̃ = r − R μ` (kept pins).
    rtilde: DVector<f64>,
    /// `S μ` (kept corridor rows).
    smean: DVector<f64>,
    /// `Γ = 𝒢 K⁻¹ 𝒢'`.
    gamma: DMatrix<f64>,
    route: Route,
    /// The corridor quantities' law under this route (none without corridors).
    law: Option<CorridorLaw>,
    draw: Option<usize>,
}

#[derive(Debug, Clone)]
enum Route {
    /// `W = K⁻¹𝒢'Γ⁻¹` (N × (m+q)).
    Kriging { w: DMatrix<f64> },
    /// `F` ((m+q)×N), driver cells `J`, the other cells, and `F_J⁺` (|J|×(m+q)).
    Drivers {
        f: DMatrix<f64>,
        cells: Vec<usize>,
        rest: Vec<usize>,
        gain: DMatrix<f64>,
    },
}

fn columns(f: &DMatrix<f64>, cols: &[usize]) -> DMatrix<f64> {
    DMatrix::from_fn(f.nrows(), cols.len(), |i, k| f[(i, cols[k])])
}

fn pinv(a: &DMatrix<f64>) -> Result<DMatrix<f64>, ForecastError> {
    if a.nrows() == 0 {
        return Ok(DMatrix::zeros(a.ncols(), 0));
    }
    a.clone()
        .pseudo_inverse(0.0)
        .map_err(|e| ForecastError::Singular(format!("F_J ({e})")))
}

/// `F = 𝒢 M`, row by row as `(M' ρ)'`.
fn shock_rows(theta: &Theta, g: &DMatrix<f64>) -> DMatrix<f64> {
    let mut f = DMatrix::zeros(g.nrows(), g.ncols());
    for i in 0..g.nrows() {
        let row: Vec<f64> = g.row(i).iter().copied().collect();
        f.set_row(
            i,
            &DVector::from_vec(theta.shock_map_transpose(&row)).transpose(),
        );
    }
    f
}

impl Plan {
    /// Build the plan; `draw` names the posterior draw in messages.
    pub fn new(
        theta: &Theta,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<Plan, ForecastError> {
        let rows = Rows::new(theta, cond, draw)?;
        let g = rows.stacked();
        let (m, q) = (rows.pins.nrows(), rows.corridors.nrows());
        let mean = DVector::from_column_slice(&theta.mean);
        let rtilde = &rows.values - &rows.pins * &mean;
        let smean = &rows.corridors * &mean;
        let (route, gamma, law) = match cond.driver_cells(theta.n(), theta.h) {
            None => {
                let (w, gamma) = kriging_gain(theta, &g, &rows.labels(), draw)?;
                let law = (q > 0)
                    .then(|| model_law(&gamma, m, &rtilde, &smean, &rows))
                    .transpose()?;
                (Route::Kriging { w }, gamma, law)
            }
            Some(mask) => {
                let f = shock_rows(theta, &g);
                let all = rows.labels();
                reach::check(&f, &mask).map_err(|involved| ForecastError::Unreachable {
                    conditions: involved.iter().map(|&i| all[i].clone()).collect(),
                    drivers: cond.driver_names(),
                    draw,
                })?;
                let cells: Vec<usize> = (0..theta.len()).filter(|&c| mask[c]).collect();
                let rest: Vec<usize> = (0..theta.len()).filter(|&c| !mask[c]).collect();
                let fj = columns(&f, &cells);
                let gain = pinv(&fj)?;
                let gamma = &f * f.transpose();
                well_conditioned(&gamma, &all, draw)?;
                let law = if q > 0 {
                    let (frj, fsj) = (fj.rows(0, m).into_owned(), fj.rows(m, q).into_owned());
                    let fr_rest = columns(&f, &rest).rows(0, m).into_owned();
                    let fs_rest = columns(&f, &rest).rows(m, q).into_owned();
                    let pr = pinv(&frj)?;
                    let fsj_pr = &fsj * &pr;
                    let cov = &fsj * fsj.transpose() - &fsj_pr * (&frj * fsj.transpose());
                    let m0 = &smean + &fsj_pr * &rtilde;
                    let shift = fs_rest - &fsj_pr * fr_rest;
                    Some(CorridorLaw::new(cov, m0, Some(shift), law_rows(&rows))?)
                } else {
                    None
                };
                let route = Route::Drivers {
                    f,
                    cells,
                    rest,
                    gain,
                };
                (route, gamma, law)
            }
        };
        Ok(Plan {
            stacked: g,
            rows,
            rtilde,
            smean,
            gamma,
            route,
            law,
            draw,
        })
    }

    pub fn pin_count(&self) -> usize {
        self.rows.pins.nrows()
    }

    pub fn corridor_count(&self) -> usize {
        self.rows.corridors.nrows()
    }

    /// `Γ = 𝒢 K⁻¹ 𝒢'` of the kept rows (pins, then corridor rows).
    pub fn gram(&self) -> &DMatrix<f64> {
        &self.gamma
    }

    /// Estimated acceptance rate of this plan's corridor sampler (at non-driver shocks zero),
    /// by `n` proposals; `None` without corridors.
    pub fn acceptance<R: Rng + ?Sized>(
        &self,
        rng: &mut R,
        n: usize,
    ) -> Result<Option<f64>, ForecastError> {
        let zeros = vec![0.0; self.nondriver_count()];
        Ok(self
            .corridor_probability(&zeros, rng, n)?
            .map(|p| p.acceptance()))
    }

    /// The corridors of this plan (each once), for messages.
    pub fn corridor_names(&self) -> Vec<String> {
        let mut names: Vec<String> = Vec::new();
        for n in &self.rows.corridor_names {
            if !names.contains(n) {
                names.push(n.clone());
            }
        }
        names
    }

    /// What the row analysis dropped or merged.
    pub fn notes(&self) -> &[String] {
        &self.rows.notes
    }

    /// One conditional path and the unconditional path it was made from.
    pub fn sample<R: Rng + ?Sized>(
        &self,
        theta: &Theta,
        rng: &mut R,
    ) -> Result<(Vec<f64>, Vec<f64>), ForecastError> {
        let m = self.pin_count();
        match &self.route {
            Route::Kriging { w } => {
                let ystar = theta.sample_unconditional(rng);
                let y = DVector::from_column_slice(&ystar);
                let mut target = self.rows.values.clone();
                if let Some(law) = &self.law {
                    let z = law.draw(&[], rng, self.draw)?;
                    target = target.resize_vertically(m + z.len(), 0.0);
                    target.rows_mut(m, z.len()).copy_from(&z);
                }
                // One correction, then one refinement of the rounding it leaves (`𝒢W = I` in
                // exact arithmetic, so the second step only removes rounding; it matters on long,
                // explosive horizons).
                let mut y = y;
                for _ in 0..2 {
                    let gap = &target - &self.stacked * &y;
                    y += w * gap;
                }
                Ok((y.as_slice().to_vec(), ystar))
            }
            Route::Drivers {
                f,
                cells,
                rest,
                gain,
            } => {
                let estar: Vec<f64> = (0..theta.len())
                    .map(|_| StandardNormal.sample(rng))
                    .collect();
                let ystar = theta.path_from_shocks(&estar);
                let mut target = self.rtilde.clone();
                if let Some(law) = &self.law {
                    let nondrivers: Vec<f64> = rest.iter().map(|&c| estar[c]).collect();
                    let z = law.draw(&nondrivers, rng, self.draw)? - &self.smean;
                    target = target.resize_vertically(m + z.len(), 0.0);
                    target.rows_mut(m, z.len()).copy_from(&z);
                }
                let gap = target - f * DVector::from_column_slice(&estar);
                let step = gain * gap;
                let mut eps = estar;
                for (k, &c) in cells.iter().enumerate() {
                    eps[c] += step[k];
                }
                Ok((theta.path_from_shocks(&eps), ystar))
            }
        }
    }

    /// Largest relative pin error of a path (over every pin, also those found redundant).
    pub fn pin_error(&self, y: &[f64]) -> f64 {
        self.rows.pin_error(y)
    }

    /// Largest relative corridor violation of a path (0 when all hold).
    pub fn corridor_violation(&self, y: &[f64]) -> f64 {
        self.rows.corridor_violation(y)
    }

    /// Pin z-scores `r̃_i / sqrt(G_ii)` and the Mahalanobis distance `d² = r̃'G⁻¹r̃`,
    /// `G = R K⁻¹ R'`, with the labels of the (kept) pins.
    pub fn pin_surprise(&self) -> (Vec<(String, f64)>, f64) {
        let m = self.pin_count();
        let g = self.gamma.view((0, 0), (m, m)).into_owned();
        let z = (0..m)
            .map(|i| {
                (
                    self.rows.pin_labels[i].clone(),
                    self.rtilde[i] / g[(i, i)].sqrt(),
                )
            })
            .collect();
        let d2 = g
            .cholesky()
            .map(|c| self.rtilde.dot(&c.solve(&self.rtilde)))
            .unwrap_or(f64::INFINITY);
        (z, d2)
    }

    /// `ln p(r | θ) = −½ (m ln 2π + ln|G| + r̃'G⁻¹r̃)`: the density of the pinned values under
    /// the unconditional forecast (ALGORITHMS §8.4), in the rows' own (unscaled) units — the
    /// scale of a shock pin's row depends on θ, so it must not be left in the weight.
    pub fn pin_log_density(&self) -> f64 {
        let m = self.pin_count();
        if m == 0 {
            return 0.0;
        }
        let g = self.gamma.view((0, 0), (m, m)).into_owned();
        match g.cholesky() {
            Some(c) => {
                let logdet: f64 = 2.0 * c.l().diagonal().iter().map(|d| d.ln()).sum::<f64>();
                let d2 = self.rtilde.dot(&c.solve(&self.rtilde));
                let jacobian: f64 = self.rows.pin_norms.iter().map(|c| c.ln()).sum();
                -0.5 * (m as f64 * (2.0 * std::f64::consts::PI).ln() + logdet + d2) - jacobian
            }
            None => f64::NEG_INFINITY,
        }
    }

    /// The model's law of the corridor quantities given the pins, every shock free — the
    /// basis of the corridor probability `P(a ≤ S y ≤ b | pins)` (none without corridors).
    pub fn model_law(&self) -> Result<Option<CorridorLaw>, ForecastError> {
        if self.corridor_count() == 0 {
            return Ok(None);
        }
        if let Route::Kriging { .. } = self.route {
            return Ok(self.law.clone());
        }
        model_law(
            &self.gamma,
            self.pin_count(),
            &self.rtilde,
            &self.smean,
            &self.rows,
        )
        .map(Some)
    }

    /// Probability of the corridors under this plan's own law given the non-driver shocks
    /// (drivers) or outright (every shock free), by `n` proposals.
    pub fn corridor_probability<R: Rng + ?Sized>(
        &self,
        nondrivers: &[f64],
        rng: &mut R,
        n: usize,
    ) -> Result<Option<Probability>, ForecastError> {
        self.law
            .as_ref()
            .map(|law| law.probability(nondrivers, rng, n))
            .transpose()
    }

    /// Number of non-driver shock cells (0 when every shock drives).
    pub fn nondriver_count(&self) -> usize {
        match &self.route {
            Route::Kriging { .. } => 0,
            Route::Drivers { rest, .. } => rest.len(),
        }
    }

    /// The pins-only scenario distribution of the shocks, `ε = μ_ε + (I − U F_R) ε*` with
    /// `ε* ~ N(0, I)`: every shock free, `U = F_R⁺`; with drivers, `U = E_J F_RJ⁺`; and
    /// `μ_ε = U r̃` (ALGORITHMS §5.2–5.3).
    pub fn pin_shock_law(&self, theta: &Theta) -> Result<ShockLaw, ForecastError> {
        let big_n = theta.len();
        let m = self.pin_count();
        let (fr, cells) = match &self.route {
            Route::Kriging { .. } => (shock_rows(theta, &self.rows.pins), (0..big_n).collect()),
            Route::Drivers { f, cells, .. } => (f.rows(0, m).into_owned(), cells.clone()),
        };
        let gain = pinv(&columns(&fr, &cells))?;
        let mut u = DMatrix::zeros(big_n, m);
        for (k, &c) in cells.iter().enumerate() {
            u.set_row(c, &gain.row(k));
        }
        Ok(ShockLaw {
            mean: &u * &self.rtilde,
            gain: u,
            rows: fr,
        })
    }

    /// Exact mean and covariance of the conditional path under pins alone (dense; for tests
    /// and checks); `None` when the plan has corridors (their law is not Gaussian).
    /// The path is affine in `ε*` ([`Plan::pin_shock_law`]), with mean `μ + M μ_ε` and
    /// covariance `M A A' M'`, `A = I − U F_R` (every shock free: `K⁻¹ − K⁻¹R'G⁻¹RK⁻¹`).
    pub fn exact_moments(&self, theta: &Theta) -> Option<(DVector<f64>, DMatrix<f64>)> {
        if self.corridor_count() > 0 {
            return None;
        }
        let big_n = theta.len();
        let mean = DVector::from_column_slice(&theta.mean);
        let shocks = |e: &DMatrix<f64>| {
            let mut out = DMatrix::zeros(big_n, e.ncols());
            for c in 0..e.ncols() {
                let col: Vec<f64> = e.column(c).iter().copied().collect();
                let path = DVector::from_vec(theta.path_from_shocks(&col)) - &mean;
                out.set_column(c, &path);
            }
            out
        };
        let law = self.pin_shock_law(theta).ok()?;
        let shock_mean = law.mean;
        let ma = shocks(&(DMatrix::identity(big_n, big_n) - law.gain * law.rows));
        let path_mean =
            &mean + shocks(&DMatrix::from_column_slice(big_n, 1, shock_mean.as_slice()));
        Some((
            DVector::from_column_slice(path_mean.as_slice()),
            &ma * ma.transpose(),
        ))
    }
}

/// `W = K⁻¹ 𝒢' Γ⁻¹` and `Γ = 𝒢 K⁻¹ 𝒢'` (band solves, then a Cholesky of `Γ`).
fn kriging_gain(
    theta: &Theta,
    g: &DMatrix<f64>,
    labels: &[String],
    draw: Option<usize>,
) -> Result<(DMatrix<f64>, DMatrix<f64>), ForecastError> {
    let (k, big_n) = g.shape();
    let mut v = DMatrix::zeros(big_n, k);
    for i in 0..k {
        let mut col: Vec<f64> = g.row(i).iter().copied().collect();
        theta.precision.solve_in_place(&mut col);
        v.set_column(i, &DVector::from_vec(col));
    }
    let gamma = g * &v;
    well_conditioned(&gamma, labels, draw)?;
    let chol = gamma
        .clone()
        .cholesky()
        .ok_or_else(|| ForecastError::NearlyDependent {
            conditions: labels.to_vec(),
            draw,
        })?;
    // W' = Γ⁻¹ V'.
    Ok((chol.solve(&v.transpose()).transpose(), gamma))
}

/// Conditions whose Gram matrix `Γ`, scaled to a unit diagonal, has a condition number above
/// this are nearly dependent: their draws would carry rounding errors of order
/// `1e−16 × cond` (ALGORITHMS §4.5, §9.1 item 7).
const NEARLY_DEPENDENT: f64 = 1e12;

/// Refuse nearly dependent conditions, naming those in the direction `Γ` nearly loses.
fn well_conditioned(
    gamma: &DMatrix<f64>,
    labels: &[String],
    draw: Option<usize>,
) -> Result<(), ForecastError> {
    let k = gamma.nrows();
    if k < 2 {
        return Ok(());
    }
    let d: Vec<f64> = (0..k)
        .map(|i| 1.0 / gamma[(i, i)].max(f64::MIN_POSITIVE).sqrt())
        .collect();
    let scaled = DMatrix::from_fn(k, k, |i, j| d[i] * gamma[(i, j)] * d[j]);
    let eig = nalgebra::SymmetricEigen::new(scaled);
    let (lo_at, lo) = eig.eigenvalues.argmin();
    let hi = eig.eigenvalues.max();
    if lo > 0.0 && hi / lo <= NEARLY_DEPENDENT {
        return Ok(());
    }
    let v = eig.eigenvectors.column(lo_at);
    let top = v.amax();
    Err(ForecastError::NearlyDependent {
        conditions: (0..k)
            .filter(|&i| v[i].abs() > 1e-3 * top)
            .map(|i| labels[i].clone())
            .collect(),
        draw,
    })
}

/// The corridor rows of a plan as a law needs them.
fn law_rows(rows: &Rows) -> LawRows {
    LawRows {
        lower: rows.lower.clone(),
        upper: rows.upper.clone(),
        extra: rows.extra.clone(),
        labels: rows.corridor_labels.clone(),
        names: rows.corridor_names.clone(),
    }
}

/// The corridor law with every shock free, from `Γ`: mean `Sμ + Γ_SR Γ_RR⁻¹ r̃`, covariance
/// `Γ_SS − Γ_SR Γ_RR⁻¹ Γ_RS` (ALGORITHMS §6.1).
fn model_law(
    gamma: &DMatrix<f64>,
    m: usize,
    rtilde: &DVector<f64>,
    smean: &DVector<f64>,
    rows: &Rows,
) -> Result<CorridorLaw, ForecastError> {
    let q = gamma.nrows() - m;
    let gss = gamma.view((m, m), (q, q)).into_owned();
    let gsr = gamma.view((m, 0), (q, m)).into_owned();
    let (mean, cov) = if m == 0 {
        (smean.clone(), gss)
    } else {
        let grr = gamma.view((0, 0), (m, m)).into_owned();
        let chol = grr.cholesky().ok_or(ForecastError::Singular(
            "the pin Gram matrix G = R K⁻¹ R'".into(),
        ))?;
        let solved = chol.solve(&gsr.transpose()); // Γ_RR⁻¹ Γ_RS
        (smean + solved.transpose() * rtilde, gss - &gsr * solved)
    };
    CorridorLaw::new(cov, mean, None, law_rows(rows))
}
