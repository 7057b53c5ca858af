//! Severity against history: how far do the scenario's shocks go, measured against the
//! model's own historical structural shocks over windows as long as the forecast?
//!
//! The scenario's mean structural shocks are `ε̄ = M⁻¹ W d̄` (ALGORITHMS §10): `d̄` the
//! conditions' mean departures from the unconditional mean, `r − Rμ` for the pins and
//! `E[z] − Sμ` for the corridor quantities (averaged over draws of their law at this θ), `W`
//! the plan's gain, so that only driver shocks move. Their size `‖ε̄‖` is the scenario's
//! score (with pins only and every shock free, the square root of the pins' Mahalanobis
//! distance). For each window `w` of `h` consecutive historical shocks `ε_w`
//! ([`Theta::shocks_of_history`]), its score is how far history went in the scenario's own
//! direction, `⟨ε̄, ε_w⟩ / ‖ε̄‖`: under the model a standard normal draw, so the comparison
//! has one degree of freedom however many conditions there are, and the windows nearest
//! the scenario are episodes of the same kind (a boom scores below zero against a
//! downturn). The figure is the share of the (overlapping) windows that went less far than
//! the scenario, the window nearest it and the one that went furthest: a reading calibrated
//! on the data the model was estimated on, which does not saturate as the divergence's coin
//! does.

use nalgebra::{DMatrix, DVector};
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

use crate::forecast::{
    ForecastError, Plan, Theta,
    random::{Purpose, stream},
};

/// Draws of the corridor quantities averaged for their mean.
const CORRIDOR_DRAWS: usize = 400;

/// The observed rows the model's historical shocks come from.
#[derive(Debug, Clone)]
pub struct History {
    /// Rows in model units, oldest first (the first `p` only serve as lags).
    pub rows: Vec<Vec<f64>>,
    /// The period label of each row.
    pub periods: Vec<String>,
    /// A period in words ("quarter", "month").
    pub period_word: &'static str,
}

/// A window of history and its score.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Span {
    pub from: String,
    pub to: String,
    pub score: f64,
}

/// The scenario's severity against history.
#[derive(Debug, Clone, Serialize)]
pub struct HistorySeverity {
    /// `‖ε̄‖`: the size of the scenario's mean structural shocks.
    pub score: f64,
    /// Periods per window (the horizon).
    pub window_length: usize,
    /// A period in words ("quarter").
    pub period_word: String,
    /// Windows of history compared (every one whose shocks are all finite).
    pub windows: usize,
    /// Share of the windows whose score is below the scenario's.
    pub share_exceeded: f64,
    /// The window whose score is nearest the scenario's.
    pub nearest: Span,
    /// The window with the largest score.
    pub largest: Span,
    /// First and last period of the historical shocks.
    pub history_from: String,
    pub history_to: String,
    /// True when the corridors' mean departures were estimated from draws.
    pub estimated: bool,
    /// The figure in plain words.
    pub reading: String,
}

/// The severity of the plan's conditions against `history` at θ; `None` when the history is
/// shorter than one window or the scenario does not move the shocks.
pub fn severity(
    theta: &Theta,
    plan: &Plan,
    history: &History,
    seed: u64,
) -> Result<Option<HistorySeverity>, ForecastError> {
    let (n, h, p) = (theta.n(), theta.h, theta.p());
    if history.rows.len() < p + h {
        return Ok(None);
    }
    let eps_bar = mean_shocks(theta, plan, seed)?;
    let score = eps_bar.norm();
    if !(score.is_finite() && score > 0.0) {
        return Ok(None);
    }
    let direction = eps_bar / score;
    let shocks = theta.shocks_of_history(&history.rows)?;
    let (starts, scores): (Vec<usize>, Vec<f64>) = (0..=shocks.len() - h)
        .filter_map(|s| {
            let along: f64 = (0..n * h)
                .map(|c| direction[c] * shocks[s + c / n][c % n])
                .sum();
            along.is_finite().then_some((s, along))
        })
        .unzip();
    let label = |row: usize| history.periods.get(row).cloned().unwrap_or_default();
    let span = |w: usize| Span {
        from: label(p + starts[w]),
        to: label(p + starts[w] + h - 1),
        score: scores[w],
    };
    let nearest = (0..scores.len())
        .min_by(|&a, &b| {
            (scores[a] - score)
                .abs()
                .total_cmp(&(scores[b] - score).abs())
        })
        .map(span);
    let largest = (0..scores.len())
        .max_by(|&a, &b| scores[a].total_cmp(&scores[b]))
        .map(span);
    let (Some(nearest), Some(largest)) = (nearest, largest) else {
        return Ok(None);
    };
    let below = scores.iter().filter(|&&s| s < score).count();
    let mut out = HistorySeverity {
        score,
        window_length: h,
        period_word: history.period_word.to_string(),
        windows: scores.len(),
        share_exceeded: below as f64 / scores.len() as f64,
        nearest,
        largest,
        history_from: label(p),
        history_to: label(p + shocks.len() - 1),
        estimated: plan.corridor_count() > 0,
        reading: String::new(),
    };
    out.reading = reading(&out);
    Ok(Some(out))
}

/// `ε̄ = E_J F_J⁺ d̄ = M⁻¹ W d̄` (stacked by period): the pins' departures `r − Rμ`, and the corridor
/// quantities' mean departures over [`CORRIDOR_DRAWS`] draws of their law (given fresh
/// non-driver shocks).
fn mean_shocks(theta: &Theta, plan: &Plan, seed: u64) -> Result<DVector<f64>, ForecastError> {
    let mut rng = stream(seed, Purpose::Checks, 2);
    let draws = if plan.corridor_count() > 0 {
        CORRIDOR_DRAWS
    } else {
        1
    };
    let mut sum = DVector::zeros(plan.pin_count() + plan.corridor_count());
    for _ in 0..draws {
        let eps = DMatrix::from_fn(theta.len(), 1, |_, _| StandardNormal.sample(&mut rng));
        sum += plan.target(&eps, 0, &mut rng)?;
    }
    let departures = plan.departures(&(sum / draws as f64));
    let eps = plan.shock_shift(&DMatrix::from_column_slice(
        departures.len(),
        1,
        departures.as_slice(),
    ));
    Ok(eps.column(0).into_owned())
}

impl HistorySeverity {
    /// One line: "further than 97% of the 12-quarter windows since 1990Q3", or "beyond every
    /// 12-quarter window since 1990Q3 (the furthest went 30% as far)".
    pub fn headline(&self) -> String {
        let windows = format!("{}-{} window", self.window_length, self.period_word);
        let since = &self.history_from;
        if self.share_exceeded >= 1.0 {
            format!(
                "beyond every {windows} since {since} (the furthest went {:.0}% as far)",
                100.0 * self.largest.score / self.score
            )
        } else {
            format!(
                "further than {:.0}% of the {windows}s since {since}",
                100.0 * self.share_exceeded
            )
        }
    }
}

/// "Further than in 97% of the 131 windows of 12 quarters in the model's history
/// (1990Q3–2025Q4); on a par with 2008Q3–2011Q2."
fn reading(s: &HistorySeverity) -> String {
    let windows = format!(
        "{} windows of {} {}s in the model's history ({}–{})",
        s.windows, s.window_length, s.period_word, s.history_from, s.history_to
    );
    let start = "in the direction of its shocks the scenario goes";
    let nearest = format!("{}–{}", s.nearest.from, s.nearest.to);
    if s.share_exceeded >= 1.0 {
        format!(
            "{start} further than every one of the {windows}; the furthest, {}–{}, went {:.0}% as far",
            s.largest.from,
            s.largest.to,
            100.0 * s.largest.score / s.score
        )
    } else if s.share_exceeded <= 0.0 {
        format!("{start} less far than every one of the {windows}; the nearest is {nearest}")
    } else {
        let pct = 100.0 * s.share_exceeded;
        let pct = if !(0.5..99.5).contains(&pct) {
            format!("{pct:.1}")
        } else {
            format!("{pct:.0}")
        };
        format!("{start} further than {pct}% of the {windows}; on a par with {nearest}")
    }
}
