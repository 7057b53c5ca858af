//! Where a scenario comes from (ALGORITHMS §10): the departure of its conditional mean from
//! the unconditional one, split exactly by structural shock and by condition.
//!
//! For one θ with gain `W = M E_J F_J⁺` (N × k) and stacked rows `𝒢 = [R; S]` (k × N), the
//! conditional mean shift is linear in the conditions' offsets:
//!
//! `Δ_θ = E[y | scenario, θ] − μ_θ = W d_θ`, `d_θ = E[t] − 𝒢μ_θ`,
//!
//! with `d = r̃ = r − Rμ` for the pins and `E[z] − Sμ` for the corridor quantities (drawn from
//! their truncated law; `E[z]` is the mean of `S y` over θ's paths, since every path meets
//! `S y = z` exactly). With drivers `W` is the drivers construction's own map (Antolín-Díaz,
//! Petrella and Rubio-Ramírez 2021); with every shock free it is kriging's.
//!
//! - **By condition** `c` (its rows `K_c`): `W_{·K_c} d_{K_c}`; the parts sum to `Δ_θ`.
//! - **By shock**: `ε̄_θ = M⁻¹Δ_θ = E_J F_J⁺ d_θ` are the shocks' conditional means, and the
//!   part of shock `j` in series `i` at horizon `t` is `Σ_{s≤t} (Ψ_{t−s} L)_{ij} ε̄_{j,s}`,
//!   computed for all shocks at once by the recursion
//!   `C_t = Σ_l B_l C_{t−l} + L diag(ε̄_t)` (`C_t`: n × n, series × shock); the row sums of
//!   `C_t` are `Δ_{θ,t}`.
//! - **By shock date** (with timed drivers): the same recursion with the shocks of each
//!   future period `s` together, `L ε̄_s` alone at `s`; the dates' parts sum to the shocks'.
//!
//! Every part is averaged over the posterior draws (weighted when the draws are reweighted):
//! additivity holds draw by draw, so it holds for the averages. With reweighting the
//! unconditional mean keeps `p(θ | data)`, and the difference of the two weightings of `μ_θ`
//! is a part of its own ("parameters"). With targets on the distribution, each draw's part is
//! taken at its paths' tilted mean, and what the tilt adds beyond the conditions — its choice
//! among the paths' free components `(I − W𝒢)(y* − μ)`, tilted less untilted — is the
//! "targets" part (split by shock with the rest). The split by shock depends on the
//! identification (the ordering).

pub mod leave_one_out;

use nalgebra::{DMatrix, DVector};
use rayon::prelude::*;

use crate::forecast::{Conditions, ForecastError, Plan, Theta};

/// One θ's conditional mean shift, by condition: column `c` is the part of condition `c`
/// (pins first, then corridors, in the scenario's order); N × C.
#[derive(Debug, Clone, PartialEq)]
pub struct Part {
    /// The θ (index into its set).
    pub theta: usize,
    pub by_condition: DMatrix<f64>,
    /// What the paths' (weighted) mean departs from `μ` besides the conditions' parts:
    /// `ȳ − μ − W d`, the mean of the paths' free components `(I − W𝒢)(y* − μ)` — zero in
    /// expectation with equal weights, not once a tilt has chosen among the paths (N).
    pub free: DVector<f64>,
}

impl Part {
    /// The part of one θ from its plan and its conditional paths (`None` without paths), at
    /// their mean or, given `weights` (one per path, any scale), their weighted mean.
    pub fn of_paths(
        theta_index: usize,
        theta: &Theta,
        plan: &Plan,
        cond: &Conditions,
        paths: &[Vec<f64>],
        weights: Option<&[f64]>,
    ) -> Option<Part> {
        if paths.is_empty() {
            return None;
        }
        // The (weighted) sum of the paths: pieces in parallel, added in order (the same sum
        // whatever the threads).
        let n = theta.len();
        let pieces: Vec<(Vec<f64>, f64)> = paths
            .par_chunks(SUM_CHUNK)
            .enumerate()
            .map(|(c, chunk)| {
                let mut sum = vec![0.0; n];
                let mut total = 0.0;
                for (j, y) in chunk.iter().enumerate() {
                    let w = weights.map_or(1.0, |w| w[c * SUM_CHUNK + j]);
                    total += w;
                    for (s, v) in sum.iter_mut().zip(y) {
                        *s += w * v;
                    }
                }
                (sum, total)
            })
            .collect();
        let mut sum = vec![0.0; n];
        let mut total = 0.0;
        for (piece, weight) in pieces {
            for (s, v) in sum.iter_mut().zip(&piece) {
                *s += v;
            }
            total += weight;
        }
        Some(Part::of_sum(theta_index, theta, plan, cond, &sum, total))
    }

    /// The part of one θ from its plan and the (weighted) sum of its conditional paths with
    /// the total of their weights (the count, unweighted).
    fn of_sum(
        theta_index: usize,
        theta: &Theta,
        plan: &Plan,
        cond: &Conditions,
        sum: &[f64],
        total: f64,
    ) -> Part {
        let gap: Vec<f64> = sum
            .iter()
            .zip(&theta.mean)
            .map(|(s, m)| s / total - m)
            .collect();
        let d = DVector::from_vec(plan.stacked().apply(&gap));
        let rows = plan.rows();
        let owner = |label: &str, pins: bool| -> Option<usize> {
            if pins {
                cond.pins.iter().position(|p| p.label == label)
            } else {
                cond.corridors
                    .iter()
                    .position(|c| c.label == label)
                    .map(|k| cond.pins.len() + k)
            }
        };
        let owners = rows
            .pin_labels
            .iter()
            .map(|l| owner(l, true))
            .chain(rows.corridor_names.iter().map(|l| owner(l, false)));
        // Each condition's departures, in its own column: W D (M E_J F_J⁺ D, one recursion
        // a condition).
        let mut split = DMatrix::zeros(d.len(), condition_count(cond));
        for (r, c) in owners.enumerate() {
            if let Some(c) = c {
                split[(r, c)] = d[r];
            }
        }
        let by_condition = plan.shift(theta, &split);
        let free = DVector::from_vec(gap) - by_condition.column_sum();
        Part {
            theta: theta_index,
            by_condition,
            free,
        }
    }
}

/// Paths added up together as one piece of work.
const SUM_CHUNK: usize = 64;

fn condition_count(cond: &Conditions) -> usize {
    cond.pins.len() + cond.corridors.len()
}

/// The scenario's departure from the unconditional forecast, split, in model units. Vectors
/// are stacked paths (index `(t − 1) n + i`).
#[derive(Debug, Clone, PartialEq)]
pub struct Attribution {
    pub n: usize,
    pub h: usize,
    /// Condition labels and their fields in the scenario (`pins[0]`), pins then corridors.
    pub conditions: Vec<(String, String)>,
    /// `by_shock[j]`: the part of structural shock `j` (named after series `j`).
    pub by_shock: Vec<Vec<f64>>,
    /// With timed drivers: `by_date[s]`, the part of the shocks hitting at future period
    /// `s + 1` (every shock together); they add up to the shocks' parts.
    pub by_date: Option<Vec<Vec<f64>>>,
    /// `by_condition[c]`: the part of condition `c`.
    pub by_condition: Vec<Vec<f64>>,
    /// With reweighting or a tilt to targets: the part due to the weights on the parameters.
    pub parameters: Option<Vec<f64>>,
    /// With a tilt to targets on the distribution: what the tilt adds beyond the conditions'
    /// parts (its choice among the paths' free components). The shocks' parts include it.
    pub targets: Option<Vec<f64>>,
    /// Conditional mean minus unconditional mean: the sum of the shocks' parts, or of the
    /// conditions' parts and the targets' part, plus the parameters' part.
    pub total: Vec<f64>,
    /// Posterior draws averaged over.
    pub draws: usize,
}

/// Draws summed together in one piece of work: the sums are formed in the same order
/// whatever the number of threads.
const CHUNK: usize = 16;

/// Average the parts of the θ in `thetas` (weights per part, summing to one, or equal).
/// `untilted`: with a tilt to targets, the parts at equal weights within each θ and the θ's
/// untilted weights; the tilted parts' free components less the untilted ones' are the
/// targets' part (zero when the tilt changes nothing), shared among the shocks too.
pub fn attribute(
    thetas: &[Theta],
    cond: &Conditions,
    parts: &[Part],
    weights: Option<&[f64]>,
    untilted: Option<(&[Part], Option<&[f64]>)>,
) -> Result<Attribution, ForecastError> {
    let (n, h) = thetas.first().map_or((0, 0), |t| (t.n(), t.h));
    let big_n = n * h;
    let c = condition_count(cond);
    let count = parts.len();
    let equal = 1.0 / count.max(1) as f64;
    // With timed drivers the split by shock also goes by the date the shocks hit.
    let dates = cond
        .drivers
        .as_ref()
        .is_some_and(|d| d.iter().any(|d| !d.always()));
    let Sums {
        condition: cond_sum,
        shock: shock_sum,
        mu_weighted: mu_w,
        date: date_sum,
        free,
    } = chunk_sums(thetas, parts, weights, untilted, c, big_n, n, dates)?;
    let targets = untilted.map(|_| free);
    let mu_eq = thetas_mean(thetas, parts, equal, big_n);
    let parameters = weights.map(|_| (&mu_w - &mu_eq).iter().copied().collect::<Vec<f64>>());
    let mut total: Vec<f64> = cond_sum.column_sum().iter().copied().collect();
    for extra in [
        &parameters,
        &targets.as_ref().map(|t| t.as_slice().to_vec()),
    ]
    .into_iter()
    .flatten()
    {
        total.iter_mut().zip(extra).for_each(|(t, p)| *t += p);
    }
    let targets = targets.map(|t| t.as_slice().to_vec());
    let columns = |m: &DMatrix<f64>| -> Vec<Vec<f64>> {
        m.column_iter()
            .map(|col| col.iter().copied().collect())
            .collect()
    };
    Ok(Attribution {
        n,
        h,
        conditions: cond
            .pins
            .iter()
            .map(|p| (p.label.clone(), p.field.clone()))
            .chain(
                cond.corridors
                    .iter()
                    .map(|x| (x.label.clone(), x.field.clone())),
            )
            .collect(),
        by_shock: columns(&shock_sum),
        by_date: dates.then(|| columns(&date_sum)),
        by_condition: columns(&cond_sum),
        parameters,
        targets,
        total,
        draws: count,
    })
}

/// Weighted sums over parts, formed chunk by chunk in part order (the same sums whatever the
/// number of threads).
struct Sums {
    /// Σ w·by condition (N × C).
    condition: DMatrix<f64>,
    /// Σ w·by shock (N × n).
    shock: DMatrix<f64>,
    /// Σ w·μ.
    mu_weighted: DVector<f64>,
    /// Σ (tilted less untilted weight·free) (with a tilt only).
    free: DVector<f64>,
    /// Σ w·by shock date (N × h; with dates only).
    date: DMatrix<f64>,
}

/// The parts' weighted sums. With `untilted` (a tilt to targets: the same draws' parts at
/// equal weights within each draw, and their weights), each draw's free component, tilted
/// less untilted, is summed as the targets' part and split by shock with its conditions'
/// parts: one split of one weighted shift per draw. With `dates`, the split by shock date is
/// summed too.
#[allow(clippy::too_many_arguments)]
fn chunk_sums(
    thetas: &[Theta],
    parts: &[Part],
    weights: Option<&[f64]>,
    untilted: Option<(&[Part], Option<&[f64]>)>,
    c: usize,
    big_n: usize,
    n: usize,
    dates: bool,
) -> Result<Sums, ForecastError> {
    let equal = 1.0 / parts.len().max(1) as f64;
    let weight = |w: Option<&[f64]>, k: usize| w.map_or(equal, |w| w[k]);
    let zero = || Sums {
        condition: DMatrix::zeros(big_n, c),
        shock: DMatrix::zeros(big_n, n),
        mu_weighted: DVector::zeros(big_n),
        free: DVector::zeros(big_n),
        date: DMatrix::zeros(big_n, if dates { big_n / n.max(1) } else { 0 }),
    };
    let chunks = parts
        .par_chunks(CHUNK)
        .enumerate()
        .map(|(chunk, list)| {
            let mut sums = zero();
            for (k, part) in list.iter().enumerate() {
                let k = chunk * CHUNK + k;
                let w = weight(weights, k);
                let theta = &thetas[part.theta];
                sums.condition += w * &part.by_condition;
                let mut shift = w * part.by_condition.column_sum();
                if let Some((base, base_weights)) = untilted {
                    let free = w * &part.free - weight(base_weights, k) * &base[k].free;
                    shift += &free;
                    sums.free += free;
                }
                let (shock, date) = by_shock(theta, shift.as_slice(), dates)?;
                sums.shock += shock;
                if let Some(date) = date {
                    sums.date += date;
                }
                sums.mu_weighted += w * DVector::from_column_slice(&theta.mean);
            }
            Ok(sums)
        })
        .collect::<Result<Vec<_>, ForecastError>>()?;
    let mut out = zero();
    for s in chunks {
        out.condition += s.condition;
        out.shock += s.shock;
        out.mu_weighted += s.mu_weighted;
        out.free += s.free;
        out.date += s.date;
    }
    Ok(out)
}

/// `Σ μ_θ / count` over the parts (the unconditional side's equal weights).
fn thetas_mean(thetas: &[Theta], parts: &[Part], equal: f64, big_n: usize) -> DVector<f64> {
    let sums = parts
        .par_chunks(CHUNK)
        .map(|list| {
            let mut s = DVector::zeros(big_n);
            for part in list {
                s += equal * DVector::from_column_slice(&thetas[part.theta].mean);
            }
            s
        })
        .collect::<Vec<_>>();
    sums.into_iter()
        .fold(DVector::zeros(big_n), |acc, s| acc + s)
}

/// Shocks whose conditional means are all below this share of the largest one are left out
/// of the recursion (non-drivers: zero up to the rounding of `M⁻¹Δ`).
const NEGLIGIBLE: f64 = 1e-13;

/// The part of every shock in a mean shift `Δ` (N): `ε̄ = M⁻¹Δ`, then
/// `C_t = Σ_l B_l C_{t−l} + L diag(ε̄_t)`; column `j` of the result (N × n) is shock `j`'s part.
/// With `dates`, also the part of the shocks hitting at each future period (N × h): column
/// `s` carries `L ε̄_s` alone through the same recursion. Only the groups that move are
/// carried (with drivers, a few shocks; with timed drivers, a few dates).
pub fn by_shock(
    theta: &Theta,
    delta: &[f64],
    dates: bool,
) -> Result<(DMatrix<f64>, Option<DMatrix<f64>>), ForecastError> {
    let (n, h) = (theta.n(), theta.h);
    let eps = theta.shocks_from_departures(&DMatrix::from_column_slice(delta.len(), 1, delta))?;
    let shocks = grouped(theta, &eps, n, |_, j| j);
    let dates = dates.then(|| grouped(theta, &eps, h, |t, _| t));
    Ok((shocks, dates))
}

/// The parts of the shocks `ε̄` (N × 1) gathered into `count` groups, shock `j` at horizon
/// `t + 1` going to group `group(t, j)`: each group's `L ε̄_t` carried through the VAR's own
/// recursion (`H⁻¹`); N × count.
fn grouped(
    theta: &Theta,
    eps: &DMatrix<f64>,
    count: usize,
    group: impl Fn(usize, usize) -> usize,
) -> DMatrix<f64> {
    let (n, h) = (theta.n(), theta.h);
    let largest = eps.amax();
    let mut moves = vec![false; count];
    for t in 0..h {
        for j in 0..n {
            if eps[(t * n + j, 0)].abs() > NEGLIGIBLE * largest {
                moves[group(t, j)] = true;
            }
        }
    }
    let moving: Vec<usize> = (0..count).filter(|&g| moves[g]).collect();
    let mut column = vec![None; count];
    for (k, &g) in moving.iter().enumerate() {
        column[g] = Some(k);
    }
    let mut x = DMatrix::zeros(n * h, moving.len());
    for t in 0..h {
        for j in 0..n {
            if let Some(k) = column[group(t, j)] {
                let e = eps[(t * n + j, 0)];
                for i in 0..n {
                    x[(t * n + i, k)] += theta.impact[(i, j)] * e;
                }
            }
        }
    }
    theta.forward_in_place(&mut x);
    let mut out = DMatrix::zeros(n * h, count);
    for (k, &g) in moving.iter().enumerate() {
        out.set_column(g, &x.column(k));
    }
    out
}
