//! The numbers people quote about a scenario, per series, each with posterior bands computed
//! from the paths themselves (a statistic per path, then its quantiles; never quantiles of
//! quantiles):
//!
//! - `peak`, `trough`: the highest and lowest value over the horizon in display units, and
//!   `peak_period`, `trough_period`: when (as horizons; the label is the median's period);
//! - `peak_to_trough`: the largest fall of the level from a peak to a later trough, from the
//!   last observation on (a `100·ln` series: in % of the peak; an as-is series: in its units);
//! - `cumulative_change`: the level at the end of the horizon against the last observation
//!   (% for a `100·ln` series, a difference otherwise);
//! - `year_average`: each calendar year the forecast reaches in full (history filling its first
//!   periods): the average of the display values, or, for growth units, the growth of the
//!   year's average level on the year before's (history where needed).
//!
//! Each comes three ways: `conditional`, `unconditional`, and `deviation` — the statistic of
//! a conditional path minus that of the unconditional path it was made from, so the bands are
//! those of the difference itself.

use std::path::Path;

use rayon::prelude::*;

use super::fans::{QUANTILES, display_path_value, model_value, quantiles, weighted};
use super::{ReportError, Stamp, write_csv};
use crate::dataset::Transform;
use crate::scenario::{Setup, Units};

/// The statistics tables and pages show (every one is in `summary.csv`).
pub const HEADLINE: [&str; 4] = ["peak", "trough", "peak_to_trough", "cumulative_change"];

/// A median with its 90% band, as tables show it: "5.30 (2.67 … 9.35)".
pub fn band(q: &[f64; 7]) -> String {
    format!("{:.2} ({:.2} … {:.2})", q[3], q[0], q[6])
}

/// Two decimals, never "-0.00" (with a sign when `signed`).
pub fn two_decimals(v: f64, signed: bool) -> String {
    let v = if v.abs() < 0.005 { 0.0 } else { v };
    if signed {
        format!("{v:+.2}")
    } else {
        format!("{v:.2}")
    }
}

/// Which paths a statistic summarises.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StatKind {
    Conditional,
    Unconditional,
    /// Conditional minus unconditional, path by path.
    Deviation,
}

impl StatKind {
    pub fn label(self) -> &'static str {
        match self {
            StatKind::Conditional => "conditional",
            StatKind::Unconditional => "unconditional",
            StatKind::Deviation => "deviation",
        }
    }
}

/// One statistic of one series: its mean and quantiles ([`QUANTILES`]) over the paths.
#[derive(Debug, Clone, PartialEq)]
pub struct Stat {
    pub series: String,
    pub statistic: String,
    /// The period of the median for `*_period`, the year for `year_average`, else empty.
    pub label: String,
    pub kind: StatKind,
    pub units: String,
    pub mean: f64,
    pub quantiles: [f64; 7],
}

/// The statistics of one path of series `i`, in a fixed order ([`names`]).
fn of_path(setup: &Setup, path: &[f64], i: usize, years: &[(i32, Vec<i64>)]) -> Vec<f64> {
    let h = setup.file.horizon;
    let transform = setup.transforms[i];
    let x = model_value(setup, path, i);
    // Levels in people's units from the last observation on, each computed once.
    let levels: Vec<f64> = (0..=h as i64)
        .map(|t| x(t).map_or(f64::NAN, |v| transform.inverse(v)))
        .collect();
    let level = |t: i64| match usize::try_from(t) {
        Ok(k) => levels[k],
        Err(_) => x(t).map_or(f64::NAN, |v| transform.inverse(v)),
    };
    let shown: Vec<f64> = (1..=h)
        .map(|t| display_path_value(setup, path, i, t))
        .collect();
    let (mut peak, mut trough) = (0, 0);
    for (k, v) in shown.iter().enumerate() {
        if *v > shown[peak] {
            peak = k;
        }
        if *v < shown[trough] {
            trough = k;
        }
    }
    let change = |from: f64, to: f64| match transform {
        Transform::Log100 => 100.0 * (to / from - 1.0),
        Transform::AsIs => to - from,
    };
    // Largest fall from a running peak (the last observation included) to a later value.
    let mut high = level(0);
    let mut fall = 0.0f64;
    for t in 1..=h as i64 {
        let v = level(t);
        fall = fall.min(change(high, v));
        high = high.max(v);
    }
    let mut out = vec![
        shown[peak],
        (peak + 1) as f64,
        shown[trough],
        (trough + 1) as f64,
        fall,
        change(level(0), level(h as i64)),
    ];
    let growth = matches!(
        setup.display[i],
        Units::PctChange | Units::Annualised | Units::YearOnYear
    );
    let f = setup.periods_per_year() as i64;
    let shown_at = |t: i64| -> f64 {
        if t >= 1 {
            shown[t as usize - 1]
        } else {
            crate::scenario::units::display_value(
                setup.display[i],
                transform,
                setup.periods_per_year(),
                t,
                &x,
            )
            .unwrap_or(f64::NAN)
        }
    };
    for (_, ts) in years {
        let mean = |v: &dyn Fn(i64) -> f64, shift: i64| {
            ts.iter().map(|&t| v(t - shift)).sum::<f64>() / ts.len() as f64
        };
        out.push(if growth {
            100.0 * (mean(&level, 0) / mean(&level, f) - 1.0)
        } else {
            mean(&shown_at, 0)
        });
    }
    out
}

/// Calendar years the forecast reaches in full, each with its periods as horizons (history
/// filling the first ones, which must be in the data, as must the year before's for growth).
fn years(setup: &Setup) -> Vec<(i32, Vec<i64>)> {
    let (last, h) = (setup.last_period(), setup.file.horizon as i64);
    let f = setup.periods_per_year() as i64;
    let history = setup.dataset.len() as i64;
    let mut out = Vec::new();
    let first = last.offset(1).year();
    let end = last.offset(h).year();
    for year in first..=end {
        let ts: Vec<i64> = (1 - history..=h)
            .filter(|&t| last.offset(t).year() == year)
            .collect();
        let whole = ts.len() as i64 == f && ts.iter().all(|&t| t - f > -history);
        if whole {
            out.push((year, ts));
        }
    }
    out
}

/// The statistics' names, in the order of [`of_path`] (years last).
fn names(years: &[(i32, Vec<i64>)]) -> Vec<(String, String)> {
    let mut v: Vec<(String, String)> = [
        "peak",
        "peak_period",
        "trough",
        "trough_period",
        "peak_to_trough",
        "cumulative_change",
    ]
    .iter()
    .map(|s| (s.to_string(), String::new()))
    .collect();
    v.extend(
        years
            .iter()
            .map(|(y, _)| ("year_average".to_string(), y.to_string())),
    );
    v
}

/// The units a statistic is in, for series `i`.
fn units_of(setup: &Setup, i: usize, statistic: &str) -> String {
    let display = setup.display[i].label();
    let level_change = match setup.transforms[i] {
        Transform::Log100 => "% of the level".to_string(),
        Transform::AsIs => "level".to_string(),
    };
    match statistic {
        "peak_period" | "trough_period" => "horizon".into(),
        "peak_to_trough" | "cumulative_change" => level_change,
        "year_average"
            if matches!(
                setup.display[i],
                Units::PctChange | Units::Annualised | Units::YearOnYear
            ) =>
        {
            "% growth of the annual average level".into()
        }
        _ => display,
    }
}

/// Every statistic of every series: conditional (weighted when `weights` are given),
/// unconditional, and their path-by-path deviation.
pub fn statistics(
    setup: &Setup,
    conditional: &[Vec<f64>],
    unconditional: &[Vec<f64>],
    weights: Option<&[f64]>,
) -> Vec<Stat> {
    let years = years(setup);
    let names = names(&years);
    let last = setup.last_period();
    // One series per piece of work, gathered in series order.
    (0..setup.n())
        .into_par_iter()
        .flat_map_iter(|i| {
            let mut out = Vec::new();
            let per_path = |paths: &[Vec<f64>]| -> Vec<Vec<f64>> {
                paths.iter().map(|p| of_path(setup, p, i, &years)).collect()
            };
            let cond = per_path(conditional);
            let uncond = per_path(unconditional);
            let dev: Vec<Vec<f64>> = cond
                .iter()
                .zip(&uncond)
                .map(|(c, u)| c.iter().zip(u).map(|(a, b)| a - b).collect())
                .collect();
            for (kind, rows, w) in [
                (StatKind::Conditional, &cond, weights),
                (StatKind::Unconditional, &uncond, None),
                (StatKind::Deviation, &dev, weights),
            ] {
                for (k, (statistic, year)) in names.iter().enumerate() {
                    let mut values: Vec<f64> = rows.iter().map(|r| r[k]).collect();
                    let (mean, q) = match w {
                        Some(w) => weighted(&values, w),
                        None => {
                            let count = values.len().max(1) as f64;
                            let mean = values.iter().map(|v| v / count).sum();
                            (mean, quantiles(&mut values))
                        }
                    };
                    let label = if statistic.ends_with("_period") && kind != StatKind::Deviation {
                        last.offset(q[3].round() as i64).to_string()
                    } else {
                        year.clone()
                    };
                    out.push(Stat {
                        series: setup.names[i].clone(),
                        statistic: statistic.clone(),
                        label,
                        kind,
                        units: if kind == StatKind::Deviation && statistic.ends_with("_period") {
                            "periods".into()
                        } else {
                            units_of(setup, i, statistic)
                        },
                        mean,
                        quantiles: q,
                    });
                }
            }
            out
        })
        .collect()
}

/// `summary.csv`: `series,statistic,label,kind,units,mean,q05,q16,q25,q50,q75,q84,q95`.
pub fn write_summary(path: &Path, stamp: &Stamp, stats: &[Stat]) -> Result<(), ReportError> {
    write_csv(path, stamp, |w| {
        let mut head = vec![
            "series".to_string(),
            "statistic".into(),
            "label".into(),
            "kind".into(),
            "units".into(),
            "mean".into(),
        ];
        head.extend(QUANTILES.iter().map(|q| format!("q{:02.0}", 100.0 * q)));
        w.write_record(&head)?;
        for s in stats {
            let mut rec = vec![
                s.series.clone(),
                s.statistic.clone(),
                s.label.clone(),
                s.kind.label().to_string(),
                s.units.clone(),
                s.mean.to_string(),
            ];
            rec.extend(s.quantiles.iter().map(|q| q.to_string()));
            w.write_record(&rec)?;
        }
        Ok(())
    })
}
