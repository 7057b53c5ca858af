//! Targets on the distribution (the scenario's `targets`): the moments each target sets on
//! the paths, in people's units, and the weights of least relative entropy that meet them
//! ([`crate::entropic`], Robertson, Tallman and Whiteman 2005).
//!
//! - `mean: m` sets `E[q] = m` for the quantity `q` (a series at a period, in its units);
//! - `sd: s` sets `E[(q − m)²] = s²` with `m` the quantity's targeted mean, or, without one,
//!   its mean before tilting, held there by a second moment `E[q] = m` (centred at `m`, the
//!   moment's exponent stays of the order of the spread, not of `m²`: the dual is then
//!   accurate enough for Newton's method to reach its tolerance);
//! - `probability: p, below: c` sets `E[1{q ≤ c}] = p` (`above`: `1{q ≥ c}`).

use serde::Serialize;

use crate::entropic::{TiltError, tilt};
use crate::forecast::ForecastError;
use crate::report::fans::model_value;
use crate::scenario::units::display_value;
use crate::scenario::{Setup, TargetSpec};

/// What the tilt did, for the reports.
#[derive(Debug, Clone, Serialize)]
pub struct TiltSummary {
    /// `KL(tilted ‖ untilted)` in nats.
    pub divergence: f64,
    /// Kish's effective number of paths after tilting, and the paths.
    pub effective_paths: f64,
    pub paths: usize,
    pub targets: Vec<TargetMet>,
}

/// One target and the value the tilted paths give it.
#[derive(Debug, Clone, Serialize)]
pub struct TargetMet {
    pub label: String,
    pub field: String,
    pub wanted: f64,
    pub got: f64,
}

/// One moment of the paths and its target value, with the target it belongs to.
struct Moment {
    values: Vec<f64>,
    target: f64,
    owner: usize,
}

/// The weights that meet the scenario's active targets on `paths` (each a stacked future
/// path in model units), tilting `base` (uniform when `None`); `None` without targets.
pub fn tilt_paths(
    setup: &Setup,
    paths: &[Vec<f64>],
    base: Option<&[f64]>,
) -> Result<Option<(Vec<f64>, TiltSummary)>, ForecastError> {
    let specs: Vec<(usize, &TargetSpec)> = setup
        .file
        .targets
        .iter()
        .enumerate()
        .filter(|(_, t)| t.active)
        .collect();
    if specs.is_empty() || paths.is_empty() {
        return Ok(None);
    }
    let base: Vec<f64> = base.map_or_else(|| vec![1.0; paths.len()], <[f64]>::to_vec);
    let mut moments = Vec::new();
    let mut labels = Vec::new();
    let mut quantities = Vec::new();
    for (slot, &(k, spec)) in specs.iter().enumerate() {
        let q = quantity(setup, k, spec, paths)?;
        labels.push((format!("targets[{k}]"), label(setup, spec)));
        moments.extend(moments_of(spec, slot, &q, &base, &specs)?);
        quantities.push(q);
    }
    let g: Vec<Vec<f64>> = moments.iter().map(|m| m.values.clone()).collect();
    let targets: Vec<f64> = moments.iter().map(|m| m.target).collect();
    let t = tilt(&base, &g, &targets).map_err(|e| {
        let index = match e {
            TiltError::Unreachable { index, .. } | TiltError::Together { index } => index,
        };
        let (field, label) = labels[moments[index].owner].clone();
        let why = match e {
            TiltError::Unreachable { .. } => "the paths cannot reach it (it lies outside every path's value, or at its edge): move it towards the scenario's fan, or widen the conditions",
            TiltError::Together { .. } => "it cannot hold together with the other targets on these paths: change one of them",
        };
        ForecastError::Target { field, label, why: why.into() }
    })?;
    let needed = setup.file.checks.min_tilted_share * paths.len() as f64;
    if t.effective_size < needed {
        return Err(ForecastError::Target {
            field: "targets".into(),
            label: labels
                .iter()
                .map(|l| l.1.clone())
                .collect::<Vec<_>>()
                .join("; "),
            why: format!(
                "the tilted paths rest on about {:.0} of {} paths, fewer than checks.min_tilted_share ({}) allows: move the targets towards the scenario's fan, or draw more paths",
                t.effective_size,
                paths.len(),
                setup.file.checks.min_tilted_share
            ),
        });
    }
    let met = specs
        .iter()
        .enumerate()
        .map(|(slot, &(_, spec))| {
            let q = &quantities[slot];
            let mean = |f: &dyn Fn(f64) -> f64| -> f64 {
                q.iter().zip(&t.weights).map(|(v, w)| f(*v) * w).sum()
            };
            let (wanted, got) = match (spec.mean, spec.sd, spec.probability) {
                (Some(m), ..) => (m, mean(&|v| v)),
                (_, Some(sd), _) => {
                    let m = mean(&|v| v);
                    (sd, (mean(&|v| v * v) - m * m).max(0.0).sqrt())
                }
                (_, _, Some(p)) => (p, mean(&|v| indicator(spec, v))),
                _ => (f64::NAN, f64::NAN),
            };
            TargetMet {
                label: labels[slot].1.clone(),
                field: labels[slot].0.clone(),
                wanted,
                got,
            }
        })
        .collect();
    let summary = TiltSummary {
        divergence: t.divergence,
        effective_paths: t.effective_size,
        paths: paths.len(),
        targets: met,
    };
    Ok(Some((t.weights, summary)))
}

/// The quantity a target is on, per path, in its units.
fn quantity(
    setup: &Setup,
    k: usize,
    spec: &TargetSpec,
    paths: &[Vec<f64>],
) -> Result<Vec<f64>, ForecastError> {
    let field = format!("targets[{k}]");
    let invalid = |why: String| ForecastError::Target {
        field: field.clone(),
        label: label(setup, spec),
        why,
    };
    let i = setup
        .names
        .iter()
        .position(|n| *n == spec.series)
        .ok_or_else(|| invalid(format!("no series named '{}'", spec.series)))?;
    let t = setup
        .horizon_of(&spec.period, &format!("{field}.period"))
        .map_err(|e| invalid(e.to_string()))?;
    let ppy = setup.periods_per_year();
    paths
        .iter()
        .map(|p| {
            let x = model_value(setup, p, i);
            display_value(spec.units, setup.transforms[i], ppy, t as i64, &x)
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    invalid(format!(
                        "its value in {} is not available on the paths",
                        spec.units.words()
                    ))
                })
        })
        .collect()
}

/// The moments target `slot` sets on quantity `q` (see the module's notes).
fn moments_of(
    spec: &TargetSpec,
    slot: usize,
    q: &[f64],
    base: &[f64],
    specs: &[(usize, &TargetSpec)],
) -> Result<Vec<Moment>, ForecastError> {
    let bad = |why: &str| ForecastError::Target {
        field: format!("targets[{}]", specs[slot].0),
        label: spec.series.clone(),
        why: why.into(),
    };
    let one = |values: Vec<f64>, target: f64| Moment {
        values,
        target,
        owner: slot,
    };
    match (spec.mean, spec.sd, spec.probability) {
        (Some(m), None, None) => Ok(vec![one(q.to_vec(), m)]),
        (None, Some(sd), None) if sd > 0.0 && sd.is_finite() => {
            // The quantity's targeted mean, else its mean before tilting, held.
            let same = |o: &&(usize, &TargetSpec)| {
                o.1.series == spec.series && o.1.period == spec.period && o.1.units == spec.units
            };
            let targeted = specs.iter().filter(same).find_map(|o| o.1.mean);
            let total: f64 = base.iter().sum();
            let m = targeted
                .unwrap_or_else(|| q.iter().zip(base).map(|(v, w)| v * w).sum::<f64>() / total);
            let squares = q.iter().map(|v| (v - m) * (v - m)).collect();
            let mut out = vec![one(squares, sd * sd)];
            if targeted.is_none() {
                out.push(one(q.to_vec(), m));
            }
            Ok(out)
        }
        (None, None, Some(p)) if p > 0.0 && p < 1.0 => {
            if spec.below.is_some() == spec.above.is_some() {
                return Err(bad(
                    "a probability target needs exactly one of below or above",
                ));
            }
            let hits = q.iter().map(|&v| indicator(spec, v)).collect();
            Ok(vec![one(hits, p)])
        }
        (None, Some(_), None) => Err(bad("sd must be a positive number")),
        (None, None, Some(_)) => Err(bad("probability must lie strictly between 0 and 1")),
        _ => Err(bad("give exactly one of mean, sd or probability")),
    }
}

/// 1 when `v` is on the target's side of its threshold (at or below `below`, at or above
/// `above`), else 0.
fn indicator(spec: &TargetSpec, v: f64) -> f64 {
    let hit = match (spec.below, spec.above) {
        (Some(c), _) => v <= c,
        (_, Some(c)) => v >= c,
        _ => false,
    };
    f64::from(u8::from(hit))
}

/// "Unemployment rate, level at 2027Q4: mean 7.5".
fn label(setup: &Setup, spec: &TargetSpec) -> String {
    let i = setup.names.iter().position(|n| *n == spec.series);
    let shown = i.map_or(spec.series.as_str(), |i| setup.shown(i));
    let what = match (spec.mean, spec.sd, spec.probability, spec.below, spec.above) {
        (Some(m), ..) => format!("mean {m}"),
        (_, Some(s), ..) => format!("standard deviation {s}"),
        (_, _, Some(p), Some(c), _) => format!("probability {p} of at most {c}"),
        (_, _, Some(p), _, Some(c)) => format!("probability {p} of at least {c}"),
        _ => "no value".into(),
    };
    format!("{shown}, {} at {}: {what}", spec.units.words(), spec.period)
}
