//! Naive acceptance–rejection for corridors (ALGORITHMS §11.3; the baseline of Waggoner and
//! Zha 1999): paths from the pins-only conditional law, kept when they lie inside every
//! corridor. With drivers, the non-driver shocks of a path are drawn once and only the
//! drivers are redrawn, so that the non-drivers keep their usual distribution (the main
//! engine's semantics, ALGORITHMS §5.4). The share of proposals accepted estimates the
//! corridors' probability; past a cap the engine gives up and says so.

use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

use crate::forecast::{ForecastError, Plan, Theta, conditions::Conditions, rows::Rows};

#[derive(Debug, Clone)]
pub struct RejectionPlan {
    /// The main engine's plan for the pins alone (same drivers).
    pins: Plan,
    /// Every condition, to test the proposals against.
    rows: Rows,
    cap: usize,
    draw: Option<usize>,
}

impl RejectionPlan {
    pub fn new(
        theta: &Theta,
        rows: Rows,
        cond: &Conditions,
        cap: usize,
        draw: Option<usize>,
    ) -> Result<RejectionPlan, ForecastError> {
        let pins_only = Conditions {
            corridors: Vec::new(),
            ..cond.clone()
        };
        let pins = Plan::new(theta, &pins_only, draw)?;
        // Every proposal is a pinned path: up to `cap` a path.
        pins.expect_paths(theta, cap);
        Ok(RejectionPlan {
            pins,
            rows,
            cap,
            draw,
        })
    }

    pub fn rows(&self) -> &Rows {
        &self.rows
    }

    /// One conditional path (and the unconditional path of its first proposal), with the
    /// number of proposals it took.
    pub fn sample_one<R: Rng + ?Sized>(
        &self,
        theta: &Theta,
        rng: &mut R,
    ) -> Result<(Vec<f64>, Vec<f64>, usize), ForecastError> {
        let mut eps: Vec<f64> = (0..theta.len())
            .map(|_| StandardNormal.sample(rng))
            .collect();
        let mut unconditional = None;
        for tried in 1..=self.cap {
            if tried > 1 {
                match self.pins.driver_cells() {
                    None => eps.iter_mut().for_each(|e| *e = StandardNormal.sample(rng)),
                    Some(cells) => {
                        for &c in cells {
                            eps[c] = StandardNormal.sample(rng);
                        }
                    }
                }
            }
            let (y, ystar) = self.pins.from_shocks(theta, &eps);
            let ystar = unconditional.get_or_insert(ystar);
            if self.rows.corridor_violation(&y) == 0.0 {
                return Ok((y, ystar.clone(), tried));
            }
        }
        Err(ForecastError::GaveUp {
            proposals: self.cap,
            draw: self.draw,
        })
    }
}
