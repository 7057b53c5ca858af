//! Everything that can be wrong with a dataset file, in plain words.
//!
//! Every message starts with the file name and, where there is one, the line
//! (1-based, as a text editor counts) so the user can go straight to it.
//! Messages are complete on their own: no variant has a `source()`, so error
//! chains print nothing twice.

use super::period::{LabelStyle, Period, PeriodError};
use super::transform::Transform;

/// Why a dataset could not be read or transformed.
#[derive(Debug, thiserror::Error)]
pub enum DatasetError {
    #[error("cannot read {file}: {error}")]
    Io { file: String, error: std::io::Error },
    #[error("{file}, line {line}: the file is not valid UTF-8 text; save it as UTF-8 CSV")]
    NotUtf8 { file: String, line: u64 },
    #[error("{file}{}: {message}", at_line(*.line))]
    Csv {
        file: String,
        line: Option<u64>,
        message: String,
    },
    #[error(
        "{file} is empty; expected a header row such as \"date,gdp,unemployment\" and then one row per period"
    )]
    Empty { file: String },
    #[error(
        "{file}, line {line}: the header has only the date column; {}",
        match separator {
            Some(c) => format!("the columns look separated by {} — save the file with commas between columns (CSV)", separator_name(*c)),
            None => "add at least one series column".into(),
        }
    )]
    NoSeries {
        file: String,
        line: u64,
        /// Another separator seen in the only column.
        separator: Option<char>,
    },
    #[error("{file}, line {line}, column {column}: the series name is empty")]
    EmptyName {
        file: String,
        line: u64,
        column: usize,
    },
    #[error("{file}, line {line}: series name {} is used by more than one column ({})", quoted(.name), join_columns(.columns))]
    DuplicateName {
        file: String,
        line: u64,
        name: String,
        columns: Vec<usize>,
    },
    #[error("{file} has a header (line {header_line}) but no data rows")]
    NoData { file: String, header_line: u64 },
    #[error("{file}, line {line}: the row has {found} cells but the header has {expected}")]
    RowWidth {
        file: String,
        line: u64,
        found: usize,
        expected: usize,
    },
    #[error("{file}, line {line}, column 1 (date): {error}")]
    BadDate {
        file: String,
        line: u64,
        error: PeriodError,
    },
    #[error(
        "{file}, line {line}: date {} is {}, but line {first_line} has {} ({}); use one date style throughout",
        quoted(.text), .style.describe(), .first_style.describe(), quoted(.first_text)
    )]
    MixedDateStyles {
        file: String,
        line: u64,
        text: String,
        style: LabelStyle,
        first_line: u64,
        first_text: String,
        first_style: LabelStyle,
    },
    #[error(
        "{file}, line {line}: cannot tell the frequency from the dates {} (line {first_line}) and {}; consecutive ISO dates must be one month apart (monthly data) or three months apart (quarterly data)",
        quoted(.first_text), quoted(.text)
    )]
    UnclearFrequency {
        file: String,
        first_line: u64,
        first_text: String,
        line: u64,
        text: String,
    },
    #[error("{file}, line {line}: {period} follows {previous}; {}", missing_between(.previous, .period))]
    DateGap {
        file: String,
        line: u64,
        period: Period,
        previous: Period,
    },
    #[error("{file}, line {line}: {period} appears again (first on line {first_line})")]
    DuplicateDate {
        file: String,
        line: u64,
        period: Period,
        first_line: u64,
    },
    #[error(
        "{file}, line {line}: {period} comes after {after} (line {after_line}): the dates are out of order; sort the rows by date"
    )]
    Unsorted {
        file: String,
        line: u64,
        period: Period,
        after_line: u64,
        after: Period,
    },
    #[error(
        "{file}, line {line}: {period} comes after {previous}; dates must run forward one period per row"
    )]
    OutOfOrder {
        file: String,
        line: u64,
        period: Period,
        previous: Period,
    },
    #[error("{file}, line {line}, column {column} ({}): {} is not a number", short(.series), quoted(.text))]
    NotANumber {
        file: String,
        line: u64,
        column: usize,
        series: String,
        text: String,
    },
    #[error("{file}, line {line}, column {column} ({}): {} is too large a number", short(.series), quoted(.text))]
    OutOfRange {
        file: String,
        line: u64,
        column: usize,
        series: String,
        text: String,
    },
    #[error(
        "{file}, column {column} ({series}): the series has no values at all (lines {first_line}–{last_line} are all missing)"
    )]
    EmptySeries {
        file: String,
        column: usize,
        series: String,
        first_line: u64,
        last_line: u64,
    },
    #[error(
        "{file}: series {series} has no value on line {line} ({period}); interior missing values are not interpolated"
    )]
    InteriorMissing {
        file: String,
        line: u64,
        column: usize,
        series: String,
        period: Period,
    },
    #[error(
        "{file}: series {series} has no value on line {line} ({period}) or after; trailing missing values are not allowed (drop those rows or fill them in)"
    )]
    TrailingMissing {
        file: String,
        line: u64,
        column: usize,
        series: String,
        period: Period,
    },
    #[error(
        "{file}, line {line}: only {rows} complete row{} from here to the end of the file; at least 2 are needed",
        if *.rows == 1 { "" } else { "s" }
    )]
    TooFewRows {
        file: String,
        line: u64,
        rows: usize,
    },
    #[error("{file}: {found} transforms were given for {expected} series")]
    TransformCount {
        file: String,
        expected: usize,
        found: usize,
    },
    #[error(
        "{file}, line {line} ({period}): series {series} has the value {value}, but its transform {transform} needs {}",
        .transform.requirement()
    )]
    TransformRejected {
        file: String,
        line: u64,
        period: Period,
        series: String,
        value: f64,
        transform: Transform,
    },
}

fn at_line(line: Option<u64>) -> String {
    line.map(|l| format!(", line {l}")).unwrap_or_default()
}

fn join_columns(columns: &[usize]) -> String {
    let text: Vec<String> = columns.iter().map(|c| c.to_string()).collect();
    match text.as_slice() {
        [] => String::new(),
        [one] => format!("column {one}"),
        [init @ .., last] => format!("columns {} and {last}", init.join(", ")),
    }
}

/// `text` in quotes for a message, cut to its first 40 characters when longer (a 5 MB cell
/// is not echoed whole).
pub fn quoted(text: &str) -> String {
    let (head, rest) = cut(text);
    format!("{head:?}{rest}")
}

/// `text` for a message without quotes (a series name), cut like [`quoted`].
pub fn short(text: &str) -> String {
    let (head, rest) = cut(text);
    format!("{head}{rest}")
}

fn cut(text: &str) -> (&str, String) {
    const SHOWN: usize = 40;
    match text.char_indices().nth(SHOWN) {
        None => (text, String::new()),
        Some((at, _)) => (
            &text[..at],
            format!("… ({} characters)", text.chars().count()),
        ),
    }
}

/// A separator as people name it.
fn separator_name(c: char) -> &'static str {
    match c {
        ';' => "semicolons (;)",
        '\t' => "tabs",
        _ => "vertical bars (|)",
    }
}

/// "1999Q2 is missing" or "1999Q2–1999Q4 are missing" for the periods strictly between.
fn missing_between(previous: &Period, period: &Period) -> String {
    let first = previous.offset(1);
    let last = period.offset(-1);
    if first == last {
        format!("{first} is missing")
    } else {
        format!("{first}–{last} are missing")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gap_message_names_the_missing_periods() {
        let one = DatasetError::DateGap {
            file: "economy.csv".into(),
            line: 57,
            period: Period::quarterly(1999, 3),
            previous: Period::quarterly(1999, 1),
        };
        assert_eq!(
            one.to_string(),
            "economy.csv, line 57: 1999Q3 follows 1999Q1; 1999Q2 is missing"
        );
        let many = DatasetError::DateGap {
            file: "economy.csv".into(),
            line: 9,
            period: Period::monthly(2000, 2),
            previous: Period::monthly(1999, 10),
        };
        assert!(
            many.to_string().ends_with("1999-11–2000-01 are missing"),
            "{many}"
        );
    }

    #[test]
    fn column_lists_read_naturally() {
        assert_eq!(join_columns(&[2, 5]), "columns 2 and 5");
        assert_eq!(join_columns(&[2, 3, 5]), "columns 2, 3 and 5");
    }
}
