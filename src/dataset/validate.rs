//! Checks across rows, and assembling the [`Dataset`].
//!
//! The frequency (from the label style, or from the spacing of the first two
//! ISO dates), strictly consecutive dates, and missing values: leading gaps are
//! trimmed with a note, anything else is an error.

use std::collections::HashMap;

use super::error::DatasetError;
use super::period::{Frequency, LabelStyle, Period, PeriodError};
use super::read::{Row, Table};

use super::Dataset;

/// Check a table across its rows and turn it into a dataset.
pub(super) fn build(file: &str, table: Table) -> Result<Dataset, DatasetError> {
    let Table {
        names,
        rows,
        skipped,
    } = table;
    let frequency = detect_frequency(file, &rows)?;
    let periods = assign_periods(file, &rows, frequency)?;
    check_consecutive(file, &rows, &periods)?;
    let starts = series_starts(file, &names, &rows)?;
    let start = starts.iter().copied().max().unwrap_or(0);
    check_complete(file, &names, &rows[start..], &periods[start..])?;
    if rows.len() - start < 2 {
        return Err(DatasetError::TooFewRows {
            file: file.into(),
            line: rows[start].line,
            rows: rows.len() - start,
        });
    }
    let notes = skipped_note(&skipped)
        .into_iter()
        .chain(trim_note(&names, &periods, &starts, start))
        .collect();
    let kept = &rows[start..];
    let columns = (0..names.len())
        .map(|j| kept.iter().filter_map(|r| r.cells[j]).collect())
        .collect();
    Ok(Dataset {
        source: file.into(),
        frequency,
        periods: periods[start..].to_vec(),
        names,
        columns,
        lines: kept.iter().map(|r| r.line).collect(),
        notes,
    })
}

/// Quarterly or monthly, from the label style (and for ISO dates, the first two rows).
fn detect_frequency(file: &str, rows: &[Row]) -> Result<Frequency, DatasetError> {
    let first = &rows[0];
    if let Some(row) = rows.iter().find(|r| r.label.style != first.label.style) {
        return Err(DatasetError::MixedDateStyles {
            file: file.into(),
            line: row.line,
            text: row.text.clone(),
            style: row.label.style,
            first_line: first.line,
            first_text: first.text.clone(),
            first_style: first.label.style,
        });
    }
    match first.label.style {
        LabelStyle::Quarter => Ok(Frequency::Quarterly),
        LabelStyle::Month => Ok(Frequency::Monthly),
        LabelStyle::Date => {
            let Some(second) = rows.get(1) else {
                return Err(DatasetError::TooFewRows {
                    file: file.into(),
                    line: first.line,
                    rows: 1,
                });
            };
            match second.label.month_index() - first.label.month_index() {
                1 => Ok(Frequency::Monthly),
                3 => Ok(Frequency::Quarterly),
                _ => Err(DatasetError::UnclearFrequency {
                    file: file.into(),
                    first_line: first.line,
                    first_text: first.text.clone(),
                    line: second.line,
                    text: second.text.clone(),
                }),
            }
        }
    }
}

fn assign_periods(file: &str, rows: &[Row], freq: Frequency) -> Result<Vec<Period>, DatasetError> {
    rows.iter()
        .map(|row| {
            row.label.period(freq).ok_or_else(|| DatasetError::BadDate {
                file: file.into(),
                line: row.line,
                error: PeriodError::WrongFrequency {
                    text: row.text.clone(),
                    style: row.label.style,
                    freq,
                },
            })
        })
        .collect()
}

/// Every date must be exactly one period after the previous one.
fn check_consecutive(file: &str, rows: &[Row], periods: &[Period]) -> Result<(), DatasetError> {
    let mut seen: HashMap<Period, u64> = HashMap::new();
    seen.insert(periods[0], rows[0].line);
    for (row, pair) in rows[1..].iter().zip(periods.windows(2)) {
        let (previous, period) = (pair[0], pair[1]);
        let (file, line) = (file.to_string(), row.line);
        let step = period.periods_since(&previous);
        if step == 1 {
            seen.insert(period, line);
        } else if let Some(&first_line) = seen.get(&period) {
            return Err(DatasetError::DuplicateDate {
                file,
                line,
                period,
                first_line,
            });
        } else if step > 1 {
            // A "missing" period that appears further down: the rows are out of order.
            let later = rows
                .iter()
                .zip(periods)
                .find(|(_, p)| p.periods_since(&previous) > 0 && period.periods_since(p) > 0);
            if let Some((later_row, &later_period)) = later {
                return Err(DatasetError::Unsorted {
                    file,
                    line: later_row.line,
                    period: later_period,
                    after_line: line,
                    after: period,
                });
            }
            return Err(DatasetError::DateGap {
                file,
                line,
                period,
                previous,
            });
        } else {
            return Err(DatasetError::OutOfOrder {
                file,
                line,
                period,
                previous,
            });
        }
    }
    Ok(())
}

/// For each series, the index of its first row with a value.
fn series_starts(file: &str, names: &[String], rows: &[Row]) -> Result<Vec<usize>, DatasetError> {
    let (first_line, last_line) = (rows[0].line, rows[rows.len() - 1].line);
    names
        .iter()
        .enumerate()
        .map(|(j, name)| {
            rows.iter()
                .position(|r| r.cells[j].is_some())
                .ok_or_else(|| DatasetError::EmptySeries {
                    file: file.into(),
                    column: j + 2,
                    series: name.clone(),
                    first_line,
                    last_line,
                })
        })
        .collect()
}

/// After trimming, every cell must have a value; report the first one that does not.
fn check_complete(
    file: &str,
    names: &[String],
    rows: &[Row],
    periods: &[Period],
) -> Result<(), DatasetError> {
    for (i, (row, &period)) in rows.iter().zip(periods).enumerate() {
        let Some(j) = row.cells.iter().position(Option::is_none) else {
            continue;
        };
        let (file, line, column, series) = (file.to_string(), row.line, j + 2, names[j].clone());
        let trailing = rows[i..].iter().all(|r| r.cells[j].is_none());
        return Err(match trailing {
            true => DatasetError::TrailingMissing {
                file,
                line,
                column,
                series,
                period,
            },
            false => DatasetError::InteriorMissing {
                file,
                line,
                column,
                series,
                period,
            },
        });
    }
    Ok(())
}

/// "trimmed 6 leading rows (1990Q1–1991Q2) because series house_prices starts in 1991Q3".
fn trim_note(
    names: &[String],
    periods: &[Period],
    starts: &[usize],
    start: usize,
) -> Option<String> {
    if start == 0 {
        return None;
    }
    let span = match start {
        1 => format!("1 leading row ({})", periods[0]),
        n => format!("{n} leading rows ({}–{})", periods[0], periods[n - 1]),
    };
    let latest: Vec<&str> = names
        .iter()
        .zip(starts)
        .filter(|&(_, &s)| s == start)
        .map(|(n, _)| n.as_str())
        .collect();
    let mut note = format!("trimmed {span} because series {} ", latest.join(", "));
    note += if latest.len() == 1 { "starts" } else { "start" };
    note += &format!(" in {}", periods[start]);
    let others: Vec<String> = names
        .iter()
        .zip(starts)
        .filter(|&(_, &s)| s > 0 && s < start)
        .map(|(n, &s)| format!("{n} from {}", periods[s]))
        .collect();
    if !others.is_empty() {
        note += &format!(" (also starting late: {})", others.join(", "));
    }
    Some(note)
}

fn skipped_note(lines: &[u64]) -> Option<String> {
    let list: Vec<String> = lines.iter().map(u64::to_string).collect();
    match list.as_slice() {
        [] => None,
        [one] => Some(format!("skipped 1 row with no values (line {one})")),
        many => Some(format!(
            "skipped {} rows with no values (lines {})",
            many.len(),
            many.join(", ")
        )),
    }
}
