//! Reverse stress test: the most plausible scenario in which outcomes happen ("bank lending
//! at most −10% on a year earlier at some quarter of 2026–2028", and perhaps "unemployment
//! at least 8% in 2027"), keeping the scenario's pins, corridors and drivers.
//!
//! Plausibility is measured on the structural shocks (ALGORITHMS §5, §9.2): the most
//! plausible scenario minimises `½ε'ε` over the driver shocks (the others at their mean,
//! zero) subject to the pins (`R y = r`), the corridors (`a ≤ S y ≤ b`) and each outcome at
//! its period (`q_t ≤ c` or `≥ c`), all linear in `ε` through the path `y = μ + M ε`: the
//! point of least norm in a polyhedron ([`crate::least_norm`], Goldfarb and Idnani 1983). With
//! pins alone and one outcome that binds it is the conditional mean given the pins and the
//! outcome at its threshold. "At some period" is searched exhaustively: every combination of
//! the outcomes' periods is solved and the least divergent wins. An outcome the rest of the
//! scenario already meets on its most plausible path adds nothing (its constraint does not
//! bind).
//!
//! The outcomes' probability under the scenario's own law (its pins, corridors and drivers)
//! is exact for one outcome without corridors (`Φ((c − q̄)/σ)` at its period) and otherwise
//! estimated from drawn paths with its standard error, as is the probability that every
//! outcome happens at some period of its range.

use nalgebra::DMatrix;
use rand::SeedableRng;

use crate::forecast::{
    Conditions, ForecastError, Pin, Plan, Target, Theta, path_rows,
    random::{Purpose, stream},
};
use crate::least_norm::{Constraint, least_norm};
use crate::report::fans::display_path_value;
use crate::scenario::{PinSpec, ScenarioError, ScenarioFile, Setup, Units};
use crate::truncnorm::univariate::ln_phi_upper;

/// A probability estimated from drawn paths, and its standard error.
type Estimate = (f64, f64);

/// Paths drawn for the outcomes' probabilities.
const PROBABILITY_PATHS: usize = 4_000;
/// Most combinations of the outcomes' periods searched.
const MOST_COMBINATIONS: usize = 4_096;

/// An outcome to reach.
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

/// The most plausible scenario that reaches the outcomes.
#[derive(Debug, Clone)]
pub struct Reverse {
    /// Per outcome: the period it happens at, and whether it binds there (false: the rest of
    /// the scenario already meets it on its most plausible path).
    pub at: Vec<(String, bool)>,
    /// The scenario's corridor rows that bind on the most plausible path, by label.
    pub binding_corridors: Vec<String>,
    /// `½ε'ε` of its structural shocks (nats).
    pub divergence: f64,
    /// Its structural shocks, by period then shock (as the paths are stacked).
    pub shocks: Vec<f64>,
    /// Its path in model units.
    pub path: Vec<f64>,
    /// `P(every outcome at its period)` under the scenario's own law, with its standard
    /// error when estimated from drawn paths (`None`: exact).
    pub probability: (f64, Option<f64>),
    /// `P(every outcome at some period of its range)`, estimated, and its standard error.
    pub probability_any: (f64, f64),
    /// `P(every outcome at its period)` under the model alone, without the scenario's
    /// conditions: exact for one outcome, else drawn, with its standard error.
    pub unconditional: (f64, Option<f64>),
    /// Every combination of periods tried (one per outcome): `½ε'ε` of the best scenario
    /// there, or why there is none.
    pub tried: Vec<(Vec<String>, Result<f64, String>)>,
    /// The scenario with each binding outcome as a pin where it happens, to edit further.
    pub scenario: ScenarioFile,
}

/// Why no scenario reaches the outcomes.
#[derive(Debug, thiserror::Error)]
pub enum ReverseError {
    #[error(transparent)]
    Scenario(#[from] ScenarioError),
    #[error(transparent)]
    Forecast(#[from] ForecastError),
    #[error("{outcomes} cannot be reached: {why}")]
    Unreachable { outcomes: String, why: String },
    #[error(
        "the outcomes' periods make {count} combinations to search, more than {MOST_COMBINATIONS}: narrow their ranges"
    )]
    TooManyCombinations { count: usize },
    #[error("give at least one outcome")]
    NoOutcome,
    #[error("{field}: its last period {to} comes before its first {from}")]
    EmptyRange {
        field: String,
        from: String,
        to: String,
    },
}

/// A path row in shock space: `lower ≤ normal'ε ≤ upper`.
struct ShockRow {
    constraint: Constraint,
    label: String,
}

/// The rows `rows` (unit norm, on the path) as constraints on the driver shocks `cells`.
fn in_shock_space(
    theta: &Theta,
    cells: &[usize],
    rows: Vec<(nalgebra::DVector<f64>, f64, f64, String)>,
) -> Vec<ShockRow> {
    if rows.is_empty() {
        return Vec::new();
    }
    let big_n = theta.len();
    let mut ft = DMatrix::zeros(big_n, rows.len());
    for (k, (row, ..)) in rows.iter().enumerate() {
        ft.set_column(k, row);
    }
    theta.adjoint_in_place(&mut ft);
    rows.into_iter()
        .enumerate()
        .map(|(k, (row, lower, upper, label))| {
            let offset: f64 = row.iter().zip(&theta.mean).map(|(a, m)| a * m).sum();
            let normal =
                nalgebra::DVector::from_iterator(cells.len(), cells.iter().map(|&c| ft[(c, k)]));
            ShockRow {
                constraint: Constraint {
                    normal,
                    lower: lower - offset,
                    upper: upper - offset,
                },
                label,
            }
        })
        .collect()
}

/// The most plausible way to `outcomes` at the central θ, keeping the scenario's pins,
/// corridors and drivers.
pub fn reverse(
    setup: &Setup,
    theta: &Theta,
    outcomes: &[Outcome],
) -> Result<Reverse, ReverseError> {
    if outcomes.is_empty() {
        return Err(ReverseError::NoOutcome);
    }
    let all = setup.conditions()?;
    let big_n = theta.len();
    let cells: Vec<usize> = match all.driver_cells(theta.n(), theta.h) {
        None => (0..big_n).collect(),
        Some(mask) => (0..big_n).filter(|&c| mask[c]).collect(),
    };
    let label = |t: usize| setup.last_period().offset(t as i64).to_string();
    let scenario_rows = in_shock_space(
        theta,
        &cells,
        path_rows(theta, &all)?
            .into_iter()
            .map(|r| (r.row, r.lower, r.upper, r.label))
            .collect(),
    );
    // Each outcome at each period of its range: its pin at the threshold (for the row and
    // the model-unit value) and its constraint.
    let mut choices: Vec<Vec<(usize, Pin, ShockRow)>> = Vec::new();
    for (k, o) in outcomes.iter().enumerate() {
        // Messages name the outcome by its place (1-based), as the form and --also list them.
        let field = format!("outcome {}", k + 1);
        let first = setup.horizon_of(&o.from, &format!("{field}, from"))?;
        let last = setup.horizon_of(&o.to, &format!("{field}, to"))?;
        if last < first {
            return Err(ReverseError::EmptyRange {
                field,
                from: o.from.clone(),
                to: o.to.clone(),
            });
        }
        let pins: Vec<(usize, Pin)> = (first..=last)
            .map(|t| outcome_pin(setup, o, t, &field).map(|p| (t, p)))
            .collect::<Result<_, _>>()?;
        let rows = pins
            .iter()
            .map(|(t, pin)| {
                let mut row = nalgebra::DVector::zeros(big_n);
                for (c, a) in row_of(pin) {
                    row[c] += a;
                }
                let (lower, upper) = if o.at_most {
                    (f64::NEG_INFINITY, pin.value)
                } else {
                    (pin.value, f64::INFINITY)
                };
                (
                    row,
                    lower,
                    upper,
                    format!("{} in {}", describe(o), label(*t)),
                )
            })
            .collect();
        let constraints = in_shock_space(theta, &cells, rows);
        choices.push(
            pins.into_iter()
                .zip(constraints)
                .map(|((t, p), c)| (t, p, c))
                .collect(),
        );
    }
    let count = choices
        .iter()
        .try_fold(1usize, |acc, c| acc.checked_mul(c.len()))
        .unwrap_or(usize::MAX);
    if count > MOST_COMBINATIONS {
        return Err(ReverseError::TooManyCombinations { count });
    }
    let base: Vec<Constraint> = scenario_rows.iter().map(|r| r.constraint.clone()).collect();
    let mut tried = Vec::new();
    let mut best: Option<(Vec<usize>, crate::least_norm::Solution)> = None;
    for combination in 0..count {
        // The combination's period index for each outcome (the last outcome fastest).
        let mut rest = combination;
        let mut picks = vec![0; choices.len()];
        for (k, c) in choices.iter().enumerate().rev() {
            picks[k] = rest % c.len();
            rest /= c.len();
        }
        let mut constraints = base.clone();
        constraints.extend(
            picks
                .iter()
                .zip(&choices)
                .map(|(&i, c)| c[i].2.constraint.clone()),
        );
        let periods: Vec<String> = picks
            .iter()
            .zip(&choices)
            .map(|(&i, c)| label(c[i].0))
            .collect();
        match least_norm(cells.len(), &constraints) {
            Ok(solution) => {
                let d = solution.divergence();
                tried.push((periods, Ok(d)));
                if best.as_ref().is_none_or(|b| d < b.1.divergence()) {
                    best = Some((picks, solution));
                }
            }
            Err(infeasible) => {
                let name = |i: usize| {
                    if i < scenario_rows.len() {
                        scenario_rows[i].label.clone()
                    } else {
                        let k = i - scenario_rows.len();
                        choices[k][picks[k]].2.label.clone()
                    }
                };
                let with: Vec<String> = infeasible.with.iter().map(|&i| name(i)).collect();
                let why = format!(
                    "{} cannot hold{} with the drivers ({})",
                    name(infeasible.index),
                    if with.is_empty() {
                        String::new()
                    } else {
                        format!(" together with {}", with.join(", "))
                    },
                    all.driver_names()
                );
                tried.push((periods, Err(why)));
            }
        }
    }
    let Some((picks, solution)) = best else {
        let why = tried
            .iter()
            .find_map(|(_, r)| r.as_ref().err().cloned())
            .unwrap_or_default();
        let ranges: Vec<String> = outcomes
            .iter()
            .map(|o| format!("{}, from {} to {}", describe(o), o.from, o.to))
            .collect();
        return Err(ReverseError::Unreachable {
            outcomes: if outcomes.len() == 1 {
                format!("the outcome ({}) at any of its periods", ranges[0])
            } else {
                format!(
                    "the outcomes ({}) together at any of their periods",
                    ranges.join("; ")
                )
            },
            why,
        });
    };
    let mut shocks = vec![0.0; big_n];
    for (&c, e) in cells.iter().zip(solution.x.iter()) {
        shocks[c] = *e;
    }
    let path = theta.path_from_shocks(&shocks);
    let first_outcome = scenario_rows.len();
    let at: Vec<(String, bool)> = picks
        .iter()
        .zip(&choices)
        .enumerate()
        .map(|(k, (&i, c))| {
            (
                label(c[i].0),
                solution.multipliers[first_outcome + k] != 0.0,
            )
        })
        .collect();
    let binding_corridors = scenario_rows
        .iter()
        .enumerate()
        .filter(|(i, r)| {
            r.constraint.lower != r.constraint.upper && solution.multipliers[*i] != 0.0
        })
        .map(|(_, r)| r.label.clone())
        .collect();
    let chosen: Vec<Pin> = picks
        .iter()
        .zip(&choices)
        .map(|(&i, c)| c[i].1.clone())
        .collect();
    let ranges: Vec<Vec<Pin>> = choices
        .iter()
        .map(|c| c.iter().map(|(_, p, _)| p.clone()).collect())
        .collect();
    let (drawn, probability_any) = probabilities(setup, theta, &all, outcomes, &chosen, &ranges)?;
    let probability = if outcomes.len() == 1 && all.corridors.is_empty() {
        (
            exact_probability(theta, &all, &outcomes[0], &chosen[0])?,
            None,
        )
    } else {
        (drawn.0, Some(drawn.1))
    };
    // The model alone: no pins, corridors or drivers.
    let free = Conditions::default();
    let unconditional = if outcomes.len() == 1 {
        (
            exact_probability(theta, &free, &outcomes[0], &chosen[0])?,
            None,
        )
    } else {
        let (at, _) = probabilities(setup, theta, &free, outcomes, &chosen, &ranges)?;
        (at.0, Some(at.1))
    };
    let mut scenario = setup.file.clone();
    if at.iter().any(|a| a.1) {
        let names: Vec<String> = outcomes.iter().map(describe).collect();
        scenario.name = format!("{} — reverse stress: {}", scenario.name, names.join("; "));
    }
    for (o, (period, binding)) in outcomes.iter().zip(&at) {
        if *binding {
            scenario.pins.push(PinSpec {
                series: Some(o.series.clone()),
                shock: None,
                period: period.clone(),
                units: o.units,
                value: o.threshold,
                active: true,
            });
        }
    }
    Ok(Reverse {
        at,
        binding_corridors,
        divergence: solution.divergence(),
        shocks,
        path,
        probability,
        probability_any,
        unconditional,
        tried,
        scenario,
    })
}

/// `P(outcome at its period)` under the pins alone (no corridors): `Φ((c − q̄)/σ)` from the
/// pins' exact conditional law.
fn exact_probability(
    theta: &Theta,
    all: &Conditions,
    outcome: &Outcome,
    pin: &Pin,
) -> Result<f64, ReverseError> {
    let base = Plan::new(theta, all, None)?;
    let (mean, cov) = base
        .exact_moments(theta)
        .ok_or_else(|| ForecastError::Singular("the pins' conditional law".into()))?;
    let row = row_of(pin);
    let q = quantity(pin, mean.as_slice());
    let cov = &cov;
    let var: f64 = row
        .iter()
        .flat_map(|&(c, a)| row.iter().map(move |&(d, b)| a * b * cov[(c, d)]))
        .sum();
    let z = (pin.value - q) / var.max(0.0).sqrt();
    Ok(if outcome.at_most {
        ln_phi_upper(-z).exp()
    } else {
        ln_phi_upper(z).exp()
    })
}

/// The outcome at horizon `t` as a pin at the threshold (its row and model-unit value);
/// `field` names it in messages.
fn outcome_pin(
    setup: &Setup,
    outcome: &Outcome,
    t: usize,
    field: &str,
) -> Result<Pin, ScenarioError> {
    let spec = PinSpec {
        series: Some(outcome.series.clone()),
        shock: None,
        period: setup.last_period().offset(t as i64).to_string(),
        units: outcome.units,
        value: outcome.threshold,
        active: true,
    };
    setup.pin_at(field, &spec)
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

/// Under the scenario's own law (pins, corridors, drivers), from [`PROBABILITY_PATHS`] drawn
/// paths: `P(every outcome at its chosen period)` and `P(every outcome at some period of its
/// range)`, each with its standard error.
fn probabilities(
    setup: &Setup,
    theta: &Theta,
    all: &Conditions,
    outcomes: &[Outcome],
    chosen: &[Pin],
    ranges: &[Vec<Pin>],
) -> Result<(Estimate, Estimate), ReverseError> {
    let plan = Plan::new(theta, all, None)?;
    let mut rng = stream(setup.file.seed, Purpose::Checks, 3);
    let mut rngs: Vec<rand_chacha::ChaCha8Rng> = (0..PROBABILITY_PATHS)
        .map(|_| rand_chacha::ChaCha8Rng::from_rng(&mut rng))
        .collect();
    let mut refs: Vec<&mut rand_chacha::ChaCha8Rng> = rngs.iter_mut().collect();
    let happens = |o: &Outcome, p: &Pin, y: &[f64]| {
        let q = quantity(p, y);
        if o.at_most {
            q <= p.value
        } else {
            q >= p.value
        }
    };
    let (mut at, mut any) = (0usize, 0usize);
    plan.expect_paths(theta, refs.len());
    for drawn in plan.sample_many(theta, &mut refs) {
        let (y, _) = drawn?;
        let all_at = outcomes.iter().zip(chosen).all(|(o, p)| happens(o, p, &y));
        let all_any = outcomes
            .iter()
            .zip(ranges)
            .all(|(o, pins)| pins.iter().any(|p| happens(o, p, &y)));
        at += usize::from(all_at);
        any += usize::from(all_any);
    }
    let share = |k: usize| {
        let p = k as f64 / PROBABILITY_PATHS as f64;
        (p, (p * (1.0 - p) / PROBABILITY_PATHS as f64).sqrt())
    };
    Ok((share(at), share(any)))
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

/// What the answer says, in lines to read (the command and the window both show them): each
/// outcome where it happens, the shocks it needs, the corridors it presses against, and the
/// probabilities.
pub fn summary_lines(setup: &Setup, outcomes: &[Outcome], r: &Reverse) -> Vec<String> {
    let mut lines = Vec::new();
    for (o, (period, binding)) in outcomes.iter().zip(&r.at) {
        lines.push(if *binding {
            format!("{} in {period}", describe(o))
        } else {
            format!(
                "{}: the rest of the scenario already meets it in {period}, nothing to add",
                describe(o)
            )
        });
    }
    lines.push(format!(
        "Most plausible: structural shocks of ½ε'ε = {:.3} nats.",
        r.divergence
    ));
    lines.push(format!(
        "Shocks it needs, by share of ε'ε: {}.",
        shock_shares(setup, r).join(", ")
    ));
    if !r.binding_corridors.is_empty() {
        lines.push(format!(
            "Corridors at their bounds on the way: {}.",
            r.binding_corridors.join(", ")
        ));
    }
    // No drawn path reaching the outcomes bounds the probability, it does not measure it
    // (the rule of three: below 3/n at 95%).
    let said = |(p, se): (f64, Option<f64>)| match se {
        None => format!(
            "{} ({p:.2e}, exact)",
            crate::checks::one_in(p.max(f64::MIN_POSITIVE).log10())
        ),
        Some(_) if p == 0.0 => format!(
            "below 1 in {:.0} (none of {PROBABILITY_PATHS} drawn paths; 95% bound)",
            PROBABILITY_PATHS as f64 / 3.0
        ),
        Some(se) => format!(
            "{} ({p:.2e} ± {se:.1e} from drawn paths)",
            crate::checks::one_in(p.log10())
        ),
    };
    let (scenario_law, model_alone) = (said(r.probability), said(r.unconditional));
    let any = said((r.probability_any.0, Some(r.probability_any.1)));
    let what = if outcomes.len() == 1 {
        format!("the outcome in {}", r.at[0].0)
    } else {
        "every outcome at its period".to_string()
    };
    lines.push(format!(
        "Probability of {what} under the scenario's own law: {scenario_law}; of {} at some period of {}: {any}; under the model alone, without the scenario's conditions: {model_alone}.",
        if outcomes.len() == 1 { "it" } else { "every outcome" },
        if outcomes.len() == 1 { "its range" } else { "their ranges" },
    ));
    lines
}

/// The shocks of the answer by their share of `ε'ε`, largest first ("house_prices 37%"),
/// those under half a percent together at the end.
fn shock_shares(setup: &Setup, r: &Reverse) -> Vec<String> {
    let n = setup.n();
    let mut by_shock: Vec<(f64, String)> = (0..n)
        .map(|j| {
            let ss: f64 = r.shocks.iter().skip(j).step_by(n).map(|e| e * e).sum();
            (ss, setup.names[j].clone())
        })
        .collect();
    by_shock.sort_by(|a, b| b.0.total_cmp(&a.0));
    let total: f64 = by_shock
        .iter()
        .map(|b| b.0)
        .sum::<f64>()
        .max(f64::MIN_POSITIVE);
    let (large, small): (Vec<_>, Vec<_>) = by_shock
        .iter()
        .filter(|b| b.0 > 1e-12 * total)
        .partition(|b| b.0 >= 0.005 * total);
    let mut out: Vec<String> = large
        .iter()
        .map(|(ss, name)| format!("{name} {:.0}%", 100.0 * ss / total))
        .collect();
    if !small.is_empty() {
        let rest: f64 = small.iter().map(|b| b.0).sum();
        out.push(format!(
            "{} others {:.1}% together",
            small.len(),
            100.0 * rest / total
        ));
    }
    out
}
