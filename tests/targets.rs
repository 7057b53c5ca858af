//! Targets on the distribution (entropic tilting, Robertson, Tallman and Whiteman 2005) in a
//! run of the adverse demo with pins: the fans' weighted mean meets a mean target to 1e-9 (the
//! fans are summarised from the tilted weights by their own code), a standard deviation and
//! a tail probability are met, the tilted quantiles move the right way, and targets out of
//! reach or badly written are refused naming the target. The tilt's own mathematics is tested
//! against closed forms in `src/entropic.rs`.

use std::path::Path;

use tiltyard::report::fans::Kind;
use tiltyard::run::{RunOutcome, run};
use tiltyard::scenario::{self, Setup, TargetSpec, Units};

fn target(series: &str, period: &str, units: Units) -> TargetSpec {
    TargetSpec {
        series: series.into(),
        period: period.into(),
        units,
        mean: None,
        sd: None,
        probability: None,
        below: None,
        above: None,
        active: true,
    }
}

fn demo(targets: Vec<TargetSpec>) -> (Setup, Result<RunOutcome, tiltyard::run::RunError>) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/adverse-pins.ron");
    let mut file = scenario::read(&path).unwrap();
    file.draws = 300;
    file.targets = targets;
    let mut setup = Setup::new(file, &path).unwrap();
    let out = run(&mut setup, &Default::default());
    (setup, out)
}

fn fan<'a>(
    out: &'a RunOutcome,
    series: &str,
    period: &str,
    kind: Kind,
) -> &'a tiltyard::report::fans::FanRow {
    out.fans
        .iter()
        .find(|r| r.series == series && r.period.to_string() == period && r.kind == kind)
        .unwrap()
}

#[test]
fn a_mean_target_is_met_by_the_fans() {
    let (_, plain) = demo(Vec::new());
    let plain = plain.unwrap();
    let before = fan(&plain, "unemployment", "2027Q4", Kind::Conditional).mean;
    let mut t = target("unemployment", "2027Q4", Units::Level);
    t.mean = Some(before + 0.3);
    let (_, out) = demo(vec![t]);
    let out = out.unwrap();
    let row = fan(&out, "unemployment", "2027Q4", Kind::Conditional);
    println!("mean before {before}, after {}", row.mean);
    assert!((row.mean - (before + 0.3)).abs() < 1e-9 * before.abs());
    // Tilting up moves the median up too; the unconditional fan is untouched.
    let median_before = fan(&plain, "unemployment", "2027Q4", Kind::Conditional).quantiles[3];
    assert!(row.quantiles[3] > median_before);
    let u = |o: &RunOutcome| fan(o, "unemployment", "2027Q4", Kind::Unconditional).mean;
    assert_eq!(u(&out), u(&plain));
    let tilt = out.tilt.expect("the run says what the tilt did");
    assert!(tilt.divergence > 0.0 && tilt.effective_paths < tilt.paths as f64);
}

#[test]
fn a_standard_deviation_and_a_tail_probability_are_met() {
    let mut sd = target("unemployment", "2027Q4", Units::Level);
    sd.sd = Some(0.25);
    let mut tail = target("house_prices", "2027Q2", Units::YearOnYear);
    tail.probability = Some(0.2);
    tail.below = Some(-13.0);
    let (_, out) = demo(vec![sd, tail]);
    let tilt = out.unwrap().tilt.unwrap();
    for m in &tilt.targets {
        println!("{}: wanted {}, got {}", m.label, m.wanted, m.got);
        assert!((m.got - m.wanted).abs() < 1e-9, "{}", m.label);
    }
}

#[test]
fn targets_out_of_reach_or_badly_written_are_named() {
    let mut far = target("unemployment", "2027Q4", Units::Level);
    far.mean = Some(50.0);
    let (_, out) = demo(vec![far]);
    let text = out.unwrap_err().to_string();
    assert!(
        text.contains("targets[0]") && text.contains("cannot reach"),
        "{text}"
    );
    let mut both = target("unemployment", "2027Q4", Units::Level);
    both.mean = Some(7.0);
    both.sd = Some(0.5);
    let (_, out) = demo(vec![both]);
    let text = out.unwrap_err().to_string();
    assert!(
        text.contains("targets[0]") && text.contains("exactly one"),
        "{text}"
    );
    let mut late = target("unemployment", "2040Q4", Units::Level);
    late.mean = Some(7.0);
    let (_, out) = demo(vec![late]);
    let text = out.unwrap_err().to_string();
    assert!(
        text.contains("targets[0]") && text.contains("2040Q4"),
        "{text}"
    );
}

/// The split under a tilt: each way its parts add up to the total, and the total moves under
/// the tilt exactly as the fans' mean does. The fans' weighted mean is summarised from the
/// paths by the fans' own code; the split's total is the weighted conditions' parts plus the
/// targets' and the parameters' parts, and the identity `T_tilted − T_untilted = Ȳ_tilted − Ȳ_untilted`
/// holds draw by draw (both sides carry the same untilted free components), so it is checked
/// to rounding — with one path per posterior draw (each draw's part kept, its weight tilted)
/// and with three (each draw's part made again at its paths' tilted mean).
#[test]
fn the_split_follows_the_tilt() {
    for paths_per_draw in [1, 3] {
        let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/adverse-pins.ron");
        let run_with = |targets: Vec<TargetSpec>| {
            let mut file = scenario::read(&path).unwrap();
            file.draws = 120;
            file.paths_per_draw = paths_per_draw;
            file.targets = targets;
            let mut setup = Setup::new(file, &path).unwrap();
            let out = run(&mut setup, &Default::default()).unwrap();
            (setup, out)
        };
        let mut t = target("unemployment", "2027Q4", Units::Level);
        t.mean = Some(7.6);
        let (setup, tilted) = run_with(vec![t]);
        let (_, plain) = run_with(Vec::new());
        let i = setup
            .names
            .iter()
            .position(|s| s == "unemployment")
            .unwrap();
        let (terms, _) = tiltyard::report::attribution::linear_units(&setup, i);
        let n = setup.n();
        let part = |p: &[f64]| tiltyard::report::attribution::series_part(n, &terms, p, i);
        let h = setup.file.horizon;
        let mut moved: f64 = 0.0;
        for out in [&tilted, &plain] {
            let a = out.attribution.as_ref().unwrap();
            let sum_of = |parts: &mut dyn Iterator<Item = &Vec<f64>>| {
                let mut s = vec![0.0; h];
                for p in parts {
                    s.iter_mut().zip(part(p)).for_each(|(s, v)| *s += v);
                }
                s
            };
            let extra = |s: &mut Vec<f64>| {
                for p in a.parameters.iter().chain(&a.targets) {
                    s.iter_mut().zip(part(p)).for_each(|(s, v)| *s += v);
                }
            };
            let total = part(&a.total);
            let mut by_condition = sum_of(&mut a.by_condition.iter());
            extra(&mut by_condition);
            let mut by_shock = sum_of(&mut a.by_shock.iter());
            if let Some(p) = &a.parameters {
                by_shock.iter_mut().zip(part(p)).for_each(|(s, v)| *s += v);
            }
            for t in 0..h {
                let scale = 1.0 + total[t].abs();
                assert!((by_condition[t] - total[t]).abs() < 1e-9 * scale, "{t}");
                assert!((by_shock[t] - total[t]).abs() < 1e-9 * scale, "{t}");
            }
        }
        let at = (0..h)
            .find(|&k| setup.last_period().offset(k as i64 + 1).to_string() == "2027Q4")
            .unwrap();
        for k in 0..h {
            let period = setup.last_period().offset(k as i64 + 1).to_string();
            let fan_shift = fan(&tilted, "unemployment", &period, Kind::Conditional).mean
                - fan(&plain, "unemployment", &period, Kind::Conditional).mean;
            let split_shift = part(&tilted.attribution.as_ref().unwrap().total)[k]
                - part(&plain.attribution.as_ref().unwrap().total)[k];
            assert!(
                (fan_shift - split_shift).abs() < 1e-9,
                "{paths_per_draw} paths a draw, {period}: fans moved {fan_shift}, the split {split_shift}"
            );
            moved = moved.max(fan_shift.abs());
        }
        // The tilt did move the mean, and the targets' part is there.
        assert!(moved > 0.1, "{moved}");
        let targets = tilted
            .attribution
            .as_ref()
            .unwrap()
            .targets
            .as_ref()
            .unwrap();
        assert!(part(targets)[at].abs() > 1e-3);
        assert!(plain.attribution.as_ref().unwrap().targets.is_none());
    }
}
