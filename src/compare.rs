//! Two scenarios on the same series side by side: their fans, their conditions (added,
//! removed, changed) and the difference of the second from the first, by period and in the
//! statistics people quote.
//!
//! When the two scenarios share the model and its randomness (dataset, series, model, ordering,
//! horizon, draws, paths per draw, seed and stationarity filter), path `k` of one is drawn
//! from the same posterior draw and the same standard normal shocks as path `k` of the other:
//! the difference of the pair is the effect of the conditions alone, and its quantiles are
//! the bands of the difference ("paired"). Otherwise only the two fans can be set side by
//! side, and the difference's bands are left empty.

use crate::report::fans::{display_path_value, quantiles, weighted};
use crate::report::{Stat, statistics};
use crate::run::RunOutcome;
use crate::scenario::{CorridorSpec, PinSpec, ScenarioFile, Setup};

/// Errors of a comparison.
#[derive(Debug, thiserror::Error)]
pub enum CompareError {
    #[error(
        "the scenarios do not have the same series: {first} has {a}, {second} has {b}; compare scenarios on the same series"
    )]
    OtherSeries {
        first: String,
        second: String,
        a: String,
        b: String,
    },
    #[error(
        "the scenarios do not have the same horizon ({a} and {b} periods) or the same last observation; compare scenarios on the same dataset and horizon"
    )]
    OtherPeriods { a: usize, b: usize },
}

/// How a condition differs between the scenarios.
#[derive(Debug, Clone, PartialEq)]
pub enum Change {
    /// Only in the second.
    Added(String),
    /// Only in the first.
    Removed(String),
    /// The same quantity and periods in both, with other values, units or bounds.
    Changed { first: String, second: String },
}

/// One series at one period: both fans' median and 90% band, and the difference.
#[derive(Debug, Clone, PartialEq)]
pub struct DiffRow {
    pub series: String,
    pub period: String,
    pub horizon: usize,
    pub units: String,
    /// 5%, 50% and 95% quantiles of the first and second scenario.
    pub first: [f64; 3],
    pub second: [f64; 3],
    /// Median of second minus median of first.
    pub median_difference: f64,
    /// With paired paths: 5%, 50% and 95% quantiles of the path-by-path difference.
    pub difference: Option<[f64; 3]>,
}

/// The comparison.
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    pub first: String,
    pub second: String,
    pub paired: bool,
    pub conditions: Vec<Change>,
    pub rows: Vec<DiffRow>,
    /// Path-by-path difference of every statistic (second minus first), when paired.
    pub statistics: Vec<Stat>,
    /// What the comparison's files name: both scenarios and both runs.
    pub stamp: crate::report::Stamp,
}

/// The 5%, 50% and 95% quantiles.
fn three(q: [f64; 7]) -> [f64; 3] {
    [q[0], q[3], q[6]]
}

/// What a condition is about (quantity and periods), and the whole condition in words.
fn pin_key(p: &PinSpec) -> (String, String) {
    let what = p
        .series
        .clone()
        .unwrap_or_else(|| format!("{} shock", p.shock.clone().unwrap_or_default()));
    (
        format!("pin on {what} at {}", p.period),
        format!(
            "pin on {what} at {}: {} {}{}",
            p.period,
            p.units.label(),
            p.value,
            if p.active { "" } else { " (switched off)" }
        ),
    )
}

fn corridor_key(c: &CorridorSpec) -> (String, String) {
    let what = c
        .series
        .clone()
        .unwrap_or_else(|| format!("{} shock", c.shock.clone().unwrap_or_default()));
    let bound = |b: &Option<crate::scenario::Bound>| match b {
        None => "open".to_string(),
        Some(crate::scenario::Bound::Same(v)) => v.to_string(),
        Some(crate::scenario::Bound::Each(v)) => format!(
            "[{}]",
            v.iter()
                .map(|x| x.map_or("open".into(), |x| x.to_string()))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    };
    (
        format!("corridor on {what} {}–{}", c.from, c.to),
        format!(
            "corridor on {what} {}–{}: {}, lower {}, upper {}{}",
            c.from,
            c.to,
            c.units.label(),
            bound(&c.lower),
            bound(&c.upper),
            if c.active { "" } else { " (switched off)" }
        ),
    )
}

/// The conditions of `b` against those of `a`, and the drivers.
pub fn condition_changes(a: &ScenarioFile, b: &ScenarioFile) -> Vec<Change> {
    let keys = |f: &ScenarioFile| -> Vec<(String, String)> {
        f.pins
            .iter()
            .map(pin_key)
            .chain(f.corridors.iter().map(corridor_key))
            .collect()
    };
    let (ka, kb) = (keys(a), keys(b));
    let mut out = Vec::new();
    for (key, text) in &ka {
        match kb.iter().find(|(k, _)| k == key) {
            None => out.push(Change::Removed(text.clone())),
            Some((_, other)) if other != text => out.push(Change::Changed {
                first: text.clone(),
                second: other.clone(),
            }),
            Some(_) => {}
        }
    }
    for (key, text) in &kb {
        if !ka.iter().any(|(k, _)| k == key) {
            out.push(Change::Added(text.clone()));
        }
    }
    let drivers = |f: &ScenarioFile| match &f.drivers {
        None => "every shock drives".to_string(),
        Some(d) => format!("drivers: {}", crate::scenario::describe_drivers(d)),
    };
    if a.drivers != b.drivers {
        out.push(Change::Changed {
            first: drivers(a),
            second: drivers(b),
        });
    }
    out
}

/// True when path `k` of one scenario and path `k` of the other come from the same
/// posterior draw and the same shocks.
fn same_randomness(a: &ScenarioFile, b: &ScenarioFile) -> bool {
    // Display units change nothing drawn.
    let model_series = |f: &ScenarioFile| -> Vec<_> {
        f.series
            .iter()
            .map(|s| (s.name.clone(), s.transform, s.centre))
            .collect()
    };
    a.dataset == b.dataset
        && model_series(a) == model_series(b)
        && a.model == b.model
        && a.ordering == b.ordering
        && a.horizon == b.horizon
        && a.draws == b.draws
        && a.paths_per_draw == b.paths_per_draw
        && a.seed == b.seed
        && a.largest_root == b.largest_root
        && !a.reweight
        && !b.reweight
}

/// Compare two runs (`a` first, `b` second).
pub fn compare(
    a: &Setup,
    run_a: &RunOutcome,
    b: &Setup,
    run_b: &RunOutcome,
) -> Result<Comparison, CompareError> {
    if a.names != b.names {
        return Err(CompareError::OtherSeries {
            first: a.file.name.clone(),
            second: b.file.name.clone(),
            a: a.names.join(", "),
            b: b.names.join(", "),
        });
    }
    if a.file.horizon != b.file.horizon || a.last_period() != b.last_period() {
        return Err(CompareError::OtherPeriods {
            a: a.file.horizon,
            b: b.file.horizon,
        });
    }
    // Both in the first scenario's display units.
    let mut shown_b = b.clone();
    shown_b.display = a.display.clone();
    let b = &shown_b;
    let (pa, pb) = (&run_a.paths, &run_b.paths);
    // The same data, and the same draws and paths kept (fixed coefficients set paths aside
    // one by one: their indices must agree too).
    let set_aside = |r: &RunOutcome| r.paths.failures.iter().map(|f| f.index).collect::<Vec<_>>();
    let paired = same_randomness(&a.file, &b.file)
        && a.columns == b.columns
        && pa.conditional.len() == pb.conditional.len()
        && pa.sources == pb.sources
        && set_aside(run_a) == set_aside(run_b);
    let weights = |r: &RunOutcome, s: &Setup| {
        crate::forecast::path_weights(&r.paths.log_weights, s.file.paths_per_draw)
            .filter(|_| s.file.reweight)
            .map(|(w, _)| w)
    };
    let (wa, wb) = (weights(run_a, a), weights(run_b, b));
    let summarise = |values: &mut Vec<f64>, w: &Option<Vec<f64>>| match w {
        Some(w) => weighted(values, w).1,
        None => quantiles(values),
    };
    let (h, last) = (a.file.horizon, a.last_period());
    let mut rows = Vec::new();
    for i in 0..a.n() {
        for t in 1..=h {
            let values = |s: &Setup, paths: &[Vec<f64>]| -> Vec<f64> {
                paths
                    .iter()
                    .map(|p| display_path_value(s, p, i, t))
                    .collect()
            };
            let (mut va, mut vb) = (values(a, &pa.conditional), values(b, &pb.conditional));
            let difference = paired.then(|| {
                let mut d: Vec<f64> = vb.iter().zip(&va).map(|(x, y)| x - y).collect();
                three(quantiles(&mut d))
            });
            let (qa, qb) = (summarise(&mut va, &wa), summarise(&mut vb, &wb));
            rows.push(DiffRow {
                series: a.names[i].clone(),
                period: last.offset(t as i64).to_string(),
                horizon: t,
                units: a.display[i].label(),
                first: three(qa),
                second: three(qb),
                median_difference: qb[3] - qa[3],
                difference,
            });
        }
    }
    let statistics = if paired {
        // The statistics of second's paths against first's, pair by pair: the "deviation"
        // rows of the summary of (second, first) are exactly those differences.
        statistics(b, &pb.conditional, &pa.conditional, None)
            .into_iter()
            .filter(|s| s.kind == crate::report::summary::StatKind::Deviation)
            .collect()
    } else {
        Vec::new()
    };
    Ok(Comparison {
        first: a.file.name.clone(),
        second: b.file.name.clone(),
        paired,
        conditions: condition_changes(&a.file, &b.file),
        rows,
        statistics,
        stamp: crate::report::Stamp {
            scenario: format!("{} against {}", run_b.stamp.scenario, run_a.stamp.scenario),
            run: format!("{} against {}", run_b.stamp.run, run_a.stamp.run),
        },
    })
}

/// The conditions' changes in a few lines.
pub fn changes_text(c: &Comparison) -> String {
    let mut s = vec![format!(
        "compare    first: {}; second: {}",
        c.first, c.second
    )];
    if c.conditions.is_empty() {
        s.push("conditions the same in both".into());
    }
    for change in &c.conditions {
        s.push(match change {
            Change::Added(t) => format!("  added    {t}"),
            Change::Removed(t) => format!("  removed  {t}"),
            Change::Changed { first, second } => {
                format!("  changed  {first}\n        to {second}")
            }
        });
    }
    s.push(if c.paired {
        "paths      paired (same model, draws and seed): the difference's bands are those of the effect of the conditions".into()
    } else {
        "paths      not paired (the model, draws or seed differ, or draws are reweighted): the difference is of the medians only".into()
    });
    s.join("\n")
}

/// `compare.csv`: `series,period,horizon,units,first_q05,first_q50,first_q95,second_q05,
/// second_q50,second_q95,median_difference,difference_q05,difference_q50,difference_q95`
/// (the last three empty when the paths are not paired).
pub fn write_compare(
    path: &std::path::Path,
    stamp: &crate::report::Stamp,
    c: &Comparison,
) -> Result<(), crate::report::ReportError> {
    crate::report::write_csv(path, stamp, |w| {
        w.write_record([
            "series",
            "period",
            "horizon",
            "units",
            "first_q05",
            "first_q50",
            "first_q95",
            "second_q05",
            "second_q50",
            "second_q95",
            "median_difference",
            "difference_q05",
            "difference_q50",
            "difference_q95",
        ])?;
        for r in &c.rows {
            let mut rec = vec![
                r.series.clone(),
                r.period.clone(),
                r.horizon.to_string(),
                r.units.clone(),
            ];
            rec.extend(r.first.iter().chain(&r.second).map(|v| v.to_string()));
            rec.push(r.median_difference.to_string());
            match r.difference {
                Some(d) => rec.extend(d.iter().map(|v| v.to_string())),
                None => rec.extend(["".to_string(), "".into(), "".into()]),
            }
            w.write_record(&rec)?;
        }
        Ok(())
    })
}
