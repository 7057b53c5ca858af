//! From a scenario file to the engine's inputs: the dataset in model units, the estimated
//! (or fixed) model, the identification ordering, and the pins and drivers as engine rows.
//! Model-level work ([`Setup::estimate`]) and condition-level work ([`Setup::conditions`])
//! are separate so that editing a condition never re-estimates the model.

use std::path::{Path, PathBuf};

use super::{
    ScenarioError,
    schema::{ModelSpec, ScenarioFile, Units},
};
use crate::checks::History;
use crate::dataset::{Dataset, DatasetError, Frequency, Period, Transform};
use crate::forecast::ParamSource;
use crate::model::{FitSummary, Params, Regression, Window, estimate_minnesota, posterior::flat};

/// Upper limits that keep a typo from asking for hours of work.
pub const MAX_HORIZON: usize = 400;
pub const MAX_DRAWS: usize = 1_000_000;
/// Most sub-scenarios a blame search may be asked to evaluate (each is a conditioning).
pub const MAX_BLAME_BUDGET: usize = 100_000;

/// A scenario with its dataset loaded and checked.
#[derive(Debug, Clone)]
pub struct Setup {
    pub file: ScenarioFile,
    /// Where the scenario came from (for messages and relative paths).
    pub path: PathBuf,
    pub dataset: Dataset,
    /// Model series: columns in model units, `columns[i][row]`.
    pub columns: Vec<Vec<f64>>,
    pub names: Vec<String>,
    pub transforms: Vec<Transform>,
    pub display: Vec<Units>,
    /// `ordering[k]` = series index of the k-th shock.
    pub ordering: Vec<usize>,
}

impl Setup {
    /// Series `i` as people name it (its label in the file, else its column name).
    pub fn shown(&self, i: usize) -> &str {
        self.file
            .series
            .get(i)
            .map_or_else(|| self.names[i].as_str(), |s| s.shown())
    }

    /// What series `i`'s values in `units` are measured in, in words.
    pub fn measure(&self, i: usize, units: Units) -> String {
        self.file
            .series
            .get(i)
            .map_or_else(|| units.words(), |s| s.measure(units))
    }

    /// Load the dataset a scenario refers to and check everything that does not need the model.
    pub fn new(file: ScenarioFile, path: &Path) -> Result<Setup, ScenarioError> {
        check_counts(&file)?;
        let base = path
            .parent()
            .filter(|b| !b.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        let dataset = Dataset::read(&base.join(&file.dataset)).map_err(|e| match e {
            DatasetError::Io { file: name, error } => ScenarioError::Invalid {
                field: "dataset".into(),
                why: format!(
                    "cannot read {name} ({:?} is read from the scenario's own folder, {}): {error}",
                    file.dataset,
                    std::path::absolute(base)
                        .unwrap_or_else(|_| base.to_path_buf())
                        .display()
                ),
            },
            other => other.into(),
        })?;
        let mut transforms_all = vec![Transform::AsIs; dataset.names.len()];
        let mut picked = Vec::new();
        for (k, s) in file.series.iter().enumerate() {
            let Some(i) = dataset.series_index(&s.name) else {
                return Err(ScenarioError::UnknownSeries {
                    field: format!("series[{k}]"),
                    name: s.name.clone(),
                    known: super::listing(&dataset.names),
                });
            };
            if picked.contains(&i) {
                return Err(ScenarioError::Invalid {
                    field: format!("series[{k}]"),
                    why: format!("series {} is listed twice", s.name),
                });
            }
            picked.push(i);
            transforms_all[i] = s.transform;
        }
        if picked.is_empty() {
            return Err(ScenarioError::Invalid {
                field: "series".into(),
                why: "list at least one series of the dataset".into(),
            });
        }
        for (k, s) in file.series.iter().enumerate() {
            if let Units::Average(periods) = s.display
                && !(1..=dataset.len()).contains(&periods)
            {
                return Err(ScenarioError::Invalid {
                    field: format!("series[{k}].display"),
                    why: format!(
                        "average needs from 1 to {} periods (the dataset's length), got {periods}",
                        dataset.len()
                    ),
                });
            }
        }
        let all = dataset.transformed(&transforms_all)?;
        let columns = picked.iter().map(|&i| all[i].clone()).collect();
        let names: Vec<String> = file.series.iter().map(|s| s.name.clone()).collect();
        let ordering = resolve_ordering(&file, &names)?;
        Ok(Setup {
            transforms: file.series.iter().map(|s| s.transform).collect(),
            display: file.series.iter().map(|s| s.display).collect(),
            path: path.to_path_buf(),
            columns,
            names,
            ordering,
            dataset,
            file,
        })
    }

    pub fn n(&self) -> usize {
        self.names.len()
    }

    pub fn lags(&self) -> usize {
        match &self.file.model {
            ModelSpec::Minnesota(m) => m.lags,
            ModelSpec::Flat(f) => f.lags,
            ModelSpec::Fixed(f) => f.lags.len(),
        }
    }

    pub fn last_period(&self) -> Period {
        self.dataset.last_period()
    }

    pub fn periods_per_year(&self) -> usize {
        self.dataset.frequency.periods_per_year()
    }

    /// The last `p` observed rows in model units, oldest first.
    pub fn tail(&self) -> Result<Vec<Vec<f64>>, ScenarioError> {
        let (p, rows) = (self.lags(), self.dataset.len());
        if rows < p {
            return Err(ScenarioError::Invalid {
                field: "model".into(),
                why: format!("{p} lags need {p} observed periods; the dataset has {rows}"),
            });
        }
        Ok((rows - p..rows)
            .map(|r| self.columns.iter().map(|c| c[r]).collect())
            .collect())
    }

    /// Estimate the model (or take the fixed coefficients).
    pub fn estimate(&self) -> Result<(ParamSource, Option<FitSummary>), ScenarioError> {
        let delta: Vec<f64> = self.file.series.iter().map(|s| s.centre.delta()).collect();
        for (k, d) in delta.iter().enumerate() {
            if !(0.0..=1.0).contains(d) {
                return Err(ScenarioError::Invalid {
                    field: format!("series[{k}].centre"),
                    why: format!("own_lag must lie in [0, 1], got {d}"),
                });
            }
        }
        let model_err = ScenarioError::Model;
        match &self.file.model {
            ModelSpec::Fixed(f) => {
                if f.intercept.len() != self.n() {
                    return Err(ScenarioError::Invalid {
                        field: "model.fixed.intercept".into(),
                        why: format!(
                            "has {} entries but the scenario lists {} series",
                            f.intercept.len(),
                            self.n()
                        ),
                    });
                }
                let params = Params::fixed(f.intercept.clone(), f.lags.clone(), f.sigma.clone())
                    .map_err(model_err)?;
                Ok((ParamSource::Fixed(params), None))
            }
            ModelSpec::Minnesota(m) => {
                let reg = self.regression(m.lags, m.window.as_ref())?;
                let (post, fit) = estimate_minnesota(&reg, m, &delta).map_err(model_err)?;
                Ok((ParamSource::Posterior(post), Some(fit)))
            }
            ModelSpec::Flat(f) => {
                let reg = self.regression(f.lags, f.window.as_ref())?;
                let post = flat(&reg.y, &reg.x).map_err(model_err)?;
                let fit = FitSummary {
                    lambda: None,
                    log_ml: None,
                    lambda_on_boundary: false,
                    observations: reg.t(),
                    floored_scales: Vec::new(),
                };
                Ok((ParamSource::Posterior(post), Some(fit)))
            }
        }
    }

    /// First and last period of the estimation window (lags included), for estimated models.
    pub fn estimation_window(&self) -> Result<Option<(Period, Period)>, ScenarioError> {
        let window = match &self.file.model {
            ModelSpec::Minnesota(m) => m.window.as_ref(),
            ModelSpec::Flat(f) => f.window.as_ref(),
            ModelSpec::Fixed(_) => return Ok(None),
        };
        let (first, last) = self.window_rows(window)?;
        Ok(Some((
            self.dataset.periods[first],
            self.dataset.periods[last],
        )))
    }

    /// The rows the model's historical shocks come from (model units, oldest first): the
    /// estimation window, or the whole dataset for fixed coefficients.
    pub fn history(&self) -> Result<History, ScenarioError> {
        let window = match &self.file.model {
            ModelSpec::Minnesota(m) => m.window.as_ref(),
            ModelSpec::Flat(f) => f.window.as_ref(),
            ModelSpec::Fixed(_) => None,
        };
        let (first, last) = self.window_rows(window)?;
        Ok(History {
            rows: (first..=last)
                .map(|r| self.columns.iter().map(|c| c[r]).collect())
                .collect(),
            periods: self.dataset.periods[first..=last]
                .iter()
                .map(ToString::to_string)
                .collect(),
            period_word: match self.dataset.frequency {
                Frequency::Quarterly => "quarter",
                Frequency::Monthly => "month",
            },
        })
    }

    /// Rows of the estimation window, checked against the lags.
    fn regression(&self, p: usize, window: Option<&Window>) -> Result<Regression, ScenarioError> {
        if p == 0 {
            return Err(ScenarioError::Invalid {
                field: "model.lags".into(),
                why: "must be at least 1".into(),
            });
        }
        let (first, last) = self.window_rows(window)?;
        let rows = last + 1 - first;
        if rows < p.saturating_add(3) {
            return Err(ScenarioError::TooFewObservations {
                rows,
                lags: p,
                window: format!(
                    "{}–{}",
                    self.dataset.periods[first], self.dataset.periods[last]
                ),
            });
        }
        Ok(Regression::new(&self.columns, first, last, p))
    }

    fn window_rows(&self, window: Option<&Window>) -> Result<(usize, usize), ScenarioError> {
        let ds = &self.dataset;
        let find = |label: &Option<String>, field: &str, default: usize| match label {
            None => Ok(default),
            Some(text) => {
                let period =
                    Period::parse(text, ds.frequency).map_err(|e| ScenarioError::Invalid {
                        field: format!("model.window.{field}"),
                        why: e.to_string(),
                    })?;
                ds.row_of(period).ok_or_else(|| ScenarioError::Invalid {
                    field: format!("model.window.{field}"),
                    why: format!(
                        "{period} is outside the dataset ({}–{})",
                        ds.first_period(),
                        ds.last_period()
                    ),
                })
            }
        };
        let w = window.cloned().unwrap_or_default();
        let first = find(&w.from, "from", 0)?;
        let last = find(&w.to, "to", ds.len() - 1)?;
        if first > last {
            return Err(ScenarioError::Invalid {
                field: "model.window".into(),
                why: "from comes after to".into(),
            });
        }
        Ok((first, last))
    }

    pub(super) fn shock_index(&self, name: &str, field: &str) -> Result<usize, ScenarioError> {
        self.names
            .iter()
            .position(|s| s == name)
            .ok_or_else(|| ScenarioError::UnknownShock {
                field: field.into(),
                name: name.into(),
                known: super::listing(&self.names),
            })
    }

    /// Horizon (1-based) of a period label, checked against the forecast range.
    pub fn horizon_of(&self, text: &str, field: &str) -> Result<usize, ScenarioError> {
        let period =
            Period::parse(text, self.dataset.frequency).map_err(|e| ScenarioError::Invalid {
                field: field.into(),
                why: e.to_string(),
            })?;
        let last = self.last_period();
        let t = period.periods_since(&last);
        let h = self.file.horizon as i64;
        if t < 1 {
            return Err(ScenarioError::Invalid {
                field: field.into(),
                why: format!(
                    "{period} is not after the last observation {last}; conditions are on future periods"
                ),
            });
        }
        if t > h {
            return Err(ScenarioError::Invalid {
                field: field.into(),
                why: format!(
                    "{period} is beyond the horizon, which ends at {}; raise horizon to at least {t} or move the condition",
                    last.offset(h)
                ),
            });
        }
        Ok(t as usize)
    }
}

/// Range checks of horizon, draws and paths per draw (also after command-line overrides).
pub fn check_counts(file: &ScenarioFile) -> Result<(), ScenarioError> {
    let bad = |field: &str, why: String| {
        Err(ScenarioError::Invalid {
            field: field.into(),
            why,
        })
    };
    if file.horizon == 0 || file.horizon > MAX_HORIZON {
        return bad("horizon", format!("must be between 1 and {MAX_HORIZON}"));
    }
    if file.draws == 0 || file.draws > MAX_DRAWS {
        return bad("draws", format!("must be between 1 and {MAX_DRAWS}"));
    }
    let checks = &file.checks;
    for (field, p) in [
        ("checks.corridor_probability", checks.corridor_probability),
        ("checks.pin_tail", checks.pin_tail),
        ("checks.min_acceptance", checks.min_acceptance),
    ] {
        if !(p > 0.0 && p < 1.0) {
            return bad(
                field,
                format!("must be a probability above 0 and below 1, got {p}"),
            );
        }
    }
    if !(checks.pin_z.is_finite() && checks.pin_z > 0.0) {
        return bad(
            "checks.pin_z",
            format!(
                "must be a positive number of standard deviations (common practice: 3), got {}",
                checks.pin_z
            ),
        );
    }
    if checks.blame_budget == 0 || checks.blame_budget > MAX_BLAME_BUDGET {
        return bad(
            "checks.blame_budget",
            format!("must be between 1 and {MAX_BLAME_BUDGET}"),
        );
    }
    for (field, share) in [
        ("checks.max_failed_share", checks.max_failed_share),
        ("checks.min_kept_share", checks.min_kept_share),
        ("checks.min_tilted_share", checks.min_tilted_share),
    ] {
        if !(0.0..=1.0).contains(&share) {
            return bad(
                field,
                format!("must be a share between 0 and 1, got {share}"),
            );
        }
    }
    if let Some(bound) = file.largest_root.bound()
        && !(bound.is_finite() && bound > 0.0)
    {
        return bad(
            "largest_root",
            format!("the bound must be a positive number (common practice: 1), got {bound}"),
        );
    }
    if file.paths_per_draw == 0
        || file
            .paths_per_draw
            .checked_mul(file.draws)
            .is_none_or(|total| total > MAX_DRAWS)
    {
        return bad(
            "paths_per_draw",
            format!("must be at least 1, with draws × paths_per_draw at most {MAX_DRAWS}"),
        );
    }
    Ok(())
}

fn resolve_ordering(file: &ScenarioFile, names: &[String]) -> Result<Vec<usize>, ScenarioError> {
    let Some(order) = &file.ordering else {
        return Ok((0..names.len()).collect());
    };
    let mut idx = Vec::new();
    for (k, name) in order.iter().enumerate() {
        let i =
            names
                .iter()
                .position(|s| s == name)
                .ok_or_else(|| ScenarioError::UnknownSeries {
                    field: format!("ordering[{k}]"),
                    name: name.clone(),
                    known: super::listing(names),
                })?;
        if idx.contains(&i) {
            return Err(ScenarioError::Invalid {
                field: format!("ordering[{k}]"),
                why: format!("{name} appears twice"),
            });
        }
        idx.push(i);
    }
    if idx.len() != names.len() {
        let missing: Vec<&str> = (0..names.len())
            .filter(|i| !idx.contains(i))
            .map(|i| names[i].as_str())
            .collect();
        return Err(ScenarioError::Invalid {
            field: "ordering".into(),
            why: format!(
                "must list every model series once; missing {}",
                missing.join(", ")
            ),
        });
    }
    Ok(idx)
}
