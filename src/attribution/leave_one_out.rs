//! Leave one out: how each series' median moves when one condition is switched off, the
//! others kept.
//!
//! On the first posterior draws of the run, the paths are drawn once with every condition and
//! once without each condition in turn, from the same posterior draws and the same standard
//! normal shocks (every path's shocks come first from its own random stream), so the
//! difference of the medians is the condition's effect and little Monte Carlo noise. Unlike
//! the additive split by condition, the effects need not add up: conditions interact (a
//! corridor may hold only because of a pin).

use std::sync::atomic::AtomicBool;

use crate::forecast::{Conditions, ForecastError, PathSet, Sampling, ThetaSet, sample_paths};
use crate::report::{Kind, displayable, fans};
use crate::scenario::Setup;

/// Posterior draws behind the comparison (all of them when there are fewer).
pub const DRAWS: usize = 200;

/// One condition's effect: the median without it minus the median with every condition, by
/// series and horizon (`shift[i][t − 1]`), in display units; or why it could not be measured.
#[derive(Debug, Clone, PartialEq)]
pub struct Effect {
    pub label: String,
    /// Its field in the scenario (`pins[0]`).
    pub field: String,
    pub shift: Result<Vec<Vec<f64>>, String>,
}

/// The effects of every condition, pins first, on the first [`DRAWS`] draws of `set`.
pub fn leave_one_out(
    setup: &Setup,
    set: &ThetaSet,
    conditions: &Conditions,
    how: Sampling,
    cancel: &AtomicBool,
) -> Result<Vec<Effect>, ForecastError> {
    let count = set.thetas.len().min(DRAWS);
    // Medians of equally weighted paths: no weights to estimate.
    let how = Sampling {
        reweight: false,
        ..how
    };
    let max_failed = setup.file.checks.max_failed_share;
    let medians = |cond: &Conditions| -> Result<Vec<Vec<f64>>, ForecastError> {
        let mut paths: PathSet = sample_paths(set, 0..count, cond, how, cancel)?;
        paths.keep_only(|p| displayable(setup, p));
        let paths = paths.within(max_failed)?;
        let rows = fans(setup, &paths.conditional, None, Kind::Conditional);
        let h = setup.file.horizon;
        Ok((0..setup.n())
            .map(|i| {
                rows[i * h..(i + 1) * h]
                    .iter()
                    .map(|r| r.quantiles[3])
                    .collect()
            })
            .collect())
    };
    let total = conditions.pins.len() + conditions.corridors.len();
    // Without a measure of the whole scenario on these draws, every effect says why.
    let all = match medians(conditions) {
        Ok(all) => Ok(all),
        Err(ForecastError::Cancelled) => return Err(ForecastError::Cancelled),
        Err(e) => Err(e.to_string()),
    };
    let mut out = Vec::new();
    for k in 0..total {
        let mut without = conditions.clone();
        let (label, field) = if k < conditions.pins.len() {
            let p = without.pins.remove(k);
            (p.label, p.field)
        } else {
            let c = without.corridors.remove(k - conditions.pins.len());
            (c.label, c.field)
        };
        let shift = match (&all, medians(&without)) {
            (_, Err(ForecastError::Cancelled)) => return Err(ForecastError::Cancelled),
            (Err(why), _) => Err(format!("the scenario itself: {why}")),
            (_, Err(e)) => Err(e.to_string()),
            (Ok(all), Ok(m)) => Ok(m
                .iter()
                .zip(all)
                .map(|(a, b)| a.iter().zip(b).map(|(x, y)| x - y).collect())
                .collect()),
        };
        out.push(Effect {
            label,
            field,
            shift,
        });
    }
    Ok(out)
}
