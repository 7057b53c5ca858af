//! The Kalman-filter engine for pins (ALGORITHMS §11.2; Bańbura, Giannone and Lenza 2015):
//! the VAR in companion form, the pinned values observed without noise and every other
//! value missing, draws by the simulation smoother of Durbin and Koopman (2002).
//!
//! State `s_t = (y_t, y_{t−1}, …, y_{t−d+1})` with `d = max(p, span of the longest pin)`;
//! `s_t = c + T s_{t−1} + (u_t, 0, …)`, `u_t ~ N(0, Σ)`. A pin whose latest period is `t` is
//! the observation `Z s_t = r`. Filter (predicted `a_t`, `P_t`): `v_t = r_t − Z_t a_t`,
//! `F_t = Z_t P_t Z_t'`, `K̃_t = P_t Z_t' F_t⁻¹`, `P_{t|t} = P_t − K̃_t Z_t P_t`,
//! `P_{t+1} = T P_{t|t} T' + Q`. Smoother without inverting the singular `P_t` (Durbin and
//! Koopman's backward recursion): `r_{t−1} = Z_t'(F_t⁻¹ v_t − K̃_t' T' r_t) + T' r_t`,
//! `r_h = 0`, `ŝ_t = a_t + P_t r_{t−1}`. A draw: simulate `y⁺` from the model; then
//! `y = y⁺ + A(r − Z y⁺)`, where `A x` is the smoothed mean of the zero-mean system given
//! observations `x` (the "mean correction" form of the simulation smoother).
//!
//! The transition is applied through its structure — the coefficient rows and a shift — never
//! as a dense `nd × nd` matrix, so no arithmetic touches its known zeros and ones: a
//! covariance step costs `O(p n² · nd)`. The gains do not depend on the pinned values and are
//! made once per θ; a path then costs two recursions of `O(h · nd · (n + m))`.

use nalgebra::{DMatrix, DVector};
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use crate::forecast::{
    ForecastError, Theta, conditions::Conditions, plan::Drawn, product::mul, rows::Rows,
};

/// The observation step of one period (empty when nothing is pinned there).
#[derive(Debug, Clone)]
struct Step {
    /// Kept pin rows observed at this period (indices into the rows' pins).
    pins: Vec<usize>,
    /// `Z_t` (m_t × nd), `F_t⁻¹` (m_t × m_t), `K̃_t` (nd × m_t).
    z: DMatrix<f64>,
    finv: DMatrix<f64>,
    gain: DMatrix<f64>,
}

#[derive(Debug, Clone)]
pub struct KalmanPlan {
    rows: Rows,
    n: usize,
    d: usize,
    lags: Vec<DMatrix<f64>>,
    steps: Vec<Step>,
    /// The top `n` rows of each predicted `P_t` (n × nd).
    p_top: Vec<DMatrix<f64>>,
}

/// `T x` for a state vector (or the columns of a matrix): the coefficient rows on top, the
/// shift below.
fn transition(lags: &[DMatrix<f64>], n: usize, d: usize, x: &DMatrix<f64>) -> DMatrix<f64> {
    let mut out = DMatrix::zeros(n * d, x.ncols());
    for (j, b) in lags.iter().enumerate() {
        out.rows_mut(0, n).gemm(1.0, b, &x.rows(j * n, n), 1.0);
    }
    for j in 1..d {
        out.rows_mut(j * n, n).copy_from(&x.rows((j - 1) * n, n));
    }
    out
}

/// `T' X` (columns of state vectors): `(T'X)_j = B_{j+1}' X_0 + X_{j+1}`.
fn transition_t(lags: &[DMatrix<f64>], n: usize, d: usize, x: &DMatrix<f64>) -> DMatrix<f64> {
    let mut out = DMatrix::zeros(n * d, x.ncols());
    let top = x.rows(0, n);
    for (j, b) in lags.iter().enumerate() {
        out.rows_mut(j * n, n).gemm(1.0, &b.transpose(), &top, 0.0);
    }
    for j in 0..d - 1 {
        let next = x.rows((j + 1) * n, n).into_owned();
        let mut block = out.rows_mut(j * n, n);
        block += &next;
    }
    out
}

impl KalmanPlan {
    pub fn new(
        theta: &Theta,
        rows: Rows,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<KalmanPlan, ForecastError> {
        let unsupported = |what: &str| ForecastError::Unsupported {
            engine: "Kalman".into(),
            what: what.into(),
        };
        if !cond.corridors.is_empty() {
            return Err(unsupported(
                "handles pins only; this scenario has corridors",
            ));
        }
        if cond.drivers.is_some() {
            return Err(unsupported(
                "lets every shock move; this scenario names drivers",
            ));
        }
        let (n, h, p) = (theta.n(), theta.h, theta.p());
        // Each kept pin row: its latest period and earliest period.
        let spans: Vec<(usize, usize)> = (0..rows.pins.nrows())
            .map(|i| {
                let cells: Vec<usize> = (0..theta.len())
                    .filter(|&c| rows.pins[(i, c)] != 0.0)
                    .collect();
                let first = cells.first().map_or(0, |c| c / n);
                let last = cells.last().map_or(0, |c| c / n);
                (last, first)
            })
            .collect();
        let d = spans
            .iter()
            .map(|&(last, first)| last - first + 1)
            .max()
            .unwrap_or(1)
            .max(p);
        let nd = n * d;
        let mut steps: Vec<Step> = (0..h)
            .map(|_| Step {
                pins: Vec::new(),
                z: DMatrix::zeros(0, nd),
                finv: DMatrix::zeros(0, 0),
                gain: DMatrix::zeros(nd, 0),
            })
            .collect();
        for (i, &(last, _)) in spans.iter().enumerate() {
            steps[last].pins.push(i);
        }
        let sigma = theta.sigma();
        let mut p_pred = DMatrix::zeros(nd, nd);
        p_pred.view_mut((0, 0), (n, n)).copy_from(&sigma);
        let mut p_top = Vec::with_capacity(h);
        for (t, step) in steps.iter_mut().enumerate() {
            p_top.push(p_pred.rows(0, n).into_owned());
            let mut p_filt = p_pred.clone();
            if !step.pins.is_empty() {
                let mt = step.pins.len();
                let mut z = DMatrix::zeros(mt, nd);
                for (k, &i) in step.pins.iter().enumerate() {
                    for c in 0..theta.len() {
                        let a = rows.pins[(i, c)];
                        if a != 0.0 {
                            let (period, series) = (c / n, c % n);
                            z[(k, (t - period) * n + series)] = a;
                        }
                    }
                }
                let pz = &p_pred * z.transpose();
                let f = &z * &pz;
                let finv = f
                    .cholesky()
                    .ok_or_else(|| ForecastError::NearlyDependent {
                        conditions: step
                            .pins
                            .iter()
                            .map(|&i| rows.pin_labels[i].clone())
                            .collect(),
                        draw,
                    })?
                    .inverse();
                let gain = &pz * &finv;
                p_filt -= &gain * pz.transpose();
                step.z = z;
                step.finv = finv;
                step.gain = gain;
            }
            // P_{t+1} = T P_{t|t} T' + Q, through the structure of T on both sides.
            let tp = transition(&theta.lags, n, d, &p_filt);
            p_pred = transition(&theta.lags, n, d, &tp.transpose()).transpose();
            let top = p_pred.view((0, 0), (n, n)) + &sigma;
            p_pred.view_mut((0, 0), (n, n)).copy_from(&top);
        }
        Ok(KalmanPlan {
            rows,
            n,
            d,
            lags: theta.lags.clone(),
            steps,
            p_top,
        })
    }

    pub fn rows(&self) -> &Rows {
        &self.rows
    }

    /// The smoothed paths of the zero-mean system given observations `x` (one row per kept
    /// pin, one column per path), as columns.
    fn correction(&self, x: &DMatrix<f64>) -> DMatrix<f64> {
        let (n, d) = (self.n, self.d);
        let (h, count) = (self.steps.len(), x.ncols());
        let mut a = DMatrix::zeros(n * d, count);
        let mut a_top = Vec::with_capacity(h);
        let mut innovations: Vec<DMatrix<f64>> = Vec::with_capacity(h);
        for step in &self.steps {
            a_top.push(a.rows(0, n).into_owned());
            if step.pins.is_empty() {
                innovations.push(DMatrix::zeros(0, count));
            } else {
                let obs = DMatrix::from_fn(step.pins.len(), count, |k, c| x[(step.pins[k], c)]);
                let v = obs - mul(&step.z, &a);
                a += mul(&step.gain, &v);
                innovations.push(v);
            }
            a = transition(&self.lags, n, d, &a);
        }
        let mut r = DMatrix::zeros(n * d, count);
        let mut out = DMatrix::zeros(n * h, count);
        for t in (0..h).rev() {
            let step = &self.steps[t];
            let tr = transition_t(&self.lags, n, d, &r);
            r = if step.pins.is_empty() {
                tr
            } else {
                let u = mul(&step.finv, &innovations[t]) - mul(&step.gain.transpose(), &tr);
                mul(&step.z.transpose(), &u) + tr
            };
            let s_top = &a_top[t] + mul(&self.p_top[t], &r);
            out.rows_mut(t * n, n).copy_from(&s_top);
        }
        out
    }

    /// The smoothed (pinned) mean path: `μ + A(r − R μ)`.
    pub fn mean(&self, theta: &Theta) -> Vec<f64> {
        let mu = DVector::from_column_slice(&theta.mean);
        let x = &self.rows.values - &self.rows.pins * &mu;
        let delta = self.correction(&DMatrix::from_column_slice(x.len(), 1, x.as_slice()));
        mu.iter().zip(delta.iter()).map(|(a, b)| a + b).collect()
    }

    /// One path per random stream (its N normals): `y⁺` simulated, then corrected by the
    /// smoother, all paths at once.
    pub fn sample_many<R: Rng + ?Sized>(&self, theta: &Theta, rngs: &mut [&mut R]) -> Vec<Drawn> {
        let big_n = theta.len();
        let mut ystar = DMatrix::zeros(big_n, rngs.len());
        for (j, rng) in rngs.iter_mut().enumerate() {
            for i in 0..big_n {
                ystar[(i, j)] = StandardNormal.sample(&mut **rng);
            }
        }
        theta.shocks_to_paths(&mut ystar);
        for mut col in ystar.column_iter_mut() {
            for (v, mu) in col.iter_mut().zip(&theta.mean) {
                *v += mu;
            }
        }
        let mut x = -mul(&self.rows.pins, &ystar);
        for mut col in x.column_iter_mut() {
            col += &self.rows.values;
        }
        let y = &ystar + self.correction(&x);
        (0..rngs.len())
            .map(|j| {
                Ok((
                    y.column(j).as_slice().to_vec(),
                    ystar.column(j).as_slice().to_vec(),
                ))
            })
            .collect()
    }
}
