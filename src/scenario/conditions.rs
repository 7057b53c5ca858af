//! Pins, corridors and drivers of a scenario in engine form. Every problem names the field
//! (`pins[2].period`), the condition and what to do; [`Setup::read_conditions`] keeps going
//! past a bad condition so that a report can list them all.

use super::{
    ScenarioError, Setup,
    schema::{Bound, CorridorSpec, DriverSpec, PinSpec, Units},
    units::{corridor_row, pin_row},
};
use crate::forecast::{Bounded, Conditions, Corridor, Driver, Pin, Target};

/// What a condition is about: a series (index) or a shock (index).
enum About {
    Series(usize),
    Shock(usize),
}

impl Setup {
    /// Active pins and corridors and the drivers in engine form, stopping at the first problem.
    pub fn conditions(&self) -> Result<Conditions, ScenarioError> {
        let (conditions, problems) = self.read_conditions();
        match problems.into_iter().next() {
            Some(e) => Err(e),
            None => Ok(conditions),
        }
    }

    /// Every valid active condition, and one error for each invalid one (left out).
    pub fn read_conditions(&self) -> (Conditions, Vec<ScenarioError>) {
        let mut problems = Vec::new();
        let drivers = self.file.drivers.as_ref().map(|list| {
            list.iter()
                .enumerate()
                .filter_map(|(k, spec)| self.driver(k, spec).map_err(|e| problems.push(e)).ok())
                .collect()
        });
        let mut pins = Vec::new();
        for (k, spec) in self.file.pins.iter().enumerate() {
            if spec.active {
                match self.pin(k, spec) {
                    Ok(p) => pins.push(p),
                    Err(e) => problems.push(e),
                }
            }
        }
        let mut corridors = Vec::new();
        for (k, spec) in self.file.corridors.iter().enumerate() {
            if spec.active {
                match self.corridor(k, spec) {
                    Ok(c) => corridors.push(c),
                    Err(e) => problems.push(e),
                }
            }
        }
        let conditions = Conditions {
            pins,
            corridors,
            drivers,
            shock_names: self.names.clone(),
        };
        (conditions, problems)
    }

    /// A driver in engine form: its shock and horizons (every one when untimed).
    fn driver(&self, k: usize, spec: &DriverSpec) -> Result<Driver, ScenarioError> {
        let field = format!("drivers[{k}]");
        let shock = self.shock_index(spec.shock(), &field)?;
        let h = self.file.horizon;
        let label = |t: usize| self.last_period().offset(t as i64).to_string();
        let (from, to) = match spec {
            DriverSpec::Always(_) => (1, h),
            DriverSpec::Timed { from, to, .. } => {
                let a = self.horizon_of(from, &format!("{field}.from"))?;
                let b = self.horizon_of(to, &format!("{field}.to"))?;
                if b < a {
                    return Err(ScenarioError::Invalid {
                        field: format!("{field}.to"),
                        why: format!("{to} comes before from ({from})"),
                    });
                }
                (a, b)
            }
        };
        Ok(Driver {
            shock,
            from,
            to,
            from_label: label(from),
            to_label: label(to),
            to_end: to == h,
        })
    }

    fn about(
        &self,
        field: &str,
        series: &Option<String>,
        shock: &Option<String>,
        units: Units,
    ) -> Result<(About, String), ScenarioError> {
        match (series, shock) {
            (Some(name), None) => {
                let i = self.names.iter().position(|s| s == name).ok_or_else(|| {
                    ScenarioError::UnknownSeries {
                        field: format!("{field}.series"),
                        name: name.clone(),
                        known: super::listing(&self.names),
                    }
                })?;
                // As people name it: "House prices, % on a year earlier".
                let what = match units {
                    Units::Level => self.shown(i).to_string(),
                    _ => format!("{}, {}", self.shown(i), units.words()),
                };
                Ok((About::Series(i), what))
            }
            (None, Some(name)) => {
                let j = self.shock_index(name, &format!("{field}.shock"))?;
                if units != Units::Level {
                    return Err(ScenarioError::Invalid {
                        field: format!("{field}.units"),
                        why: "a shock condition is on the standardised shock itself; use units: level"
                            .into(),
                    });
                }
                Ok((About::Shock(j), format!("{} shock", self.shown(j))))
            }
            _ => Err(ScenarioError::Invalid {
                field: field.into(),
                why: "give exactly one of series or shock".into(),
            }),
        }
    }

    fn pin(&self, k: usize, spec: &PinSpec) -> Result<Pin, ScenarioError> {
        self.pin_at(&format!("pins[{k}]"), spec)
    }

    /// A pin in engine form, its messages naming it by `field` (`pins[2]`, `outcome`).
    pub fn pin_at(&self, field: &str, spec: &PinSpec) -> Result<Pin, ScenarioError> {
        let field = field.to_string();
        if !spec.value.is_finite() {
            return Err(ScenarioError::Invalid {
                field: format!("{field}.value"),
                why: "must be a finite number".into(),
            });
        }
        let (about, what) = self.about(&field, &spec.series, &spec.shock, spec.units)?;
        let t = self.horizon_of(&spec.period, &format!("{field}.period"))?;
        let label = format!("{what} at {} = {}", spec.period, spec.value);
        let (target, value) = match about {
            About::Series(i) => {
                let (terms, value) = pin_row(
                    spec.units,
                    self.transforms[i],
                    spec.value,
                    self.periods_per_year(),
                    i,
                    self.n(),
                    t,
                    &self.columns[i],
                )
                .map_err(|e| ScenarioError::Condition {
                    field: field.clone(),
                    label: label.clone(),
                    why: e.to_string(),
                })?;
                (Target::Path { terms }, value)
            }
            About::Shock(j) => (
                Target::Shock {
                    horizon: t,
                    shock: j,
                },
                spec.value,
            ),
        };
        Ok(Pin {
            label,
            field,
            target,
            value,
        })
    }

    fn corridor(&self, k: usize, spec: &CorridorSpec) -> Result<Corridor, ScenarioError> {
        let field = format!("corridors[{k}]");
        let (about, what) = self.about(&field, &spec.series, &spec.shock, spec.units)?;
        let first = self.horizon_of(&spec.from, &format!("{field}.from"))?;
        let last = self.horizon_of(&spec.to, &format!("{field}.to"))?;
        if last < first {
            return Err(ScenarioError::Invalid {
                field: format!("{field}.to"),
                why: format!("{} comes before from ({})", spec.to, spec.from),
            });
        }
        let periods = last - first + 1;
        let lower = expand(&spec.lower, periods, &field, "lower", f64::NEG_INFINITY)?;
        let upper = expand(&spec.upper, periods, &field, "upper", f64::INFINITY)?;
        let label = format!(
            "{what} {}–{} {}",
            spec.from,
            spec.to,
            describe(&spec.lower, &spec.upper)
        );
        if lower.iter().chain(&upper).all(|v| v.is_infinite()) {
            return Err(ScenarioError::Condition {
                field,
                label,
                why: "give a lower bound, an upper bound or both".into(),
            });
        }
        let mut rows = Vec::with_capacity(periods);
        for (s, (&lo, &hi)) in lower.iter().zip(&upper).enumerate() {
            let t = first + s;
            let period = self.last_period().offset(t as i64).to_string();
            if lo >= hi {
                let why = if lo == hi {
                    format!("lower equals upper at {period}: that is a pin; write it as one")
                } else {
                    format!("lower bound {lo} is above upper bound {hi} at {period}")
                };
                return Err(ScenarioError::Condition { field, label, why });
            }
            let (target, lower, upper) = match about {
                About::Series(i) => {
                    let (terms, lo, hi) = corridor_row(
                        spec.units,
                        self.transforms[i],
                        (lo, hi),
                        self.periods_per_year(),
                        i,
                        self.n(),
                        t,
                        &self.columns[i],
                    )
                    .map_err(|e| ScenarioError::Condition {
                        field: field.clone(),
                        label: label.clone(),
                        why: format!("{period}: {e}"),
                    })?;
                    (Target::Path { terms }, lo, hi)
                }
                About::Shock(j) => (
                    Target::Shock {
                        horizon: t,
                        shock: j,
                    },
                    lo,
                    hi,
                ),
            };
            rows.push(Bounded {
                period,
                target,
                lower,
                upper,
            });
        }
        Ok(Corridor { label, field, rows })
    }
}

/// One bound per period (`open` where none is given).
fn expand(
    bound: &Option<Bound>,
    periods: usize,
    field: &str,
    side: &str,
    open: f64,
) -> Result<Vec<f64>, ScenarioError> {
    let values: Vec<Option<f64>> = match bound {
        None => vec![None; periods],
        Some(Bound::Same(v)) => vec![Some(*v); periods],
        Some(Bound::Each(list)) => {
            if list.len() != periods {
                return Err(ScenarioError::Invalid {
                    field: format!("{field}.{side}"),
                    why: format!(
                        "{} values for {periods} periods; give one per period (None leaves one open)",
                        list.len()
                    ),
                });
            }
            list.clone()
        }
    };
    values
        .into_iter()
        .map(|v| match v {
            None => Ok(open),
            Some(x) if x.is_finite() => Ok(x),
            Some(x) => Err(ScenarioError::Invalid {
                field: format!("{field}.{side}"),
                why: format!("{x} is not a finite number"),
            }),
        })
        .collect()
}

/// "in [1, 2]", "≥ 1", "≤ −2…−12" (first…last of per-period bounds).
fn describe(lower: &Option<Bound>, upper: &Option<Bound>) -> String {
    let text = |b: &Bound| match b {
        Bound::Same(v) => format!("{v}"),
        Bound::Each(list) => {
            let given: Vec<f64> = list.iter().flatten().copied().collect();
            match given.as_slice() {
                [] => "open".into(),
                [one] => format!("{one}"),
                [first, .., last] => format!("{first}…{last}"),
            }
        }
    };
    match (lower, upper) {
        (Some(l), Some(u)) => format!("in [{}, {}]", text(l), text(u)),
        (Some(l), None) => format!("≥ {}", text(l)),
        (None, Some(u)) => format!("≤ {}", text(u)),
        (None, None) => "unbounded".into(),
    }
}
