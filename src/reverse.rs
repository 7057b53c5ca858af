//! Reverse stress test: the most plausible scenario in which an outcome happens ("bank
//! lending at most −10% on a year earlier at some quarter of 2026–2028"), keeping the
//! scenario's pins and drivers.
//!
//! Plausibility is measured on the structural shocks (ALGORITHMS §5, §9.2): the most
//! plausible scenario minimises `ε'ε` over the driver shocks subject to the pins and the
//! outcome `q_t ≤ c` (or `≥ c`), a linear inequality on the path. For one period this convex
//! problem has a closed form: if the pins' own conditional mean already meets the outcome,
//! that is the answer (the inequality does not bind); otherwise the optimum puts the outcome
//! exactly at the threshold, and the answer is the conditional mean given the pins and
//! `q_t = c`, whose shocks are the pins' shock law's mean ([`Plan::pin_shock_law`]). For "at
//! some period" the smallest `½ε'ε` over the periods wins. The outcome's probability is exact
//! at one period (`Φ((c − q̄)/σ)` under the scenario's own law given its pins and drivers) and
//! estimated over the periods by drawing paths, with its standard error. With corridors, the
//! answer is checked against them and refused when they bind (the quadratic programme that
//! would need is not built yet).

use rand::SeedableRng;

use crate::forecast::{
    Conditions, ForecastError, Pin, Plan, Target, Theta,
    random::{Purpose, stream},
};
use crate::report::fans::display_path_value;
use crate::scenario::{PinSpec, ScenarioError, ScenarioFile, Setup, Units};
use crate::truncnorm::univariate::ln_phi_upper;

/// Paths drawn for the probability of the outcome at some period of the range.
const PROBABILITY_PATHS: usize = 4_000;

/// The outcome to reach.
#[derive(Debug, Clone)]
pub struct Outcome {
    pub series: String,
    pub units: Units,
    pub threshold: f64,
    /// `q ≤ threshold` (else `q ≥ threshold`).
    pub at_most: bool,
    /// The periods it may happen at (first and last, inclusive).
    pub from: String,
    pub to: String,
}

/// The most plausible scenario that reaches the outcome.
#[derive(Debug, Clone)]
pub struct Reverse {
    /// The period the outcome happens at in it.
    pub period: String,
    /// False when the scenario as it stands already meets the outcome on average there.
    pub binding: bool,
    /// `½ε'ε` of its mean structural shocks (nats; the pins' part of the plausibility).
    pub divergence: f64,
    /// Its mean structural shocks, by period then shock (as the paths are stacked).
    pub shocks: Vec<f64>,
    /// Its mean path in model units.
    pub path: Vec<f64>,
    /// `P(outcome at that period)` under the scenario's own law (its pins and drivers).
    pub probability: f64,
    /// `P(outcome at some period of the range)`, estimated, and its standard error.
    pub probability_any: (f64, f64),
    /// Per period of the range: `½ε'ε` of the best scenario there, or why none.
    pub by_period: Vec<(String, Result<f64, String>)>,
    /// The scenario with the outcome as a pin where it happens, to edit further.
    pub scenario: ScenarioFile,
}

/// Why no scenario reaches the outcome.
#[derive(Debug, thiserror::Error)]
pub enum ReverseError {
    #[error(transparent)]
    Scenario(#[from] ScenarioError),
    #[error(transparent)]
    Forecast(#[from] ForecastError),
    #[error("the outcome ({outcome}) cannot be reached at any period from {from} to {to}: {why}")]
    Unreachable {
        outcome: String,
        from: String,
        to: String,
        why: String,
    },
    #[error(
        "the most plausible path to the outcome leaves the corridor{}: the corridors bind, which this reverse stress test does not handle yet; switch them off (active: false) or turn them into pins",
        if .0.len() == 1 { format!(" {}", .0[0]) } else { format!("s {}", .0.join(", ")) }
    )]
    CorridorsBind(Vec<String>),
}

/// The most plausible way to `outcome` at the central θ, keeping the scenario's pins and
/// drivers.
pub fn reverse(setup: &Setup, theta: &Theta, outcome: &Outcome) -> Result<Reverse, ReverseError> {
    let all = setup.conditions()?;
    let pins_only = Conditions {
        corridors: Vec::new(),
        ..all.clone()
    };
    let base = Plan::new(theta, &pins_only, None)?;
    let (mean, cov) = base
        .exact_moments(theta)
        .ok_or_else(|| ForecastError::Singular("the pins' conditional law".into()))?;
    let first = setup.horizon_of(&outcome.from, "outcome.from")?;
    let last = setup.horizon_of(&outcome.to, "outcome.to")?;
    let label = |t: usize| setup.last_period().offset(t as i64).to_string();
    // The outcome at each period of the range, as a pin at the threshold.
    let pins: Vec<(usize, Pin)> = (first..=last)
        .map(|t| outcome_pin(setup, outcome, t).map(|p| (t, p)))
        .collect::<Result<_, _>>()?;
    let mut by_period = Vec::new();
    let mut best: Option<(usize, f64, Plan, Pin, bool)> = None;
    for (t, pin) in pins.iter().cloned() {
        let q = quantity(&pin, mean.as_slice());
        let met = if outcome.at_most {
            q <= pin.value
        } else {
            q >= pin.value
        };
        if met {
            // The scenario as it is meets the outcome on average here: nothing to add.
            let d = 0.5 * base.pin_shock_law(theta)?.mean.norm_squared();
            by_period.push((label(t), Ok(d)));
            if best.as_ref().is_none_or(|b| d < b.1) {
                best = Some((t, d, base.clone(), pin, false));
            }
            continue;
        }
        let mut cond = pins_only.clone();
        cond.pins.push(pin.clone());
        match Plan::new(theta, &cond, None).and_then(|p| {
            let d = 0.5 * p.pin_shock_law(theta)?.mean.norm_squared();
            Ok((p, d))
        }) {
            Ok((plan, d)) => {
                by_period.push((label(t), Ok(d)));
                if best.as_ref().is_none_or(|b| d < b.1) {
                    best = Some((t, d, plan, pin, true));
                }
            }
            Err(e) => by_period.push((label(t), Err(e.to_string()))),
        }
    }
    let Some((t, divergence, plan, pin, binding)) = best else {
        let why = by_period
            .iter()
            .find_map(|(_, r)| r.as_ref().err().cloned())
            .unwrap_or_default();
        return Err(ReverseError::Unreachable {
            outcome: describe(outcome),
            from: outcome.from.clone(),
            to: outcome.to.clone(),
            why,
        });
    };
    let law = plan.pin_shock_law(theta)?;
    let path = plan
        .exact_moments(theta)
        .map(|m| m.0.iter().copied().collect::<Vec<f64>>())
        .ok_or_else(|| ForecastError::Singular("the conditional law".into()))?;
    // The corridors are kept: the answer stands only if it meets them.
    if !all.corridors.is_empty() {
        let full = Plan::new(theta, &all, None)?;
        if full.corridor_violation(&path) > 1e-9 {
            return Err(ReverseError::CorridorsBind(full.corridor_names()));
        }
    }
    let row = row_of(&pin);
    let q = quantity(&pin, mean.as_slice());
    let cov = &cov;
    let var: f64 = row
        .iter()
        .flat_map(|&(c, a)| row.iter().map(move |&(d, b)| a * b * cov[(c, d)]))
        .sum();
    let z = (pin.value - q) / var.max(0.0).sqrt();
    let probability = if outcome.at_most {
        ln_phi_upper(-z).exp()
    } else {
        ln_phi_upper(z).exp()
    };
    let outcome_pins: Vec<Pin> = pins.into_iter().map(|(_, p)| p).collect();
    let probability_any = probability_over(setup, theta, &base, outcome, &outcome_pins)?;
    let mut scenario = setup.file.clone();
    if binding {
        scenario.name = format!("{} — reverse stress: {}", scenario.name, describe(outcome));
        scenario.pins.push(PinSpec {
            series: Some(outcome.series.clone()),
            shock: None,
            period: label(t),
            units: outcome.units,
            value: outcome.threshold,
            active: true,
        });
    }
    Ok(Reverse {
        period: label(t),
        binding,
        divergence,
        shocks: law.mean.iter().copied().collect(),
        path,
        probability,
        probability_any,
        by_period,
        scenario,
    })
}

/// The outcome at horizon `t` as a pin at the threshold (its row and model-unit value).
fn outcome_pin(setup: &Setup, outcome: &Outcome, t: usize) -> Result<Pin, ScenarioError> {
    let spec = PinSpec {
        series: Some(outcome.series.clone()),
        shock: None,
        period: setup.last_period().offset(t as i64).to_string(),
        units: outcome.units,
        value: outcome.threshold,
        active: true,
    };
    setup.pin_at("outcome", &spec)
}

/// The outcome's quantity `Σ coef · y[cell]` on a path in model units.
fn quantity(pin: &Pin, y: &[f64]) -> f64 {
    row_of(pin).iter().map(|&(c, a)| a * y[c]).sum()
}

fn row_of(pin: &Pin) -> Vec<(usize, f64)> {
    match &pin.target {
        Target::Path { terms } => terms.clone(),
        Target::Shock { .. } => Vec::new(),
    }
}

/// `P(outcome at some period of the range)` under the pins, by [`PROBABILITY_PATHS`] paths,
/// with its standard error.
fn probability_over(
    setup: &Setup,
    theta: &Theta,
    base: &Plan,
    outcome: &Outcome,
    pins: &[Pin],
) -> Result<(f64, f64), ReverseError> {
    let mut rng = stream(setup.file.seed, Purpose::Checks, 3);
    let mut rngs: Vec<rand_chacha::ChaCha8Rng> = (0..PROBABILITY_PATHS)
        .map(|_| rand_chacha::ChaCha8Rng::from_rng(&mut rng))
        .collect();
    let mut refs: Vec<&mut rand_chacha::ChaCha8Rng> = rngs.iter_mut().collect();
    let mut hits = 0usize;
    for drawn in base.sample_many(theta, &mut refs) {
        let (y, _) = drawn?;
        let hit = pins.iter().any(|p| {
            let q: f64 = row_of(p).iter().map(|&(c, a)| a * y[c]).sum();
            if outcome.at_most {
                q <= p.value
            } else {
                q >= p.value
            }
        });
        hits += usize::from(hit);
    }
    let p = hits as f64 / PROBABILITY_PATHS as f64;
    Ok((p, (p * (1.0 - p) / PROBABILITY_PATHS as f64).sqrt()))
}

/// "bank_lending (% on a year earlier) at most -10".
pub fn describe(o: &Outcome) -> String {
    format!(
        "{} ({}) {} {}",
        o.series,
        o.units.words(),
        if o.at_most { "at most" } else { "at least" },
        o.threshold
    )
}

/// The most plausible path in each series' display units, by series and period.
pub fn path_table(setup: &Setup, r: &Reverse) -> Vec<(String, Vec<f64>)> {
    (0..setup.n())
        .map(|i| {
            let values = (1..=setup.file.horizon)
                .map(|t| display_path_value(setup, &r.path, i, t))
                .collect();
            (setup.names[i].clone(), values)
        })
        .collect()
}
