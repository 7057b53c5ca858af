//! Conditioning one θ on the pins and corridors, and drawing conditional paths.
//!
//! Stacked rows `𝒢 = [R; S]` (k = m + q: pins, then independent corridor rows;
//! [`super::rows`]), pin values `r`, `r̃ = r − Rμ`, and the conditions in shock space
//! `F = 𝒢 M` (k × N), computed as `(M'𝒢')'` from the moving-average rows of the series the
//! conditions involve ([`Theta::conditions_in_shocks`]).
//!
//! Drivers `J` are the shock cells that may move (every cell when no drivers are named;
//! Antolín-Díaz, Petrella and Rubio-Ramírez 2021). One factorisation serves everything: the
//! thin QR `F_J' = Q R` (R k×k upper triangular, pins first), never the Gram matrix
//! `F_J F_J'`, so nothing squares the conditioning:
//!
//! - `F_J⁺ = Q R⁻ᵀ`; the gain `W = M E_J F_J⁺` (N × k) moves only driver shocks. It is
//!   applied to a few columns (one path of a posterior draw, the conditions' parts) as
//!   `M E_J (F_J⁺ D)` — a product with `Q` and one forward recursion a column — and formed
//!   only for a plan that serves at least k paths, where forming it costs no more than that;
//! - with `R = [[R_RR, R_RS], [0, R_SS]]`, the corridor quantities `z = S y` given the pins
//!   and the non-driver shocks `ε*_J̄` are Gaussian with mean
//!   `Sμ + R_RS'R_RR⁻ᵀ r̃ + (F_SJ̄ − R_RS'R_RR⁻ᵀ F_RJ̄) ε*_J̄` and covariance `R_SS'R_SS`
//!   (since `F_SJ F_RJ⁺ = R_RS'R_RR⁻ᵀ` and `F_SJ(I − F_RJ⁺F_RJ)F_SJ' = R_SS'R_SS`); `z` is
//!   drawn from it truncated to the corridors ([`super::corridor`]);
//! - a path: `ε* ~ N(0, I)`, `y* = μ + M ε*` (the VAR simulated forward), then
//!   `y = y* + W((r; z) − 𝒢y*)`, which meets `R y = r` and `S y = z` exactly because
//!   `𝒢W = F_J F_J⁺ = I`; one more step with the same `W` removes the rounding left by long,
//!   explosive horizons. With every shock free this is conditioning by kriging (Rue and Held
//!   2005), `W = K⁻¹𝒢'Γ⁻¹` (ALGORITHMS §4.4, §5.3–5.4, §6.2).
//!
//! The model's own law (every shock free: pin surprise, the corridors' probability, weights)
//! uses the same factorisation of `F'`, with `Γ = 𝒢K⁻¹𝒢' = R'R`.

use std::sync::{Arc, OnceLock};

use nalgebra::{DMatrix, DMatrixView, DVector};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use super::{
    ForecastError,
    conditions::Conditions,
    corridor::CorridorLaw,
    factor::Factor,
    product::{SparseRows, mul},
    reach,
    rows::Rows,
    theta::Theta,
};
use crate::truncnorm::Probability;

/// One drawn path: the conditional path and the unconditional path it was made from.
pub type Drawn = Result<(Vec<f64>, Vec<f64>), ForecastError>;

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

/// A corrected path misses a row's target by more than rounding past this share of
/// `1 + |target|` (a few units in the last place of a sum of a few terms), and is refined.
const REFINE: f64 = 1e-14;

/// Condition-dependent objects for one θ.
#[derive(Debug, Clone)]
pub struct Plan {
    /// The conditions' rows, shared by the plans of a run when they do not depend on θ.
    rows: Arc<Rows>,
    /// `F' = M'𝒢'` (N × k).
    shock_rows: DMatrix<f64>,
    /// `r̃ = r − R μ` (kept pins).
    rtilde: DVector<f64>,
    /// `S μ` (kept corridor rows).
    smean: DVector<f64>,
    /// Driver cells `J` (`None`: every cell) and the other cells `J̄`.
    cells: Option<Vec<usize>>,
    rest: Vec<usize>,
    /// QR of `F_J'`.
    factor: Arc<Factor>,
    /// QR of `F'` (every shock free), the same as `factor` without drivers.
    model: OnceLock<Arc<Factor>>,
    /// `W = M E_J F_J⁺` (N × k), formed for a plan that serves at least k paths.
    gain: OnceLock<DMatrix<f64>>,
    /// The corridor quantities' law under this plan's drivers (none without corridors).
    law: Option<CorridorLaw>,
    draw: Option<usize>,
}

impl Plan {
    /// Build the plan; `draw` names the posterior draw in messages.
    pub fn new(
        theta: &Theta,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<Plan, ForecastError> {
        let rows = Arc::new(Rows::new(theta, cond, draw)?);
        Plan::with_rows(theta, rows, cond, draw, None)
    }

    /// Build the plan on rows already made (conditions on observables give the same rows
    /// under every θ, so a run makes them once; see [`Conditions::on_shocks`]), with the
    /// corridor law laid out like `like`'s (another θ's law of the same corridors) when given.
    pub fn with_rows(
        theta: &Theta,
        rows: Arc<Rows>,
        cond: &Conditions,
        draw: Option<usize>,
        like: Option<&CorridorLaw>,
    ) -> Result<Plan, ForecastError> {
        let (m, q) = (rows.pins.nrows(), rows.corridors.nrows());
        let (rtilde, smean) = departures_of_mean(theta, &rows);
        let shock_rows = theta.conditions_in_shocks(rows.stacked_rows());
        let (cells, rest) = match cond.driver_cells(theta.n(), theta.h) {
            None => (None, Vec::new()),
            Some(mask) => (
                Some((0..theta.len()).filter(|&c| mask[c]).collect::<Vec<_>>()),
                (0..theta.len()).filter(|&c| !mask[c]).collect(),
            ),
        };
        let factor = Factor::new(&shock_rows, cells.as_deref(), m);
        if cells.is_some() {
            let width = cells.as_ref().map_or(0, Vec::len).max(m + q);
            reach::check(&factor, width).map_err(|involved| ForecastError::Unreachable {
                conditions: involved.iter().map(|&i| rows.label(i).to_owned()).collect(),
                drivers: cond.driver_names(),
                draw,
            })?;
        }
        well_conditioned(&factor, &rows, draw)?;
        if !factor.invertible() {
            return Err(ForecastError::NearlyDependent {
                conditions: rows.labels(),
                draw,
            });
        }
        let law = plan_law(&factor, &rows, &rtilde, &smean, &shock_rows, &rest, like)?;
        let factor = Arc::new(factor);
        let model = OnceLock::new();
        if cells.is_none() {
            let _ = model.set(factor.clone());
        }
        Ok(Plan {
            shock_rows,
            rows,
            rtilde,
            smean,
            cells,
            rest,
            factor,
            model,
            gain: OnceLock::new(),
            law,
            draw,
        })
    }

    /// The same plan for new values of the same conditions: when `rows` (made from the edited
    /// conditions) stack to exactly this plan's rows, everything but the values is kept — the
    /// factor, the gain `W` and the corridor law's covariance — and only `r̃`, `Sμ` and the
    /// law's mean and bounds are made again (ALGORITHMS §8.2, the "values" level). `None` when
    /// the rows differ.
    pub fn revalue(&self, theta: &Theta, rows: Arc<Rows>) -> Option<Result<Plan, ForecastError>> {
        if rows.stacked_rows() != self.rows.stacked_rows()
            || rows.law_rows().extra.len() != self.rows.law_rows().extra.len()
        {
            return None;
        }
        let (rtilde, smean) = departures_of_mean(theta, &rows);
        let law = plan_law(
            &self.factor,
            &rows,
            &rtilde,
            &smean,
            &self.shock_rows,
            &self.rest,
            self.law.as_ref(),
        );
        Some(law.map(|law| Plan {
            rows,
            rtilde,
            smean,
            law,
            ..self.clone()
        }))
    }

    /// The corridor quantities' law under this plan's drivers (none without corridors).
    pub fn law(&self) -> Option<&CorridorLaw> {
        self.law.as_ref()
    }

    pub fn pin_count(&self) -> usize {
        self.rows.pins.nrows()
    }

    pub fn corridor_count(&self) -> usize {
        self.rows.corridors.nrows()
    }

    /// The factor of the model's law (every shock free).
    fn model_factor(&self) -> &Factor {
        self.model
            .get_or_init(|| Arc::new(Factor::new(&self.shock_rows, None, self.pin_count())))
    }

    /// Condition number of `Γ = 𝒢 K⁻¹ 𝒢'` scaled to a unit diagonal (1 for fewer than two
    /// conditions): how close the kept conditions come to repeating each other.
    pub fn condition_number(&self) -> f64 {
        self.model_factor().scaled_condition().0
    }

    /// The acceptance rate of this plan's corridor sampler (at non-driver shocks zero),
    /// estimated by `n` proposals, when it is below `floor`; `None` when it is not, or
    /// without corridors. Proposals stop as soon as the estimate cannot fall below `floor`.
    pub fn acceptance_below<R: Rng + ?Sized>(
        &self,
        rng: &mut R,
        n: usize,
        floor: f64,
    ) -> Result<Option<f64>, ForecastError> {
        let zeros = vec![0.0; self.nondriver_count()];
        match &self.law {
            Some(law) => law.acceptance_below(&zeros, rng, n, floor),
            None => Ok(None),
        }
    }

    /// The corridors of this plan (each once), for messages.
    pub fn corridor_names(&self) -> Vec<String> {
        self.rows.law_rows().names.clone()
    }

    /// The conditions' rows.
    pub fn rows(&self) -> &Rows {
        &self.rows
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
        let mut one = [rng];
        self.sample_many(theta, &mut one)
            .pop()
            .unwrap_or(Err(ForecastError::Cancelled))
    }

    /// One path per random stream, drawn together: each stream gives its path's shocks
    /// `ε*` (N normals) and then its corridor quantities, so a path is the same whichever
    /// paths it is drawn with (up to rounding); the recursions and the corrections run as
    /// matrix products over all of them.
    pub fn sample_many<R: Rng + ?Sized>(&self, theta: &Theta, rngs: &mut [&mut R]) -> Vec<Drawn> {
        let (big_n, count) = (theta.len(), rngs.len());
        let k = self.stacked().nrows();
        let mut ystar = DMatrix::zeros(big_n, count);
        let mut target = DMatrix::zeros(k, count);
        let mut failed: Vec<Option<ForecastError>> = vec![None; count];
        for (j, rng) in rngs.iter_mut().enumerate() {
            for i in 0..big_n {
                ystar[(i, j)] = StandardNormal.sample(&mut **rng);
            }
            match self.target(&ystar, j, &mut **rng) {
                Ok(t) => target.set_column(j, &t),
                Err(e) => failed[j] = Some(e),
            }
        }
        theta.shocks_to_paths(&mut ystar);
        for mut col in ystar.column_iter_mut() {
            for (v, mu) in col.iter_mut().zip(&theta.mean) {
                *v += mu;
            }
        }
        let gy = self.stacked_times(&ystar);
        let y = self.correct(theta, ystar.as_view(), gy.as_view(), &target);
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

    /// The conditional paths from unconditional ones (columns of `ystar`, with `gy = 𝒢 y*`)
    /// and their targets `(r; z)` (columns): `y = y* + W(t − 𝒢y*)`, then once more with the
    /// same `W` when the rows still miss their targets by more than rounding — the rounding
    /// that long, explosive horizons leave (one step of iterative refinement; checking the
    /// gap costs the rows' few non-zeros, the step a product as large as the first).
    pub fn correct(
        &self,
        theta: &Theta,
        ystar: DMatrixView<f64>,
        gy: DMatrixView<f64>,
        target: &DMatrix<f64>,
    ) -> DMatrix<f64> {
        let mut y = self.shift(theta, &(target - gy));
        y += ystar;
        let gap = target - self.stacked().times(&y);
        let missed = gap
            .iter()
            .zip(target.iter())
            .any(|(g, t)| g.abs() > REFINE * (1.0 + t.abs()));
        if missed {
            y += self.shift(theta, &gap);
        }
        y
    }

    /// Prepare for `paths` paths: at least k of them form the gain `W` once (k forward
    /// recursions and a product of size |J| × k × k, no more than the paths' own corrections
    /// through the factor would cost), kept by [`Plan::revalue`] for edits of values. Called
    /// before any path is drawn, so that every path of a plan takes the same route whatever
    /// the threads.
    pub fn expect_paths(&self, theta: &Theta, paths: usize) {
        let k = self.stacked().nrows();
        if paths >= k {
            self.gain.get_or_init(|| {
                let mut w = self.shock_shift(&DMatrix::identity(k, k));
                theta.shocks_to_paths(&mut w);
                w
            });
        }
    }

    /// `W D = M E_J F_J⁺ D` (N × c) for departures `D` (k × c) of the rows from `𝒢y`: the
    /// paths' moves that meet them. Through `W` when [`Plan::expect_paths`] formed it,
    /// otherwise through the factor, one forward recursion a column.
    pub fn shift(&self, theta: &Theta, d: &DMatrix<f64>) -> DMatrix<f64> {
        if let Some(w) = self.gain.get() {
            return mul(w, d);
        }
        let mut e = self.shock_shift(d);
        theta.shocks_to_paths(&mut e);
        e
    }

    /// `E_J F_J⁺ D` (N × c): the least-norm moves of the driver shocks that change the rows
    /// by the columns of `D` (k × c).
    pub fn shock_shift(&self, d: &DMatrix<f64>) -> DMatrix<f64> {
        let x = self.factor.pinv_times(d);
        match &self.cells {
            None => x,
            Some(cells) => {
                let mut e = DMatrix::zeros(self.shock_rows.nrows(), d.ncols());
                for (k, &c) in cells.iter().enumerate() {
                    e.set_row(c, &x.row(k));
                }
                e
            }
        }
    }

    /// `𝒢 Y` for paths in the columns of `y`.
    pub fn stacked_times(&self, y: &DMatrix<f64>) -> DMatrix<f64> {
        self.stacked().times(y)
    }

    /// The targets `(r; z)` of one path: the pin values, then the corridor quantities drawn
    /// given the path's non-driver shocks (from its shocks `ε*`, a column of `eps`).
    pub fn target<R: Rng + ?Sized>(
        &self,
        eps: &DMatrix<f64>,
        j: usize,
        rng: &mut R,
    ) -> Result<DVector<f64>, ForecastError> {
        let m = self.pin_count();
        let mut target = self.rows.values.clone();
        if let Some(law) = &self.law {
            let nondrivers: Vec<f64> = self.rest.iter().map(|&c| eps[(c, j)]).collect();
            let z = law.draw(&nondrivers, rng, self.draw)?;
            target = target.resize_vertically(m + z.len(), 0.0);
            target.rows_mut(m, z.len()).copy_from(&z);
        }
        Ok(target)
    }

    /// The pinned path made from given standard normal shocks `ε*` (plans without corridors:
    /// the building block of naive rejection), with the unconditional path.
    pub fn from_shocks(&self, theta: &Theta, eps: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let ystar = DMatrix::from_vec(eps.len(), 1, theta.path_from_shocks(eps));
        let target = DMatrix::from_column_slice(self.pin_count(), 1, self.rows.values.as_slice());
        let y = self.correct(
            theta,
            ystar.as_view(),
            self.stacked_times(&ystar).as_view(),
            &target,
        );
        (y.as_slice().to_vec(), ystar.as_slice().to_vec())
    }

    /// The stacked rows `𝒢 = [R; S]` (k × N).
    pub fn stacked(&self) -> &SparseRows {
        self.rows.stacked_rows()
    }

    /// The departures `t − 𝒢μ` of targets `t = (r; z)` from the unconditional mean.
    pub fn departures(&self, target: &DVector<f64>) -> DVector<f64> {
        let m = self.pin_count();
        let mut d = target.clone();
        for i in 0..m {
            // r̃ = r − Rμ, so Rμ = r − r̃.
            d[i] -= self.rows.values[i] - self.rtilde[i];
        }
        for (i, s) in self.smean.iter().enumerate() {
            d[m + i] -= s;
        }
        d
    }

    /// The driver cells (`None`: every shock moves).
    pub fn driver_cells(&self) -> Option<&[usize]> {
        self.cells.as_deref()
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
    /// `G = R K⁻¹ R' = R_RR'R_RR`, with the labels of the (kept) pins.
    pub fn pin_surprise(&self) -> (Vec<(String, f64)>, f64) {
        let m = self.pin_count();
        let f = self.model_factor();
        let z = (0..m)
            .map(|i| {
                (
                    self.rows.pin_labels[i].clone(),
                    self.rtilde[i] / f.variance(i).sqrt(),
                )
            })
            .collect();
        let d2 = f.pin_distance(self.rtilde.as_slice());
        (z, if d2.is_finite() { d2 } else { f64::INFINITY })
    }

    /// `ln p(r | θ) = −½ (m ln 2π + ln|G| + r̃'G⁻¹r̃)`: the density of the pinned values under
    /// the unconditional forecast (ALGORITHMS §8.4), in the rows' own (unscaled) units — the
    /// scale of a shock pin's row depends on θ, so it must not be left in the weight.
    pub fn pin_log_density(&self) -> f64 {
        let m = self.pin_count();
        if m == 0 {
            return 0.0;
        }
        let logdet = self.model_factor().pin_log_det();
        let (_, d2) = self.pin_surprise();
        let jacobian: f64 = self.rows.pin_norms.iter().map(|c| c.ln()).sum();
        let lp = -0.5 * (m as f64 * (2.0 * std::f64::consts::PI).ln() + logdet + d2) - jacobian;
        if lp.is_nan() { f64::NEG_INFINITY } else { lp }
    }

    /// The model's law of the corridor quantities given the pins, every shock free — the
    /// basis of the corridor probability `P(a ≤ S y ≤ b | pins)` (none without corridors):
    /// mean `Sμ + Γ_SR Γ_RR⁻¹ r̃`, covariance `Γ_SS − Γ_SR Γ_RR⁻¹ Γ_RS` (ALGORITHMS §6.1),
    /// from the factor of `F'`.
    pub fn model_law(&self) -> Result<Option<CorridorLaw>, ForecastError> {
        if self.corridor_count() == 0 {
            return Ok(None);
        }
        if self.cells.is_none() {
            return Ok(self.law.clone());
        }
        let f = self.model_factor();
        let mean = &self.smean + f.corridor_on_pins() * &self.rtilde;
        let rows = self.rows.law_rows().clone();
        CorridorLaw::new(f.corridor_covariance(), mean, None, rows, self.law.as_ref()).map(Some)
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
        self.rest.len()
    }

    /// The pins-only scenario distribution of the shocks, `ε = μ_ε + (I − U F_R) ε*` with
    /// `ε* ~ N(0, I)`: `U = E_J F_RJ⁺` (every shock free: `U = F_R⁺`) and `μ_ε = U r̃`
    /// (ALGORITHMS §5.2–5.3). `F_RJ⁺ = Q_R R_RR⁻ᵀ` from the plan's factor.
    pub fn pin_shock_law(&self, theta: &Theta) -> Result<ShockLaw, ForecastError> {
        let big_n = theta.len();
        let m = self.pin_count();
        let pinv = self
            .factor
            .pins_pinv()
            .ok_or_else(|| ForecastError::Singular("the pins' shock map F_R".into()))?;
        let mut u = DMatrix::zeros(big_n, m);
        for k in 0..big_n.min(pinv.nrows()) {
            let c = self
                .cells
                .as_ref()
                .map_or(Some(k), |cells| cells.get(k).copied());
            if let Some(c) = c {
                u.set_row(c, &pinv.row(k));
            }
        }
        Ok(ShockLaw {
            mean: &u * &self.rtilde,
            gain: u,
            rows: self.shock_rows.columns(0, m).transpose(),
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
        let law = self.pin_shock_law(theta).ok()?;
        let mut ma = DMatrix::identity(big_n, big_n) - &law.gain * &law.rows;
        theta.shocks_to_paths(&mut ma);
        let mut shift = DMatrix::from_column_slice(big_n, 1, law.mean.as_slice());
        theta.shocks_to_paths(&mut shift);
        let mean = DVector::from_column_slice(&theta.mean) + shift.column(0);
        Some((mean, &ma * ma.transpose()))
    }
}

/// Conditions whose Gram matrix `Γ`, scaled to a unit diagonal, has a condition number above
/// this are nearly dependent: their draws would carry rounding errors of order
/// `1e−16 × cond` (ALGORITHMS §4.5, §9.1 item 7).
const NEARLY_DEPENDENT: f64 = 1e12;

/// Refuse nearly dependent conditions, naming those in the direction `Γ` nearly loses. The
/// scaled `Γ` has condition `cond(U)²`, screened first by [`Factor::condition_bound`].
fn well_conditioned(
    factor: &Factor,
    rows: &Rows,
    draw: Option<usize>,
) -> Result<(), ForecastError> {
    if factor.condition_bound().powi(2) <= NEARLY_DEPENDENT {
        return Ok(());
    }
    let (cond, involved) = factor.scaled_condition();
    if cond <= NEARLY_DEPENDENT {
        return Ok(());
    }
    Err(ForecastError::NearlyDependent {
        conditions: involved.iter().map(|&i| rows.label(i).to_owned()).collect(),
        draw,
    })
}

/// The corridor quantities' law under the drivers of `factor` (none without corridors):
/// mean `Sμ + C r̃` with `C = R_RS'R_RR⁻ᵀ`, covariance `R_SS'R_SS`, and, with drivers, the
/// mean's shift `(F_SJ̄ − C F_RJ̄) ε*_J̄` by the non-driver shocks.
fn plan_law(
    factor: &Factor,
    rows: &Rows,
    rtilde: &DVector<f64>,
    smean: &DVector<f64>,
    shock_rows: &DMatrix<f64>,
    rest: &[usize],
    like: Option<&CorridorLaw>,
) -> Result<Option<CorridorLaw>, ForecastError> {
    let (m, q) = (rows.pins.nrows(), rows.corridors.nrows());
    if q == 0 {
        return Ok(None);
    }
    let on_pins = factor.corridor_on_pins();
    let cov = factor.corridor_covariance();
    let m0 = smean + &on_pins * rtilde;
    let shift = (!rest.is_empty()).then(|| {
        let f_rest = DMatrix::from_fn(m + q, rest.len(), |i, c| shock_rows[(rest[c], i)]);
        f_rest.rows(m, q) - &on_pins * f_rest.rows(0, m)
    });
    CorridorLaw::new(cov, m0, shift, rows.law_rows().clone(), like).map(Some)
}

/// `r̃ = r − Rμ` and `Sμ` under θ, from the stacked rows' non-zeros.
fn departures_of_mean(theta: &Theta, rows: &Rows) -> (DVector<f64>, DVector<f64>) {
    let m = rows.pins.nrows();
    let at_mean = rows.stacked_rows().apply(&theta.mean);
    let rtilde = DVector::from_fn(m, |i, _| rows.values[i] - at_mean[i]);
    let smean = DVector::from_column_slice(&at_mean[m..]);
    (rtilde, smean)
}
