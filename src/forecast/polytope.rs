//! Can dependent corridors hold together? (ALGORITHMS §6.4.) The kept corridor quantities
//! `z` lie in the box `[a, b]`; each dependent row adds `a_s ≤ α_s'z + c_s ≤ b_s`. The set
//! has positive probability under any Gaussian with nonsingular covariance exactly when it
//! has an interior, which a small linear programme decides: maximise the margin `t ∈ [0, 1]`
//! by which every finite bound can be met (each row's margin scaled by its norm). An
//! infeasible programme or a margin of (numerically) zero is a clash.

use microlp::{ComparisonOp, OptimizationDirection, Problem};
use nalgebra::DVector;

use super::rows::Extra;

/// The margin must exceed this, with every quantity rescaled by `1 + |largest finite bound|`
/// (the programme itself meets its constraints to an absolute 1e−7).
const INTERIOR: f64 = 1e-6;

/// True when the box cut by the extra rows has an interior.
pub fn has_interior(lower: &DVector<f64>, upper: &DVector<f64>, extra: &[Extra]) -> bool {
    // Rescale z' = z / s so that the margin (capped at 1) is on the scale of the bounds.
    let finite = |v: f64| if v.is_finite() { v.abs() } else { 0.0 };
    let s = 1.0
        + lower
            .iter()
            .chain(upper.iter())
            .copied()
            .chain(
                extra
                    .iter()
                    .flat_map(|e| [e.lower - e.offset, e.upper - e.offset]),
            )
            .map(finite)
            .fold(0.0, f64::max);
    let mut lp = Problem::new(OptimizationDirection::Maximize);
    let t = lp.add_var(1.0, (0.0, 1.0));
    let z: Vec<_> = (0..lower.len())
        .map(|_| lp.add_var(0.0, (f64::NEG_INFINITY, f64::INFINITY)))
        .collect();
    let bound = |lp: &mut Problem, terms: Vec<(microlp::Variable, f64)>, lo: f64, hi: f64| {
        let norm = terms.iter().map(|(_, a)| a * a).sum::<f64>().sqrt();
        if lo.is_finite() {
            let mut row = terms.clone();
            row.push((t, -norm));
            lp.add_constraint(row.as_slice(), ComparisonOp::Ge, lo / s);
        }
        if hi.is_finite() {
            let mut row = terms;
            row.push((t, norm));
            lp.add_constraint(row.as_slice(), ComparisonOp::Le, hi / s);
        }
    };
    for k in 0..lower.len() {
        bound(&mut lp, vec![(z[k], 1.0)], lower[k], upper[k]);
    }
    for e in extra {
        let terms: Vec<_> = (0..z.len())
            .filter(|&k| e.alpha[k] != 0.0)
            .map(|k| (z[k], e.alpha[k]))
            .collect();
        bound(&mut lp, terms, e.lower - e.offset, e.upper - e.offset);
    }
    match lp.solve().map(|o| o.into_solution()) {
        Ok(Ok(solution)) => solution.objective() > INTERIOR,
        _ => false,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn extra(alpha: &[f64], lower: f64, upper: f64) -> Extra {
        Extra {
            alpha: DVector::from_column_slice(alpha),
            offset: 0.0,
            lower,
            upper,
            label: String::new(),
        }
    }

    /// `z₁, z₂ ∈ [0, 1]` with `z₁ + z₂` in `[0.5, 1.5]` (interior), in `[2, 3]` (only the corner
    /// (1, 1): no interior) and in `[2.5, 3]` (empty).
    #[test]
    fn interior_corner_and_empty() {
        let lo = DVector::from_column_slice(&[0.0, 0.0]);
        let hi = DVector::from_column_slice(&[1.0, 1.0]);
        assert!(has_interior(&lo, &hi, &[extra(&[1.0, 1.0], 0.5, 1.5)]));
        assert!(!has_interior(&lo, &hi, &[extra(&[1.0, 1.0], 2.0, 3.0)]));
        assert!(!has_interior(&lo, &hi, &[extra(&[1.0, 1.0], 2.5, 3.0)]));
        // Open sides: z₁ ≥ 5 with z₁ − z₂ ≤ 1 and z₂ ≤ 4 is empty; with z₂ ≤ 4.5 it is not.
        let lo = DVector::from_column_slice(&[5.0, f64::NEG_INFINITY]);
        let hi = DVector::from_column_slice(&[f64::INFINITY, 4.0]);
        assert!(!has_interior(
            &lo,
            &hi,
            &[extra(&[1.0, -1.0], f64::NEG_INFINITY, 1.0)]
        ));
        let hi = DVector::from_column_slice(&[f64::INFINITY, 4.5]);
        assert!(has_interior(
            &lo,
            &hi,
            &[extra(&[1.0, -1.0], f64::NEG_INFINITY, 1.0)]
        ));
    }

    /// The verdict does not depend on the units: the same sets scaled by 1e7.
    #[test]
    fn scale_invariant() {
        let k = 1e7;
        let lo = DVector::from_column_slice(&[0.0, 0.0]);
        let hi = DVector::from_column_slice(&[k, k]);
        assert!(has_interior(
            &lo,
            &hi,
            &[extra(&[1.0, 1.0], 0.5 * k, 1.5 * k)]
        ));
        assert!(!has_interior(
            &lo,
            &hi,
            &[extra(&[1.0, 1.0], 2.0 * k, 3.0 * k)]
        ));
    }
}
