//! What every output file of one command names — the scenario it came from and the command's
//! run id — and the output folder's discipline: made and proved writable before any work,
//! every file written atomically, and the files of an earlier command that this one did not
//! write removed, so that a reader never takes one run's files for another's.

use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use serde::Serialize;

use super::{CAUTION, ReportError};

/// The scenario and run every file of one command names.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stamp {
    /// The scenario's name and file.
    pub scenario: String,
    /// UTC time to the second and the process id: `20261204T224103Z-51234`.
    pub run: String,
}

impl Stamp {
    /// A new run of the scenario `name` read from `file`.
    pub fn new(name: &str, file: &Path) -> Stamp {
        let seconds = SystemTime::now()
            .duration_since(UNIX_EPOCH)
            .map_or(0, |d| d.as_secs());
        Stamp {
            scenario: format!("{name} ({})", file.display()),
            run: format!("{}-{}", utc(seconds), std::process::id()),
        }
    }

    /// The comment line that opens each CSV file (`pandas.read_csv(..., comment="#")` and
    /// most spreadsheet imports skip it): the scenario, the run and the caution.
    pub fn csv_line(&self) -> String {
        format!("# {} · run {} · {CAUTION}", self.scenario, self.run)
    }
}

/// `YYYYMMDDTHHMMSSZ` for seconds since 1970-01-01 UTC.
pub fn utc(seconds: u64) -> String {
    let (year, month, day, rest) = civil(seconds);
    format!(
        "{year:04}{month:02}{day:02}T{:02}{:02}{:02}Z",
        rest / 3_600,
        rest / 60 % 60,
        rest % 60
    )
}

/// `YYYY-MM-DD HH:MM:SS UTC` for seconds since 1970-01-01 UTC.
pub fn readable_utc(seconds: u64) -> String {
    let (year, month, day, rest) = civil(seconds);
    format!(
        "{year:04}-{month:02}-{day:02} {:02}:{:02}:{:02} UTC",
        rest / 3_600,
        rest / 60 % 60,
        rest % 60
    )
}

/// Year, month, day and seconds into the day (the proleptic Gregorian calendar; days to a
/// civil date by the era-based method of Hinnant's "chrono-Compatible Low-Level Date
/// Algorithms").
fn civil(seconds: u64) -> (i64, i64, i64, u64) {
    let days = (seconds / 86_400) as i64;
    let rest = seconds % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1_460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    (year, month, day, rest)
}

/// One command's output folder.
#[derive(Debug)]
pub struct Outputs {
    dir: PathBuf,
    written: Vec<PathBuf>,
}

impl Outputs {
    /// Make the folder and prove it writable (a probe file written and removed), before any
    /// work is spent.
    pub fn prepare(dir: &Path) -> Result<Outputs, ReportError> {
        let io = |error| ReportError::Io {
            path: dir.to_path_buf(),
            error,
        };
        std::fs::create_dir_all(dir).map_err(io)?;
        let probe = dir.join(format!(".tiltyard-probe-{}", std::process::id()));
        std::fs::write(&probe, b"").map_err(io)?;
        std::fs::remove_file(&probe).map_err(io)?;
        // Temporary files of a command killed while writing (`.fans.csv.<pid>.tmp.csv`).
        for entry in std::fs::read_dir(dir).map_err(io)?.flatten() {
            let name = entry.file_name().to_string_lossy().into_owned();
            let ours = COMMAND_FILES
                .iter()
                .any(|f| name.starts_with(&format!(".{f}.")) && name.contains(".tmp"));
            if ours {
                let _ = std::fs::remove_file(entry.path());
            }
        }
        Ok(Outputs {
            dir: dir.to_path_buf(),
            written: Vec::new(),
        })
    }

    /// The path of `name` in the folder.
    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.join(name)
    }

    /// Write `name` with `write` (which writes atomically itself) and remember it.
    pub fn write(
        &mut self,
        name: &str,
        write: impl FnOnce(&Path) -> Result<(), ReportError>,
    ) -> Result<PathBuf, ReportError> {
        let path = self.dir.join(name);
        write(&path)?;
        self.written.push(path.clone());
        Ok(path)
    }

    /// The files written so far.
    pub fn written(&self) -> &[PathBuf] {
        &self.written
    }

    /// Remove the files of `family` (the names any command of this kind writes) that this
    /// command did not write: they belong to an earlier run. Returns the names removed.
    pub fn remove_stale(&self, family: &[&str]) -> Result<Vec<String>, ReportError> {
        let mut removed = Vec::new();
        for name in family {
            let path = self.dir.join(name);
            if self.written.contains(&path) || !path.exists() {
                continue;
            }
            std::fs::remove_file(&path).map_err(|error| ReportError::Io {
                path: path.clone(),
                error,
            })?;
            removed.push((*name).to_string());
        }
        Ok(removed)
    }
}

/// Every file a headless command may write into its folder (`run`, `check`, `compare`): each
/// command removes those it did not write.
pub const COMMAND_FILES: &[&str] = &[
    "fans.csv",
    "summary.csv",
    "attribution.csv",
    "draws.csv",
    "checks.json",
    "about.txt",
    "compare.csv",
    "compare-summary.csv",
    "compare.txt",
];

#[cfg(test)]
mod tests {
    use super::*;

    /// Dates from Python's `datetime.datetime.fromtimestamp(s, datetime.UTC)` (Python 3.13,
    /// `strftime("%Y%m%dT%H%M%SZ")`): the epoch, a leap day, the last second of February in
    /// a century year that is not a leap year and the next, and a date in 2026.
    #[test]
    fn utc_matches_the_civil_calendar() {
        assert_eq!(utc(0), "19700101T000000Z");
        assert_eq!(utc(951_782_400), "20000229T000000Z");
        assert_eq!(utc(4_107_542_399), "21000228T235959Z");
        assert_eq!(utc(4_107_542_400), "21000301T000000Z");
        assert_eq!(utc(1_796_424_063), "20261204T224103Z");
        assert_eq!(readable_utc(1_796_424_063), "2026-12-04 22:41:03 UTC");
    }

    #[test]
    fn stale_files_of_the_family_are_removed_and_others_kept() {
        let dir = std::env::temp_dir().join(format!("tiltyard-stamp-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        let mut out = Outputs::prepare(&dir).unwrap();
        for name in ["fans.csv", "draws.csv", "notes.txt"] {
            std::fs::write(dir.join(name), "old").unwrap();
        }
        out.write("fans.csv", |p| {
            std::fs::write(p, "new").map_err(|error| ReportError::Io {
                path: p.to_path_buf(),
                error,
            })
        })
        .unwrap();
        let removed = out.remove_stale(COMMAND_FILES).unwrap();
        assert_eq!(removed, vec!["draws.csv".to_string()]);
        assert_eq!(
            std::fs::read_to_string(dir.join("fans.csv")).unwrap(),
            "new"
        );
        assert!(dir.join("notes.txt").exists(), "files not ours are kept");
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
