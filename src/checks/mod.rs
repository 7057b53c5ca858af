//! Scenario checks: do the conditions clash (cannot hold together in the model), are they
//! strained (hold only with a tiny model probability), which conditions are to blame, and
//! how plausible is the whole scenario (ALGORITHMS §9).
//!
//! Everything is evaluated for one parameter set θ — the posterior mean, or the fixed
//! coefficients — so the window can run it live: one plan (as for sampling), a few thousand
//! proposals of the truncated-normal estimator, and a bounded blame search.
//!
//! - [`strain`]: χ² tails, the coin calibration, and the report parts;
//! - [`blame`]: the deletion filter;
//! - [`severity`]: the scenario's shocks against the model's historical shocks.

pub mod blame;
pub mod severity;
pub mod strain;

use nalgebra::{DMatrix, SymmetricEigen};
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

use crate::forecast::{
    Conditions, ForecastError, Plan, Theta,
    random::{Purpose, stream},
};
use crate::scenario::CheckSettings;
use crate::truncnorm::{Probability, SolveStatus};
pub use severity::{History, HistorySeverity};
pub use strain::{CorridorStrain, PinStrain, Plausibility};

/// How bad a finding is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Severity {
    /// The conditions cannot hold together (or cannot be sampled): nothing is sampled.
    Clash,
    /// They hold together only improbably.
    Strain,
}

/// One problem, naming the conditions involved.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Finding {
    pub severity: Severity,
    /// A stable name for the kind of problem (`contradictory_pins`, `corridor_probability`…).
    pub kind: String,
    /// Labels of the conditions to blame.
    pub conditions: Vec<String>,
    /// Their fields in the scenario file, where known (`pins[2]`).
    pub fields: Vec<String>,
    pub message: String,
    /// What would resolve it.
    pub remedy: String,
    /// Whether the blamed set was verified to be minimal (blame searches only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub minimal: Option<bool>,
}

/// The overall verdict.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    Clear,
    Strained,
    Clashing,
}

/// The result of the checks.
#[derive(Debug, Clone, Serialize)]
pub struct CheckReport {
    pub status: Status,
    /// Which parameters the checks used.
    pub evaluated_at: String,
    pub findings: Vec<Finding>,
    pub notes: Vec<String>,
    pub pins: Option<PinStrain>,
    pub corridors: Option<CorridorStrain>,
    pub plausibility: Option<Plausibility>,
    /// The conditions' shocks against the model's historical shocks.
    pub against_history: Option<HistorySeverity>,
    pub settings: CheckSettings,
}

impl CheckReport {
    pub fn clashes(&self) -> bool {
        self.status == Status::Clashing
    }

    fn settle(mut self) -> CheckReport {
        self.status = if self.findings.iter().any(|f| f.severity == Severity::Clash) {
            Status::Clashing
        } else if self.findings.is_empty() {
            Status::Clear
        } else {
            Status::Strained
        };
        self
    }
}

/// Proposals behind the first corridor-probability estimate; doubled until the relative
/// error is below [`TARGET_REL_ERR`] or [`MAX_PROPOSALS`] is reached (ALGORITHMS §7.7).
const FIRST_PROPOSALS: usize = 2_000;
const MAX_PROPOSALS: usize = 64_000;
const TARGET_REL_ERR: f64 = 0.02;
/// Proposals per corridor-probability estimate inside blame searches and per non-driver draw.
const QUICK_PROPOSALS: usize = 2_000;
/// Non-driver shock draws averaged over for the drivers' corridor part of the divergence and
/// for the sampler's acceptance.
const NONDRIVER_DRAWS: usize = 32;
/// A condition Gram matrix (unit diagonal) with a condition number above this is flagged as
/// nearly redundant (ALGORITHMS §9.1 item 7); above 1e12 the plan refuses the conditions.
const NEARLY_REDUNDANT: f64 = 1e10;

/// Check a set of conditions for one θ. `extra` findings (from the scenario layer: bad
/// conditions that were left out) are carried into the report; `history` (the model's data)
/// gives the severity against history.
pub fn check_conditions(
    theta: &Theta,
    cond: &Conditions,
    settings: &CheckSettings,
    seed: u64,
    evaluated_at: &str,
    extra: Vec<Finding>,
    history: Option<&History>,
) -> CheckReport {
    let mut report = CheckReport {
        status: Status::Clear,
        evaluated_at: evaluated_at.to_string(),
        findings: extra,
        notes: Vec::new(),
        pins: None,
        corridors: None,
        plausibility: None,
        against_history: None,
        settings: *settings,
    };
    let plan = match Plan::new(theta, cond, None) {
        Ok(plan) => plan,
        Err(e) => {
            report
                .findings
                .push(clash_finding(theta, cond, &e, settings));
            return report.settle();
        }
    };
    report.notes.extend(plan.notes().iter().cloned());
    if let Some(note) = redundancy_note(&plan) {
        report.notes.push(note);
    }
    if plan.pin_count() > 0 {
        let (z, d2) = plan.pin_surprise();
        for (label, zi) in &z {
            if zi.abs() > settings.pin_z {
                report.findings.push(Finding {
                    severity: Severity::Strain,
                    kind: "pin_far_from_forecast".into(),
                    conditions: vec![label.clone()],
                    fields: fields_of(cond, std::slice::from_ref(label)),
                    message: format!(
                        "pin '{label}' is {:.1} standard deviations from the unconditional forecast",
                        zi.abs()
                    ),
                    remedy: "check its value and units, or accept that the scenario is severe".into(),
                    minimal: None,
                });
            }
        }
        report.pins = Some(PinStrain::new(z, d2));
    }
    // With drivers, the sampler's own law depends on the non-driver shocks: one fixed set of
    // their draws serves the acceptance and the corridor part of the divergence.
    let own = if plan.corridor_count() > 0 && plan.nondriver_count() > 0 {
        match nondriver_estimates(&plan, seed) {
            Ok(v) => Some(v),
            Err(e) => {
                report
                    .findings
                    .push(clash_finding(theta, cond, &e, settings));
                return report.settle();
            }
        }
    } else {
        None
    };
    let mut corridor_ok = true;
    match corridor_strain(&plan, own.as_deref(), seed) {
        Ok(Some(strain)) => {
            if strain.acceptance < settings.min_acceptance {
                report.findings.push(Finding {
                    severity: Severity::Clash,
                    kind: "too_improbable_to_sample".into(),
                    conditions: cond.corridors.iter().map(|c| c.label.clone()).collect(),
                    fields: cond.corridors.iter().map(|c| c.field.clone()).collect(),
                    message: format!(
                        "the exact sampler would accept about {:.1e} of its proposals (the limit is {:.0e}): the corridors are too improbable to sample",
                        strain.acceptance, settings.min_acceptance
                    ),
                    remedy: "widen the corridors, or move them or the pins towards the unconditional forecast".into(),
                    minimal: None,
                });
            }
            report.corridors = Some(strain);
        }
        Ok(None) => {}
        Err(e) => {
            corridor_ok = false;
            report
                .findings
                .push(clash_finding(theta, cond, &e, settings));
        }
    }
    let strains = strain_findings(theta, cond, &report, settings, seed);
    report.findings.extend(strains);
    let finite = report
        .corridors
        .as_ref()
        .is_none_or(|c| c.log10_probability.is_finite());
    if corridor_ok && finite {
        match plausibility(theta, &plan, &report, own.as_deref()) {
            Ok(p) => report.plausibility = Some(p),
            Err(e) => report.notes.push(format!("plausibility not computed: {e}")),
        }
    } else {
        report
            .notes
            .push("plausibility not computed: the corridors' probability is unknown".into());
    }
    if let Some(history) = history.filter(|_| corridor_ok && finite) {
        match severity::severity(theta, &plan, history, seed) {
            Ok(s) => report.against_history = s,
            Err(e) => report
                .notes
                .push(format!("severity against history not computed: {e}")),
        }
    }
    report.settle()
}

/// `ln ℓ̂` of the corridors given the pins (model law, every shock free), with the doubling
/// rule; and the acceptance of this plan's own sampler (drivers: averaged over `own`).
fn corridor_strain(
    plan: &Plan,
    own: Option<&[Probability]>,
    seed: u64,
) -> Result<Option<CorridorStrain>, ForecastError> {
    let Some(law) = plan.model_law()? else {
        return Ok(None);
    };
    let fallback = law.status() == SolveStatus::Fallback;
    let mut rng = stream(seed, Purpose::Checks, 0);
    let mut n = FIRST_PROPOSALS;
    let mut est = law.probability(&[], &mut rng, n)?;
    // (A zero estimate has no relative error: keep doubling then too.)
    while (est.rel_err.is_nan() || est.rel_err > TARGET_REL_ERR) && n < MAX_PROPOSALS {
        n *= 2;
        est = law.probability(&[], &mut rng, n)?;
    }
    let acceptance = match own {
        None => est.acceptance(),
        Some(estimates) => {
            estimates.iter().map(|p| p.acceptance()).sum::<f64>() / estimates.len().max(1) as f64
        }
    };
    let ln10 = std::f64::consts::LN_10;
    Ok(Some(CorridorStrain {
        log10_probability: est.ln / ln10,
        relative_error: est.rel_err,
        log10_bound: est.ln_bound / ln10,
        acceptance,
        proposals: est.proposals,
        saddle_point_found: !fallback,
    }))
}

/// The plan's own corridor probability for a fixed set of non-driver shock draws.
fn nondriver_estimates(plan: &Plan, seed: u64) -> Result<Vec<Probability>, ForecastError> {
    let mut rng = stream(seed, Purpose::Checks, 1);
    let mut out = Vec::with_capacity(NONDRIVER_DRAWS);
    for _ in 0..NONDRIVER_DRAWS {
        let e: Vec<f64> = (0..plan.nondriver_count())
            .map(|_| StandardNormal.sample(&mut rng))
            .collect();
        if let Some(p) = plan.corridor_probability(&e, &mut rng, QUICK_PROPOSALS)? {
            out.push(p);
        }
    }
    Ok(out)
}

/// `D = D_mean + D_shape + D_corr` (ALGORITHMS §9.2). The shock covariance `A A'` with
/// `A = I − U F_R` is the identity outside `span[U, F_R']`, so its non-unit eigenvalues come
/// from that small subspace; exactly `m` of them are the pinned directions (zero), and are
/// left out. With drivers the corridor part averages `−ln ℓ(ε_J̄)` over draws of the
/// non-driver shocks (`own`); with every shock free it is `−ln ℓ` of the report.
fn plausibility(
    theta: &Theta,
    plan: &Plan,
    report: &CheckReport,
    own: Option<&[Probability]>,
) -> Result<Plausibility, ForecastError> {
    let law = plan.pin_shock_law(theta)?;
    let (u, fr) = (&law.gain, &law.rows);
    let mean_part = 0.5 * law.mean.norm_squared();
    let m = plan.pin_count();
    let shape_part: f64 = if m == 0 {
        0.0
    } else {
        let big_n = theta.len();
        let mut w = DMatrix::zeros(big_n, 2 * m);
        w.columns_mut(0, m).copy_from(u);
        w.columns_mut(m, m).copy_from(&fr.transpose());
        let q = w.qr().q();
        // A'Q = Q − F_R'(U'Q).
        let atq = &q - fr.transpose() * (u.transpose() * &q);
        let small = atq.transpose() * atq;
        let mut eig: Vec<f64> = SymmetricEigen::new(small)
            .eigenvalues
            .iter()
            .copied()
            .collect();
        eig.sort_by(f64::total_cmp);
        eig.iter()
            .skip(m)
            .map(|&l| 0.5 * (l - 1.0 - l.max(f64::MIN_POSITIVE).ln()))
            .sum()
    };
    let corridor_part = match (&report.corridors, own) {
        (None, _) => 0.0,
        (Some(_), Some(estimates)) => {
            -estimates.iter().map(|p| p.ln).sum::<f64>() / estimates.len().max(1) as f64
        }
        (Some(c), None) => -c.log10_probability * std::f64::consts::LN_10,
    };
    Ok(Plausibility::new(
        mean_part,
        shape_part.max(0.0),
        corridor_part.max(0.0),
        theta.h,
        own.is_some(),
    ))
}

/// A note when the conditions are nearly redundant: the condition number of `Γ` scaled to a
/// unit diagonal.
fn redundancy_note(plan: &Plan) -> Option<String> {
    let cond = plan.condition_number();
    (cond > NEARLY_REDUNDANT).then(|| {
        format!(
            "the conditions are nearly redundant (condition number {cond:.1e}): some combination of them is almost fixed by the others, and results may be sensitive to rounding"
        )
    })
}

/// Fields of the conditions with these labels.
fn fields_of(cond: &Conditions, labels: &[String]) -> Vec<String> {
    let all = cond.labels();
    let fields = cond.fields();
    labels
        .iter()
        .filter_map(|l| {
            all.iter()
                .position(|a| a == l || l.starts_with(&format!("{a} at ")))
                .map(|i| fields[i].clone())
        })
        .fold(Vec::new(), |mut acc, f| {
            if !acc.contains(&f) {
                acc.push(f);
            }
            acc
        })
}

/// The kind, blamed labels and remedy of a clash error.
fn describe(e: &ForecastError) -> (&'static str, Vec<String>, &'static str) {
    match e {
        ForecastError::Unreachable { conditions, .. } => (
            "unreachable_by_drivers",
            conditions.clone(),
            "add drivers that move these quantities, move the conditions later, or turn a pin into a corridor",
        ),
        ForecastError::Contradictory { pins, .. } => (
            "contradictory_pins",
            pins.clone(),
            "change or remove one of these pins",
        ),
        ForecastError::CorridorFixedByPins { corridor, pins } => (
            "pin_outside_corridor",
            pins.iter().cloned().chain([corridor.clone()]).collect(),
            "move the pin value inside the corridor, or widen the corridor",
        ),
        ForecastError::CorridorsContradict { rows } => (
            "corridors_contradict",
            rows.clone(),
            "widen or move one of these corridors",
        ),
        ForecastError::EmptyCorridor { corridor } => (
            "empty_corridor",
            vec![corridor.clone()],
            "make the lower bound smaller than the upper bound",
        ),
        ForecastError::NearlyDependent { conditions, .. } => (
            "nearly_redundant",
            conditions.clone(),
            "remove the condition that (nearly) repeats the others",
        ),
        ForecastError::TooImprobable { corridors, .. } => (
            "too_improbable_to_sample",
            corridors.clone(),
            "widen the corridors, or move them or the pins towards the unconditional forecast",
        ),
        ForecastError::Target { label, .. } => (
            "target_out_of_reach",
            vec![label.clone()],
            "move the target towards the scenario's fan, or change the other targets",
        ),
        ForecastError::Singular(_)
        | ForecastError::NotFinite { .. }
        | ForecastError::NotStationary { .. }
        | ForecastError::TooManyFailed { .. }
        | ForecastError::Unsupported { .. }
        | ForecastError::GaveUp { .. }
        | ForecastError::SamplerBound { .. }
        | ForecastError::Cancelled => (
            "numerical",
            Vec::new(),
            "check the model and the conditions",
        ),
    }
}

/// A clash finding, with the conditions to blame narrowed by the deletion filter.
fn clash_finding(
    theta: &Theta,
    cond: &Conditions,
    e: &ForecastError,
    settings: &CheckSettings,
) -> Finding {
    let (kind, named, remedy) = describe(e);
    let start: Vec<usize> = (0..cond.len()).collect();
    let b = blame::deletion_filter(&start, settings.blame_budget, |keep| {
        Plan::new(theta, &cond.subset(keep), None).is_err()
    });
    let labels = cond.labels();
    let conditions: Vec<String> = if b.set.len() < cond.len() || named.is_empty() {
        b.set.iter().map(|&i| labels[i].clone()).collect()
    } else {
        named
    };
    Finding {
        severity: Severity::Clash,
        kind: kind.into(),
        fields: fields_of(cond, &conditions),
        conditions,
        message: e.to_string(),
        remedy: remedy.into(),
        minimal: Some(b.minimal),
    }
}

/// Strain findings, each with the conditions to blame found by the deletion filter: the pins
/// jointly far out (test: their χ² tail below `pin_tail`; only pins are candidates, the least
/// surprising tried first), and the corridors improbable given the pins (test: their
/// probability below `corridor_probability`; every condition is a candidate, since pins shift
/// the corridors). The tests of one search reuse one random stream (common random numbers).
fn strain_findings(
    theta: &Theta,
    cond: &Conditions,
    report: &CheckReport,
    settings: &CheckSettings,
    seed: u64,
) -> Vec<Finding> {
    let mut out = Vec::new();
    let labels = cond.labels();
    if let Some(p) = report
        .pins
        .as_ref()
        .filter(|p| p.log10_tail < settings.pin_tail.log10())
    {
        let fails = |keep: &[usize]| -> bool {
            Plan::new(theta, &cond.subset(keep), None).is_ok_and(|plan| {
                let (z, d2) = plan.pin_surprise();
                !z.is_empty() && strain::ln_chi2_tail(z.len(), d2) < settings.pin_tail.ln()
            })
        };
        let z_of = |i: usize| {
            p.z.iter()
                .find(|(l, _)| *l == cond.pins[i].label)
                .map_or(0.0, |(_, z)| z.abs())
        };
        let mut order: Vec<usize> = (0..cond.pins.len()).collect();
        order.sort_by(|&a, &b| z_of(a).total_cmp(&z_of(b)));
        let b = blame::deletion_filter(&order, settings.blame_budget, fails);
        let conditions: Vec<String> = b.set.iter().map(|&i| labels[i].clone()).collect();
        out.push(Finding {
            severity: Severity::Strain,
            kind: "pins_far_from_forecast".into(),
            fields: fields_of(cond, &conditions),
            message: format!(
                "the pins are jointly {:.1} standard deviations from the unconditional forecast (χ² tail 10^{:.1}, {})",
                p.mahalanobis.sqrt(),
                p.log10_tail,
                one_in(p.log10_tail)
            ),
            remedy: "move the pins named here towards the unconditional forecast, or keep them knowing the scenario is far in the tails".into(),
            conditions,
            minimal: Some(b.minimal),
        });
    }
    if let Some(c) = report
        .corridors
        .as_ref()
        .filter(|c| c.log10_probability < settings.corridor_probability.log10())
    {
        let fails = |keep: &[usize]| -> bool {
            let Ok(plan) = Plan::new(theta, &cond.subset(keep), None) else {
                return false;
            };
            let mut rng = stream(seed, Purpose::Checks, 2);
            matches!(plan.model_law(), Ok(Some(law)) if law
                .probability(&[], &mut rng, QUICK_PROPOSALS)
                .is_ok_and(|p| p.ln < settings.corridor_probability.ln()))
        };
        let order: Vec<usize> = (0..cond.len()).collect();
        let b = blame::deletion_filter(&order, settings.blame_budget, fails);
        let conditions: Vec<String> = b.set.iter().map(|&i| labels[i].clone()).collect();
        out.push(Finding {
            severity: Severity::Strain,
            kind: "corridors_improbable".into(),
            fields: fields_of(cond, &conditions),
            message: format!(
                "the corridors hold with probability 10^{:.1} ({}) given the pins (every shock free)",
                c.log10_probability,
                one_in(c.log10_probability)
            ),
            remedy: "widen or move the corridors named here, or the pins that push against them"
                .into(),
            conditions,
            minimal: Some(b.minimal),
        });
    }
    out
}

/// A probability in plain words: "about 1 in 190,000" (from its log10).
pub fn one_in(log10_probability: f64) -> String {
    if !log10_probability.is_finite() {
        return if log10_probability == f64::NEG_INFINITY {
            "too small to tell apart from 0".into()
        } else {
            "not measured".into()
        };
    }
    if log10_probability < -15.0 {
        return format!("about 1 in 10^{:.0}", -log10_probability);
    }
    if log10_probability >= -0.3 {
        return format!("about {:.0}%", 100.0 * 10f64.powf(log10_probability));
    }
    let n = 10f64.powf(-log10_probability);
    let digits = n.log10().floor() as i32;
    let unit = 10f64.powi((digits - 1).max(0));
    let rounded = ((n / unit).round() * unit) as u128;
    let text = rounded.to_string();
    let mut grouped = String::new();
    for (k, c) in text.chars().enumerate() {
        if k > 0 && (text.len() - k).is_multiple_of(3) {
            grouped.push(',');
        }
        grouped.push(c);
    }
    format!("about 1 in {grouped}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn probabilities_read_in_plain_words() {
        assert_eq!(one_in(-5.28), "about 1 in 190,000");
        assert_eq!(one_in(-2.0), "about 1 in 100");
        assert_eq!(one_in(-0.1), "about 79%");
        assert_eq!(one_in(-50.0), "about 1 in 10^50");
        assert_eq!(one_in(f64::NAN), "not measured");
    }
}
