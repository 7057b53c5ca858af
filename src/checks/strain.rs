//! How improbable a scenario is (ALGORITHMS §9.2): how far the pins sit from the unconditional
//! forecast, the probability of the corridors given the pins, and the plausibility of the
//! scenario's shocks.
//!
//! - **Pins.** `r̃ = r − Rμ`, `G = R K⁻¹ R'`: z-scores `r̃_i / sqrt(G_ii)` and the Mahalanobis
//!   distance `d² = r̃'G⁻¹r̃`, which is `χ²_m` under the unconditional forecast; its tail
//!   `P(χ²_m ≥ d²)` is computed in logs from closed forms (below).
//! - **Corridors.** `ℓ = P(a ≤ S y ≤ b | pins)` by minimax tilting (Botev 2017).
//! - **Plausibility** (Antolín-Díaz, Petrella and Rubio-Ramírez 2021): the Kullback–Leibler
//!   divergence of the scenario's shocks from `N(0, I)`, as the sum of finite parts
//!   `D = ½ μ_ε'μ_ε + ½ Σ_{λ>0} (λ − 1 − ln λ) + D_corr` (mean, shape over the non-zero
//!   eigenvalues of the shock covariance, and `−ln ℓ` for the corridors), calibrated as a
//!   biased coin (McCulloch 1989): `q(D) = ½ (1 + sqrt(1 − e^{−2D}))`.
//!
//! `χ²` tails: with `y = x/2`, `P(χ²_m ≥ x) = Q(m/2, y)`; for even `m`,
//! `Q = e^{−y} Σ_{k<m/2} y^k / k!`; for odd `m`, `Q = 2Φ̄(√x) + Σ_{k=0}^{(m−3)/2} e^{−y}
//! y^{k+1/2} / Γ(k + 3/2)` (the recurrence `Q(a+1, y) = Q(a, y) + y^a e^{−y}/Γ(a+1)` from
//! `Q(½, y) = 2Φ̄(√(2y))`; Abramowitz and Stegun 6.5.21 and 26.4.4, from memory).

use serde::Serialize;
use statrs::function::gamma::ln_gamma;

use crate::truncnorm::ln_phi_upper;

/// `ln P(χ²_m ≥ x)` for `m ≥ 1`, `x ≥ 0`, accurate far into the tail.
pub fn ln_chi2_tail(m: usize, x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    let y = 0.5 * x;
    let mut terms: Vec<f64> = Vec::new();
    if m.is_multiple_of(2) {
        for k in 0..m / 2 {
            terms.push(-y + k as f64 * y.ln() - ln_gamma(k as f64 + 1.0));
        }
    } else {
        terms.push(std::f64::consts::LN_2 + ln_phi_upper(x.sqrt()));
        for k in 0..(m - 1) / 2 {
            let a = k as f64 + 0.5;
            terms.push(-y + a * y.ln() - ln_gamma(a + 1.0));
        }
    }
    log_sum_exp(&terms).min(0.0)
}

fn log_sum_exp(terms: &[f64]) -> f64 {
    let top = terms.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !top.is_finite() {
        return top;
    }
    top + terms.iter().map(|t| (t - top).exp()).sum::<f64>().ln()
}

/// The biased-coin reading of a divergence `D` (McCulloch 1989): `q` with
/// `KL(Bernoulli(½) ‖ Bernoulli(q)) = D`.
pub fn coin(d: f64) -> f64 {
    0.5 * (1.0 + (-(-2.0 * d).exp_m1()).max(0.0).sqrt())
}

/// Pin surprise.
#[derive(Debug, Clone, Serialize)]
pub struct PinStrain {
    /// Per pin: label and z-score.
    pub z: Vec<(String, f64)>,
    /// `d² = r̃'G⁻¹r̃`.
    pub mahalanobis: f64,
    /// Number of (independent) pins `m`.
    pub pins: usize,
    /// `log10 P(χ²_m ≥ d²)`.
    pub log10_tail: f64,
}

impl PinStrain {
    pub fn new(z: Vec<(String, f64)>, mahalanobis: f64) -> PinStrain {
        let pins = z.len();
        PinStrain {
            log10_tail: ln_chi2_tail(pins, mahalanobis) / std::f64::consts::LN_10,
            z,
            mahalanobis,
            pins,
        }
    }
}

/// Probability of the corridors given the pins.
#[derive(Debug, Clone, Serialize)]
pub struct CorridorStrain {
    /// `log10 ℓ̂`.
    pub log10_probability: f64,
    /// Relative standard error of `ℓ̂`.
    pub relative_error: f64,
    /// `log10 e^{ψ*}`, a sure upper bound on the probability.
    pub log10_bound: f64,
    /// Share of proposals the exact sampler accepts (drivers: averaged over non-driver shocks).
    pub acceptance: f64,
    pub proposals: usize,
    /// False when the minimax saddle point was not found: sampling stays exact but accepts
    /// only as often as plain rejection would.
    pub saddle_point_found: bool,
}

/// The plausibility of the scenario's shocks.
#[derive(Debug, Clone, Serialize)]
pub struct Plausibility {
    pub mean_part: f64,
    pub shape_part: f64,
    pub corridor_part: f64,
    /// True when the corridor part is under the drivers' law (only drivers move for the
    /// corridors), averaged over the other shocks; false when every shock is free.
    pub corridor_part_with_drivers: bool,
    /// `D`, in nats.
    pub divergence: f64,
    /// `D / h`.
    pub per_period: f64,
    /// `q(D)`.
    pub coin: f64,
    /// The coin in plain words.
    pub reading: String,
}

impl Plausibility {
    pub fn new(
        mean_part: f64,
        shape_part: f64,
        corridor_part: f64,
        horizon: usize,
        corridor_part_with_drivers: bool,
    ) -> Self {
        let divergence = mean_part + shape_part + corridor_part;
        let q = coin(divergence);
        Plausibility {
            mean_part,
            shape_part,
            corridor_part,
            corridor_part_with_drivers,
            divergence,
            per_period: divergence / horizon.max(1) as f64,
            coin: q,
            reading: reading(q),
        }
    }
}

/// "About as easy to tell from the model's usual shocks as a coin that lands heads 71% of the
/// time is from a fair one."
fn reading(q: f64) -> String {
    let pct = 100.0 * q;
    let heads = if pct >= 99.95 {
        "practically always".to_string()
    } else if pct >= 99.0 {
        format!("{pct:.1}% of the time")
    } else {
        format!("{pct:.0}% of the time")
    };
    format!(
        "the scenario's shocks are about as easy to tell from the model's usual ones as a coin that lands heads {heads} is from a fair coin"
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Closed forms: `P(χ²_1 ≥ x) = 2Φ̄(√x)`, `P(χ²_2 ≥ x) = e^{−x/2}`,
    /// `P(χ²_4 ≥ x) = e^{−x/2}(1 + x/2)`, and `P(χ²_3 ≥ x) = 2Φ̄(√x) + sqrt(2x/π) e^{−x/2}`
    /// (textbook identities); checked also far in the tail, where statrs' regularised gamma
    /// would underflow.
    #[test]
    fn chi2_tails_match_closed_forms() {
        let phi_bar2 = |x: f64| std::f64::consts::LN_2 + ln_phi_upper(x.sqrt());
        for x in [0.5, 3.0, 20.0, 400.0, 3000.0] {
            let cases = [
                (1, phi_bar2(x)),
                (2, -x / 2.0),
                (4, -x / 2.0 + (1.0 + x / 2.0).ln()),
                (
                    3,
                    log_sum_exp(&[
                        phi_bar2(x),
                        0.5 * (2.0 * x / std::f64::consts::PI).ln() - x / 2.0,
                    ]),
                ),
            ];
            for (m, want) in cases {
                let got = ln_chi2_tail(m, x);
                assert!(
                    (got - want).abs() <= 1e-12 * want.abs().max(1.0),
                    "m={m}, x={x}: {got} vs {want}"
                );
            }
        }
        // statrs agrees where it does not underflow.
        let sr = statrs::function::gamma::gamma_ur(3.5, 6.0).ln();
        assert!((ln_chi2_tail(7, 12.0) - sr).abs() < 1e-10);
    }

    /// ALGORITHMS §9.2 check values of `q(D)`.
    #[test]
    fn coin_check_values() {
        for (d, q) in [
            (0.01, 0.57036),
            (0.1, 0.71288),
            (0.5, 0.89753),
            (1.0, 0.96494),
            (2.0, 0.99540),
        ] {
            assert!((coin(d) - q).abs() < 5e-6, "q({d}) = {}", coin(d));
        }
        assert_eq!(coin(0.0), 0.5);
    }
}
