//! Per-series transforms between data units and model units.

use std::fmt;

use serde::{Deserialize, Serialize};

/// How a series enters the model: its value as is, or 100·ln(value).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Transform {
    AsIs,
    Log100,
}

impl Transform {
    /// Data units to model units. `None` when the value has no model-unit
    /// counterpart: a non-finite value, or a value <= 0 under `Log100`.
    pub fn forward(self, value: f64) -> Option<f64> {
        if !value.is_finite() {
            return None;
        }
        match self {
            Transform::AsIs => Some(value),
            Transform::Log100 if value > 0.0 => Some(100.0 * value.ln()),
            Transform::Log100 => None,
        }
    }

    /// Model units back to data units (`exp(x/100)` for `Log100`).
    pub fn inverse(self, x: f64) -> f64 {
        match self {
            Transform::AsIs => x,
            Transform::Log100 => (x / 100.0).exp(),
        }
    }

    /// The name used in scenario files: "as_is" or "log100".
    pub fn name(self) -> &'static str {
        match self {
            Transform::AsIs => "as_is",
            Transform::Log100 => "log100",
        }
    }

    /// What values the transform accepts, for messages.
    pub fn requirement(self) -> &'static str {
        match self {
            Transform::AsIs => "finite values",
            Transform::Log100 => "values above zero",
        }
    }
}

impl fmt::Display for Transform {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Transform::AsIs => f.write_str("as_is (value as is)"),
            Transform::Log100 => f.write_str("log100 (100·ln of the value)"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log100_is_one_hundred_times_the_natural_log() {
        assert_eq!(Transform::Log100.forward(1.0), Some(0.0));
        let x = Transform::Log100.forward(std::f64::consts::E).unwrap();
        assert!((x - 100.0).abs() < 1e-12, "{x}");
        let x = Transform::Log100.forward(110.0).unwrap();
        assert!((x - 470.048_036_3).abs() < 1e-6, "{x}");
    }

    #[test]
    fn log100_rejects_zero_negative_and_non_finite() {
        assert_eq!(Transform::Log100.forward(0.0), None);
        assert_eq!(Transform::Log100.forward(-3.5), None);
        assert_eq!(Transform::Log100.forward(f64::NAN), None);
        assert_eq!(Transform::Log100.forward(f64::INFINITY), None);
    }

    #[test]
    fn as_is_passes_values_through() {
        assert_eq!(Transform::AsIs.forward(-2.5), Some(-2.5));
        assert_eq!(Transform::AsIs.forward(0.0), Some(0.0));
        assert_eq!(Transform::AsIs.inverse(-2.5), -2.5);
        assert_eq!(Transform::AsIs.forward(f64::NAN), None);
    }

    #[test]
    fn inverse_undoes_forward() {
        for v in [0.001, 0.5, 1.0, 97.3, 12_345.6] {
            let x = Transform::Log100.forward(v).unwrap();
            let back = Transform::Log100.inverse(x);
            assert!(
                (back - v).abs() <= 1e-12 * v.max(1.0),
                "{v} -> {x} -> {back}"
            );
        }
        assert!((Transform::Log100.inverse(100.0) - std::f64::consts::E).abs() < 1e-12);
    }

    #[test]
    fn serde_names_are_snake_case() {
        let json = serde_json::to_string(&Transform::Log100).unwrap();
        assert_eq!(json, "\"log100\"");
        let t: Transform = serde_json::from_str("\"as_is\"").unwrap();
        assert_eq!(t, Transform::AsIs);
    }
}
