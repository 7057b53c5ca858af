//! Unit tests for `truncnorm::univariate`.
//!
//! Tolerances: the reference values are exact to ≥ 20 digits, and every
//! formula here is a handful of correctly-rounded-ish f64 operations on
//! quantities that do not cancel, so the result should be within a few ulps
//! (~1e-15 relative). 1e-13 leaves a factor ~100 for the accumulated error of
//! the rational approximations (Cody, ~1e-16 each) and the log/exp chain,
//! while still catching any formula or branch slip (which shows up at 1e-10
//! or worse).

// Reference values are quoted digit for digit.
#![allow(clippy::excessive_precision)]

use super::univariate::{ln_phi_upper, ln_prob, mean_var, normal_quantile, sample};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

const INF: f64 = f64::INFINITY;

/// Relative tolerance with an absolute floor of 1e-300: values below the
/// normal range (ln Φ̄(−38) ≈ −2.9e-316) are subnormal and cannot carry
/// relative precision.
fn assert_close(got: f64, want: f64, rel: f64, what: &str) {
    let err = (got - want).abs();
    assert!(
        err <= rel * want.abs() || err <= 1e-300,
        "{what}: got {got:e}, want {want:e}, rel err {:e}",
        err / want.abs()
    );
}

#[test]
fn ln_phi_upper_check_values() {
    let cases = [
        (1.0, -1.8410216450092635),
        (5.0, -15.064998393988726),
        (10.0, -53.231285150512471),
        (20.0, -203.91715537109726),
        (38.0, -726.55721601882013),
        (40.0, -804.60844201375379),
        (100.0, -5005.5242086942051),
        (1000.0, -500007.82669481218),
    ];
    for (x, want) in cases {
        assert_close(ln_phi_upper(x), want, 1e-13, &format!("ln_phi_upper({x})"));
    }
    assert_eq!(ln_phi_upper(-INF), 0.0);
    assert_eq!(ln_phi_upper(INF), -INF);
    for x in [
        -1e300, -40.0, -1e-300, 0.0, 1e-300, 36.999, 37.001, 1e10, 1e300,
    ] {
        assert!(!ln_phi_upper(x).is_nan(), "NaN at {x}");
    }
}

#[test]
fn ln_prob_check_values() {
    let cases = [
        (-1.0, 1.0, -0.38171514630212607),
        (-31.0, -30.0, -454.32124395634325),
        (0.5, INF, -1.1759117615936186),
        (5.0, 5.0001, -22.629528896432977),
        (-0.001, 0.001, -7.13354679829352),
        // The brief's values for (5, 5+1e-8) and (40, 40+1e-9) are those of
        // the exact decimal upper bounds, which f64 cannot represent: the
        // rounded f64 bound shifts b − a by 6e-17 resp. 3.5e-15, i.e. by
        // 6e-9 resp. 3.5e-6 relative. Here: the values for the f64 inputs
        // (mpmath, 50 digits); the brief's values are checked below to the
        // precision the rounding allows.
        (5.0, 5.0 + 1e-8, -31.839619308234508964),
        (40.0, 40.0 + 1e-9, -821.6422078601303426),
    ];
    for (a, b, want) in cases {
        assert_close(ln_prob(a, b), want, 1e-13, &format!("ln_prob({a}, {b})"));
    }
    assert_close(
        ln_prob(5.0, 5.0 + 1e-8),
        -31.839619302157038,
        1e-9,
        "decimal",
    );
    assert_close(
        ln_prob(40.0, 40.0 + 1e-9),
        -821.64220439015108,
        1e-8,
        "decimal",
    );
    assert_eq!(ln_prob(-INF, INF), 0.0);
    assert_eq!(ln_prob(1.0, 1.0), -INF);
    for (a, b) in [
        (-INF, -1e300),
        (1e300, INF),
        (-INF, 0.0),
        (0.0, INF),
        (38.0, INF),
    ] {
        assert!(!ln_prob(a, b).is_nan(), "NaN at ({a}, {b})");
    }
}

/// Fixture `tests/fixtures/tails.json` from `tests/fixtures/make_tails.py`
/// (mpmath, 50 digits). All numbers are strings; infinities are "inf"/"-inf",
/// which `str::parse::<f64>` reads directly.
#[test]
fn mpmath_fixture() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/tails.json");
    let text = std::fs::read_to_string(&path).expect("read tails.json");
    let json: serde_json::Value = serde_json::from_str(&text).expect("parse tails.json");
    let num = |v: &serde_json::Value| -> f64 { v.as_str().expect("string").parse().expect("f64") };
    let rows = |key: &str| json[key].as_array().expect("array").clone();
    let tails = rows("ln_phi_upper");
    assert!(tails.len() >= 16);
    for row in &tails {
        let (x, want) = (num(&row[0]), num(&row[1]));
        assert_close(
            ln_phi_upper(x),
            want,
            1e-13,
            &format!("fixture ln_phi_upper({x})"),
        );
    }
    let probs = rows("ln_prob");
    assert!(probs.len() >= 20);
    for row in &probs {
        let (a, b, want) = (num(&row[0]), num(&row[1]), num(&row[2]));
        assert_close(
            ln_prob(a, b),
            want,
            1e-13,
            &format!("fixture ln_prob({a}, {b})"),
        );
    }
}

/// Truncated moments against mpmath at 400 digits (`moments` in tails.json), including far
/// two-sided intervals ([1000, 1000.5], [1e4, 1e4 + 1]) where the textbook variance is a
/// tiny difference of large terms, and intervals a little wider than flat ([100, 100.00001]
/// and its neighbours), where differences of tail terms lose digits. Every error is
/// printed. Tolerances: means 1e-13 of the larger of the mean and the interval's width (a
/// symmetric interval's mean is zero: the quadrature leaves rounding of the width's size);
/// variances `VARIANCE_REL` relative (see there).
#[test]
fn mpmath_moments() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/tails.json");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).expect("read")).expect("parse");
    let num = |v: &serde_json::Value| -> f64 { v.as_str().expect("string").parse().expect("f64") };
    let rows = json["moments"].as_array().expect("moments");
    assert!(rows.len() >= 30);
    for row in rows {
        let (a, b, mean, var) = (num(&row[0]), num(&row[1]), num(&row[2]), num(&row[3]));
        let (m, v) = mean_var(a, b);
        let scale = mean.abs().max((b - a).min(1.0));
        println!(
            "[{a}, {b}]: mean error {:.1e} of scale, variance {:.1e} relative",
            (m - mean).abs() / scale,
            (v - var).abs() / var
        );
        assert!(
            (m - mean).abs() <= 1e-13 * scale,
            "mean on [{a}, {b}]: {m:e} against {mean:e}"
        );
        assert_close(v, var, VARIANCE_REL, &format!("variance on [{a}, {b}]"));
    }
}

/// Relative tolerance of the variances against mpmath: the short-interval quadrature is
/// exact to rounding (sums of positive terms, ~1e-15 here); beyond its reach the tail
/// formulas subtract two one-sided second moments, and at `x = 100` the one-sided variance
/// `1 − r (r − x)` keeps only `−log10(1e−16 x²)` = 12 digits, which the subtraction turns
/// into the largest error seen, 4.3e-11 at [100, 100.04]: 1e-10 leaves a factor of two.
const VARIANCE_REL: f64 = 1e-10;

const BOXES: [(f64, f64, f64, f64); 4] = [
    (-0.3, 1.7, 0.501161180884738, 0.27041816447724886),
    (2.0, INF, 2.3732155328228409, 0.11427910041408126),
    (10.0, INF, 10.098093233962512, 0.0094453778256563214),
    (-1.0, 1.0, 0.0, 0.29112509477279321),
];

#[test]
fn mean_var_check_values() {
    for (a, b, mean, var) in BOXES {
        let (m, v) = mean_var(a, b);
        if mean == 0.0 {
            assert!(m.abs() <= 1e-15, "mean on [{a}, {b}]: {m:e}");
        } else {
            assert_close(m, mean, 1e-12, &format!("mean on [{a}, {b}]"));
        }
        assert_close(v, var, 1e-12, &format!("var on [{a}, {b}]"));
        // Mirror image.
        let (mm, vm) = mean_var(-b, -a);
        if mean == 0.0 {
            assert!(mm.abs() <= 1e-15, "mirrored mean on [{a}, {b}]: {mm:e}");
        } else {
            assert_close(-mm, m, 1e-12, "mirrored mean");
        }
        assert_close(vm, v, 1e-12, "mirrored var");
    }
}

/// Sample moments of 20000 seeded draws within 4 Monte Carlo standard errors.
#[test]
fn sample_moments() {
    let n = 20_000;
    let mut boxes: Vec<(f64, f64)> = BOXES.iter().map(|&(a, b, _, _)| (a, b)).collect();
    boxes.extend([(40.0, INF), (-INF, -40.0), (0.5, 100.0), (-3.0, -2.5)]);
    for (k, &(a, b)) in boxes.iter().enumerate() {
        let mut rng = ChaCha8Rng::seed_from_u64(20_170_000 + k as u64);
        let draws: Vec<f64> = (0..n).map(|_| sample(a, b, &mut rng)).collect();
        assert!(
            draws.iter().all(|&x| a <= x && x <= b),
            "draw outside [{a}, {b}]"
        );
        let nf = n as f64;
        let m = draws.iter().sum::<f64>() / nf;
        let v = draws.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (nf - 1.0);
        let mu4 = draws.iter().map(|x| (x - m).powi(4)).sum::<f64>() / nf;
        let (mean, var) = mean_var(a, b);
        let se_mean = (var / nf).sqrt();
        let se_var = ((mu4 - v * v).max(0.0) / nf).sqrt();
        assert!(
            (m - mean).abs() <= 4.0 * se_mean,
            "mean on [{a}, {b}]: {m} vs {mean}"
        );
        assert!(
            (v - var).abs() <= 4.0 * se_var,
            "var on [{a}, {b}]: {v} vs {var}"
        );
    }
}

#[test]
fn sample_narrow_box_and_far_tail() {
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    for _ in 0..20_000 {
        let x = sample(5.0, 5.001, &mut rng);
        assert!((5.0..=5.001).contains(&x), "{x}");
    }
    for (a, b) in [(40.0, 40.5), (1e3, INF), (-0.5, 0.5), (-INF, -0.7)] {
        for _ in 0..1000 {
            let x = sample(a, b, &mut rng);
            assert!(x.is_finite() && a <= x && x <= b, "[{a}, {b}]: {x}");
        }
    }
}

/// Φ(normal_quantile(p)) = p, with Φ(x) = exp(ln Φ̄(−x)).
#[test]
fn quantile_round_trip() {
    let ps = [
        1e-300, 1e-100, 1e-20, 1e-10, 1e-5, 0.001, 0.02425, 0.075, 0.2, 0.5, 0.7, 0.9, 0.975, 0.999,
    ];
    for p in ps {
        let x = normal_quantile(p);
        let ln_p = ln_phi_upper(-x);
        // Relative error in p from the conditioning of Φ (|x|·δx/x·φ/Φ ≈ x² δ).
        let tol = 1e-15 * (1.0 + x * x) * 4.0;
        assert!(
            (ln_p - p.ln()).abs() <= tol,
            "p = {p:e}: x = {x}, ln Φ(x) = {ln_p}, ln p = {}",
            p.ln()
        );
        // Symmetry of the quantile.
        if p != 0.5 && p >= 1e-5 {
            assert_close(normal_quantile(1.0 - p), -x, 1e-9, "symmetry");
        }
    }
    assert_eq!(normal_quantile(0.0), -INF);
    assert_eq!(normal_quantile(1.0), INF);
    assert_eq!(normal_quantile(0.5), 0.0);
    assert!(normal_quantile(-0.1).is_nan());
}
