//! Fans: per series and period, the mean and central quantiles of the pooled paths, in the
//! series' display units (each path is turned into display units first, then summarised,
//! so non-linear units such as year-on-year growth are exact).

use rayon::prelude::*;

use crate::dataset::Period;
use crate::scenario::{Setup, Units, units::display_value};

/// Probabilities of the fan quantiles: 90%, 68% and 50% central bands and the median.
pub const QUANTILES: [f64; 7] = [0.05, 0.16, 0.25, 0.5, 0.75, 0.84, 0.95];

/// Pieces of work the series are shared among (each path is read once per piece): enough
/// for the cores, few enough that each piece reads its paths for several series.
const PIECES: usize = 8;

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
    let x = model_value(setup, path, i);
    display_value(
        setup.display[i],
        setup.transforms[i],
        setup.periods_per_year(),
        t as i64,
        &x,
    )
    .unwrap_or(f64::NAN)
}

/// Series `i` in model units at horizon `t`: from `path` for `t ≥ 1` (none when the path is
/// empty or ends before), from the history for `t ≤ 0` (0 is the last observation).
pub fn model_value<'a>(
    setup: &'a Setup,
    path: &'a [f64],
    i: usize,
) -> impl Fn(i64) -> Option<f64> + 'a {
    let (n, col) = (setup.n(), &setup.columns[i]);
    move |t: i64| {
        if t >= 1 {
            path.get((t as usize - 1) * n + i).copied()
        } else {
            col.len().checked_sub(1 + (-t) as usize).map(|k| col[k])
        }
    }
}

/// True when every value of `path` is finite in every series' display units (growth of
/// explosive paths in `100·ln` units can overflow there although the path itself is finite).
pub fn displayable(setup: &Setup, path: &[f64]) -> bool {
    let h = setup.file.horizon;
    (0..setup.n()).all(|i| (1..=h).all(|t| display_path_value(setup, path, i, t).is_finite()))
}

/// Fans of `paths` (each a stacked future path in model units), optionally with a weight per
/// path (normalised to sum to one).
pub fn fans(setup: &Setup, paths: &[Vec<f64>], weights: Option<&[f64]>, kind: Kind) -> Vec<FanRow> {
    let h = setup.file.horizon;
    let last = setup.last_period();
    // A few series per piece of work, gathered in series order: each path is read once per
    // piece, in order, into one row of values per series and period.
    let n = setup.n();
    let per = n.div_ceil(PIECES).max(1);
    (0..n)
        .step_by(per)
        .collect::<Vec<_>>()
        .into_par_iter()
        .flat_map_iter(|first| {
            let series = first..(first + per).min(n);
            let count = paths.len();
            let mut by_row = vec![0.0; series.len() * h * count];
            for (j, p) in paths.iter().enumerate() {
                for i in series.clone() {
                    for t in 1..=h {
                        by_row[((i - first) * h + t - 1) * count + j] =
                            display_path_value(setup, p, i, t);
                    }
                }
            }
            let mut rows = Vec::with_capacity(series.len() * h);
            for i in series.clone() {
                for t in 1..=h {
                    let at = ((i - first) * h + t - 1) * count;
                    let values = &mut by_row[at..at + count];
                    let (mean, quantiles) = match weights {
                        None => {
                            // Divide first: the sum of large finite values must not overflow.
                            let share = count.max(1) as f64;
                            (values.iter().map(|v| v / share).sum(), quantiles(values))
                        }
                        Some(w) => weighted(values, w),
                    };
                    rows.push(FanRow {
                        series: setup.names[i].clone(),
                        period: last.offset(t as i64),
                        horizon: t,
                        kind,
                        units: setup.display[i],
                        mean,
                        quantiles,
                    });
                }
            }
            rows
        })
        .collect()
}

/// Sample quantiles by the midpoint rule (Hyndman and Fan 1996 type 5; numpy's
/// `method="hazen"`): the k-th smallest of P values sits at probability `(k − ½)/P`, and
/// quantiles interpolate between these positions, clamped at the ends. The same rule as
/// [`weighted`] with equal weights, so that reweighting with equal weights moves no band.
pub fn quantiles(values: &mut [f64]) -> [f64; 7] {
    let mut out = [f64::NAN; 7];
    if values.is_empty() {
        return out;
    }
    let count = values.len();
    let places = QUANTILES.map(|q| (q * count as f64 - 0.5).clamp(0.0, (count - 1) as f64));
    // The order statistics at the ranks next to each place, selected in increasing order of
    // rank, each from the values above the last one (selection, not a full sort).
    let mut ranks: Vec<usize> = places
        .iter()
        .flat_map(|p| {
            let lo = p.floor() as usize;
            [lo, (lo + 1).min(count - 1)]
        })
        .collect();
    ranks.sort_unstable();
    ranks.dedup();
    let mut at = Vec::with_capacity(ranks.len());
    let mut from = 0;
    for &r in &ranks {
        let (_, v, _) = values[from..].select_nth_unstable_by(r - from, f64::total_cmp);
        at.push((r, *v));
        from = r + 1;
    }
    let value = |r: usize| {
        at.iter()
            .find(|&&(k, _)| k == r)
            .map_or(f64::NAN, |&(_, v)| v)
    };
    for (o, pos) in out.iter_mut().zip(places) {
        let lo = pos.floor() as usize;
        let (a, b) = (value(lo), value((lo + 1).min(count - 1)));
        // Equal neighbours (infinite ones included) need no interpolation: ∞ − ∞ is NaN.
        *o = if a == b {
            a
        } else {
            a + (pos - lo as f64) * (b - a)
        };
    }
    out
}

/// Weighted mean and quantiles (weights summing to one). A value with weight `w_k` sits at
/// the middle of its probability block, `c_k = Σ_{j<k} w_j + w_k/2` after sorting, and
/// quantiles interpolate linearly between these positions (clamped at the ends); with equal
/// weights this is the "midpoint" rule, Hyndman and Fan (1996) type 5.
pub fn weighted(values: &[f64], weights: &[f64]) -> (f64, [f64; 7]) {
    let mut pairs: Vec<(f64, f64)> = values
        .iter()
        .copied()
        .zip(weights.iter().copied())
        .collect();
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let total: f64 = pairs.iter().map(|p| p.1).sum();
    let mean = pairs.iter().map(|(v, w)| v * w).sum::<f64>() / total;
    let mut out = [f64::NAN; 7];
    if pairs.is_empty() || total <= 0.0 {
        return (f64::NAN, out);
    }
    let mut positions = Vec::with_capacity(pairs.len());
    let mut acc = 0.0;
    for (_, w) in &pairs {
        positions.push((acc + 0.5 * w) / total);
        acc += w;
    }
    for (o, q) in out.iter_mut().zip(QUANTILES) {
        let k = positions.partition_point(|&c| c < q);
        *o = if k == 0 {
            pairs[0].0
        } else if k == pairs.len() {
            pairs[k - 1].0
        } else {
            let (c0, c1) = (positions[k - 1], positions[k]);
            let f = if c1 > c0 { (q - c0) / (c1 - c0) } else { 0.0 };
            if pairs[k].0 == pairs[k - 1].0 {
                pairs[k].0
            } else {
                pairs[k - 1].0 + f * (pairs[k].0 - pairs[k - 1].0)
            }
        };
    }
    (mean, out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Reference: numpy.quantile(np.arange(10.0), [.05, .16, .25, .5, .75, .84, .95],
    /// method="hazen") = [0, 1.1, 2, 4.5, 7, 7.9, 9] (numpy 2.4.6); and both rules give the
    /// same numbers on the same values with equal weights, to rounding (the weighted rule
    /// accumulates the weights: a few units in the last place).
    #[test]
    fn quantiles_follow_the_midpoint_rule_like_weighted_ones() {
        let mut v: Vec<f64> = (0..10).rev().map(f64::from).collect();
        let q = quantiles(&mut v);
        let expect = [0.0, 1.1, 2.0, 4.5, 7.0, 7.9, 9.0];
        for (a, b) in q.iter().zip(expect) {
            assert!((a - b).abs() < 1e-12, "{q:?}");
        }
        let mut odd: Vec<f64> = (0..37).map(|i| (f64::from(i) * 0.7).sin()).collect();
        let (_, w) = weighted(&odd, &vec![1.0 / 37.0; 37]);
        for (a, b) in quantiles(&mut odd).iter().zip(w) {
            assert!((a - b).abs() < 1e-14, "{a} against {b}");
        }
    }

    /// Selection gives the order statistics a full sort gives: every size from 1 to 60, with
    /// ties and infinite values, against the rule applied to the sorted values.
    #[test]
    fn selected_quantiles_match_the_sorted_rule() {
        for count in 1..=60usize {
            let values: Vec<f64> = (0..count)
                .map(|k| match k % 11 {
                    3 => 2.0,
                    7 => f64::INFINITY,
                    9 => f64::NEG_INFINITY,
                    _ => ((k * 37 % 17) as f64 * 0.91).sin(),
                })
                .collect();
            let mut sorted = values.clone();
            sorted.sort_by(f64::total_cmp);
            let got = quantiles(&mut values.clone());
            for (o, q) in got.iter().zip(QUANTILES) {
                let pos = (q * count as f64 - 0.5).clamp(0.0, (count - 1) as f64);
                let lo = pos.floor() as usize;
                let (a, b) = (sorted[lo], sorted[(lo + 1).min(count - 1)]);
                let want = if a == b {
                    a
                } else {
                    a + (pos - lo as f64) * (b - a)
                };
                assert!(
                    o.total_cmp(&want).is_eq(),
                    "{count} values, quantile {q}: {o} against {want}"
                );
            }
        }
    }

    /// Equal weights: numpy.quantile(np.arange(10.0), [.05, .16, .25, .5, .75, .84, .95],
    /// method="hazen") = [0, 1.1, 2, 4.5, 7, 7.9, 9] (position n·q − ½, clamped; by hand from
    /// the definition). A value with twice the weight counts as two copies for the mean.
    #[test]
    fn weighted_quantiles_reduce_to_the_midpoint_rule() {
        let v: Vec<f64> = (0..10).rev().map(f64::from).collect();
        let (mean, q) = weighted(&v, &[0.1; 10]);
        let expect = [0.0, 1.1, 2.0, 4.5, 7.0, 7.9, 9.0];
        for (a, b) in q.iter().zip(expect) {
            assert!((a - b).abs() < 1e-12, "{q:?}");
        }
        assert!((mean - 4.5).abs() < 1e-12);
        let (mean, _) = weighted(&[1.0, 4.0], &[2.0 / 3.0, 1.0 / 3.0]);
        assert!((mean - 2.0).abs() < 1e-12);
    }
}
