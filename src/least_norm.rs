//! The point of least Euclidean norm in a polyhedron: minimise `½‖x‖²` subject to equalities
//! `a'x = b` and inequalities `l ≤ a'x ≤ u` — the most plausible structural shocks that meet
//! a reverse stress test's outcomes together with the scenario's pins and corridors.
//!
//! The dual active-set method of Goldfarb and Idnani (1983) for a strictly convex quadratic
//! programme, here with the identity as the Hessian: start from the unconstrained minimum
//! `x = 0`; take the most violated constraint; move `x` along its normal's part orthogonal to
//! the active constraints' normals until it holds, dropping an active inequality whose
//! multiplier would turn negative on the way; repeat until none is violated. Every step keeps
//! the active constraints' multipliers feasible for the dual, so the answer is optimal when
//! it is feasible, and a constraint that cannot be met with the active ones (its normal in
//! their span and no multiplier to give way) shows the programme infeasible. Equalities are
//! taken first and never dropped. Each step works with a QR factorisation of the active
//! normals (a few tens of them), made anew.

use nalgebra::{DMatrix, DVector};

/// One constraint: `lower ≤ a'x ≤ upper` (equal bounds: an equality; an infinite bound: none).
#[derive(Debug, Clone)]
pub struct Constraint {
    pub normal: DVector<f64>,
    pub lower: f64,
    pub upper: f64,
}

/// The answer: `x`, and per constraint its multiplier (positive when it holds `x` at its
/// upper bound, negative at its lower bound, zero when it does not bind).
#[derive(Debug, Clone)]
pub struct Solution {
    pub x: DVector<f64>,
    pub multipliers: Vec<f64>,
}

impl Solution {
    /// `½‖x‖²`.
    pub fn divergence(&self) -> f64 {
        0.5 * self.x.norm_squared()
    }

    /// Constraints that bind (non-zero multiplier).
    pub fn binding(&self) -> Vec<usize> {
        (0..self.multipliers.len())
            .filter(|&i| self.multipliers[i] != 0.0)
            .collect()
    }
}

/// Why there is no answer: constraint `index` cannot hold together with those before it
/// that were active (`with`).
#[derive(Debug, Clone, PartialEq)]
pub struct Infeasible {
    pub index: usize,
    pub with: Vec<usize>,
}

/// A violation below this share of `1 + |bound|` (normals scaled to unit length) is rounding.
const TOLERANCE: f64 = 1e-10;
/// A direction shorter than this (relative to the unit normal) lies in the active span.
const IN_SPAN: f64 = 1e-12;

/// One side of a constraint, `s·a'x ≥ s·bound` with `s = ±1`.
#[derive(Debug, Clone, Copy)]
struct Side {
    constraint: usize,
    sign: f64,
    equality: bool,
}

/// Minimise `½‖x‖²` subject to `constraints` in `dim` unknowns.
pub fn least_norm(dim: usize, constraints: &[Constraint]) -> Result<Solution, Infeasible> {
    // Unit normals: tolerances then mean the same for every constraint.
    let scaled: Vec<(DVector<f64>, f64, f64)> = constraints
        .iter()
        .map(|c| {
            let norm = c.normal.norm();
            let s = if norm > 0.0 { 1.0 / norm } else { 1.0 };
            (&c.normal * s, c.lower * s, c.upper * s)
        })
        .collect();
    let bound = |side: &Side| {
        let (_, lo, hi) = &scaled[side.constraint];
        if side.sign > 0.0 { *lo } else { -*hi }
    };
    let normal = |side: &Side| &scaled[side.constraint].0 * side.sign;
    // s(x) = s·a'x − s·bound: negative when violated.
    let slack = |side: &Side, x: &DVector<f64>| normal(side).dot(x) - bound(side);
    let mut x = DVector::zeros(dim);
    let mut active: Vec<Side> = Vec::new();
    let mut u: Vec<f64> = Vec::new();
    let equalities: Vec<usize> = (0..constraints.len())
        .filter(|&i| constraints[i].lower == constraints[i].upper)
        .collect();
    let most_steps = 20 * (constraints.len() + dim) + 100;
    let mut steps = 0;
    let mut next_equality = 0;
    loop {
        // The constraint to add: the next equality (on its violated side), else the most
        // violated inequality side.
        let candidate = if next_equality < equalities.len() {
            let i = equalities[next_equality];
            next_equality += 1;
            let up = Side {
                constraint: i,
                sign: 1.0,
                equality: true,
            };
            let side = if slack(&up, &x) <= 0.0 {
                up
            } else {
                Side { sign: -1.0, ..up }
            };
            Some(side)
        } else {
            let mut worst: Option<(f64, Side)> = None;
            for (i, (_, lo, hi)) in scaled.iter().enumerate() {
                if constraints[i].lower == constraints[i].upper
                    || active.iter().any(|a| a.constraint == i)
                {
                    continue;
                }
                for (sign, b) in [(1.0, *lo), (-1.0, -*hi)] {
                    if !b.is_finite() {
                        continue;
                    }
                    let side = Side {
                        constraint: i,
                        sign,
                        equality: false,
                    };
                    let s = slack(&side, &x);
                    if s < -TOLERANCE * (1.0 + b.abs()) && worst.is_none_or(|w| s < w.0) {
                        worst = Some((s, side));
                    }
                }
            }
            worst.map(|w| w.1)
        };
        let Some(p) = candidate else {
            break;
        };
        let np = normal(&p);
        let mut up = 0.0;
        loop {
            steps += 1;
            if steps > most_steps {
                return Err(Infeasible {
                    index: p.constraint,
                    with: active.iter().map(|a| a.constraint).collect(),
                });
            }
            let (z, r) = split(&active, &np, &normal);
            let s = slack(&p, &x);
            // An equality already met (its normal in the active span): nothing to add.
            if p.equality && s.abs() <= TOLERANCE * (1.0 + bound(&p).abs()) && z.norm() <= IN_SPAN {
                break;
            }
            // The partial step: the first active inequality whose multiplier reaches zero.
            let mut t1 = f64::INFINITY;
            let mut drop = None;
            for (j, a) in active.iter().enumerate() {
                if !a.equality && r[j] > 0.0 {
                    let t = u[j] / r[j];
                    if t < t1 {
                        (t1, drop) = (t, Some(j));
                    }
                }
            }
            // The full step: the constraint holds exactly.
            let zz = z.norm_squared();
            let t2 = if z.norm() > IN_SPAN {
                -s / zz
            } else {
                f64::INFINITY
            };
            let t = t1.min(t2);
            if !t.is_finite() {
                return Err(Infeasible {
                    index: p.constraint,
                    with: active.iter().map(|a| a.constraint).collect(),
                });
            }
            if t2.is_finite() {
                x += &z * t;
            }
            for (uj, rj) in u.iter_mut().zip(r.iter()) {
                *uj -= t * rj;
            }
            up += t;
            if t2 <= t1 {
                active.push(p);
                u.push(up);
                break;
            }
            if let Some(k) = drop {
                active.remove(k);
                u.remove(k);
            }
        }
    }
    let mut multipliers = vec![0.0; constraints.len()];
    for (a, m) in active.iter().zip(&u) {
        // A side s·a'x ≥ s·bound with multiplier m pushes along s·a: upper bounds positive.
        let norm = constraints[a.constraint].normal.norm();
        multipliers[a.constraint] = -a.sign * m / if norm > 0.0 { norm } else { 1.0 };
    }
    Ok(Solution { x, multipliers })
}

/// `z = (I − N N⁺) n_p` (the part of `n_p` orthogonal to the active normals `N`) and
/// `r = N⁺ n_p`, by a QR factorisation of `N`.
fn split(
    active: &[Side],
    np: &DVector<f64>,
    normal: &impl Fn(&Side) -> DVector<f64>,
) -> (DVector<f64>, DVector<f64>) {
    if active.is_empty() {
        return (np.clone(), DVector::zeros(0));
    }
    let cols: Vec<DVector<f64>> = active.iter().map(normal).collect();
    let n = DMatrix::from_columns(&cols);
    let qr = n.qr();
    let (q, r) = (qr.q(), qr.r());
    let coef = q.transpose() * np;
    let z = np - &q * &coef;
    let r = r
        .solve_upper_triangular(&coef)
        .unwrap_or_else(|| DVector::from_element(active.len(), f64::NAN));
    (z, r)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(normal: &[f64], lower: f64, upper: f64) -> Constraint {
        Constraint {
            normal: DVector::from_column_slice(normal),
            lower,
            upper,
        }
    }

    /// Closed forms: the projection of 0 on a half-space `a'x ≥ b` (b > 0) is `a b/‖a‖²`
    /// with multiplier `−b/‖a‖²`; on a box it is the box's nearest corner coordinates; a
    /// half-space already holding at 0 adds nothing.
    #[test]
    fn projections_have_their_closed_forms() {
        let a = [3.0, 4.0];
        let s = least_norm(2, &[c(&a, 10.0, f64::INFINITY)]).unwrap();
        assert!((s.x[0] - 1.2).abs() < 1e-14 && (s.x[1] - 1.6).abs() < 1e-14);
        assert!((s.multipliers[0] + 10.0 / 25.0).abs() < 1e-14);
        let s = least_norm(
            3,
            &[
                c(&[1.0, 0.0, 0.0], 2.0, 5.0),
                c(&[0.0, 1.0, 0.0], -4.0, -1.0),
                c(&[0.0, 0.0, 1.0], -1.0, 1.0),
            ],
        )
        .unwrap();
        assert_eq!(s.x.as_slice(), &[2.0, -1.0, 0.0]);
        assert_eq!(s.binding(), vec![0, 1]);
        assert!(s.multipliers[0] < 0.0 && s.multipliers[1] > 0.0);
        let s = least_norm(2, &[c(&a, -1.0, 1.0)]).unwrap();
        assert_eq!(s.x.norm(), 0.0);
    }

    /// An equality and an inequality that pushes against it: the answer is the KKT point,
    /// checked by its conditions (feasible, stationary `x = Σ λ_i a_i`, signs right); a
    /// redundant equality is accepted; inconsistent ones are named.
    #[test]
    fn equalities_and_inequalities_together() {
        let cons = [
            c(&[1.0, 1.0, 0.0], 1.0, 1.0),
            c(&[1.0, -1.0, 1.0], 2.0, f64::INFINITY),
            c(&[2.0, 2.0, 0.0], 2.0, 2.0),
        ];
        let s = least_norm(3, &cons).unwrap();
        let mut grad = s.x.clone();
        for (k, con) in cons.iter().enumerate() {
            grad -= &con.normal * (-s.multipliers[k]);
        }
        assert!(grad.amax() < 1e-12, "{grad}");
        assert!((s.x[0] + s.x[1] - 1.0).abs() < 1e-12);
        assert!(s.x[0] - s.x[1] + s.x[2] >= 2.0 - 1e-12);
        assert!(s.multipliers[1] < 0.0);
        let bad = least_norm(
            2,
            &[c(&[1.0, 1.0], 1.0, 1.0), c(&[1.0, 1.0], 3.0, f64::INFINITY)],
        )
        .unwrap_err();
        assert_eq!(bad.index, 1);
        let bad = least_norm(2, &[c(&[1.0, 1.0], 1.0, 1.0), c(&[2.0, 2.0], 3.0, 3.0)]).unwrap_err();
        assert_eq!(bad.index, 1);
    }
}
