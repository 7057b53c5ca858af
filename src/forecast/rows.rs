//! Pins and corridors as scaled rows for one θ, with their linear dependencies resolved
//! (ALGORITHMS §4.1, §6.2 step 1, §6.4, §9.1 items 2–5).
//!
//! Every row is scaled to unit Euclidean norm (values and bounds alike). Rows are examined
//! in order — pins, then corridor rows — against the span of the rows kept so far
//! (classical Gram–Schmidt, applied twice; a dependent row's coefficients on the kept rows by
//! back substitution in the Gram–Schmidt triangle):
//!
//! - a pin in the span of earlier pins is *redundant* when its value agrees with the value
//!   they imply (it is dropped, with a note) and *contradictory* otherwise;
//! - a corridor row in the span of the pins alone is fixed by them: a pass/fail check;
//! - a corridor row that is a combination of the pins and exactly one kept corridor row
//!   narrows that row's interval (duplicates and overlaps are intersected);
//! - any other dependent corridor row becomes an extra inequality `a ≤ α'z + β'r ≤ b` on the
//!   kept corridor quantities `z`; the polytope they cut out must have an interior (a small
//!   linear programme, [`super::polytope`]), and draws of `z` are kept only inside it.

use std::sync::Arc;

use nalgebra::{DMatrix, DVector};

use super::{
    ForecastError,
    conditions::{Conditions, Target},
    corridor::LawRows,
    polytope,
    product::SparseRows,
    theta::Theta,
};

/// A row is dependent when its distance from the span of the kept rows (all unit norm) is
/// below this; `1e−9` matches the consistency residual of ALGORITHMS §9.1.
const DEPENDENT: f64 = 1e-9;
/// Values implied by other rows agree when within `AGREE · (1 + |value|)`.
const AGREE: f64 = 1e-9;
/// A coefficient of a dependency is negligible below this share of the largest one.
const NEGLIGIBLE: f64 = 1e-9;

/// A dependent corridor row: `lower ≤ α'z + offset ≤ upper` on the kept corridor rows `z`.
#[derive(Debug, Clone)]
pub struct Extra {
    pub alpha: DVector<f64>,
    pub offset: f64,
    pub lower: f64,
    pub upper: f64,
    pub label: String,
}

impl Extra {
    pub fn holds(&self, z: &DVector<f64>) -> bool {
        let v = self.alpha.dot(z) + self.offset;
        self.lower <= v && v <= self.upper
    }
}

/// The rows of a scenario for one θ.
#[derive(Debug, Clone)]
pub struct Rows {
    /// Kept pin rows `R` (m×N) and values `r`, with their labels.
    pub pins: DMatrix<f64>,
    pub values: DVector<f64>,
    pub pin_labels: Vec<String>,
    /// Euclidean norms of the kept pin rows before scaling (for densities in the pins' own
    /// units).
    pub pin_norms: Vec<f64>,
    /// Kept corridor rows `S` (q×N); their bounds, labels and dependent rows are in
    /// [`Rows::law_rows`].
    pub corridors: DMatrix<f64>,
    /// The corridor each kept row belongs to (its label).
    pub corridor_names: Vec<String>,
    /// What was dropped or merged, for the report.
    pub notes: Vec<String>,
    /// The non-zeros of the stacked rows `𝒢 = [R; S]`.
    stacked: SparseRows,
    /// The kept corridor rows' bounds `a`, `b`, labels and dependent rows (kept as
    /// inequalities on the corridor quantities), as every θ's corridor law shares them.
    law: Arc<LawRows>,
    /// Every pin and corridor row as given, to measure how well a path meets them.
    every_pin: (SparseRows, DVector<f64>),
    every_corridor: (SparseRows, DVector<f64>, DVector<f64>),
}

/// One scaled row with its value (pins) or bounds (corridors) and label.
struct Raw {
    row: DVector<f64>,
    /// Norm before scaling.
    norm: f64,
    /// The condition it belongs to.
    name: String,
    lower: f64,
    upper: f64,
    label: String,
}

fn raw(
    theta: &Theta,
    target: &Target,
    (lower, upper): (f64, f64),
    label: String,
    name: &str,
) -> Result<Raw, ForecastError> {
    let mut row = DVector::zeros(theta.len());
    let offset = match target {
        Target::Path { terms } => {
            for &(c, a) in terms {
                row[c] += a;
            }
            0.0
        }
        Target::Shock { horizon, shock } => {
            let terms = theta.shock_row(*horizon, *shock)?;
            for &(c, a) in &terms {
                row[c] += a;
            }
            terms.iter().map(|(c, a)| a * theta.mean[*c]).sum()
        }
    };
    let norm = row.norm();
    let scale = if norm > 0.0 { 1.0 / norm } else { 1.0 };
    Ok(Raw {
        row: row * scale,
        norm,
        name: name.to_string(),
        lower: (lower + offset) * scale,
        upper: (upper + offset) * scale,
        label,
    })
}

/// Orthonormal basis `q_1 …` of the kept rows and the triangle `T` with
/// `kept_j = Σ_{i≤j} T_ij q_i` (classical Gram–Schmidt, applied twice).
struct Span {
    basis: Vec<DVector<f64>>,
    /// Column `j` of `T` (entries `0 ..= j`).
    triangle: Vec<Vec<f64>>,
}

impl Span {
    /// The residual of `row` from the span and its coordinates on the basis.
    fn project(&self, row: &DVector<f64>) -> (DVector<f64>, Vec<f64>) {
        let mut r = row.clone();
        let mut coords = vec![0.0; self.basis.len()];
        for _ in 0..2 {
            for (c, q) in coords.iter_mut().zip(&self.basis) {
                let d = q.dot(&r);
                r -= q * d;
                *c += d;
            }
        }
        (r, coords)
    }

    /// Add `row` if it is independent; otherwise return its coefficients on the kept rows
    /// (`T c = Q'row`, by back substitution).
    fn add(&mut self, row: &DVector<f64>) -> Option<DVector<f64>> {
        let (r, mut coords) = self.project(row);
        let norm = r.norm();
        if norm > DEPENDENT {
            coords.push(norm);
            self.basis.push(r / norm);
            self.triangle.push(coords);
            return None;
        }
        let k = self.basis.len();
        let mut coef = DVector::zeros(k);
        for j in (0..k).rev() {
            let mut v = coords[j];
            for l in j + 1..k {
                v -= self.triangle[l][j] * coef[l];
            }
            coef[j] = v / self.triangle[j][j];
        }
        Some(coef)
    }
}

/// Indices with a non-negligible coefficient.
fn involved(coef: &[f64]) -> Vec<usize> {
    let big = coef.iter().fold(0.0f64, |m, c| m.max(c.abs()));
    (0..coef.len())
        .filter(|&i| coef[i].abs() > NEGLIGIBLE * big)
        .collect()
}

impl Rows {
    /// Build and simplify the rows; clashes found on the way are errors naming the conditions.
    pub fn new(
        theta: &Theta,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<Rows, ForecastError> {
        let big_n = theta.len();
        let (pins, corridor_raw, mut notes) = raw_rows(theta, cond)?;
        let every_pin = stack(&pins, big_n, |r| (r.lower, r.lower));
        let every_corridor = stack(&corridor_raw, big_n, |r| (r.lower, r.upper));

        let mut span = Span {
            basis: Vec::new(),
            triangle: Vec::new(),
        };
        let mut kept_pins: Vec<Raw> = Vec::new();
        for p in pins {
            let Some(coef) = span.add(&p.row) else {
                kept_pins.push(p);
                continue;
            };
            let implied: f64 = (0..kept_pins.len())
                .map(|j| coef[j] * kept_pins[j].lower)
                .sum();
            let mut names: Vec<String> = involved(coef.as_slice())
                .into_iter()
                .map(|j| kept_pins[j].label.clone())
                .collect();
            if (implied - p.lower).abs() <= AGREE * (1.0 + p.lower.abs()) {
                notes.push(format!(
                    "pin '{}' is implied by {}; it is met without being imposed twice",
                    p.label,
                    quoted(&names)
                ));
                continue;
            }
            names.push(p.label);
            return Err(ForecastError::Contradictory { pins: names, draw });
        }

        let m = kept_pins.len();
        let mut kept: Vec<Raw> = Vec::new();
        let mut extra = Vec::new();
        for s in corridor_raw {
            let Some(coef) = span.add(&s.row) else {
                kept.push(s);
                continue;
            };
            let beta = coef.rows(0, m);
            let alpha = coef.rows(m, kept.len()).into_owned();
            let offset: f64 = (0..m).map(|j| beta[j] * kept_pins[j].lower).sum();
            let pin_names: Vec<String> = involved(beta.as_slice())
                .into_iter()
                .map(|j| kept_pins[j].label.clone())
                .collect();
            let active = involved(alpha.as_slice());
            let big = coef.amax();
            let alpha_matters = alpha.amax() > NEGLIGIBLE * big;
            if !alpha_matters {
                let tol = AGREE * (1.0 + offset.abs());
                if offset < s.lower - tol || offset > s.upper + tol {
                    return Err(ForecastError::CorridorFixedByPins {
                        corridor: s.label,
                        pins: pin_names,
                    });
                }
                notes.push(format!(
                    "corridor '{}' is fixed by {} and lies inside its bounds",
                    s.label,
                    quoted(&pin_names)
                ));
                continue;
            }
            if let [j] = active[..] {
                // a ≤ α_j z_j + offset ≤ b: an interval on z_j.
                let (mut lo, mut hi) =
                    ((s.lower - offset) / alpha[j], (s.upper - offset) / alpha[j]);
                if alpha[j] < 0.0 {
                    std::mem::swap(&mut lo, &mut hi);
                }
                let target = &mut kept[j];
                target.lower = target.lower.max(lo);
                target.upper = target.upper.min(hi);
                if target.lower >= target.upper {
                    let mut rows = vec![target.label.clone(), s.label];
                    rows.extend(pin_names);
                    return Err(ForecastError::CorridorsContradict { rows });
                }
                notes.push(format!(
                    "corridor '{}' bounds the same quantity as '{}'; the tighter bounds hold",
                    s.label, target.label
                ));
                continue;
            }
            extra.push(Extra {
                alpha,
                offset,
                lower: s.lower,
                upper: s.upper,
                label: s.label,
            });
        }
        let q = kept.len();
        let extra: Vec<Extra> = extra
            .into_iter()
            .map(|mut e| {
                e.alpha = e.alpha.resize_vertically(q, 0.0);
                e
            })
            .collect();
        let lower = DVector::from_iterator(q, kept.iter().map(|r| r.lower));
        let upper = DVector::from_iterator(q, kept.iter().map(|r| r.upper));
        if !extra.is_empty() && !polytope::has_interior(&lower, &upper, &extra) {
            let mut rows: Vec<String> = Vec::new();
            for e in &extra {
                for j in involved(e.alpha.as_slice()) {
                    if !rows.contains(&kept[j].label) {
                        rows.push(kept[j].label.clone());
                    }
                }
                rows.push(e.label.clone());
            }
            return Err(ForecastError::CorridorsContradict { rows });
        }
        let (pin_rows, pin_values, _) = stack(&kept_pins, big_n, |r| (r.lower, r.lower));
        let (corridor_rows, _, _) = stack(&kept, big_n, |r| (r.lower, r.upper));
        let mut names: Vec<String> = Vec::new();
        for r in &kept {
            if !names.contains(&r.name) {
                names.push(r.name.clone());
            }
        }
        let law = Arc::new(LawRows {
            lower,
            upper,
            extra,
            labels: kept.iter().map(|r| r.label.clone()).collect(),
            names,
        });
        let mut stacked = SparseRows::new(&pin_rows);
        stacked.extend(SparseRows::new(&corridor_rows));
        Ok(Rows {
            pins: pin_rows,
            values: pin_values,
            pin_norms: kept_pins.iter().map(|p| p.norm).collect(),
            pin_labels: kept_pins.into_iter().map(|p| p.label).collect(),
            corridors: corridor_rows,
            corridor_names: kept.into_iter().map(|r| r.name).collect(),
            notes,
            stacked,
            law,
            every_pin: (SparseRows::new(&every_pin.0), every_pin.1),
            every_corridor: (
                SparseRows::new(&every_corridor.0),
                every_corridor.1,
                every_corridor.2,
            ),
        })
    }

    /// `[R; S]`, the stacked rows `𝒢`.
    pub fn stacked(&self) -> DMatrix<f64> {
        let (m, q, big_n) = (self.pins.nrows(), self.corridors.nrows(), self.pins.ncols());
        let mut g = DMatrix::zeros(m + q, big_n);
        g.rows_mut(0, m).copy_from(&self.pins);
        g.rows_mut(m, q).copy_from(&self.corridors);
        g
    }

    /// The non-zeros of the stacked rows `𝒢`, row by row.
    pub fn stacked_rows(&self) -> &SparseRows {
        &self.stacked
    }

    /// The kept corridor rows for a corridor law (shared, not copied).
    pub fn law_rows(&self) -> &Arc<LawRows> {
        &self.law
    }

    /// Labels of the stacked rows.
    pub fn labels(&self) -> Vec<String> {
        self.pin_labels
            .iter()
            .chain(&self.law.labels)
            .cloned()
            .collect()
    }

    /// The label of stacked row `i` (pins first, then the kept corridor rows).
    pub fn label(&self, i: usize) -> &str {
        let m = self.pin_labels.len();
        if i < m {
            &self.pin_labels[i]
        } else {
            &self.law.labels[i - m]
        }
    }

    /// Largest pin error of a path over every pin as given, relative:
    /// `max |ρ'y − r| / (1 + |r|)`.
    pub fn pin_error(&self, y: &[f64]) -> f64 {
        let (rows, values) = &self.every_pin;
        let res = DVector::from_vec(rows.apply(y)) - values;
        res.iter()
            .zip(values.iter())
            .map(|(e, r)| e.abs() / (1.0 + r.abs()))
            .fold(0.0, f64::max)
    }

    /// The largest pin error and corridor violation over the paths in the columns of `y`
    /// (as [`Rows::pin_error`] and [`Rows::corridor_violation`], as two matrix products).
    pub fn errors(&self, y: &DMatrix<f64>) -> (f64, f64) {
        let (pins, values) = &self.every_pin;
        let (rows, lower, upper) = &self.every_corridor;
        let at_pins = pins.times(y);
        let at_rows = rows.times(y);
        let mut pin: f64 = 0.0;
        let mut corridor: f64 = 0.0;
        for col in at_pins.column_iter() {
            for (v, r) in col.iter().zip(values.iter()) {
                pin = pin.max((v - r).abs() / (1.0 + r.abs()));
            }
        }
        for col in at_rows.column_iter() {
            for (i, v) in col.iter().enumerate() {
                let below = (lower[i] - v) / (1.0 + lower[i].abs());
                let above = (v - upper[i]) / (1.0 + upper[i].abs());
                corridor = corridor.max(below.max(above));
            }
        }
        (pin, corridor)
    }

    /// Largest corridor violation of a path over every corridor row as given, relative to
    /// `1 + |bound|` (0 when every corridor holds).
    pub fn corridor_violation(&self, y: &[f64]) -> f64 {
        let (rows, lower, upper) = &self.every_corridor;
        let v = rows.apply(y);
        (0..v.len())
            .map(|i| {
                let below = (lower[i] - v[i]) / (1.0 + lower[i].abs());
                let above = (v[i] - upper[i]) / (1.0 + upper[i].abs());
                below.max(above).max(0.0)
            })
            .fold(0.0, f64::max)
    }
}

/// Pins, corridor rows and notes.
type RawRows = (Vec<Raw>, Vec<Raw>, Vec<String>);

/// Every pin and corridor row of `cond` as given (unit norm, with its bounds in the same
/// scaling: a pin's value twice), corridor rows bounding nothing left out with a note.
fn raw_rows(theta: &Theta, cond: &Conditions) -> Result<RawRows, ForecastError> {
    let pins: Vec<Raw> = cond
        .pins
        .iter()
        .map(|p| {
            raw(
                theta,
                &p.target,
                (p.value, p.value),
                p.label.clone(),
                &p.label,
            )
        })
        .collect::<Result<_, _>>()?;
    let mut corridor_raw = Vec::new();
    let mut notes = Vec::new();
    for c in &cond.corridors {
        if c.rows
            .iter()
            .all(|b| b.lower == f64::NEG_INFINITY && b.upper == f64::INFINITY)
        {
            notes.push(format!(
                "corridor '{}' bounds nothing (its bounds lie outside what the series can take)",
                c.label
            ));
        }
        for (k, b) in c.rows.iter().enumerate() {
            if b.lower == f64::NEG_INFINITY && b.upper == f64::INFINITY {
                continue;
            }
            if b.lower.is_nan() || b.upper.is_nan() || b.lower >= b.upper {
                return Err(ForecastError::EmptyCorridor {
                    corridor: c.row_label(k),
                });
            }
            corridor_raw.push(raw(
                theta,
                &b.target,
                (b.lower, b.upper),
                c.row_label(k),
                &c.label,
            )?);
        }
    }
    Ok((pins, corridor_raw, notes))
}

/// A condition's row on the path as given: `lower ≤ row'y ≤ upper` (a pin: equal bounds; a
/// one-sided corridor: an infinite bound), with its label.
#[derive(Debug, Clone)]
pub struct PathRow {
    pub row: DVector<f64>,
    pub lower: f64,
    pub upper: f64,
    pub label: String,
}

/// Every pin and corridor row of `cond`, none dropped or merged: the constraints of a
/// programme that deals with dependent rows itself (the reverse stress test).
pub fn path_rows(theta: &Theta, cond: &Conditions) -> Result<Vec<PathRow>, ForecastError> {
    let (pins, corridors, _) = raw_rows(theta, cond)?;
    Ok(pins
        .into_iter()
        .chain(corridors)
        .map(|r| PathRow {
            row: r.row,
            lower: r.lower,
            upper: r.upper,
            label: r.label,
        })
        .collect())
}

fn stack(
    rows: &[Raw],
    big_n: usize,
    bounds: impl Fn(&Raw) -> (f64, f64),
) -> (DMatrix<f64>, DVector<f64>, DVector<f64>) {
    let k = rows.len();
    let mut m = DMatrix::zeros(k, big_n);
    let mut lo = DVector::zeros(k);
    let mut hi = DVector::zeros(k);
    for (i, r) in rows.iter().enumerate() {
        m.set_row(i, &r.row.transpose());
        (lo[i], hi[i]) = bounds(r);
    }
    (m, lo, hi)
}

fn quoted(names: &[String]) -> String {
    names
        .iter()
        .map(|n| format!("'{n}'"))
        .collect::<Vec<_>>()
        .join(", ")
}
