//! Seeded mutations of the demo files, fed to the reading and checking code in-process: no
//! input may panic or hang, and every refusal must come with a message. The normal suite runs
//! a few thousand cases; `TILTYARD_FUZZ_CASES=100000 cargo test --test fuzz -- --nocapture`
//! runs a longer campaign (same seeds, more of them).

use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::Duration;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios-demo")
        .join(name)
}

/// Cases per kind (data files, scenario files) in the normal suite.
const CASES: usize = 2_500;
/// One case in this many that loads is also checked (estimation and the checks on a few
/// posterior draws); the rest stop after loading.
const CHECK_EVERY: usize = 10;
/// A case taking longer than this counts as a hang.
const PATIENCE: Duration = Duration::from_secs(60);

/// Values that break naive code: limits, non-numbers, signs, extreme exponents.
const NASTY: &[&str] = &[
    "0",
    "-0",
    "-1",
    "1e308",
    "-1e308",
    "1e-320",
    "NaN",
    "inf",
    "-inf",
    "18446744073709551615",
    "9223372036854775807",
    "4294967296",
    "1e999",
    "",
    "\"\"",
    "()",
    "[]",
    ",",
    ";",
    "\"",
    "//",
    "/*",
    "\u{feff}",
    "é",
    "2026Q5",
    "0000Q1",
    "9999Q4",
];

/// One mutation of `text`.
fn mutate(text: &str, rng: &mut ChaCha8Rng) -> Vec<u8> {
    let mut bytes = text.as_bytes().to_vec();
    let rounds = rng.random_range(1..=3);
    for _ in 0..rounds {
        if bytes.is_empty() {
            bytes.extend_from_slice(b"x");
        }
        let at = rng.random_range(0..bytes.len());
        match rng.random_range(0..9) {
            // Replace a number (or the token at a random place) with a nasty value.
            0 | 1 => {
                let start = (0..=at)
                    .rev()
                    .find(|&i| !bytes[i].is_ascii_alphanumeric() && bytes[i] != b'.')
                    .map_or(0, |i| i + 1);
                let end = (at..bytes.len())
                    .find(|&i| !bytes[i].is_ascii_alphanumeric() && bytes[i] != b'.')
                    .unwrap_or(bytes.len())
                    .max(start);
                let with = NASTY[rng.random_range(0..NASTY.len())].as_bytes();
                bytes.splice(start..end, with.iter().copied());
            }
            // Flip a byte.
            2 => bytes[at] ^= 1 << rng.random_range(0..8),
            // Delete a range.
            3 => {
                let end = (at + rng.random_range(1..40)).min(bytes.len());
                bytes.drain(at..end);
            }
            // Duplicate a range.
            4 => {
                let end = (at + rng.random_range(1..200)).min(bytes.len());
                let copy = bytes[at..end].to_vec();
                bytes.splice(at..at, copy);
            }
            // Insert a nasty token.
            5 => {
                let with = NASTY[rng.random_range(0..NASTY.len())].as_bytes();
                bytes.splice(at..at, with.iter().copied());
            }
            // Swap two lines.
            6 => {
                let text = String::from_utf8_lossy(&bytes).into_owned();
                let mut lines: Vec<&str> = text.lines().collect();
                if lines.len() > 2 {
                    let (i, j) = (
                        rng.random_range(0..lines.len()),
                        rng.random_range(0..lines.len()),
                    );
                    lines.swap(i, j);
                }
                bytes = (lines.join("\n") + "\n").into_bytes();
            }
            // Cut the file short.
            7 => bytes.truncate(at),
            // A random byte.
            _ => bytes.insert(at, rng.random()),
        }
    }
    bytes
}

/// Load (and sometimes check) one pair of files on a thread of its own: `Err` with the
/// panic's text, or a hang.
fn try_case(dir: &Path, check: bool) -> Result<(), String> {
    let path = dir.join("case.ron");
    let (send, receive) = mpsc::channel();
    std::thread::spawn(move || {
        let outcome = std::panic::catch_unwind(|| match tiltyard::scenario::load(&path) {
            Err(e) => {
                assert!(!e.to_string().trim().is_empty(), "an empty message");
                false
            }
            Ok(mut setup) => {
                if check {
                    setup.file.draws = setup.file.draws.min(5);
                    if let Err(e) = tiltyard::run::check(&setup) {
                        assert!(!e.to_string().trim().is_empty(), "an empty message");
                    }
                }
                true
            }
        });
        let _ = send.send(outcome.map_err(|p| {
            p.downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_else(|| "a panic".into())
        }));
    });
    match receive.recv_timeout(PATIENCE) {
        Ok(Ok(_)) => Ok(()),
        Ok(Err(panic)) => Err(format!("panicked: {panic}")),
        Err(_) => Err(format!("no answer within {PATIENCE:?}")),
    }
}

fn cases() -> usize {
    std::env::var("TILTYARD_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(CASES)
}

/// Run `count` cases where `make(i, rng)` gives the scenario text and data bytes of case `i`.
fn campaign(seed: u64, make: impl Fn(&mut ChaCha8Rng) -> (Vec<u8>, Vec<u8>)) {
    let dir = tempfile::tempdir().unwrap();
    let mut loaded = 0;
    let mut failures = Vec::new();
    for i in 0..cases() {
        let mut rng = ChaCha8Rng::seed_from_u64(seed ^ (i as u64).wrapping_mul(0x9e37_79b9));
        let (scenario, data) = make(&mut rng);
        std::fs::write(dir.path().join("case.ron"), &scenario).unwrap();
        std::fs::write(dir.path().join("economy.csv"), &data).unwrap();
        let check = i % CHECK_EVERY == 0;
        if let Err(e) = try_case(dir.path(), check) {
            let keep = dir.path().join(format!("failing-{i}"));
            failures.push(format!("case {i} (seed {seed}): {e}"));
            let _ = std::fs::create_dir_all(&keep);
            let _ = std::fs::write(keep.join("case.ron"), &scenario);
            let _ = std::fs::write(keep.join("economy.csv"), &data);
        } else {
            loaded += 1;
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
    assert!(loaded > 0);
}

#[test]
fn mutated_data_files_never_panic() {
    let scenario = std::fs::read_to_string(demo("adverse.ron")).unwrap();
    let csv = std::fs::read_to_string(demo("economy.csv")).unwrap();
    campaign(11, |rng| (scenario.clone().into_bytes(), mutate(&csv, rng)));
}

#[test]
fn mutated_scenario_files_never_panic() {
    let csv = std::fs::read(demo("economy.csv")).unwrap();
    let texts: Vec<String> = [
        "baseline.ron",
        "adverse.ron",
        "clash.ron",
        "adverse-pins.ron",
    ]
    .iter()
    .map(|f| std::fs::read_to_string(demo(f)).unwrap())
    .collect();
    campaign(29, |rng| {
        let text = &texts[rng.random_range(0..texts.len())];
        (mutate(text, rng), csv.clone())
    });
}
