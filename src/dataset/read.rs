//! Reading a dataset CSV into a header and raw rows.
//!
//! This part checks what can be checked one row at a time: the header (series
//! names), and for each row its width, its date label and its cells. The checks
//! across rows are in [`super::validate`].

use std::io::Read;

use csv::{Position, ReaderBuilder, StringRecord, Trim};

use super::error::DatasetError;
use super::period::Label;

use super::Dataset;

/// One data row as read: its line, its date label and its cells (`None` = missing).
pub(super) struct Row {
    pub line: u64,
    pub text: String,
    pub label: Label,
    pub cells: Vec<Option<f64>>,
}

/// The file as read, before the checks across rows.
pub(super) struct Table {
    pub names: Vec<String>,
    pub rows: Vec<Row>,
    /// Lines of rows whose cells were all empty.
    pub skipped: Vec<u64>,
}

/// Read and validate a whole dataset; `file` names the source in messages.
pub(super) fn read_dataset<R: Read>(file: &str, mut reader: R) -> Result<Dataset, DatasetError> {
    let mut bytes = Vec::new();
    reader
        .read_to_end(&mut bytes)
        .map_err(|error| DatasetError::Io {
            file: file.into(),
            error,
        })?;
    let table = read_table(file, &bytes)?;
    super::validate::build(file, table)
}

fn read_table(file: &str, bytes: &[u8]) -> Result<Table, DatasetError> {
    let lines = LineFinder(bytes);
    let mut csv = ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .trim(Trim::All)
        .from_reader(bytes);
    let mut records = csv.records();
    let header = match records.next() {
        None => return Err(DatasetError::Empty { file: file.into() }),
        Some(record) => record.map_err(|e| csv_error(file, &lines, e))?,
    };
    let header_line = lines.of(&header);
    let names = parse_header(file, header_line, &header)?;
    let mut rows = Vec::new();
    let mut skipped = Vec::new();
    for record in records {
        let record = record.map_err(|e| csv_error(file, &lines, e))?;
        let line = lines.of(&record);
        match parse_row(file, &names, line, &record)? {
            Some(row) => rows.push(row),
            None => skipped.push(line),
        }
    }
    if rows.is_empty() {
        return Err(DatasetError::NoData {
            file: file.into(),
            header_line,
        });
    }
    Ok(Table {
        names,
        rows,
        skipped,
    })
}

/// True 1-based lines for csv positions.
///
/// The csv reader skips blank lines but reports a record's position as where
/// the skipping began, so step over the line breaks to the record's first line.
struct LineFinder<'a>(&'a [u8]);

impl LineFinder<'_> {
    fn at(&self, position: &Position) -> u64 {
        let start = usize::try_from(position.byte()).unwrap_or(usize::MAX);
        let breaks = self
            .0
            .get(start..)
            .unwrap_or_default()
            .iter()
            .take_while(|&&b| b == b'\n' || b == b'\r')
            .filter(|&&b| b == b'\n')
            .count();
        position.line() + breaks as u64
    }

    fn of(&self, record: &StringRecord) -> u64 {
        record.position().map_or(0, |p| self.at(p))
    }
}

fn csv_error(file: &str, lines: &LineFinder, error: csv::Error) -> DatasetError {
    let line = error.position().map(|p| lines.at(p));
    let message = error.to_string();
    match error.into_kind() {
        csv::ErrorKind::Io(error) => DatasetError::Io {
            file: file.into(),
            error,
        },
        csv::ErrorKind::Utf8 { pos, .. } => DatasetError::NotUtf8 {
            file: file.into(),
            line: pos.map_or(line.unwrap_or(0), |p| lines.at(&p)),
        },
        _ => DatasetError::Csv {
            file: file.into(),
            line,
            message,
        },
    }
}

/// Series names from the header row (the first cell names the date column).
fn parse_header(file: &str, line: u64, header: &StringRecord) -> Result<Vec<String>, DatasetError> {
    let cells: Vec<&str> = header
        .iter()
        .map(|c| c.trim_start_matches('\u{feff}').trim())
        .collect();
    if cells.iter().all(|c| c.is_empty()) {
        return Err(DatasetError::Empty { file: file.into() });
    }
    if cells.len() < 2 {
        // A file saved with another separator reads as one column: name the separator.
        let separator = [';', '\t', '|'].into_iter().find(|c| cells[0].contains(*c));
        return Err(DatasetError::NoSeries {
            file: file.into(),
            line,
            separator,
        });
    }
    let names: Vec<String> = cells[1..].iter().map(|c| c.to_string()).collect();
    if let Some(j) = names.iter().position(|n| n.is_empty()) {
        return Err(DatasetError::EmptyName {
            file: file.into(),
            line,
            column: j + 2,
        });
    }
    // Columns by name, in one pass (a header of 200,000 columns takes a moment, not minutes).
    let mut seen: std::collections::HashMap<&str, Vec<usize>> = Default::default();
    for (j, name) in names.iter().enumerate() {
        seen.entry(name.as_str()).or_default().push(j + 2);
    }
    if let Some(name) = names.iter().find(|n| seen[n.as_str()].len() > 1) {
        return Err(DatasetError::DuplicateName {
            file: file.into(),
            line,
            name: name.clone(),
            columns: seen[name.as_str()].clone(),
        });
    }
    Ok(names)
}

/// One data row; `None` for a row whose cells are all empty (skipped).
fn parse_row(
    file: &str,
    names: &[String],
    line: u64,
    record: &StringRecord,
) -> Result<Option<Row>, DatasetError> {
    if record.iter().all(|c| c.trim().is_empty()) {
        return Ok(None);
    }
    if record.len() != names.len() + 1 {
        return Err(DatasetError::RowWidth {
            file: file.into(),
            line,
            found: record.len(),
            expected: names.len() + 1,
        });
    }
    let text = record[0].trim().to_string();
    let label = Label::parse(&text).map_err(|error| DatasetError::BadDate {
        file: file.into(),
        line,
        error,
    })?;
    let mut cells = Vec::with_capacity(names.len());
    for (j, (name, cell)) in names.iter().zip(record.iter().skip(1)).enumerate() {
        let cell_error = |too_large: bool| {
            let (file, series, text) = (file.to_string(), name.clone(), cell.trim().to_string());
            let column = j + 2;
            if too_large {
                DatasetError::OutOfRange {
                    file,
                    line,
                    column,
                    series,
                    text,
                }
            } else {
                DatasetError::NotANumber {
                    file,
                    line,
                    column,
                    series,
                    text,
                }
            }
        };
        cells.push(parse_cell(cell).map_err(cell_error)?);
    }
    Ok(Some(Row {
        line,
        text,
        label,
        cells,
    }))
}

/// A cell's value: `Ok(None)` when missing, `Err(too_large)` when not a usable number.
fn parse_cell(cell: &str) -> Result<Option<f64>, bool> {
    let t = cell.trim();
    if t.is_empty() || t == "." || t.eq_ignore_ascii_case("na") || t.eq_ignore_ascii_case("nan") {
        return Ok(None);
    }
    let numeric = t
        .bytes()
        .all(|b| b.is_ascii_digit() || matches!(b, b'+' | b'-' | b'.' | b'e' | b'E'));
    if !numeric || !t.bytes().any(|b| b.is_ascii_digit()) {
        return Err(false);
    }
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        Ok(_) => Err(true),
        Err(_) => Err(false),
    }
}
