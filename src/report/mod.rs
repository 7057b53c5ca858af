//! Tables written by the headless commands: `fans.csv`, `draws.csv`, `attribution.csv`,
//! `summary.csv`, `about.txt` (what was run, and the caution every forecast export carries)
//! and `checks.json`. Every file is written atomically and names its scenario and run
//! ([`stamp`]).

pub mod attribution;
pub mod charts;
pub mod checks;
pub mod fans;
pub mod pack;
pub mod stamp;
pub mod summary;

use std::io::Write;
use std::path::Path;

pub use attribution::write_attribution;
pub use checks::{check_text, write_checks_json};
pub use fans::{FanRow, Kind, QUANTILES, displayable, fans, quantiles, weighted};
pub use stamp::{COMMAND_FILES, Outputs, Stamp};
pub use summary::{Stat, statistics, write_summary};

use crate::scenario::Setup;

/// Shown with every screen and export that shows forecasts.
pub const CAUTION: &str = "Model-based scenarios, not predictions or advice. Decisions rest with \
the institution's own governance, local rules and qualified staff.";

/// Errors while writing tables.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    #[error("cannot write {}: {error}", path.display())]
    Io {
        path: std::path::PathBuf,
        error: std::io::Error,
    },
    #[error("cannot write {}: {error}", path.display())]
    Csv {
        path: std::path::PathBuf,
        error: csv::Error,
    },
}

/// Write a CSV table atomically ([`replace_with`]), opened by the stamp's comment line;
/// `fill` writes the header and the records.
pub fn write_csv(
    path: &Path,
    stamp: &Stamp,
    fill: impl FnOnce(&mut csv::Writer<std::fs::File>) -> csv::Result<()>,
) -> Result<(), ReportError> {
    replace_with(path, |tmp| {
        let io = |error| ReportError::Io {
            path: path.to_path_buf(),
            error,
        };
        let mut file = std::fs::File::create(tmp).map_err(io)?;
        writeln!(file, "{}", stamp.csv_line()).map_err(io)?;
        let mut w = csv::Writer::from_writer(file);
        fill(&mut w).map_err(|error| ReportError::Csv {
            path: path.to_path_buf(),
            error,
        })?;
        w.flush().map_err(io)
    })
}

/// `fans.csv`: `series,period,horizon,kind,units,mean,q05,q16,q25,q50,q75,q84,q95`.
pub fn write_fans(path: &Path, stamp: &Stamp, rows: &[FanRow]) -> Result<(), ReportError> {
    write_csv(path, stamp, |w| {
        w.write_record([
            "series", "period", "horizon", "kind", "units", "mean", "q05", "q16", "q25", "q50",
            "q75", "q84", "q95",
        ])?;
        for r in rows {
            let mut rec = vec![
                r.series.clone(),
                r.period.to_string(),
                r.horizon.to_string(),
                r.kind.label().to_string(),
                r.units.label(),
                r.mean.to_string(),
            ];
            rec.extend(r.quantiles.iter().map(|q| q.to_string()));
            w.write_record(&rec)?;
        }
        Ok(())
    })
}

/// `draws.csv`: `draw,weight,series,period,value`, values in each series' display units;
/// `weight` is the path's share in the conditional fans (`weights`, summing to one: after
/// reweighting or a tilt to targets; equal shares without).
pub fn write_draws(
    path: &Path,
    stamp: &Stamp,
    setup: &Setup,
    paths: &[Vec<f64>],
    weights: Option<&[f64]>,
) -> Result<(), ReportError> {
    let equal = 1.0 / paths.len().max(1) as f64;
    write_csv(path, stamp, |w| {
        w.write_record(["draw", "weight", "series", "period", "value"])?;
        let last = setup.last_period();
        for (d, path_values) in paths.iter().enumerate() {
            let weight = weights.and_then(|w| w.get(d)).copied().unwrap_or(equal);
            for t in 1..=setup.file.horizon {
                for i in 0..setup.n() {
                    let v = fans::display_path_value(setup, path_values, i, t);
                    w.write_record([
                        d.to_string(),
                        weight.to_string(),
                        setup.names[i].clone(),
                        last.offset(t as i64).to_string(),
                        v.to_string(),
                    ])?;
                }
            }
        }
        Ok(())
    })
}

/// Make `path` anew atomically: `write` fills a temporary file beside it (with the same
/// extension, which some writers read), which is synced to disk and renamed over `path`; a
/// reader never sees a half-written file, and a failure leaves the old one in place.
pub fn replace_with(
    path: &Path,
    write: impl FnOnce(&Path) -> Result<(), ReportError>,
) -> Result<(), ReportError> {
    let io = |error| ReportError::Io {
        path: path.to_path_buf(),
        error,
    };
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".into());
    let extension = path
        .extension()
        .map(|e| format!(".{}", e.to_string_lossy()))
        .unwrap_or_default();
    let tmp = path.with_file_name(format!(".{name}.{}.tmp{extension}", std::process::id()));
    let result = write(&tmp)
        .and_then(|_| {
            std::fs::File::open(&tmp)
                .and_then(|f| f.sync_all())
                .map_err(io)
        })
        .and_then(|_| std::fs::rename(&tmp, path).map_err(io));
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Write `bytes` to `path` atomically ([`replace_with`]).
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    replace_with(path, |tmp| {
        std::fs::write(tmp, bytes).map_err(|error| ReportError::Io {
            path: tmp.to_path_buf(),
            error,
        })
    })
    .map_err(|e| match e {
        ReportError::Io { error, .. } => error,
        other => std::io::Error::other(other.to_string()),
    })
}

/// `about.txt`: the run summary (its first line names the scenario), the run and the caution.
pub fn write_about(path: &Path, stamp: &Stamp, summary: &str) -> Result<(), ReportError> {
    let text = format!("{summary}\nrun        {}\n\n{CAUTION}\n", stamp.run);
    write_atomic(path, text.as_bytes()).map_err(|error| ReportError::Io {
        path: path.to_path_buf(),
        error,
    })
}
