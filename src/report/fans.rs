//! Fans: per series and period, the mean and central quantiles of the pooled paths, in the
//! series' display units (each path is turned into display units first, then summarised,
//! so non-linear units such as year-on-year growth are exact).

use crate::dataset::Period;
use crate::scenario::{Setup, Units, units::display_value};

/// Probabilities of the fan quantiles: 90%, 68% and 50% central bands and the median.
pub const QUANTILES: [f64; 7] = [0.05, 0.16, 0.25, 0.5, 0.75, 0.84, 0.95];

/// Which distribution a fan summarises.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    Conditional,
    Unconditional,
}

impl Kind {
    pub fn label(self) -> &'static str {
        match self {
            Kind::Conditional => "conditional",
            Kind::Unconditional => "unconditional",
        }
    }
}

/// One row of `fans.csv`.
#[derive(Debug, Clone, PartialEq)]
pub struct FanRow {
    pub series: String,
    pub period: Period,
    pub horizon: usize,
    pub kind: Kind,
    pub units: Units,
    pub mean: f64,
    pub quantiles: [f64; 7],
}

/// Value of path `path` for series `i` at horizon `t` in the series' display units.
pub fn display_path_value(setup: &Setup, path: &[f64], i: usize, t: usize) -> f64 {
    let n = setup.n();
    let col = &setup.columns[i];
    let x = |s: i64| -> Option<f64> {
        if s >= 1 {
            path.get((s as usize - 1) * n + i).copied()
        } else {
            col.len().checked_sub(1 + (-s) as usize).map(|k| col[k])
        }
    };
    display_value(
        setup.display[i],
        setup.transforms[i],
        setup.periods_per_year(),
        t as i64,
        &x,
    )
    .unwrap_or(f64::NAN)
}

/// Fans of `paths` (each a stacked future path in model units).
pub fn fans(setup: &Setup, paths: &[Vec<f64>], kind: Kind) -> Vec<FanRow> {
    let h = setup.file.horizon;
    let last = setup.last_period();
    let mut rows = Vec::with_capacity(setup.n() * h);
    let mut values = Vec::with_capacity(paths.len());
    for i in 0..setup.n() {
        for t in 1..=h {
            values.clear();
            values.extend(paths.iter().map(|p| display_path_value(setup, p, i, t)));
            rows.push(FanRow {
                series: setup.names[i].clone(),
                period: last.offset(t as i64),
                horizon: t,
                kind,
                units: setup.display[i],
                mean: values.iter().sum::<f64>() / values.len().max(1) as f64,
                quantiles: quantiles(&mut values),
            });
        }
    }
    rows
}

/// Sample quantiles with linear interpolation between order statistics (position
/// `q (P − 1)`; the default of numpy's `quantile`, Hyndman and Fan 1996 type 7).
pub fn quantiles(values: &mut [f64]) -> [f64; 7] {
    values.sort_by(f64::total_cmp);
    let mut out = [f64::NAN; 7];
    if values.is_empty() {
        return out;
    }
    let last = (values.len() - 1) as f64;
    for (o, q) in out.iter_mut().zip(QUANTILES) {
        let pos = q * last;
        let lo = pos.floor() as usize;
        let hi = (lo + 1).min(values.len() - 1);
        *o = values[lo] + (pos - lo as f64) * (values[hi] - values[lo]);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Reference: numpy.quantile(np.arange(11.0), [.05, .16, .25, .5, .75, .84, .95]) =
    /// [0.5, 1.6, 2.5, 5, 7.5, 8.4, 9.5] (linear method; computed by hand from the definition).
    #[test]
    fn quantiles_match_linear_interpolation() {
        let mut v: Vec<f64> = (0..11).rev().map(f64::from).collect();
        let q = quantiles(&mut v);
        let expect = [0.5, 1.6, 2.5, 5.0, 7.5, 8.4, 9.5];
        for (a, b) in q.iter().zip(expect) {
            assert!((a - b).abs() < 1e-12, "{q:?}");
        }
    }
}
