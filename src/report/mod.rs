//! Tables written by the headless commands: `fans.csv`, `draws.csv`, `attribution.csv`,
//! `summary.csv`,
//! `about.txt` (what was run, and the caution every forecast export carries) and
//! `checks.json`.

pub mod attribution;
pub mod charts;
pub mod checks;
pub mod fans;
pub mod pack;
pub mod summary;

use std::path::Path;

pub use attribution::write_attribution;
pub use checks::{check_text, write_checks_json};
pub use fans::{FanRow, Kind, QUANTILES, displayable, fans, quantiles, weighted};
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

fn csv_writer(path: &Path) -> Result<csv::Writer<std::fs::File>, ReportError> {
    csv::Writer::from_path(path).map_err(|error| ReportError::Csv {
        path: path.to_path_buf(),
        error,
    })
}

/// `fans.csv`: `series,period,horizon,kind,units,mean,q05,q16,q25,q50,q75,q84,q95`.
pub fn write_fans(path: &Path, rows: &[FanRow]) -> Result<(), ReportError> {
    let err = |error| ReportError::Csv {
        path: path.to_path_buf(),
        error,
    };
    let mut w = csv_writer(path)?;
    w.write_record([
        "series", "period", "horizon", "kind", "units", "mean", "q05", "q16", "q25", "q50", "q75",
        "q84", "q95",
    ])
    .map_err(err)?;
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
        w.write_record(&rec).map_err(err)?;
    }
    w.flush().map_err(|error| ReportError::Io {
        path: path.to_path_buf(),
        error,
    })
}

/// `draws.csv`: `draw,series,period,value`, values in each series' display units.
pub fn write_draws(path: &Path, setup: &Setup, paths: &[Vec<f64>]) -> Result<(), ReportError> {
    let err = |error| ReportError::Csv {
        path: path.to_path_buf(),
        error,
    };
    let mut w = csv_writer(path)?;
    w.write_record(["draw", "series", "period", "value"])
        .map_err(err)?;
    let last = setup.last_period();
    for (d, path_values) in paths.iter().enumerate() {
        for t in 1..=setup.file.horizon {
            for i in 0..setup.n() {
                let v = fans::display_path_value(setup, path_values, i, t);
                w.write_record([
                    d.to_string(),
                    setup.names[i].clone(),
                    last.offset(t as i64).to_string(),
                    v.to_string(),
                ])
                .map_err(err)?;
            }
        }
    }
    w.flush().map_err(|error| ReportError::Io {
        path: path.to_path_buf(),
        error,
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

/// `about.txt`: the run summary and the caution.
pub fn write_about(path: &Path, summary: &str) -> Result<(), ReportError> {
    std::fs::write(path, format!("{summary}\n\n{CAUTION}\n")).map_err(|error| ReportError::Io {
        path: path.to_path_buf(),
        error,
    })
}
