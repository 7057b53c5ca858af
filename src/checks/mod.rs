//! Scenario checks: do the conditions clash (cannot hold together in the model), are they
//! strained (hold only with a tiny model probability), which conditions are to blame, and
//! how plausible is the whole scenario (ALGORITHMS §9).
//!
//! Everything is evaluated for one parameter set θ — the posterior mean, or the fixed
//! coefficients — so the window can run it live: one plan (as for sampling), a few thousand
//! proposals of the truncated-normal estimator, and a bounded blame search.
//!
//! - [`strain`]: χ² tails, the coin calibration, and the report parts;
//! - [`blame`]: the deletion filter.

pub mod blame;
pub mod strain;

use nalgebra::{DMatrix, DVector, SymmetricEigen};
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;

use crate::forecast::{
    Conditions, ForecastError, Plan, Theta,
    random::{Purpose, stream},
};
use crate::scenario::CheckSettings;
use crate::truncnorm::Probability;
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
const QUICK_PROPOSALS: usize = 1_000;
/// Non-driver shock draws averaged over for the drivers' corridor part of the divergence and
/// for the sampler's acceptance.
const NONDRIVER_DRAWS: usize = 32;
/// Eigenvalues of the shock covariance below this count as zero (pinned directions).
const ZERO_EIGENVALUE: f64 = 1e-8;
/// A condition Gram matrix (unit diagonal) with a condition number above this is flagged as
/// nearly redundant (ALGORITHMS §9.1 item 7).
const NEARLY_REDUNDANT: f64 = 1e10;

/// Check a set of conditions for one θ. `extra` findings (from the scenario layer: bad
/// conditions that were left out) are carried into the report.
pub fn check_conditions(
    theta: &Theta,
    cond: &Conditions,
    settings: &CheckSettings,
    seed: u64,
    evaluated_at: &str,
    extra: Vec<Finding>,
) -> CheckReport {
    let mut report = CheckReport {
        status: Status::Clear,
        evaluated_at: evaluated_at.to_string(),
        findings: extra,
        notes: Vec::new(),
        pins: None,
        corridors: None,
        plausibility: None,
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
    let mut ln_corridor = 0.0;
    match corridor_strain(&plan, seed) {
        Ok(Some((strain, ln_p))) => {
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
            ln_corridor = ln_p;
            report.corridors = Some(strain);
        }
        Ok(None) => {}
        Err(e) => report
            .findings
            .push(clash_finding(theta, cond, &e, settings)),
    }
    if strained(&report, settings) {
        report
            .findings
            .push(strain_finding(theta, cond, &report, settings, seed));
    }
    match plausibility(theta, &plan, -ln_corridor, seed) {
        Ok(p) => report.plausibility = Some(p),
        Err(e) => report.notes.push(format!("plausibility not computed: {e}")),
    }
    report.settle()
}

/// Whether the pins' joint tail or the corridors' probability is below its threshold.
fn strained(report: &CheckReport, settings: &CheckSettings) -> bool {
    let pins = report
        .pins
        .as_ref()
        .is_some_and(|p| p.log10_tail < settings.pin_tail.log10());
    let corridors = report
        .corridors
        .as_ref()
        .is_some_and(|c| c.log10_probability < settings.corridor_probability.log10());
    pins || corridors
}

/// `ln ℓ̂` of the corridors given the pins (model law, every shock free), with the doubling
/// rule; and the acceptance of this plan's own sampler.
fn corridor_strain(plan: &Plan, seed: u64) -> Result<Option<(CorridorStrain, f64)>, ForecastError> {
    let Some(law) = plan.model_law()? else {
        return Ok(None);
    };
    let mut rng = stream(seed, Purpose::Checks, 0);
    let mut n = FIRST_PROPOSALS;
    let mut est = law.probability(&[], &mut rng, n)?;
    while est.rel_err > TARGET_REL_ERR && n < MAX_PROPOSALS {
        n *= 2;
        est = law.probability(&[], &mut rng, n)?;
    }
    let acceptance = if plan.nondriver_count() == 0 {
        est.acceptance()
    } else {
        let estimates = nondriver_estimates(plan, seed)?;
        estimates.iter().map(|p| p.acceptance()).sum::<f64>() / estimates.len().max(1) as f64
    };
    let ln10 = std::f64::consts::LN_10;
    let strain = CorridorStrain {
        log10_probability: est.ln / ln10,
        relative_error: est.rel_err,
        log10_bound: est.ln_bound / ln10,
        acceptance,
        proposals: est.proposals,
    };
    Ok(Some((strain, est.ln)))
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
/// from that small subspace. With drivers the corridor part averages `−ln ℓ(ε_J̄)` over draws
/// of the non-driver shocks; with every shock free it is `−ln ℓ`.
fn plausibility(
    theta: &Theta,
    plan: &Plan,
    corridor_all_free: f64,
    seed: u64,
) -> Result<Plausibility, ForecastError> {
    let law = plan.pin_shock_law(theta)?;
    let (u, fr) = (&law.gain, &law.rows);
    let mean_part = 0.5 * law.mean.norm_squared();
    let shape_part = if plan.pin_count() == 0 {
        0.0
    } else {
        let big_n = theta.len();
        let m = plan.pin_count();
        let mut w = DMatrix::zeros(big_n, 2 * m);
        w.columns_mut(0, m).copy_from(u);
        w.columns_mut(m, m).copy_from(&fr.transpose());
        let q = w.qr().q();
        // A'Q = Q − F_R'(U'Q).
        let atq = &q - fr.transpose() * (u.transpose() * &q);
        let small = atq.transpose() * atq;
        SymmetricEigen::new(small)
            .eigenvalues
            .iter()
            .filter(|&&l| l > ZERO_EIGENVALUE)
            .map(|&l| 0.5 * (l - 1.0 - l.ln()))
            .sum()
    };
    let corridor_part = if plan.corridor_count() == 0 {
        0.0
    } else if plan.nondriver_count() == 0 {
        corridor_all_free
    } else {
        let estimates = nondriver_estimates(plan, seed)?;
        -estimates.iter().map(|p| p.ln).sum::<f64>() / estimates.len().max(1) as f64
    };
    Ok(Plausibility::new(
        mean_part,
        shape_part.max(0.0),
        corridor_part,
        theta.h,
    ))
}

/// A note when the conditions are nearly redundant: the condition number of `Γ` scaled to a
/// unit diagonal.
fn redundancy_note(plan: &Plan) -> Option<String> {
    let g = plan.gram();
    if g.nrows() < 2 {
        return None;
    }
    let d = DVector::from_iterator(g.nrows(), g.diagonal().iter().map(|x| 1.0 / x.sqrt()));
    let scaled = DMatrix::from_fn(g.nrows(), g.ncols(), |i, j| d[i] * g[(i, j)] * d[j]);
    let eig = SymmetricEigen::new(scaled).eigenvalues;
    let (lo, hi) = (eig.min(), eig.max());
    (lo <= 0.0 || hi / lo > NEARLY_REDUNDANT).then(|| {
        format!(
            "the conditions are nearly redundant (condition number {:.1e}): some combination of them is almost fixed by the others, and results may be sensitive to rounding",
            hi / lo.max(f64::MIN_POSITIVE)
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
        ForecastError::NearlyDependent { condition } => (
            "nearly_redundant",
            vec![condition.clone()],
            "remove the condition or the ones it repeats",
        ),
        ForecastError::TooImprobable { corridors, .. } => (
            "too_improbable_to_sample",
            corridors.clone(),
            "widen the corridors, or move them or the pins towards the unconditional forecast",
        ),
        ForecastError::Singular(_) | ForecastError::Cancelled => (
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

/// The strain finding: the conditions that together make the scenario improbable, found by
/// the deletion filter on "pins' tail below its threshold, or corridors' probability below
/// its threshold", trying the least surprising pins first.
fn strain_finding(
    theta: &Theta,
    cond: &Conditions,
    report: &CheckReport,
    settings: &CheckSettings,
    seed: u64,
) -> Finding {
    let fails = |keep: &[usize]| -> bool {
        let sub = cond.subset(keep);
        let Ok(plan) = Plan::new(theta, &sub, None) else {
            return true;
        };
        if plan.pin_count() > 0 {
            let (z, d2) = plan.pin_surprise();
            if strain::ln_chi2_tail(z.len(), d2) < settings.pin_tail.ln() {
                return true;
            }
        }
        match plan.model_law() {
            Ok(Some(law)) => {
                // Common random numbers across the tests of one search.
                let mut rng = stream(seed, Purpose::Checks, 2);
                law.probability(&[], &mut rng, QUICK_PROPOSALS)
                    .is_ok_and(|p| p.ln < settings.corridor_probability.ln())
            }
            _ => false,
        }
    };
    let mut order: Vec<usize> = (0..cond.len()).collect();
    if let Some(p) = &report.pins {
        // Least surprising pins first (|z|), then the corridors.
        let z_of = |i: usize| {
            p.z.iter()
                .find(|(l, _)| *l == cond.pins[i].label)
                .map_or(0.0, |(_, z)| z.abs())
        };
        order[..cond.pins.len()].sort_by(|&a, &b| z_of(a).total_cmp(&z_of(b)));
    }
    let b = blame::deletion_filter(&order, settings.blame_budget, fails);
    let labels = cond.labels();
    let conditions: Vec<String> = b.set.iter().map(|&i| labels[i].clone()).collect();
    let mut what = Vec::new();
    if let Some(p) = &report.pins {
        what.push(format!(
            "the pins are jointly {:.1} standard deviations out (χ² tail 10^{:.1})",
            p.mahalanobis.sqrt(),
            p.log10_tail
        ));
    }
    if let Some(c) = &report.corridors {
        what.push(format!(
            "the corridors hold with probability 10^{:.1} given the pins",
            c.log10_probability
        ));
    }
    Finding {
        severity: Severity::Strain,
        kind: "improbable_scenario".into(),
        fields: fields_of(cond, &conditions),
        message: format!(
            "the conditions hold together only improbably: {}",
            what.join("; ")
        ),
        remedy: "loosen or move the conditions named here, or keep them knowing the scenario is far in the tails".into(),
        conditions,
        minimal: Some(b.minimal),
    }
}
