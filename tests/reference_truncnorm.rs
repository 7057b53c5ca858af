//! The truncated multivariate normal (minimax tilting) against outside references:
//! closed-form orthant probabilities, and fixtures made with scipy and numpy by
//! `tests/fixtures/make_truncnorm.py` (general boxes; Tallis 1961 moments; large
//! acceptance–rejection samples).

mod common;

use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde_json::Value;
use tiltyard::truncnorm::{SolveStatus, TruncatedNormal};

const INF: f64 = f64::INFINITY;
/// Estimates must lie within this many of their own reported standard errors of the truth
/// (ALGORITHMS §11.4), combined with the reference's error where it has one.
const SE: f64 = 4.0;
/// Sampled moments against references: 4 standard errors for means, 5 for covariances.
const MEAN_SE: f64 = 4.0;
const COV_SE: f64 = 5.0;
/// `e^{ψ*}` must bound the true probability; the reference's own rounding is far below this.
const BOUND_SLACK: f64 = 1e-9;

fn rng(seed: u64) -> ChaCha8Rng {
    ChaCha8Rng::seed_from_u64(seed)
}

/// Check `ℓ̂` against a true value `p` (with its own standard error `p_se`, 0 for closed
/// forms) and the bound `ψ* ≥ ln p`.
fn check_probability(name: &str, tn: &TruncatedNormal, p: f64, p_se: f64, seed: u64) {
    let est = tn.probability(&mut rng(seed), 20_000);
    let got = est.ln.exp();
    let se = (est.rel_err * got).hypot(p_se);
    assert!(
        (got - p).abs() <= SE * se,
        "{name}: estimate {got:e} (rel. err. {:.2e}), true {p:e}",
        est.rel_err
    );
    assert!(
        est.ln_bound >= p.ln() - BOUND_SLACK,
        "{name}: bound e^ψ* = {:e} below the true {p:e}",
        est.ln_bound.exp()
    );
    assert!(
        matches!(tn.status(), SolveStatus::Converged { .. }),
        "{name}: saddle point"
    );
}

fn unit_correlation(d: usize, rho: f64) -> DMatrix<f64> {
    DMatrix::from_fn(d, d, |i, j| if i == j { 1.0 } else { rho })
}

/// Sheppard's formula: `P(X₁ > 0, X₂ > 0) = 1/4 + arcsin(ρ)/(2π)`; and its trivariate
/// extension `1/8 + (arcsin ρ₁₂ + arcsin ρ₁₃ + arcsin ρ₂₃)/(4π)` (ALGORITHMS §7.10; both are
/// classical closed forms, values recomputed here from the formula).
#[test]
fn orthants_in_two_and_three_dimensions() {
    for rho in [0.6, -0.8, 0.95] {
        let tn = TruncatedNormal::new(&unit_correlation(2, rho), &[0.0; 2], &[INF; 2]).unwrap();
        let p = 0.25 + rho.asin() / (2.0 * std::f64::consts::PI);
        check_probability(&format!("bivariate ρ={rho}"), &tn, p, 0.0, 1);
    }
    let (r12, r13, r23) = (0.3, -0.2, 0.5);
    let sigma = DMatrix::from_row_slice(3, 3, &[1.0, r12, r13, r12, 1.0, r23, r13, r23, 1.0]);
    let tn = TruncatedNormal::new(&sigma, &[0.0; 3], &[INF; 3]).unwrap();
    let p = 0.125 + (r12.asin() + r13.asin() + r23.asin()) / (4.0 * std::f64::consts::PI);
    check_probability("trivariate", &tn, p, 0.0, 2);
}

/// Equicorrelated `ρ = ½`: `P(all X_i > 0) = 1/(d+1)` (write `X_i = (V_i − V_0)/√2` with i.i.d.
/// `V`; ALGORITHMS §7.10), for d up to 100.
#[test]
fn equicorrelated_orthant_up_to_100_dimensions() {
    for d in [2, 10, 50, 100] {
        let tn =
            TruncatedNormal::new(&unit_correlation(d, 0.5), &vec![0.0; d], &vec![INF; d]).unwrap();
        check_probability(
            &format!("d={d}"),
            &tn,
            1.0 / (d as f64 + 1.0),
            0.0,
            d as u64,
        );
    }
}

/// Far tail: `P(all X_i > 3)`, d = 10, ρ = ½, equals `∫ φ(t) Φ̄((3 − √ρ t)/√(1−ρ))^10 dt`
/// = 1.3613003742765623e−7 (ALGORITHMS §7.10; re-evaluated with mpmath quadrature at 30
/// digits: 1.36130037427656229751e−7).
#[test]
fn far_tail_orthant() {
    let tn = TruncatedNormal::new(&unit_correlation(10, 0.5), &[3.0; 10], &[INF; 10]).unwrap();
    let exact = 1.3613003742765623e-7_f64;
    check_probability("far tail", &tn, exact, 0.0, 3);
    // ψ* bounds ln ℓ from above (Botev 2017, Theorem 1), so the exact sampler's acceptance
    // rate is ℓ e^{−ψ*} ≤ 1 with ℓ known here; the estimate of that rate must agree within
    // four of its standard errors.
    assert!(
        tn.ln_bound() >= exact.ln(),
        "ψ* = {} below ln ℓ",
        tn.ln_bound()
    );
    let want = (exact.ln() - tn.ln_bound()).exp();
    let est = tn.probability(&mut rng(4), 5_000);
    assert!(
        (est.acceptance() - want).abs() <= 4.0 * est.rel_err * want,
        "acceptance {} against {want}",
        est.acceptance()
    );
}

/// One dimension: `P = Φ(b) − Φ(a)` exactly, and `ψ*` equals it.
#[test]
fn one_dimension_is_exact() {
    let sigma = DMatrix::from_element(1, 1, 4.0);
    let tn = TruncatedNormal::new(&sigma, &[-1.0], &[3.0]).unwrap();
    let p = tiltyard::truncnorm::ln_prob(-0.5, 1.5);
    assert!((tn.ln_bound() - p).abs() < 1e-14);
    let est = tn.probability(&mut rng(5), 100);
    assert!((est.ln - p).abs() < 1e-14 && est.rel_err < 1e-14);
}

fn bounds(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap_or(f64::NAN))
        .collect()
}

/// The fixture writes `null` for an infinite bound.
fn box_of(case: &Value) -> (DVector<f64>, DMatrix<f64>, Vec<f64>, Vec<f64>) {
    let mean = common::vector(&case["mean"]);
    let sigma = common::matrix(&case["sigma"]);
    let lower: Vec<f64> = bounds(&case["lower"])
        .iter()
        .zip(mean.iter())
        .map(|(l, m)| if l.is_nan() { -INF } else { l - m })
        .collect();
    let upper: Vec<f64> = bounds(&case["upper"])
        .iter()
        .zip(mean.iter())
        .map(|(u, m)| if u.is_nan() { INF } else { u - m })
        .collect();
    (mean, sigma, lower, upper)
}

/// General boxes against scipy's multivariate normal distribution function (quasi-Monte
/// Carlo, Genz's method, averaged over seeds; `truncnorm_boxes.json`).
#[test]
fn general_boxes_against_scipy() {
    let fx = common::json("truncnorm_boxes.json");
    for (i, case) in fx["cases"].as_array().unwrap().iter().enumerate() {
        let (_, sigma, lower, upper) = box_of(case);
        let tn = TruncatedNormal::new(&sigma, &lower, &upper).unwrap();
        let p = case["prob"].as_f64().unwrap();
        let p_se = case["prob_se"].as_f64().unwrap();
        check_probability(case["name"].as_str().unwrap(), &tn, p, p_se, 100 + i as u64);
    }
}

/// Sample mean and covariance of `n` exact draws (mean added back).
fn sample_moments(
    mean: &DVector<f64>,
    tn: &TruncatedNormal,
    n: usize,
    seed: u64,
) -> (DVector<f64>, DMatrix<f64>) {
    let d = mean.len();
    let mut r = rng(seed);
    let draws: Vec<DVector<f64>> = (0..n)
        .map(|_| DVector::from_vec(tn.sample(&mut r, 1_000_000).unwrap()) + mean)
        .collect();
    let m = draws.iter().fold(DVector::zeros(d), |a, x| a + x) / n as f64;
    let mut c = DMatrix::zeros(d, d);
    for x in &draws {
        let e = x - &m;
        c += &e * e.transpose();
    }
    (m, c / (n as f64 - 1.0))
}

/// Sampled moments against references within `MEAN_SE`/`COV_SE` standard errors. The
/// standard errors are those of our own sample (from the reference's sd and the exact
/// variance-of-a-product formula) combined with the reference's (`ref_se`, if Monte Carlo).
fn check_moments(
    name: &str,
    got: (&DVector<f64>, &DMatrix<f64>),
    want: (&DVector<f64>, &DMatrix<f64>),
    ref_se: Option<(&DVector<f64>, &DMatrix<f64>)>,
    n: usize,
) {
    let (gm, gc) = got;
    let (wm, wc) = want;
    let d = wm.len();
    let nf = n as f64;
    for i in 0..d {
        let mut se = (wc[(i, i)] / nf).sqrt();
        if let Some((ms, _)) = ref_se {
            se = se.hypot(ms[i]);
        }
        assert!(
            (gm[i] - wm[i]).abs() <= MEAN_SE * se,
            "{name}: mean[{i}] {} vs {} (s.e. {se:e})",
            gm[i],
            wm[i]
        );
        for j in 0..=i {
            // s.e. of a covariance ≈ sqrt((σ_ii σ_jj + σ_ij²)/n) (ALGORITHMS §11.4).
            let mut se = ((wc[(i, i)] * wc[(j, j)] + wc[(i, j)].powi(2)) / nf).sqrt();
            if let Some((_, cs)) = ref_se {
                se = se.hypot(cs[(i, j)]);
            }
            assert!(
                (gc[(i, j)] - wc[(i, j)]).abs() <= COV_SE * se,
                "{name}: cov[{i},{j}] {} vs {} (s.e. {se:e})",
                gc[(i, j)],
                wc[(i, j)]
            );
        }
    }
}

/// One-sided truncation: closed-form moments (Tallis 1961) computed with scipy.
#[test]
fn moments_against_tallis() {
    let fx = common::json("truncnorm_moments.json");
    for (i, case) in fx["tallis"].as_array().unwrap().iter().enumerate() {
        let (mean, sigma, lower, upper) = box_of(case);
        let tn = TruncatedNormal::new(&sigma, &lower, &upper).unwrap();
        let n = 40_000;
        let (m, c) = sample_moments(&mean, &tn, n, 200 + i as u64);
        let want_m = common::vector(&case["trunc_mean"]);
        let want_c = common::matrix(&case["trunc_cov"]);
        check_moments(
            case["name"].as_str().unwrap(),
            (&m, &c),
            (&want_m, &want_c),
            None,
            n,
        );
    }
}

/// Loose boxes: moments of a large numpy acceptance–rejection sample.
#[test]
fn moments_against_rejection_sampling() {
    let fx = common::json("truncnorm_moments.json");
    for (i, case) in fx["rejection"].as_array().unwrap().iter().enumerate() {
        let (mean, sigma, lower, upper) = box_of(case);
        let tn = TruncatedNormal::new(&sigma, &lower, &upper).unwrap();
        let n = 40_000;
        let (m, c) = sample_moments(&mean, &tn, n, 300 + i as u64);
        let want_m = common::vector(&case["trunc_mean"]);
        let want_c = common::matrix(&case["trunc_cov"]);
        let se_m = common::vector(&case["mean_se"]);
        let se_c = common::matrix(&case["cov_se"]);
        check_moments(
            case["name"].as_str().unwrap(),
            (&m, &c),
            (&want_m, &want_c),
            Some((&se_m, &se_c)),
            n,
        );
        // Every draw lies in the box.
        let mut r = rng(400 + i as u64);
        for _ in 0..2_000 {
            let x = tn.sample(&mut r, 1_000_000).unwrap();
            assert!(x.iter().zip(&lower).all(|(x, l)| x >= l));
            assert!(x.iter().zip(&upper).all(|(x, u)| x <= u));
        }
    }
}

/// Far boxes under an equicorrelated normal against mpmath (`boxes` in tails.json: a
/// one-dimensional integral at 50 digits): the d = 10, ρ = ½ orthant beyond 3, and a 3-d box
/// 40 standard deviations out (probability ≈ 10^−611). The estimate is within its error, the
/// bound holds, and every draw lies in the box.
#[test]
fn far_boxes_against_mpmath() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/tails.json");
    let json: Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let num = |v: &Value| -> f64 { v.as_str().unwrap().parse().unwrap() };
    for (i, row) in json["boxes"].as_array().unwrap().iter().enumerate() {
        let rho = num(&row[0]);
        let lower: Vec<f64> = row[1].as_array().unwrap().iter().map(num).collect();
        let upper: Vec<f64> = row[2].as_array().unwrap().iter().map(num).collect();
        let want = num(&row[3]);
        let tn = TruncatedNormal::new(&unit_correlation(lower.len(), rho), &lower, &upper).unwrap();
        assert!(matches!(tn.status(), SolveStatus::Converged { .. }));
        let est = tn.probability(&mut rng(500 + i as u64), 20_000);
        assert!(
            (est.ln - want).abs() <= SE * est.rel_err,
            "box {i}: ln estimate {} (rel. err. {:.1e}) vs mpmath {want}",
            est.ln,
            est.rel_err
        );
        assert!(est.ln_bound >= want - BOUND_SLACK);
        let mut r = rng(600 + i as u64);
        for _ in 0..200 {
            let x = tn.sample(&mut r, 100_000).unwrap();
            assert!((0..x.len()).all(|k| lower[k] <= x[k] && x[k] <= upper[k]));
        }
    }
}

/// A 300-dimensional random-walk corridor: the saddle point converges, draws stay inside and
/// the bound holds. No outside value is at hand for this box, so the estimate is checked only
/// for consistency between two seeds.
#[test]
fn large_box_is_consistent() {
    let d = 300;
    // Random-walk corridor: X_t = Σ_{s≤t} e_s, |X_t| ≤ 2 + √t·0.5.
    let sigma = DMatrix::from_fn(d, d, |i, j| (i.min(j) + 1) as f64);
    let half: Vec<f64> = (0..d)
        .map(|t| 2.0 + 0.5 * ((t + 1) as f64).sqrt())
        .collect();
    let lower: Vec<f64> = half.iter().map(|h| -h).collect();
    let big = TruncatedNormal::new(&sigma, &lower, &half).unwrap();
    assert!(matches!(big.status(), SolveStatus::Converged { .. }));
    let a = big.probability(&mut rng(7), 2_000);
    let b = big.probability(&mut rng(8), 2_000);
    let se = (a.rel_err.powi(2) + b.rel_err.powi(2)).sqrt();
    assert!((a.ln - b.ln).abs() <= SE * se, "{a:?} vs {b:?}");
    assert!(a.ln <= a.ln_bound);
    let x = big.sample(&mut rng(9), 1_000_000).unwrap();
    assert!(x.iter().zip(&half).all(|(x, h)| x.abs() <= *h));
}
