//! Attribution with corridors, drivers and parameter uncertainty (the adverse demo): the
//! parts add up to the total exactly, the total is the conditional mean shift within Monte
//! Carlo error, and nothing depends on the number of threads. The exact values of the split
//! are checked against numpy in `reference_pins.rs`.

use std::path::Path;

use tiltyard::attribution::{Attribution, attribute};
use tiltyard::run::{RunOptions, run};
use tiltyard::scenario::{self, Setup};

/// Additivity: the parts are sums of the same per-draw terms, so they add up to rounding.
const ADDS_UP: f64 = 1e-9;
/// Monte Carlo checks: 4 standard errors (ALGORITHMS §11.4).
const MC_SE: f64 = 4.0;

fn adverse(draws: usize, reweight: bool) -> Setup {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/adverse.ron");
    let mut file = scenario::read(&path).unwrap();
    file.draws = draws;
    file.reweight = reweight;
    Setup::new(file, &path).unwrap()
}

fn assert_adds_up(a: &Attribution) {
    let scale = a.total.iter().fold(1.0f64, |m, v| m.max(v.abs()));
    for cell in 0..a.total.len() {
        let shocks: f64 = a.by_shock.iter().map(|p| p[cell]).sum();
        let conditions: f64 = a.by_condition.iter().map(|p| p[cell]).sum();
        let params = a.parameters.as_ref().map_or(0.0, |p| p[cell]);
        assert!(
            (shocks + params - a.total[cell]).abs() < ADDS_UP * scale,
            "cell {cell}: shocks {shocks} + parameters {params} vs total {}",
            a.total[cell]
        );
        assert!(
            (conditions + params - a.total[cell]).abs() < ADDS_UP * scale,
            "cell {cell}: conditions {conditions} + parameters {params} vs total {}",
            a.total[cell]
        );
    }
}

#[test]
fn parts_add_up_and_the_total_is_the_mean_shift() {
    let mut setup = adverse(400, false);
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    let a = out.attribution.as_ref().unwrap();
    assert_adds_up(a);
    assert_eq!(a.draws, out.posterior_draws);
    assert!(a.parameters.is_none());
    // Every condition moves something, and so do the drivers' shocks; a shock that does not
    // drive, has no condition on it and is not needed is not moved (its mean stays 0).
    assert!(
        a.by_condition
            .iter()
            .all(|p| p.iter().any(|v| v.abs() > 1e-6))
    );
    let moved = |j: usize| a.by_shock[j].iter().any(|v| v.abs() > 1e-9);
    for (j, name) in setup.names.iter().enumerate() {
        let drives = setup
            .file
            .drivers
            .as_ref()
            .unwrap()
            .iter()
            .any(|d| d.shock() == name);
        assert_eq!(moved(j), drives, "shock {name}");
    }
    // The total averages Δ_θ = W(E[z] − 𝒢μ_θ) over the draws. Each path was made from an
    // unconditional one, y = y* + W(t − 𝒢y*), so with one path per draw
    // y − y* − Δ_θ = −W𝒢(y* − μ_θ): Monte Carlo noise with mean zero, independent across
    // draws. The paths' mean shift differs from the total by its average: within 4 standard
    // errors of zero, the standard error from the residuals themselves.
    assert_eq!(setup.file.paths_per_draw, 1);
    let paths = &out.paths;
    assert_eq!(paths.parts.len(), paths.conditional.len());
    let count = paths.conditional.len() as f64;
    for cell in 0..a.total.len() {
        let residuals: Vec<f64> = (0..paths.conditional.len())
            .map(|k| {
                let part = &paths.parts[k];
                assert_eq!(part.theta, paths.sources[k]);
                let delta: f64 = part.by_condition.row(cell).sum();
                paths.conditional[k][cell] - paths.unconditional[k][cell] - delta
            })
            .collect();
        let mean = residuals.iter().sum::<f64>() / count;
        let var = residuals.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (count - 1.0);
        let se = (var / count).sqrt();
        let shift = paths
            .conditional
            .iter()
            .zip(&paths.unconditional)
            .map(|(y, u)| y[cell] - u[cell])
            .sum::<f64>()
            / count;
        assert!(
            (shift - a.total[cell]).abs() <= MC_SE * se + 1e-9,
            "cell {cell}: paths' mean shift {shift} vs attribution total {} (se {se:e})",
            a.total[cell]
        );
    }
}

#[test]
fn reweighted_draws_have_a_parameters_part_and_still_add_up() {
    let mut setup = adverse(120, true);
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    let a = out.attribution.as_ref().unwrap();
    assert!(a.parameters.is_some());
    assert_adds_up(a);
}

#[test]
fn the_split_does_not_depend_on_the_threads() {
    let split = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let mut setup = adverse(100, false);
            run(&mut setup, &RunOptions::default())
                .unwrap()
                .attribution
                .unwrap()
        })
    };
    assert_eq!(split(1), split(2));
}

#[test]
fn attribution_matches_its_parts_recomputed_from_scratch() {
    // The parts the run kept, attributed again outside the run, give the run's result.
    let mut setup = adverse(60, false);
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    let cond = setup.conditions().unwrap();
    let model = tiltyard::pipeline::Model::new(&setup).unwrap();
    let set = model
        .draw(&setup, 60, &std::sync::atomic::AtomicBool::new(false))
        .unwrap();
    let again = attribute(&set.thetas, &cond, &out.paths.parts, None, None).unwrap();
    assert_eq!(&again, out.attribution.as_ref().unwrap());
}

fn baseline_one_pin(drivers: Option<Vec<String>>) -> Setup {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/baseline.ron");
    let mut file = scenario::read(&path).unwrap();
    file.draws = 80;
    file.pins.truncate(1);
    file.drivers = drivers.map(|d| d.into_iter().map(scenario::DriverSpec::Always).collect());
    Setup::new(file, &path).unwrap()
}

fn largest(v: &[f64]) -> f64 {
    v.iter().fold(0.0f64, |m, x| m.max(x.abs()))
}

/// One pin, one driver: that shock carries all of the mean shift, the others none.
#[test]
fn one_driver_carries_all_of_a_one_pin_scenario() {
    let mut setup = baseline_one_pin(Some(vec!["policy_rate".into()]));
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    let a = out.attribution.unwrap();
    let j = setup.names.iter().position(|n| n == "policy_rate").unwrap();
    let scale = largest(&a.total);
    assert!(scale > 1e-3, "the pin moves the forecast");
    for (k, part) in a.by_shock.iter().enumerate() {
        let gap: Vec<f64> = if k == j {
            part.iter().zip(&a.total).map(|(p, t)| p - t).collect()
        } else {
            part.clone()
        };
        assert!(largest(&gap) < ADDS_UP * scale, "shock {k}");
    }
}

/// One pin: it carries all of the split by condition.
#[test]
fn a_single_pin_carries_all_of_the_split_by_condition() {
    let mut setup = baseline_one_pin(None);
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    let a = out.attribution.unwrap();
    assert_eq!(a.by_condition.len(), 1);
    let gap: Vec<f64> = a.by_condition[0]
        .iter()
        .zip(&a.total)
        .map(|(p, t)| p - t)
        .collect();
    assert!(largest(&gap) < ADDS_UP * largest(&a.total));
}

/// Leave one out with one pin: switching it off leaves the unconditional forecast, so its
/// effect is the median of the unconditional paths drawn beside the conditional ones (the
/// same draws and shocks) minus the conditional median.
#[test]
fn leaving_out_the_only_pin_gives_the_unconditional_median() {
    use std::sync::atomic::AtomicBool;
    use tiltyard::attribution::leave_one_out::leave_one_out;
    use tiltyard::forecast::{Sampling, sample_paths};
    use tiltyard::report::{Kind, fans};
    let setup = baseline_one_pin(None);
    let model = tiltyard::pipeline::Model::new(&setup).unwrap();
    let cancel = AtomicBool::new(false);
    let set = model.draw(&setup, 80, &cancel).unwrap();
    let cond = setup.conditions().unwrap();
    let how = Sampling {
        paths_per_theta: 1,
        seed: setup.file.seed,
        reweight: false,
        min_acceptance: setup.file.checks.min_acceptance,
        engine: tiltyard::crosscheck::EngineKind::Main,
    };
    let effects = leave_one_out(&setup, &set, &cond, how, &cancel).unwrap();
    assert_eq!(effects.len(), 1);
    assert_eq!(effects[0].field, "pins[0]");
    let shift = effects[0].shift.as_ref().unwrap();
    let paths = sample_paths(&set, 0..80, &cond, how, &cancel).unwrap();
    let with = fans(&setup, &paths.conditional, None, Kind::Conditional);
    let without = fans(&setup, &paths.unconditional, None, Kind::Unconditional);
    let h = setup.file.horizon;
    let mut moved = 0.0f64;
    for (k, (a, b)) in with.iter().zip(&without).enumerate() {
        let want = b.quantiles[3] - a.quantiles[3];
        let got = shift[k / h][k % h];
        assert!(
            (got - want).abs() < 1e-9 * (1.0 + want.abs()),
            "{a:?}: {got} vs {want}"
        );
        moved = moved.max(want.abs());
    }
    assert!(moved > 0.01, "the pin moves the forecast");
}
