//! The attribution in people's units, and `attribution.csv`.
//!
//! The split is exact in model units ([`crate::attribution`]). A series' display units are
//! used where they are linear in model units, so the parts still add up: levels, changes and
//! averages of an as-is series; for a `100·ln` series its log level (≈ % difference from the
//! unconditional forecast) and growth in log points (≈ % growth). Growth of an as-is series
//! is a ratio, not additive: those series are split in levels. History is the same under
//! both forecasts, so it carries no part.

use std::path::Path;

use super::{ReportError, Stamp, write_csv};
use crate::attribution::Attribution;
use crate::dataset::Transform;
use crate::scenario::{Setup, Units};

/// How series `i`'s parts are shown: `(lag, coefficient)` terms over its model-unit parts,
/// and the units' name.
pub fn linear_units(setup: &Setup, i: usize) -> (Vec<(usize, f64)>, String) {
    let f = setup.periods_per_year();
    let average = |k: usize| (0..k).map(|l| (l, 1.0 / k as f64)).collect::<Vec<_>>();
    match (setup.transforms[i], setup.display[i]) {
        (Transform::AsIs, Units::Difference) => (vec![(0, 1.0), (1, -1.0)], "change".into()),
        (Transform::AsIs, Units::Average(k)) => (average(k), format!("average of {k} periods")),
        (Transform::AsIs, _) => (vec![(0, 1.0)], "level".into()),
        (Transform::Log100, Units::PctChange) => (
            vec![(0, 1.0), (1, -1.0)],
            "log points of % change on the period before".into(),
        ),
        (Transform::Log100, Units::Annualised) => (
            vec![(0, f as f64), (1, -(f as f64))],
            "log points of annualised % change".into(),
        ),
        (Transform::Log100, Units::YearOnYear) => (
            vec![(0, 1.0), (f, -1.0)],
            "log points of % change on a year earlier".into(),
        ),
        (Transform::Log100, Units::Average(k)) => (
            average(k),
            format!("log points of the {k}-period average level"),
        ),
        (Transform::Log100, _) => (vec![(0, 1.0)], "log points of the level (≈ %)".into()),
    }
}

/// Series `i` of a stacked model-unit part (`n` series) at horizons 1…h, in its
/// [`linear_units`] (`terms`).
pub fn series_part(n: usize, terms: &[(usize, f64)], part: &[f64], i: usize) -> Vec<f64> {
    let h = part.len() / n.max(1);
    (1..=h)
        .map(|t| {
            terms
                .iter()
                .filter(|&&(lag, _)| lag < t)
                .map(|&(lag, c)| c * part[(t - lag - 1) * n + i])
                .sum()
        })
        .collect()
}

/// `attribution.csv`: `series,period,horizon,units,kind,part,value`, where `kind` is `total`
/// (conditional minus unconditional mean), `shock` (a structural shock, named after the
/// series it is ordered with), `shock_date` (with timed drivers: every shock hitting at the
/// period named, together), `condition` (a pin or corridor, by its label), `targets` (with
/// targets on the distribution: what the tilt adds beyond the conditions; the shocks' parts
/// include it) or `parameters` (the weights on the posterior draws).
pub fn write_attribution(
    path: &Path,
    stamp: &Stamp,
    setup: &Setup,
    a: &Attribution,
) -> Result<(), ReportError> {
    write_csv(path, stamp, |w| {
        w.write_record([
            "series", "period", "horizon", "units", "kind", "part", "value",
        ])?;
        let (last, n) = (setup.last_period(), setup.n());
        let dates: Vec<String> = (1..=a.h)
            .map(|t| last.offset(t as i64).to_string())
            .collect();
        for i in 0..n {
            let (terms, units) = linear_units(setup, i);
            let mut parts: Vec<(&str, &str, Vec<f64>)> =
                vec![("total", "", series_part(n, &terms, &a.total, i))];
            for (j, shock) in a.by_shock.iter().enumerate() {
                parts.push(("shock", &setup.names[j], series_part(n, &terms, shock, i)));
            }
            for (part, date) in a.by_date.iter().flatten().zip(&dates) {
                parts.push(("shock_date", date, series_part(n, &terms, part, i)));
            }
            for ((label, _), part) in a.conditions.iter().zip(&a.by_condition) {
                parts.push(("condition", label, series_part(n, &terms, part, i)));
            }
            if let Some(p) = &a.targets {
                parts.push(("targets", "", series_part(n, &terms, p, i)));
            }
            if let Some(p) = &a.parameters {
                parts.push(("parameters", "", series_part(n, &terms, p, i)));
            }
            for t in 1..=setup.file.horizon {
                for (kind, name, values) in &parts {
                    w.write_record([
                        setup.names[i].as_str(),
                        &last.offset(t as i64).to_string(),
                        &t.to_string(),
                        &units,
                        kind,
                        name,
                        &values[t - 1].to_string(),
                    ])?;
                }
            }
        }
        Ok(())
    })
}

/// Parts drawn one by one in a chart of the split by shock; the rest are summed into one.
pub const SHOWN_PARTS: usize = 8;

/// Colours of the parts, in order (RGB): the project's own qualitative set, readable on light
/// and dark backgrounds; the window and the pack's charts both use it.
pub const PART_COLOURS: [(u8, u8, u8); 9] = [
    (46, 134, 171),
    (222, 143, 5),
    (2, 158, 115),
    (213, 94, 0),
    (204, 120, 188),
    (118, 104, 188),
    (160, 160, 60),
    (86, 180, 233),
    (140, 86, 75),
];

/// One part of a series' split as charts show it.
#[derive(Debug, Clone, PartialEq)]
pub struct ShownPart {
    pub name: String,
    pub values: Vec<f64>,
    /// The sum of the smaller shocks, or the parameters' part (drawn muted).
    pub rest: bool,
}

/// Series `i`'s split by shock for a chart, in its linear units (`terms`): the shocks that
/// move it, largest first (by their sum of absolute parts); beyond [`SHOWN_PARTS`] the smallest
/// summed into one part; then, with reweighting, the parameters' part. The parts add up to
/// the total.
pub fn shock_parts(
    a: &Attribution,
    names: &[String],
    terms: &[(usize, f64)],
    i: usize,
) -> Vec<ShownPart> {
    let size = |v: &[f64]| v.iter().map(|x| x.abs()).sum::<f64>();
    let mut parts: Vec<ShownPart> = a
        .by_shock
        .iter()
        .enumerate()
        .map(|(j, p)| ShownPart {
            name: format!("{} shock", names[j]),
            values: series_part(a.n, terms, p, i),
            rest: false,
        })
        .filter(|p| size(&p.values) > 0.0)
        .collect();
    parts.sort_by(|x, y| size(&y.values).total_cmp(&size(&x.values)));
    finish(parts, a, terms, i, |k| format!("{k} other shocks"))
}

/// Series `i`'s split by the date the shocks hit (timed drivers; `None` without), in date
/// order (`labels`: the future periods): the dates whose shocks move it; beyond
/// [`SHOWN_PARTS`] the later ones summed into one part; then the parameters' part.
pub fn date_parts(
    a: &Attribution,
    labels: &[String],
    terms: &[(usize, f64)],
    i: usize,
) -> Option<Vec<ShownPart>> {
    let parts = a
        .by_date
        .as_ref()?
        .iter()
        .enumerate()
        .map(|(s, p)| ShownPart {
            name: format!("shocks in {}", labels.get(s).map_or("", String::as_str)),
            values: series_part(a.n, terms, p, i),
            rest: false,
        })
        .filter(|p| p.values.iter().any(|x| *x != 0.0))
        .collect();
    Some(finish(parts, a, terms, i, |k| {
        format!("shocks in the {k} later periods")
    }))
}

/// Beyond [`SHOWN_PARTS`], the parts from the last shown on summed into one (named by
/// `rest` from their count); then, with weights on the draws, the parameters' part.
fn finish(
    mut parts: Vec<ShownPart>,
    a: &Attribution,
    terms: &[(usize, f64)],
    i: usize,
    rest: impl Fn(usize) -> String,
) -> Vec<ShownPart> {
    if parts.len() > SHOWN_PARTS {
        let later = parts.split_off(SHOWN_PARTS - 1);
        let mut sum = vec![0.0; later[0].values.len()];
        for p in &later {
            sum.iter_mut().zip(&p.values).for_each(|(s, x)| *s += x);
        }
        parts.push(ShownPart {
            name: rest(later.len()),
            values: sum,
            rest: true,
        });
    }
    if let Some(p) = &a.parameters {
        parts.push(ShownPart {
            name: "weighting of the parameters".into(),
            values: series_part(a.n, terms, p, i),
            rest: true,
        });
    }
    parts
}
