//! Statements in people's units, as linear rows on model variables (ALGORITHMS §4.2).
//!
//! A statement at horizon `t` about series `x` (model units) is `Σ_k a_k x_{t−lag_k} = rhs`.
//! Terms dated at or before the last observation move to the right-hand side with the
//! observed values. `f` is the number of periods per year.
//!
//! | transform | units | row | right-hand side |
//! | --- | --- | --- | --- |
//! | log100 | level `v` | `x_t` | `100 ln v` |
//! | log100 | pct_change `g` | `x_t − x_{t−1}` | `100 ln(1 + g/100)` |
//! | log100 | annualised `g` | `x_t − x_{t−1}` | `(100/f) ln(1 + g/100)` |
//! | log100 | year_on_year `g` | `x_t − x_{t−f}` | `100 ln(1 + g/100)` |
//! | log100 | average(k) `v` | `(1/k) Σ_{i<k} x_{t−i}` | `100 ln v` (geometric mean) |
//! | as_is | level `v` / difference `d` | `x_t` / `x_t − x_{t−1}` | `v` / `d` |
//! | as_is | pct_change / annualised / year_on_year `g` | `x_t − c·x_{t−j}` | `0`, `c = 1+g/100`, `(1+g/100)^{1/f}`, `1+g/100` |
//! | as_is | average(k) `v` | `(1/k) Σ_{i<k} x_{t−i}` | `v` |
//!
//! All of these are exact: no linearisation. A difference of a log series in its own units
//! (`X_t − X_{t−1}`) is not linear in `x` and is refused.
//!
//! A corridor uses the same row; its bounds map through the same increasing function of the
//! value (ALGORITHMS §4.2). Growth units of an as-is series put the value into the row, so a
//! bound on them is not one linear row and is refused. A lower bound outside the domain
//! (a level ≤ 0 of a log100 series, a fall of 100% or more) bounds nothing and is open.

use super::schema::Units;
use crate::dataset::Transform;

/// Sparse terms `(cell, coefficient)` of a row over future cells.
pub type Terms = Vec<(usize, f64)>;

/// Why a statement cannot become a row.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum UnitsError {
    #[error(
        "{units} is not available for a log100 series (not linear in the model's units); use pct_change"
    )]
    NotLinear { units: String },
    #[error("{what} must be {need}, got {value}")]
    OutOfDomain {
        what: String,
        need: String,
        value: f64,
    },
    #[error("it reaches {periods} periods before the first observation")]
    BeforeSample { periods: usize },
    #[error("average over {0} periods: need at least 1")]
    EmptyAverage(usize),
    #[error(
        "a corridor in {units} on an as-is series is not one linear condition (the value enters the row); use level or difference"
    )]
    NotLinearBound { units: String },
}

/// `(lag, coefficient)` terms and the right-hand side of a statement.
fn statement(
    units: Units,
    transform: Transform,
    value: f64,
    f: usize,
    t: usize,
) -> Result<(Vec<(usize, f64)>, f64), UnitsError> {
    let growth = |g: f64| -> Result<f64, UnitsError> {
        if g > -100.0 {
            Ok(1.0 + g / 100.0)
        } else {
            Err(UnitsError::OutOfDomain {
                what: format!("a {} value", units.label()),
                need: "above −100 (percent)".into(),
                value: g,
            })
        }
    };
    let log = transform == Transform::Log100;
    let positive_level = |v: f64| -> Result<f64, UnitsError> {
        if v > 0.0 {
            Ok(100.0 * v.ln())
        } else {
            Err(UnitsError::OutOfDomain {
                what: "a level of a log100 series".into(),
                need: "positive".into(),
                value: v,
            })
        }
    };
    let fl = f as f64;
    Ok(match (units, log) {
        (Units::Level, true) => (vec![(0, 1.0)], positive_level(value)?),
        (Units::Level, false) => (vec![(0, 1.0)], value),
        (Units::PctChange, true) => (vec![(0, 1.0), (1, -1.0)], 100.0 * growth(value)?.ln()),
        (Units::Annualised, true) => (vec![(0, 1.0), (1, -1.0)], 100.0 / fl * growth(value)?.ln()),
        (Units::YearOnYear, true) => (vec![(0, 1.0), (f, -1.0)], 100.0 * growth(value)?.ln()),
        // Back to horizon 0, the last observation (moved to the right-hand side).
        (Units::Cumulative, true) => (vec![(0, 1.0), (t, -1.0)], 100.0 * growth(value)?.ln()),
        (Units::Cumulative, false) => (vec![(0, 1.0), (t, -growth(value)?)], 0.0),
        (Units::Difference, true) => {
            return Err(UnitsError::NotLinear {
                units: units.label(),
            });
        }
        (Units::PctChange, false) => (vec![(0, 1.0), (1, -growth(value)?)], 0.0),
        (Units::Annualised, false) => (vec![(0, 1.0), (1, -growth(value)?.powf(1.0 / fl))], 0.0),
        (Units::YearOnYear, false) => (vec![(0, 1.0), (f, -growth(value)?)], 0.0),
        (Units::Difference, false) => (vec![(0, 1.0), (1, -1.0)], value),
        (Units::Average(k), _) => {
            if k == 0 {
                return Err(UnitsError::EmptyAverage(k));
            }
            let terms = (0..k).map(|i| (i, 1.0 / k as f64)).collect();
            (terms, if log { positive_level(value)? } else { value })
        }
    })
}

/// The row of a statement on series `series` (of `n`) at horizon `t` (1-based), over
/// stacked future cells `(t−1) n + i`, with history terms moved to the right-hand side.
/// `history` is the series in model units, last entry = last observation.
#[allow(clippy::too_many_arguments)]
pub fn pin_row(
    units: Units,
    transform: Transform,
    value: f64,
    f: usize,
    series: usize,
    n: usize,
    t: usize,
    history: &[f64],
) -> Result<(Vec<(usize, f64)>, f64), UnitsError> {
    if let Units::Average(k) = units
        && k > t + history.len()
    {
        return Err(UnitsError::BeforeSample {
            periods: k - t - history.len(),
        });
    }
    let (terms, mut rhs) = statement(units, transform, value, f, t)?;
    let mut row = Vec::new();
    for (lag, a) in terms {
        let at = t as i64 - lag as i64; // horizon of the term; ≤ 0 is history
        if at >= 1 {
            row.push(((at as usize - 1) * n + series, a));
        } else {
            let back = (-at) as usize; // 0 = last observation
            let Some(&x) = history.len().checked_sub(1 + back).map(|k| &history[k]) else {
                return Err(UnitsError::BeforeSample {
                    periods: back + 1 - history.len(),
                });
            };
            rhs -= a * x;
        }
    }
    Ok((row, rhs))
}

/// The row of a corridor in `units` at horizon `t` and its bounds in row terms (history
/// moved); `lower`/`upper` are ∓∞ when open.
#[allow(clippy::too_many_arguments)]
pub fn corridor_row(
    units: Units,
    transform: Transform,
    (lower, upper): (f64, f64),
    f: usize,
    series: usize,
    n: usize,
    t: usize,
    history: &[f64],
) -> Result<(Terms, f64, f64), UnitsError> {
    let log = transform == Transform::Log100;
    if !log
        && matches!(
            units,
            Units::PctChange | Units::Annualised | Units::YearOnYear | Units::Cumulative
        )
    {
        return Err(UnitsError::NotLinearBound {
            units: units.label(),
        });
    }
    let growth = matches!(
        units,
        Units::PctChange | Units::Annualised | Units::YearOnYear | Units::Cumulative
    );
    // Below the domain, a lower bound says nothing.
    let floor = match (log, growth) {
        (true, true) => Some(-100.0),
        (true, false) => Some(0.0),
        (false, _) => None,
    };
    let lower = match floor {
        Some(fl) if lower <= fl => f64::NEG_INFINITY,
        _ => lower,
    };
    let reference = if log && !growth { 1.0 } else { 0.0 };
    let (terms, _) = pin_row(units, transform, reference, f, series, n, t, history)?;
    let map = |v: f64| -> Result<f64, UnitsError> {
        if v.is_infinite() {
            return Ok(v);
        }
        Ok(pin_row(units, transform, v, f, series, n, t, history)?.1)
    };
    Ok((terms, map(lower)?, map(upper)?))
}

/// The value of a path in `units` at horizon `t`: `x(s)` gives the model-unit value at
/// horizon `s` (history for `s ≤ 0`, `None` before the sample).
pub fn display_value(
    units: Units,
    transform: Transform,
    f: usize,
    t: i64,
    x: &dyn Fn(i64) -> Option<f64>,
) -> Option<f64> {
    let level = |v: f64| transform.inverse(v);
    let log = transform == Transform::Log100;
    let ratio = |lag: i64| -> Option<f64> {
        let (a, b) = (x(t)?, x(t - lag)?);
        Some(if log { ((a - b) / 100.0).exp() } else { a / b })
    };
    Some(match units {
        Units::Level => level(x(t)?),
        Units::PctChange => 100.0 * (ratio(1)? - 1.0),
        Units::Annualised => 100.0 * (ratio(1)?.powi(f as i32) - 1.0),
        Units::YearOnYear => 100.0 * (ratio(f as i64)? - 1.0),
        Units::Cumulative => 100.0 * (ratio(t)? - 1.0),
        Units::Difference => level(x(t)?) - level(x(t - 1)?),
        Units::Average(k) => {
            let k = k.max(1) as i64;
            let mut sum = 0.0;
            for i in 0..k {
                sum += x(t - i)?;
            }
            level(sum / k as f64)
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Round trip: a path that meets the row shows the stated value in the same units.
    #[test]
    fn rows_and_display_agree() {
        let history = [460.0, 461.0, 462.5, 463.0, 464.2]; // 100 ln of levels near 100
        let cases = [
            (Units::Level, Transform::Log100, 103.0),
            (Units::PctChange, Transform::Log100, 0.7),
            (Units::Annualised, Transform::Log100, 2.5),
            (Units::YearOnYear, Transform::Log100, -3.0),
            (Units::Average(4), Transform::Log100, 102.0),
            (Units::Cumulative, Transform::Log100, -5.0),
            (Units::Level, Transform::AsIs, 4.5),
            (Units::Difference, Transform::AsIs, -0.25),
            (Units::PctChange, Transform::AsIs, 1.5),
            (Units::Annualised, Transform::AsIs, 6.0),
            (Units::YearOnYear, Transform::AsIs, 12.0),
            (Units::Average(3), Transform::AsIs, 464.0),
            (Units::Cumulative, Transform::AsIs, 2.0),
        ];
        let h = 3;
        for (units, transform, value) in cases {
            let (row, rhs) = pin_row(units, transform, value, 4, 0, 1, h, &history).unwrap();
            // A path with every cell free except the last: solve the row for cell h.
            let mut path = [465.0, 466.0, 0.0];
            let last = h - 1; // one series: cell = horizon − 1
            let a_last = row.iter().find(|(c, _)| *c == last).unwrap().1;
            let rest: f64 = row
                .iter()
                .filter(|(c, _)| *c != last)
                .map(|(c, a)| a * path[*c])
                .sum();
            path[last] = (rhs - rest) / a_last;
            let x = |s: i64| -> Option<f64> {
                if s >= 1 {
                    path.get(s as usize - 1).copied()
                } else {
                    history
                        .len()
                        .checked_sub(1 + (-s) as usize)
                        .map(|k| history[k])
                }
            };
            let shown = display_value(units, transform, 4, h as i64, &x).unwrap();
            assert!(
                (shown - value).abs() < 1e-10 * (1.0 + value.abs()),
                "{units:?} {transform:?}: stated {value}, shown {shown}"
            );
        }
    }

    #[test]
    fn refuses_what_is_not_linear_or_out_of_domain() {
        let h = [1.0, 2.0];
        assert!(matches!(
            pin_row(Units::Difference, Transform::Log100, 1.0, 4, 0, 1, 1, &h),
            Err(UnitsError::NotLinear { .. })
        ));
        assert!(matches!(
            pin_row(Units::Level, Transform::Log100, 0.0, 4, 0, 1, 1, &h),
            Err(UnitsError::OutOfDomain { .. })
        ));
        assert!(matches!(
            pin_row(Units::YearOnYear, Transform::Log100, -100.0, 4, 0, 1, 1, &h),
            Err(UnitsError::OutOfDomain { .. })
        ));
        assert!(matches!(
            pin_row(Units::YearOnYear, Transform::Log100, 1.0, 4, 0, 1, 1, &h),
            Err(UnitsError::BeforeSample { periods: 2 })
        ));
    }
}
