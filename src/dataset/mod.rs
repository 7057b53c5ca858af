//! The user's history: a CSV file with a date column and one numeric column per series.
//!
//! [`Dataset::read`] validates the file and reports every problem with the file
//! name, line and column, in plain words. Leading missing values (series that
//! start late) are trimmed with a note in [`Dataset::notes`]; any other missing
//! value is an error, because the model does not interpolate.
//!
//! Dates may be quarter labels (`2004Q3`), month labels (`2004-07`, `2004M07`)
//! or ISO dates (`2004-07-01`); the frequency is detected from them and every
//! row must follow the previous one by exactly one period.
//!
//! [`Dataset::transformed`] turns the raw columns into model units with a
//! per-series [`Transform`].

mod error;
mod period;
mod read;
mod transform;
mod validate;

#[cfg(test)]
mod tests;

use std::path::{Path, PathBuf};

pub use error::{DatasetError, quoted, short};
pub use period::{Frequency, LabelStyle, Period, PeriodError};
pub use transform::Transform;

/// A validated history: consecutive periods, named series, all values finite.
#[derive(Debug, Clone, PartialEq)]
pub struct Dataset {
    /// The file it came from (for messages); the given name for [`Dataset::from_reader`].
    pub source: PathBuf,
    pub frequency: Frequency,
    /// Consecutive, one per kept row.
    pub periods: Vec<Period>,
    /// Series names (header), in file order.
    pub names: Vec<String>,
    /// `columns[series][row]`, raw values, all finite after trimming.
    pub columns: Vec<Vec<f64>>,
    /// 1-based file line of each kept row (for messages).
    pub lines: Vec<u64>,
    /// Non-fatal remarks, e.g. about trimmed leading rows.
    pub notes: Vec<String>,
}

impl Dataset {
    /// Read and validate a dataset file.
    pub fn read(path: &Path) -> Result<Dataset, DatasetError> {
        let name = path.display().to_string();
        let file = std::fs::File::open(path).map_err(|error| DatasetError::Io {
            file: name.clone(),
            error,
        })?;
        let mut dataset = read::read_dataset(&name, file)?;
        dataset.source = path.to_path_buf();
        Ok(dataset)
    }

    /// Read and validate a dataset from any reader; `source` names it in messages
    /// (e.g. `"<memory>"`).
    pub fn from_reader<R: std::io::Read>(source: &str, reader: R) -> Result<Dataset, DatasetError> {
        read::read_dataset(source, reader)
    }

    /// Position of the series called `name` (exact, case-sensitive).
    pub fn series_index(&self, name: &str) -> Option<usize> {
        self.names.iter().position(|n| n == name)
    }

    /// Number of kept rows (periods).
    pub fn len(&self) -> usize {
        self.periods.len()
    }

    pub fn is_empty(&self) -> bool {
        self.periods.is_empty()
    }

    /// # Panics
    /// If the dataset is empty (never the case for one that was read).
    pub fn first_period(&self) -> Period {
        self.periods[0]
    }

    /// # Panics
    /// If the dataset is empty (never the case for one that was read).
    pub fn last_period(&self) -> Period {
        self.periods[self.periods.len() - 1]
    }

    /// Row index of `period`, if the dataset covers it (and it has the dataset's frequency).
    pub fn row_of(&self, period: Period) -> Option<usize> {
        let first = *self.periods.first()?;
        if period.freq != first.freq {
            return None;
        }
        usize::try_from(period.periods_since(&first))
            .ok()
            .filter(|&row| row < self.len())
    }

    /// Columns in model units for the given transforms (one per series, same order
    /// as names); the error names the series, period, file and line of a value the
    /// transform rejects (e.g. a non-positive value under Log100).
    pub fn transformed(&self, transforms: &[Transform]) -> Result<Vec<Vec<f64>>, DatasetError> {
        let file = self.source.display().to_string();
        if transforms.len() != self.columns.len() {
            return Err(DatasetError::TransformCount {
                file,
                expected: self.columns.len(),
                found: transforms.len(),
            });
        }
        let mut out = Vec::with_capacity(self.columns.len());
        for ((column, &transform), name) in self.columns.iter().zip(transforms).zip(&self.names) {
            let mut values = Vec::with_capacity(column.len());
            for (row, &value) in column.iter().enumerate() {
                let Some(x) = transform.forward(value) else {
                    return Err(DatasetError::TransformRejected {
                        file,
                        line: self.lines.get(row).copied().unwrap_or(0),
                        period: self.periods[row],
                        series: name.clone(),
                        value,
                        transform,
                    });
                };
                values.push(x);
            }
            out.push(values);
        }
        Ok(out)
    }
}
