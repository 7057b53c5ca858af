//! The minimax saddle point of Botev (2017), ALGORITHMS §7.3–7.5.
//!
//! With the ordered, scaled factor (`L̃`, bounds `l̃`, `ũ`, see [`super::reorder`]) and a tilting
//! vector `μ` (`μ_d = 0`), the log ratio of target to proposal is
//!
//! `ψ(x; μ) = Σ_k [ ln(Φ(β_k) − Φ(α_k)) + ½ μ_k² − μ_k x_k ]`,
//! `α_k = l̃_k − c_k − μ_k`, `β_k = ũ_k − c_k − μ_k`, `c_k = Σ_{j<k} L̃_kj x_j`.
//!
//! It depends on `v = (x_1..x_{d−1}, μ_1..μ_{d−1})`. With `P_k` the mean of `N(0,1)` on
//! `[α_k, β_k]` and `Δ_k` its variance minus one, the gradient is
//! `∂ψ/∂μ_k = P_k + μ_k − x_k`, `∂ψ/∂x_j = (L̃'P)_j − μ_j`, and the Hessian has blocks
//! `U_xx = [L̃'ΔL̃]₁₁`, `U_μx = [ΔL̃ − I]₁₁`, `U_μμ = diag(1 + Δ)`. `ψ` is concave in `x` and
//! convex in `μ`; `μ* = argmin_μ max_x ψ` is found by damped Newton on `∇ψ = 0` (Schur
//! complement on the `x` block), with Levenberg–Marquardt as the fallback and `μ = 0` as the
//! last resort (still exact, with `ψ* = 0` as the bound; Genz 1992 efficiency).

use nalgebra::{DMatrix, DVector};

use super::{reorder::Ordered, univariate};
use crate::forecast::product::{cholesky, gram};

/// Stop when `‖∇ψ‖_∞` is below this.
const GRAD_TOL: f64 = 1e-10;
/// Accept a stalled iteration whose gradient is below this (ALGORITHMS §7.5, step 4).
const GRAD_ACCEPT: f64 = 1e-6;
/// A step shorter than this (relative to `1 + ‖v‖_∞`) counts as stalled.
const STEP_TOL: f64 = 1e-13;
const NEWTON_ITERATIONS: usize = 100;
const LM_ITERATIONS: usize = 50;
/// Armijo constant of the line search on `Θ = ½‖∇ψ‖²`.
const ARMIJO: f64 = 2e-4;
/// Smallest line-search step, `2⁻²⁰`.
const MIN_STEP: f64 = 9.5367431640625e-7;
/// Newton steps polishing `x` at the final `μ`.
const POLISH_ITERATIONS: usize = 20;
/// Rounding allowance added to `ψ*` (relative to `1 + |ψ*|`): far above the rounding of a sum
/// of `d` logarithms, far below anything that would change the acceptance rate.
const PSI_ALLOWANCE: f64 = 1e-12;
/// Below this, `1 + Δ_k` is too small for the Schur route: solve the full system instead.
const NARROW: f64 = 1e-10;

/// How the saddle point was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SolveStatus {
    /// Newton (or Levenberg–Marquardt) reached `‖∇ψ‖_∞ ≤ 1e−10`, or stalled below `1e−6`.
    Converged { iterations: usize },
    /// No saddle point found: `μ = 0` and `ψ* = 0` (exact but slow sampling).
    Fallback,
}

/// The tilting: `μ` (length d, last entry 0), the bound `ψ*`, and how it was found.
#[derive(Debug, Clone)]
pub struct Tilt {
    pub mu: Vec<f64>,
    /// The saddle point's `x` (length d−1), kept to warm-start a nearby problem.
    pub x: Vec<f64>,
    pub psi_star: f64,
    pub status: SolveStatus,
}

/// `ψ`, its gradient `(g_x, g_μ)` and the truncated moments at `v = (x, μ)`.
struct Eval {
    psi: f64,
    grad: DVector<f64>,
    /// `1 + Δ_k`, the truncated variance, k = 0..d.
    var: Vec<f64>,
}

fn evaluate(o: &Ordered, lo: &[f64], hi: &[f64], v: &DVector<f64>) -> Eval {
    let d = o.dim();
    let m = d - 1;
    let (x, mu) = (&v.as_slice()[..m], &v.as_slice()[m..]);
    let mut psi = 0.0;
    let mut mean = vec![0.0; d];
    let mut var = vec![0.0; d];
    for k in 0..d {
        let c = o.shift(k, x);
        let mk = if k < m { mu[k] } else { 0.0 };
        let (a, b) = (lo[k] - c - mk, hi[k] - c - mk);
        let lp;
        (lp, mean[k], var[k]) = univariate::ln_prob_mean_var(a, b);
        psi += lp;
        if k < m {
            psi += 0.5 * mk * mk - mk * x[k];
        }
    }
    let mut grad = DVector::zeros(2 * m);
    for j in 0..m {
        let lp: f64 = (j + 1..d).map(|k| o.lt[(k, j)] * mean[k]).sum();
        grad[j] = lp - mu[j];
        grad[m + j] = mean[j] + mu[j] - x[j];
    }
    Eval { psi, grad, var }
}

/// `W'W = −U_xx = −[L̃'ΔL̃]₁₁` with `W = diag(√−Δ) L̃[:, :m]` (−1 < Δ ≤ 0): the x block of
/// the Hessian, negated.
fn minus_xx(o: &Ordered, var: &[f64]) -> DMatrix<f64> {
    let scale: Vec<f64> = var.iter().map(|v| (1.0 - v).max(0.0).sqrt()).collect();
    lower_gram(o, &scale, 0.0)
}

/// `B'B` for `B = diag(s) (L̃ + c E)[:, :m]` (d × m, `E` the unit diagonal): column a of `B`
/// is zero above row a, so with its rows reversed `B'B` is a staircase Gram product.
fn lower_gram(o: &Ordered, s: &[f64], c: f64) -> DMatrix<f64> {
    let (d, m) = (o.dim(), o.dim() - 1);
    let reversed = DMatrix::from_fn(d, m, |r, a| {
        let k = d - 1 - r;
        s[k] * if a == k { c } else { o.lt[(k, a)] }
    });
    let reach: Vec<usize> = (0..m).map(|a| d - a).collect();
    gram(&reversed, &reach)
}

/// `U_μx = [ΔL̃ − I]₁₁` (m × m, lower triangular with −1 on the diagonal).
fn mu_x(o: &Ordered, var: &[f64]) -> DMatrix<f64> {
    let m = o.dim() - 1;
    DMatrix::from_fn(m, m, |k, c| match c.cmp(&k) {
        std::cmp::Ordering::Less => (var[k] - 1.0) * o.lt[(k, c)],
        std::cmp::Ordering::Equal => -1.0,
        std::cmp::Ordering::Greater => 0.0,
    })
}

/// The full Hessian `J` of `ψ` in `v = (x, μ)`, from its blocks (for the LU and
/// Levenberg–Marquardt routes; Newton's usual route needs the blocks alone).
fn hessian(o: &Ordered, var: &[f64]) -> DMatrix<f64> {
    let m = o.dim() - 1;
    let mut j = DMatrix::zeros(2 * m, 2 * m);
    j.view_mut((0, 0), (m, m)).copy_from(&(-minus_xx(o, var)));
    let umx = mu_x(o, var);
    j.view_mut((m, 0), (m, m)).copy_from(&umx);
    j.view_mut((0, m), (m, m)).copy_from(&umx.transpose());
    for k in 0..m {
        j[(m + k, m + k)] = var[k];
    }
    j
}

/// Newton direction `δ` solving `J δ = −g`. The usual route is the Schur complement on the
/// `x` block: `(U_μx' U_μμ⁻¹ U_μx − U_xx) δ_x = g_x − U_μx' U_μμ⁻¹ g_μ`. With
/// `U_μx = Δ̂L̃ₛ − I` (`Δ̂ = diag(Δ)`, `L̃ₛ` the leading m × m block of `L̃`), `U_μμ = I + Δ̂` and
/// `−U_xx = W'W`, the complement is `B'B + I` with the rows of `B` (d × m) equal to
/// `√D_k (e_k + L̃_k)` for k < m, `D_k = −Δ_k/(1 + Δ_k)`, and `√−Δ_d L̃_d` for the last: one
/// product, never below `I`. Else the LU of `J`.
fn newton_direction(o: &Ordered, e: &Eval) -> Option<DVector<f64>> {
    let (d, m) = (o.dim(), o.dim() - 1);
    let var = &e.var;
    if var[..m].iter().all(|&v| v > NARROW) {
        let scale: Vec<f64> = (0..d)
            .map(|k| {
                let minus_delta = (1.0 - var[k]).max(0.0);
                if k < m {
                    (minus_delta / var[k]).sqrt()
                } else {
                    minus_delta.sqrt()
                }
            })
            .collect();
        let mut schur = lower_gram(o, &scale, 1.0);
        for k in 0..m {
            schur[(k, k)] += 1.0;
        }
        let (gx, gm) = (e.grad.rows(0, m), e.grad.rows(m, m));
        // w = U_μμ⁻¹ g_μ; the right side g_x − U_μx' w, column by column of L̃.
        let w: Vec<f64> = (0..m).map(|k| gm[k] / var[k]).collect();
        let rhs = DVector::from_fn(m, |c, _| {
            let below: f64 = (c + 1..m)
                .map(|k| (var[k] - 1.0) * o.lt[(k, c)] * w[k])
                .sum();
            gx[c] + w[c] - below
        });
        if let Some(chol) = cholesky(schur) {
            let dx = chol.solve(&rhs);
            // δ_μ = −U_μμ⁻¹ (g_μ + U_μx δ_x), (U_μx δ_x)_k = Δ_k (L̃ₛ δ_x)_k − δ_x,k.
            let mut step = DVector::zeros(2 * m);
            for k in 0..m {
                let u_dx = (var[k] - 1.0) * o.shift(k, dx.as_slice()) - dx[k];
                step[k] = dx[k];
                step[m + k] = -(w[k] + u_dx / var[k]);
            }
            return Some(step);
        }
    }
    hessian(o, &e.var).lu().solve(&(-&e.grad))
}

fn half_sq(g: &DVector<f64>) -> f64 {
    0.5 * g.norm_squared()
}

/// Find the saddle point, starting from whichever of `starts` (`v = (x, μ)`, length 2(d−1))
/// has the smallest gradient, the first of equals (the cold start when none is given).
pub fn solve(o: &Ordered, lo: &[f64], hi: &[f64], starts: Vec<DVector<f64>>) -> Tilt {
    let d = o.dim();
    let m = d - 1;
    let size = |e: &Eval| {
        if e.grad.iter().all(|g| g.is_finite()) {
            e.grad.amax()
        } else {
            f64::INFINITY
        }
    };
    let (mut v, mut e) = starts
        .into_iter()
        .map(|v| {
            let e = evaluate(o, lo, hi, &v);
            (v, e)
        })
        .min_by(|a, b| size(&a.1).total_cmp(&size(&b.1)))
        .unwrap_or_else(|| {
            let v = cold_start(o, lo, hi);
            let e = evaluate(o, lo, hi, &v);
            (v, e)
        });
    if m == 0 {
        return finish(o, lo, hi, v, e, 0);
    }
    for it in 0..NEWTON_ITERATIONS {
        let gmax = e.grad.amax();
        if gmax <= GRAD_TOL {
            return finish(o, lo, hi, v, e, it);
        }
        let Some(step) = newton_direction(o, &e).filter(|s| s.iter().all(|x| x.is_finite())) else {
            break;
        };
        let theta = half_sq(&e.grad);
        let mut t = 1.0;
        let accepted = loop {
            let trial = &v + &step * t;
            let et = evaluate(o, lo, hi, &trial);
            if et.grad.iter().all(|g| g.is_finite())
                && half_sq(&et.grad) <= (1.0 - ARMIJO * t) * theta
            {
                break Some((trial, et));
            }
            t *= 0.5;
            if t < MIN_STEP {
                break None;
            }
        };
        match accepted {
            Some((trial, et)) => {
                let moved = (&trial - &v).amax();
                v = trial;
                e = et;
                if moved <= STEP_TOL * (1.0 + v.amax()) && e.grad.amax() <= GRAD_ACCEPT {
                    return finish(o, lo, hi, v, e, it + 1);
                }
            }
            None if gmax <= GRAD_ACCEPT => return finish(o, lo, hi, v, e, it),
            None => break,
        }
    }
    levenberg_marquardt(o, lo, hi, v, e)
}

/// Levenberg–Marquardt on `∇ψ = 0`: `(J'J + λ I) δ = −J' g`, λ adapted to the progress.
fn levenberg_marquardt(
    o: &Ordered,
    lo: &[f64],
    hi: &[f64],
    mut v: DVector<f64>,
    mut e: Eval,
) -> Tilt {
    let m2 = v.len();
    let mut lambda = 1e-3;
    for it in 0..LM_ITERATIONS {
        if e.grad.amax() <= GRAD_TOL {
            return finish(o, lo, hi, v, e, NEWTON_ITERATIONS + it);
        }
        let jac = hessian(o, &e.var);
        let jtj = jac.transpose() * &jac;
        let jtg = jac.transpose() * &e.grad;
        let system = &jtj + DMatrix::identity(m2, m2) * (lambda * (1.0 + jtj.diagonal().amax()));
        let Some(step) = cholesky(system).map(|c| -c.solve(&jtg)) else {
            lambda *= 10.0;
            continue;
        };
        let trial = &v + &step;
        let et = evaluate(o, lo, hi, &trial);
        if et.grad.iter().all(|g| g.is_finite()) && half_sq(&et.grad) < half_sq(&e.grad) {
            v = trial;
            e = et;
            lambda = (lambda / 10.0).max(1e-12);
        } else {
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
        }
    }
    if e.grad.amax() <= GRAD_ACCEPT {
        return finish(o, lo, hi, v, e, NEWTON_ITERATIONS + LM_ITERATIONS);
    }
    Tilt {
        mu: vec![0.0; o.dim()],
        x: vec![0.0; o.dim() - 1],
        psi_star: 0.0,
        status: SolveStatus::Fallback,
    }
}

/// Polish `x` as the maximiser of the concave `ψ(·; μ*)` (Newton on the `x` block alone, with
/// a line search that must raise `ψ`), then set `ψ*` to its value plus the increase one more
/// Newton step would still promise and a rounding allowance: the accept–reject step needs
/// `ψ(w; μ*) ≤ ψ*` for every `w`, and a saddle point accepted at a gradient of 1e−6 (or found by
/// Levenberg–Marquardt) only approximates the maximiser.
/// `e` is the evaluation at `v`.
fn finish(
    o: &Ordered,
    lo: &[f64],
    hi: &[f64],
    mut v: DVector<f64>,
    mut e: Eval,
    iterations: usize,
) -> Tilt {
    let m = o.dim() - 1;
    let mut promise = 0.0;
    for _ in 0..POLISH_ITERATIONS {
        let gx = e.grad.rows(0, m).into_owned();
        let neg = minus_xx(o, &e.var);
        let ridge = 1e-12 * (1.0 + neg.diagonal().amax());
        let Some(chol) = cholesky(neg + DMatrix::identity(m, m) * ridge) else {
            break;
        };
        let step = chol.solve(&gx);
        promise = 0.5 * gx.dot(&step);
        // A gain below the rounding of ψ cannot be seen by comparing ψ: stop rather than
        // halve the step twenty times (the promise stays in the allowance below).
        if promise.is_nan()
            || promise <= PSI_ALLOWANCE * (1.0 + e.psi.abs())
            || gx.amax() <= GRAD_TOL * 1e-2
        {
            break;
        }
        let mut t = 1.0;
        let improved = loop {
            let mut trial = v.clone();
            trial.rows_mut(0, m).axpy(t, &step, 1.0);
            let et = evaluate(o, lo, hi, &trial);
            if et.psi.is_finite() && et.psi > e.psi {
                break Some((trial, et));
            }
            t *= 0.5;
            if t < MIN_STEP {
                break None;
            }
        };
        match improved {
            Some((trial, et)) => {
                v = trial;
                e = et;
            }
            None => break,
        }
    }
    // One variable: ψ does not depend on x, and ψ* = ln P exactly.
    let allowance = if m == 0 {
        0.0
    } else {
        promise.max(0.0) + PSI_ALLOWANCE * (1.0 + e.psi.abs())
    };
    let psi_star = e.psi + allowance;
    let mut mu = v.as_slice()[m..].to_vec();
    mu.push(0.0);
    Tilt {
        mu,
        x: v.as_slice()[..m].to_vec(),
        psi_star,
        status: SolveStatus::Converged { iterations },
    }
}

/// The start of ALGORITHMS §7.5: `x = z` (sequential truncated means), `μ = 0`, where the
/// `μ` part of the gradient vanishes.
pub fn cold_start(o: &Ordered, lo: &[f64], hi: &[f64]) -> DVector<f64> {
    let m = o.dim().saturating_sub(1);
    let z = o.truncated_means(lo, hi);
    let mut v = DVector::zeros(2 * m);
    v.rows_mut(0, m).copy_from_slice(&z[..m]);
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::truncnorm::reorder::reorder;

    fn problem(d: usize) -> (Ordered, Vec<f64>, Vec<f64>) {
        let g = DMatrix::from_fn(d, d, |i, j| ((i * 5 + j * 11) as f64 * 0.29).cos());
        let sigma = &g * g.transpose() + DMatrix::identity(d, d);
        let lower: Vec<f64> = (0..d).map(|i| 0.5 + 0.2 * i as f64).collect();
        let upper: Vec<f64> = (0..d)
            .map(|i| {
                if i % 2 == 0 {
                    f64::INFINITY
                } else {
                    4.0 + i as f64
                }
            })
            .collect();
        let o = reorder(&sigma, &lower, &upper).unwrap();
        let (lo, hi) = o.scale_bounds(&lower, &upper);
        (o, lo, hi)
    }

    /// The analytic gradient and Hessian match central finite differences of `ψ` (and of the
    /// gradient), as ALGORITHMS §7.4 records for its derivation.
    #[test]
    fn derivatives_match_finite_differences() {
        let (o, lo, hi) = problem(6);
        let m = 5;
        let v = DVector::from_fn(2 * m, |i, _| 0.3 + 0.1 * (i as f64).sin());
        let e = evaluate(&o, &lo, &hi, &v);
        let jac = hessian(&o, &e.var);
        let h = 1e-6;
        for i in 0..2 * m {
            let mut vp = v.clone();
            let mut vm = v.clone();
            vp[i] += h;
            vm[i] -= h;
            let (ep, em) = (evaluate(&o, &lo, &hi, &vp), evaluate(&o, &lo, &hi, &vm));
            let fd = (ep.psi - em.psi) / (2.0 * h);
            assert!(
                (fd - e.grad[i]).abs() < 1e-7,
                "gradient {i}: {fd} vs {}",
                e.grad[i]
            );
            for r in 0..2 * m {
                let fd = (ep.grad[r] - em.grad[r]) / (2.0 * h);
                assert!(
                    (fd - jac[(r, i)]).abs() < 1e-6,
                    "J[{r},{i}]: {fd} vs {}",
                    jac[(r, i)]
                );
            }
        }
    }

    /// The Schur route's direction solves the full Newton system `J δ = −g` (LU of the `J`
    /// built from its blocks, itself checked against finite differences above).
    #[test]
    fn schur_direction_solves_the_full_system() {
        let (o, lo, hi) = problem(9);
        let m = 8;
        for shift in [0.0, 0.4, -0.7] {
            let v = DVector::from_fn(2 * m, |i, _| shift + 0.2 * (i as f64 * 1.3).cos());
            let e = evaluate(&o, &lo, &hi, &v);
            assert!(e.var[..m].iter().all(|&v| v > NARROW));
            let fast = newton_direction(&o, &e).unwrap();
            let full = hessian(&o, &e.var).lu().solve(&(-&e.grad)).unwrap();
            let size = 1.0 + full.amax();
            assert!(
                (&fast - &full).amax() < 1e-10 * size,
                "{fast} against {full}"
            );
        }
    }

    /// At the start `x = z, μ = 0` the μ part of the gradient is zero; Newton converges in a
    /// handful of iterations and `ψ(·; μ*)` is maximal at `x*`.
    #[test]
    fn newton_converges_to_the_saddle_point() {
        let (o, lo, hi) = problem(8);
        let m = 7;
        let start = cold_start(&o, &lo, &hi);
        let e0 = evaluate(&o, &lo, &hi, &start);
        assert!(e0.grad.rows(m, m).amax() < 1e-12);
        let tilt = solve(&o, &lo, &hi, vec![start]);
        let SolveStatus::Converged { iterations } = tilt.status else {
            panic!("no convergence")
        };
        assert!(iterations <= 20, "{iterations} iterations");
        // Perturbing x lowers ψ (concave in x), perturbing μ raises max_x ψ is not checked here;
        // the maximum over x at μ* is ψ*.
        let mut v = DVector::zeros(2 * m);
        v.rows_mut(0, m).copy_from_slice(&tilt.x);
        v.rows_mut(m, m).copy_from_slice(&tilt.mu[..m]);
        for i in 0..m {
            for step in [-0.1, 0.1] {
                let mut w = v.clone();
                w[i] += step;
                assert!(evaluate(&o, &lo, &hi, &w).psi <= tilt.psi_star + 1e-12);
            }
        }
    }

    /// The Levenberg–Marquardt fallback, started away from the saddle point, reaches the same
    /// point as Newton.
    #[test]
    fn levenberg_marquardt_finds_the_same_saddle_point() {
        let (o, lo, hi) = problem(5);
        let newton = solve(&o, &lo, &hi, vec![cold_start(&o, &lo, &hi)]);
        let start = DVector::from_element(8, 0.7);
        let e = evaluate(&o, &lo, &hi, &start);
        let lm = levenberg_marquardt(&o, &lo, &hi, start, e);
        assert!(matches!(lm.status, SolveStatus::Converged { .. }));
        assert!((lm.psi_star - newton.psi_star).abs() < 1e-9);
        for (a, b) in lm.mu.iter().zip(&newton.mu) {
            assert!((a - b).abs() < 1e-6);
        }
    }
}
