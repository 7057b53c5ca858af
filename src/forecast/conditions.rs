//! Conditions as the engine sees them: pins (`ρ'y = r`) and corridors (`a ≤ ρ'y ≤ b`, one row
//! per period) on the future path or on structural shocks, and the drivers.
//!
//! A condition on observables is a row over future cells (history already moved to the value
//! or bounds by the scenario layer). A condition on shock `j` at horizon `t` is about
//! `ε_{j,t}`; for a given θ it is the path row `ρ' = e'(I ⊗ L⁻¹)H` with value (or bounds)
//! shifted by `ρ'μ` (ALGORITHMS §5.1).

/// What a condition is about.
#[derive(Debug, Clone, PartialEq)]
pub enum Target {
    /// `Σ coef · y[cell]` over future cells (index `(t−1) n + i`).
    Path { terms: Vec<(usize, f64)> },
    /// `ε_{shock, horizon}` (horizon 1-based, shock indexed like its series).
    Shock { horizon: usize, shock: usize },
}

/// A pin: `target = value`, with the label used in every message about it.
#[derive(Debug, Clone, PartialEq)]
pub struct Pin {
    pub label: String,
    /// Where it comes from in the scenario file (`pins[2]`).
    pub field: String,
    pub target: Target,
    pub value: f64,
}

/// One period of a corridor: `lower ≤ target ≤ upper` (either side may be infinite).
#[derive(Debug, Clone, PartialEq)]
pub struct Bounded {
    /// The period, as written (for messages).
    pub period: String,
    pub target: Target,
    pub lower: f64,
    pub upper: f64,
}

/// A corridor: bounds on one quantity over a range of periods.
#[derive(Debug, Clone, PartialEq)]
pub struct Corridor {
    pub label: String,
    /// Where it comes from in the scenario file (`corridors[0]`).
    pub field: String,
    pub rows: Vec<Bounded>,
}

impl Corridor {
    /// The label of one period's row.
    pub fn row_label(&self, k: usize) -> String {
        format!("{} at {}", self.label, self.rows[k].period)
    }
}

/// A shock allowed to move over horizons `from..=to` (1-based), with the labels of those
/// periods for messages.
#[derive(Debug, Clone, PartialEq)]
pub struct Driver {
    pub shock: usize,
    pub from: usize,
    pub to: usize,
    pub from_label: String,
    pub to_label: String,
    /// True when `to` is the last horizon of the forecast.
    pub to_end: bool,
}

impl Driver {
    /// Moves at every period of the forecast.
    pub fn always(&self) -> bool {
        self.from <= 1 && self.to_end
    }
}

/// The pins, corridors and drivers of a scenario, ready for the engine.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Conditions {
    pub pins: Vec<Pin>,
    pub corridors: Vec<Corridor>,
    /// Shocks allowed to move, each over its horizons; `None` means every shock at every
    /// horizon. A shock that is itself pinned or bounded always moves at that horizon.
    pub drivers: Option<Vec<Driver>>,
    /// Shock names for messages, indexed like the shocks.
    pub shock_names: Vec<String>,
}

impl Conditions {
    /// Driver mask over stacked shock cells (`None` when every shock drives).
    pub fn driver_cells(&self, n: usize, h: usize) -> Option<Vec<bool>> {
        let drivers = self.drivers.as_ref()?;
        let mut mask = vec![false; n * h];
        for d in drivers {
            for t in d.from.max(1) - 1..d.to.min(h) {
                mask[t * n + d.shock] = true;
            }
        }
        let targets = self.pins.iter().map(|p| &p.target).chain(
            self.corridors
                .iter()
                .flat_map(|c| c.rows.iter().map(|r| &r.target)),
        );
        for target in targets {
            if let Target::Shock { horizon, shock } = *target {
                mask[(horizon - 1) * n + shock] = true;
            }
        }
        Some(mask)
    }

    /// True when a pin or corridor is on a structural shock: its row then depends on θ.
    pub fn on_shocks(&self) -> bool {
        let shock = |t: &Target| matches!(t, Target::Shock { .. });
        self.pins.iter().any(|p| shock(&p.target))
            || self
                .corridors
                .iter()
                .any(|c| c.rows.iter().any(|r| shock(&r.target)))
    }

    /// Names of the drivers (with their periods when timed), for messages; when every driver
    /// is timed, what that rules out ("no shock may move after 2026Q1").
    pub fn driver_names(&self) -> String {
        let Some(drivers) = &self.drivers else {
            return "all shocks".into();
        };
        if drivers.is_empty() {
            return "no shocks".into();
        }
        let name = |j: usize| {
            self.shock_names
                .get(j)
                .cloned()
                .unwrap_or_else(|| j.to_string())
        };
        let mut text = drivers
            .iter()
            .map(|d| match (d.always(), d.from == d.to) {
                (true, _) => name(d.shock),
                (false, true) => format!("{} in {} only", name(d.shock), d.from_label),
                (false, false) => format!("{} in {}–{}", name(d.shock), d.from_label, d.to_label),
            })
            .collect::<Vec<_>>()
            .join(", ");
        let first = drivers.iter().min_by_key(|d| d.from);
        if let Some(d) = first.filter(|d| d.from > 1) {
            text.push_str(&format!("; no shock may move before {}", d.from_label));
        }
        let last = drivers.iter().max_by_key(|d| (d.to_end, d.to));
        if let Some(d) = last.filter(|d| !d.to_end) {
            text.push_str(&format!("; no shock may move after {}", d.to_label));
        }
        text
    }

    /// The conditions named by `keep` (indices into [`Conditions::labels`]): a sub-scenario
    /// for blame searches. Drivers are kept.
    pub fn subset(&self, keep: &[usize]) -> Conditions {
        let m = self.pins.len();
        Conditions {
            pins: keep
                .iter()
                .filter(|&&i| i < m)
                .map(|&i| self.pins[i].clone())
                .collect(),
            corridors: keep
                .iter()
                .filter(|&&i| i >= m)
                .map(|&i| self.corridors[i - m].clone())
                .collect(),
            drivers: self.drivers.clone(),
            shock_names: self.shock_names.clone(),
        }
    }

    /// Labels of every condition: pins first, then corridors.
    pub fn labels(&self) -> Vec<String> {
        self.pins
            .iter()
            .map(|p| p.label.clone())
            .chain(self.corridors.iter().map(|c| c.label.clone()))
            .collect()
    }

    /// Scenario-file fields of every condition, in the order of [`Conditions::labels`].
    pub fn fields(&self) -> Vec<String> {
        self.pins
            .iter()
            .map(|p| p.field.clone())
            .chain(self.corridors.iter().map(|c| c.field.clone()))
            .collect()
    }

    /// Number of conditions (pins and corridors).
    pub fn len(&self) -> usize {
        self.pins.len() + self.corridors.len()
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}
