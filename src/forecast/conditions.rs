//! Conditions as the engine sees them: pins as linear rows on the future path or on
//! structural shocks, and the drivers.
//!
//! A pin on observables is a row `ρ'y = r` over future cells (history already moved into
//! `r` by the scenario layer). A pin on shock `j` at horizon `t` fixes `ε_{j,t} = v`; for a
//! given θ it is the path row `ρ' = e'(I ⊗ L⁻¹)H` with value `v + ρ'μ` (ALGORITHMS §5.1).

/// What a pin fixes.
#[derive(Debug, Clone, PartialEq)]
pub enum PinTarget {
    /// `Σ coef · y[cell] = value` over future cells (index `(t−1) n + i`).
    Path {
        terms: Vec<(usize, f64)>,
        value: f64,
    },
    /// `ε_{shock, horizon} = value` (horizon 1-based, shock indexed like its series).
    Shock {
        horizon: usize,
        shock: usize,
        value: f64,
    },
}

/// One pin with the label used in every message about it.
#[derive(Debug, Clone, PartialEq)]
pub struct Pin {
    pub label: String,
    pub target: PinTarget,
}

/// The pins and drivers of a scenario, ready for the engine.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Conditions {
    pub pins: Vec<Pin>,
    /// Shocks allowed to move (all horizons), by index; `None` means every shock.
    /// A shock that is itself pinned always moves at the pinned horizon.
    pub drivers: Option<Vec<usize>>,
    /// Shock names for messages, indexed like the shocks.
    pub shock_names: Vec<String>,
}

impl Conditions {
    /// Driver mask over stacked shock cells (`None` when every shock drives).
    pub fn driver_cells(&self, n: usize, h: usize) -> Option<Vec<bool>> {
        let drivers = self.drivers.as_ref()?;
        let mut mask = vec![false; n * h];
        for &j in drivers {
            for t in 0..h {
                mask[t * n + j] = true;
            }
        }
        for pin in &self.pins {
            if let PinTarget::Shock { horizon, shock, .. } = pin.target {
                mask[(horizon - 1) * n + shock] = true;
            }
        }
        Some(mask)
    }

    /// Names of the drivers, for messages.
    pub fn driver_names(&self) -> String {
        match &self.drivers {
            None => "all shocks".into(),
            Some(d) if d.is_empty() => "no shocks".into(),
            Some(d) => d
                .iter()
                .map(|&j| {
                    self.shock_names
                        .get(j)
                        .cloned()
                        .unwrap_or_else(|| j.to_string())
                })
                .collect::<Vec<_>>()
                .join(", "),
        }
    }
}
