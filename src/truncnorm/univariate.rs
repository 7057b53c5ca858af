//! Univariate truncated standard normal: ln Φ̄, ln P(a, b), moments, exact
//! sampling and the normal quantile. See the module docs of
//! [`crate::truncnorm`] for formulas and sources.

// Published coefficients (Cody 1969, Wichura 1988) are kept digit for digit.
#![allow(clippy::excessive_precision)]

use rand::Rng;
use rand_distr::StandardNormal;

/// ln √(2π).
const LN_SQRT_2PI: f64 = 0.918_938_533_204_672_8;
/// 1/√(2π).
const FRAC_1_SQRT_2PI: f64 = 0.398_942_280_401_432_7;
/// 1/√π.
const FRAC_1_SQRT_PI: f64 = 0.564_189_583_547_756_3;
/// √π.
const SQRT_PI: f64 = 1.772_453_850_905_516;
/// Boundary between the rejection/inverse-transform region and the tail
/// sampler (Botev 2017).
const TAIL_THRESHOLD: f64 = 0.66;
/// An interval narrower than this (times `max(1, |midpoint|)`) is nearly flat: ln P and the
/// moments use the midpoint expansion.
const NARROW: f64 = 1e-3;
/// Above this, ln Φ̄ uses the asymptotic series.
const ASYMPTOTIC_FROM: f64 = 37.0;

// Rational Chebyshev coefficients of Cody (1969).
const ERF_A: [f64; 5] = [
    3.16112374387056560e00,
    1.13864154151050156e02,
    3.77485237685302021e02,
    3.20937758913846947e03,
    1.85777706184603153e-1,
];
const ERF_B: [f64; 4] = [
    2.36012909523441209e01,
    2.44024637934444173e02,
    1.28261652607737228e03,
    2.84423683343917062e03,
];
const ERF_C: [f64; 9] = [
    5.64188496988670089e-1,
    8.88314979438837594e00,
    6.61191906371416295e01,
    2.98635138197400131e02,
    8.81952221241769090e02,
    1.71204761263407058e03,
    2.05107837782607147e03,
    1.23033935479799725e03,
    2.15311535474403846e-8,
];
const ERF_D: [f64; 8] = [
    1.57449261107098347e01,
    1.17693950891312499e02,
    5.37181101862009858e02,
    1.62138957456669019e03,
    3.29079923573345963e03,
    4.36261909014324716e03,
    3.43936767414372164e03,
    1.23033935480374942e03,
];
const ERF_P: [f64; 6] = [
    3.05326634961232344e-1,
    3.60344899949804439e-1,
    1.25781726111229246e-1,
    1.60837851487422766e-2,
    6.58749161529837803e-4,
    1.63153871373020978e-2,
];
const ERF_Q: [f64; 5] = [
    2.56852019228982242e00,
    1.87295284992346047e00,
    5.27905102951428412e-1,
    6.05183413124413191e-2,
    2.33520497626869185e-3,
];

/// Cody's rational form `P(x)/Q(x)` in his Horner order: with `a` of length `m + 2` and
/// `b` of length `m + 1` (Q monic), `P = (…((a[m+1] x + a[0]) x + a[1]) x … + a[m])`,
/// `Q = (…((x + b[0]) x + b[1]) x … + b[m])`.
fn cody_rational(a: &[f64], b: &[f64], x: f64) -> f64 {
    let m = a.len() - 2;
    let mut num = a[m + 1] * x;
    let mut den = x;
    for i in 0..m {
        num = (num + a[i]) * x;
        den = (den + b[i]) * x;
    }
    (num + a[m]) / (den + b[m])
}

/// erf(y) for |y| ≤ 0.46875 (Cody's first interval).
fn erf_small(y: f64) -> f64 {
    y * cody_rational(&ERF_A, &ERF_B, y * y)
}

/// For y > 4: `z·P(z)/Q(z)`, z = 1/y², so that erfcx(y) = (1/√π − it)/y.
fn erfcx_tail_correction(y: f64) -> f64 {
    let z = 1.0 / (y * y);
    z * cody_rational(&ERF_P, &ERF_Q, z)
}

/// Scaled complementary error function erfcx(y) = e^{y²} erfc(y), y ≥ 0
/// (Cody 1969; relative error ~1e-16, no underflow).
fn erfcx(y: f64) -> f64 {
    if y <= 0.46875 {
        (y * y).exp() * (1.0 - erf_small(y))
    } else if y <= 4.0 {
        cody_rational(&ERF_C, &ERF_D, y)
    } else {
        (FRAC_1_SQRT_PI - erfcx_tail_correction(y)) / y
    }
}

/// erf(y) for y ≥ 0, full relative accuracy near 0.
fn erf_nonneg(y: f64) -> f64 {
    if y <= 0.46875 {
        return erf_small(y);
    }
    if y > 27.0 {
        return 1.0;
    }
    // exp(−y²) split into a rounded part and a small correction, so the exponent carries no rounding error.
    let ysq = (y * 16.0).trunc() / 16.0;
    let del = (y - ysq) * (y + ysq);
    1.0 - (-ysq * ysq).exp() * (-del).exp() * erfcx(y)
}

/// ln Φ̄(x) = ln(1 − Φ(x)) for any x: 0 at −∞, −∞ at +∞.
pub fn ln_phi_upper(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x == f64::INFINITY {
        return f64::NEG_INFINITY;
    }
    if x < 0.0 {
        return (-ln_phi_upper(-x).exp()).ln_1p();
    }
    if x > ASYMPTOTIC_FROM {
        let z = 1.0 / (x * x);
        let series = z * (-1.0 + z * (3.0 + z * (-15.0 + z * (105.0 - 945.0 * z))));
        return -0.5 * x * x - x.ln() - LN_SQRT_2PI + series.ln_1p();
    }
    -0.5 * x * x - std::f64::consts::LN_2 + erfcx(x * std::f64::consts::FRAC_1_SQRT_2).ln()
}

/// Φ̄(x) on the linear scale.
fn phi_upper(x: f64) -> f64 {
    ln_phi_upper(x).exp()
}

/// ln φ(x).
fn ln_pdf(x: f64) -> f64 {
    -0.5 * x * x - LN_SQRT_2PI
}

/// ln(Φ(b) − Φ(a)) for a < b (−∞ when a ≥ b); any, also infinite, bounds.
pub fn ln_prob(a: f64, b: f64) -> f64 {
    if a.is_nan() || b.is_nan() {
        return f64::NAN;
    }
    if a >= b {
        return f64::NEG_INFINITY;
    }
    if a.is_finite() && b.is_finite() {
        let h = b - a;
        let m = 0.5 * a + 0.5 * b;
        if h * m.abs().max(1.0) <= NARROW {
            return h.ln() + ln_pdf(m) + ((m * m - 1.0) * h * h / 24.0).ln_1p();
        }
    }
    if a > 0.0 {
        let la = ln_phi_upper(a);
        if b == f64::INFINITY {
            return la;
        }
        return la + (-(ln_phi_upper(b) - la).exp_m1()).ln();
    }
    if b < 0.0 {
        return ln_prob(-b, -a);
    }
    // a ≤ 0 ≤ b: the two excluded tails are each at most ½.
    let excluded = phi_upper(-a) + phi_upper(b);
    if excluded < 0.5 {
        (-excluded).ln_1p()
    } else {
        let s = std::f64::consts::FRAC_1_SQRT_2;
        (0.5 * erf_nonneg(-a * s) + 0.5 * erf_nonneg(b * s)).ln()
    }
}

/// Inverse Mills ratio φ(x)/Φ̄(x) for x > 0 and, with it, r − x, both free
/// of cancellation.
fn inverse_mills(x: f64) -> (f64, f64) {
    let y = x * std::f64::consts::FRAC_1_SQRT_2;
    let m = erfcx(y) / (2.0 * FRAC_1_SQRT_2PI); // Mills ratio Φ̄/φ
    let r = 1.0 / m;
    if y > 4.0 {
        // 1 − x·M = √π · z P(z)/Q(z) exactly in Cody's tail form.
        (r, r * SQRT_PI * erfcx_tail_correction(y))
    } else {
        (r, r - x)
    }
}

/// Mean and variance of N(0,1) truncated to [a, b] (a < b).
///
/// - Short intervals (`h = b − a`, midpoint `c`, `h·max(1, |c|) ≤ 4`): with `x = c + v`, the
///   density is `∝ exp(−c v − v²/2)` on `|v| ≤ h/2`, an exponent within ±4 there (`|c|h/2 ≤ 2`
///   and `h²/8 ≤ 2`). Its moments about the midpoint come from Gauss–Legendre quadrature
///   with 20 nodes (exact for polynomials of degree 39; the exponential's Taylor terms
///   beyond are below `4⁴⁰/40!`, about 1e−24, relative), the variance as a sum of positive
///   terms about the mean: no difference of large numbers, however narrow or far out the
///   interval. (The tail formulas below lose
///   `−log10(1 − q)` digits twice over for intervals just wider than they are flat: 35% of
///   the variance at [100, 100.00001].)
/// - Intervals inside a tail (`a > 0`, or the mirror `b < 0`): moments of the offset `X − a`
///   from the one-sided tails at `a` and `b`, free of cancellation far out: with inverse Mills
///   ratios `r_a`, `r_b`, `q = Φ̄(b)/Φ̄(a)`, `E[X − a] = ((r_a − a) − q (r_b − a)) / (1 − q)` and
///   `E[(X − a)²] = (S_a − q S_b)/(1 − q)`, `S_x = Var_x + (r_x − a)²` with the one-sided
///   variances `Var_x = 1 − r_x (r_x − x)`.
/// - Otherwise the textbook ratios.
pub fn mean_var(a: f64, b: f64) -> (f64, f64) {
    moments(a, b, || ln_prob(a, b))
}

/// `ln P(a ≤ Z ≤ b)` with the truncated mean and variance, the probability made once (the
/// moments of an interval around the centre need it too).
pub fn ln_prob_mean_var(a: f64, b: f64) -> (f64, f64, f64) {
    let lp = ln_prob(a, b);
    let (mean, var) = moments(a, b, || lp);
    (lp, mean, var)
}

/// [`mean_var`], given how to find `ln P(a ≤ Z ≤ b)` when the interval holds the centre.
fn moments(a: f64, b: f64, ln_prob_ab: impl FnOnce() -> f64) -> (f64, f64) {
    if a.is_finite() && b.is_finite() {
        let (h, c) = (b - a, 0.5 * a + 0.5 * b);
        if h * c.abs().max(1.0) <= 4.0 {
            return short_moments(c, 0.5 * h);
        }
    }
    if a > 0.0 {
        return tail_moments(a, b);
    }
    if b < 0.0 {
        let (mean, var) = tail_moments(-b, -a);
        return (-mean, var);
    }
    let lp = ln_prob_ab();
    // φ(x)/P and x·φ(x)/P, with x·φ(x) = 0 at infinite x.
    let ratio = |x: f64| {
        if x.is_infinite() {
            (0.0, 0.0)
        } else {
            let q = (-0.5 * x * x - lp).exp() * FRAC_1_SQRT_2PI;
            (q, x * q)
        }
    };
    let (pa, apa) = ratio(a);
    let (pb, bpb) = ratio(b);
    let mean = pa - pb;
    (mean, 1.0 + (apa - bpb) - mean * mean)
}

/// Moments of N(0,1) on `[c − half, c + half]` by Gauss–Legendre quadrature about the
/// midpoint (see [`mean_var`]).
fn short_moments(c: f64, half: f64) -> (f64, f64) {
    let (nodes, weights) = gauss_legendre();
    let mut mass = 0.0;
    let mut first = 0.0;
    let mut terms = [(0.0, 0.0); GL_NODES];
    for ((term, x), w) in terms.iter_mut().zip(nodes).zip(weights) {
        let v = half * x;
        let density = w * (-c * v - 0.5 * v * v).exp();
        mass += density;
        first += density * v;
        *term = (v, density);
    }
    let shift = first / mass;
    let var = terms
        .iter()
        .map(|(v, d)| d * (v - shift) * (v - shift))
        .sum::<f64>()
        / mass;
    (c + shift, var)
}

/// Nodes and weights of 20-point Gauss–Legendre quadrature on [−1, 1], by Newton's method on
/// the Legendre polynomial from the usual starting values `cos(π(i − ¼)/(n + ½))` (Golub and
/// Welsch 1969 give the same rule as eigenvalues), made once.
fn gauss_legendre() -> &'static ([f64; GL_NODES], [f64; GL_NODES]) {
    static RULE: std::sync::OnceLock<([f64; GL_NODES], [f64; GL_NODES])> =
        std::sync::OnceLock::new();
    RULE.get_or_init(|| {
        let n = GL_NODES;
        let (mut nodes, mut weights) = ([0.0; GL_NODES], [0.0; GL_NODES]);
        for i in 0..n {
            let mut x = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
            let mut derivative = 0.0;
            for _ in 0..100 {
                // P_n(x) and P_n'(x) by the three-term recurrence.
                let (mut p0, mut p1) = (1.0, x);
                for k in 2..=n {
                    let k = k as f64;
                    (p0, p1) = (p1, ((2.0 * k - 1.0) * x * p1 - (k - 1.0) * p0) / k);
                }
                derivative = n as f64 * (x * p1 - p0) / (x * x - 1.0);
                let step = p1 / derivative;
                x -= step;
                if step.abs() < 1e-16 {
                    break;
                }
            }
            nodes[i] = x;
            weights[i] = 2.0 / ((1.0 - x * x) * derivative * derivative);
        }
        (nodes, weights)
    })
}

/// Nodes of the quadrature behind the moments of short intervals.
const GL_NODES: usize = 20;

/// Variance of N(0,1) on `[x, ∞)`, `1 − r (r − x)` from the inverse Mills ratio `r`; beyond
/// `x = 100`, where that difference keeps only `−log10(1e−16 x²)` digits, its asymptotic series
/// in `t = 1/x²`: `t − 6t² + 50t³ − 518t⁴ + 6354t⁵` (from the Mills-ratio series
/// `1/x − 1/x³ + 3/x⁵ − …`, Abramowitz and Stegun 26.2.12; next term `89782 t⁶`, below 1e−15
/// relative there).
fn tail_variance(x: f64, r: f64, excess: f64) -> f64 {
    if x > 100.0 {
        let t = 1.0 / (x * x);
        t * (1.0 + t * (-6.0 + t * (50.0 + t * (-518.0 + t * 6354.0))))
    } else {
        1.0 - r * excess
    }
}

/// Moments on `[a, b]` with `a > 0` (see [`mean_var`]).
fn tail_moments(a: f64, b: f64) -> (f64, f64) {
    let (ra, exa) = inverse_mills(a);
    let var_a = tail_variance(a, ra, exa);
    if b == f64::INFINITY {
        return (ra, var_a);
    }
    let (rb, exb) = inverse_mills(b);
    let var_b = tail_variance(b, rb, exb);
    let q = (ln_phi_upper(b) - ln_phi_upper(a)).exp();
    let shift_b = exb + (b - a); // r_b − a
    let offset = (exa - q * shift_b) / (1.0 - q);
    let second = (var_a + exa * exa - q * (var_b + shift_b * shift_b)) / (1.0 - q);
    (a + offset, (second - offset * offset).max(0.0))
}

/// Marsaglia (1964) tail sampler on [a, b], a > 0 (Botev 2017, `ntail`).
fn sample_tail<R: Rng + ?Sized>(a: f64, b: f64, rng: &mut R) -> f64 {
    let c = 0.5 * a * a;
    let f = if b == f64::INFINITY {
        -1.0
    } else {
        (c - 0.5 * b * b).exp_m1()
    };
    loop {
        let u1: f64 = rng.random();
        let u2: f64 = rng.random();
        let e = c - (u1 * f).ln_1p();
        if u2 * u2 * e <= c {
            return (2.0 * e).sqrt().clamp(a, b);
        }
    }
}

/// Exact draw from N(0,1) truncated to [a, b] (a < b; infinite bounds
/// allowed). Works far into the tails (a = 40 and beyond).
pub fn sample<R: Rng + ?Sized>(a: f64, b: f64, rng: &mut R) -> f64 {
    if a > TAIL_THRESHOLD {
        return sample_tail(a, b, rng);
    }
    if b < -TAIL_THRESHOLD {
        return -sample_tail(-b, -a, rng);
    }
    if b - a > 2.0 {
        loop {
            let z: f64 = rng.sample(StandardNormal);
            if a <= z && z <= b {
                return z;
            }
        }
    }
    // Inverse transform on the upper tail: x = Φ̄⁻¹(Φ̄(a) − U (Φ̄(a) − Φ̄(b))).
    let pa = phi_upper(a);
    let pb = phi_upper(b);
    let u: f64 = rng.random();
    let q = pa - u * (pa - pb);
    (-normal_quantile(q)).clamp(a, b)
}

// Wichura (1988) AS 241 PPND16 coefficients.
const Q_A: [f64; 8] = [
    3.387132872796366608,
    1.3314166789178437745e2,
    1.971590950306551442e3,
    1.373169376550946112e4,
    4.592195393154987145e4,
    6.726577092700870085e4,
    3.343057558358812810e4,
    2.509080928730122673e3,
];
const Q_B: [f64; 8] = [
    1.0,
    4.231333070160091125e1,
    6.871870074920579083e2,
    5.394196021424751108e3,
    2.121379430158659586e4,
    3.930789580009271061e4,
    2.872908573572194267e4,
    5.226495278852854561e3,
];
const Q_C: [f64; 8] = [
    1.42343711074968357734,
    4.6303378461565452959,
    5.7694972214606914055,
    3.64784832476320460504,
    1.27045825245236838258,
    2.4178072517745061177e-1,
    2.27238449892691845833e-2,
    7.7454501427834140764e-4,
];
const Q_D: [f64; 8] = [
    1.0,
    2.05319162663775882187,
    1.6763848301838038494,
    6.8976733498510000455e-1,
    1.4810397642748007459e-1,
    1.51986665636164571966e-2,
    5.475938084995344946e-4,
    1.05075007164441684324e-9,
];
const Q_E: [f64; 8] = [
    6.6579046435011037772,
    5.4637849111641143699,
    1.7848265399172913358,
    2.9656057182850489123e-1,
    2.6532189526576123093e-2,
    1.2426609473880784386e-3,
    2.7115555687434875782e-5,
    2.0103343992922881327e-7,
];
const Q_F: [f64; 8] = [
    1.0,
    5.998322065558879377e-1,
    1.3692988092273580531e-1,
    1.4875361290850614853e-2,
    7.868691311456132591e-4,
    1.8463183175100546818e-5,
    1.4215117583164458887e-7,
    2.0442631033899397856e-15,
];

/// Horner evaluation, coefficients from the constant term up.
fn poly(c: &[f64; 8], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &ci| acc * x + ci)
}

/// Standard normal quantile Φ⁻¹(p) (Wichura 1988, AS 241 PPND16, relative
/// error ~1e-16). Returns ∓∞ at p = 0 / 1 and NaN outside [0, 1].
pub fn normal_quantile(p: f64) -> f64 {
    if !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    let q = p - 0.5;
    if q.abs() <= 0.425 {
        let r = 0.180625 - q * q;
        return q * poly(&Q_A, r) / poly(&Q_B, r);
    }
    let tail = if q < 0.0 { p } else { 1.0 - p };
    if tail == 0.0 {
        return if q < 0.0 {
            f64::NEG_INFINITY
        } else {
            f64::INFINITY
        };
    }
    let r = (-tail.ln()).sqrt();
    let x = if r <= 5.0 {
        let r = r - 1.6;
        poly(&Q_C, r) / poly(&Q_D, r)
    } else {
        let r = r - 5.0;
        poly(&Q_E, r) / poly(&Q_F, r)
    };
    if q < 0.0 { -x } else { x }
}
