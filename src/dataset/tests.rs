//! Tests of reading, validation and transforms through the public API.

use super::*;

mod values;

pub(super) const FILE: &str = "economy.csv";

pub(super) fn read(text: &str) -> Result<Dataset, DatasetError> {
    Dataset::from_reader(FILE, text.as_bytes())
}

/// The error for `text`, after checking its message mentions every one of `parts`.
pub(super) fn failure(text: &str, parts: &[&str]) -> DatasetError {
    let error = match read(text) {
        Ok(d) => panic!("expected an error, read {d:?}"),
        Err(e) => e,
    };
    let message = error.to_string();
    for part in parts {
        assert!(message.contains(part), "message {message:?} lacks {part:?}");
    }
    error
}

pub(super) const QUARTERLY: &str = "\
date,gdp,unemployment
1999Q1,100.0,5.0
1999Q2,101.5,4.8
1999Q3,102.0,4.9
";

#[test]
fn reads_quarterly_labels() {
    let d = read(QUARTERLY).unwrap();
    assert_eq!(d.source, PathBuf::from(FILE));
    assert_eq!(d.frequency, Frequency::Quarterly);
    assert_eq!(d.names, vec!["gdp", "unemployment"]);
    assert_eq!(
        d.periods,
        vec![
            Period::quarterly(1999, 1),
            Period::quarterly(1999, 2),
            Period::quarterly(1999, 3)
        ]
    );
    assert_eq!(
        d.columns,
        vec![vec![100.0, 101.5, 102.0], vec![5.0, 4.8, 4.9]]
    );
    assert_eq!(d.lines, vec![2, 3, 4]);
    assert!(d.notes.is_empty(), "{:?}", d.notes);
    assert_eq!((d.len(), d.is_empty()), (3, false));
    assert_eq!(d.first_period(), Period::quarterly(1999, 1));
    assert_eq!(d.last_period(), Period::quarterly(1999, 3));
}

#[test]
fn lookups_by_name_and_period() {
    let d = read(QUARTERLY).unwrap();
    assert_eq!(d.series_index("unemployment"), Some(1));
    assert_eq!(d.series_index("Unemployment"), None);
    assert_eq!(d.row_of(Period::quarterly(1999, 2)), Some(1));
    assert_eq!(d.row_of(Period::quarterly(1999, 4)), None);
    assert_eq!(d.row_of(Period::quarterly(1998, 4)), None);
    assert_eq!(d.row_of(Period::monthly(1999, 1)), None);
}

#[test]
fn reads_monthly_labels_in_both_spellings() {
    let d = read("period,cpi\n2004-11,1\n2004-12,2\n2005-01,3\n").unwrap();
    assert_eq!(d.frequency, Frequency::Monthly);
    assert_eq!(d.periods[2], Period::monthly(2005, 1));
    let d = read("period,cpi\n2004M11,1\n2004m12,2\n2005M1,3\n").unwrap();
    assert_eq!(d.frequency, Frequency::Monthly);
    assert_eq!(d.last_period(), Period::monthly(2005, 1));
}

#[test]
fn iso_dates_one_month_apart_are_monthly() {
    let d = read("date,cpi\n2004-11-01,1\n2004-12-01,2\n2005-01-01,3\n").unwrap();
    assert_eq!(d.frequency, Frequency::Monthly);
    assert_eq!(
        d.periods,
        vec![
            Period::monthly(2004, 11),
            Period::monthly(2004, 12),
            Period::monthly(2005, 1)
        ]
    );
}

#[test]
fn iso_dates_three_months_apart_are_quarterly() {
    let d = read("date,gdp\n2004-09-30,1\n2004-12-31,2\n2005-03-31,3\n").unwrap();
    assert_eq!(d.frequency, Frequency::Quarterly);
    assert_eq!(
        d.periods,
        vec![
            Period::quarterly(2004, 3),
            Period::quarterly(2004, 4),
            Period::quarterly(2005, 1)
        ]
    );
}

#[test]
fn iso_dates_at_another_spacing_are_an_error() {
    let e = failure(
        "date,gdp\n2004-01-01,1\n2004-03-01,2\n",
        &[FILE, "line 3", "\"2004-01-01\"", "\"2004-03-01\""],
    );
    assert!(
        matches!(
            e,
            DatasetError::UnclearFrequency {
                line: 3,
                first_line: 2,
                ..
            }
        ),
        "{e:?}"
    );
}

#[test]
fn iso_dates_must_stay_consecutive_after_detection() {
    let e = failure(
        "date,gdp\n2004-01-01,1\n2004-04-01,2\n2004-10-01,3\n",
        &[FILE, "line 4", "2004Q3 is missing"],
    );
    assert!(matches!(e, DatasetError::DateGap { line: 4, .. }), "{e:?}");
}

#[test]
fn cells_allow_spaces_plus_signs_and_exponents() {
    let d = read("date, a , b\n2000Q1,  +1.5 , 2e3\n2000Q2,\" -0.25\",1.5E-2\n").unwrap();
    assert_eq!(d.names, vec!["a", "b"]);
    assert_eq!(d.columns, vec![vec![1.5, -0.25], vec![2000.0, 0.015]]);
}

#[test]
fn header_byte_order_mark_is_ignored() {
    let d = read("\u{feff}date,gdp\n2000Q1,1\n2000Q2,2\n").unwrap();
    assert_eq!(d.names, vec!["gdp"]);
}

#[test]
fn empty_file_is_an_error() {
    let e = failure("", &[FILE, "empty"]);
    assert!(matches!(e, DatasetError::Empty { .. }), "{e:?}");
    assert!(matches!(
        failure("  \n\n", &[FILE]),
        DatasetError::Empty { .. }
    ));
}

#[test]
fn header_without_data_is_an_error() {
    let e = failure("date,gdp\n", &[FILE, "line 1", "no data rows"]);
    assert!(
        matches!(e, DatasetError::NoData { header_line: 1, .. }),
        "{e:?}"
    );
}

#[test]
fn header_with_only_a_date_column_is_an_error() {
    let e = failure("date\n2000Q1\n", &[FILE, "line 1", "only the date column"]);
    assert!(matches!(e, DatasetError::NoSeries { line: 1, .. }), "{e:?}");
}

#[test]
fn empty_series_name_is_an_error() {
    let e = failure(
        "date,gdp, ,cpi\n2000Q1,1,2,3\n",
        &[FILE, "line 1", "column 3"],
    );
    assert!(
        matches!(
            e,
            DatasetError::EmptyName {
                line: 1,
                column: 3,
                ..
            }
        ),
        "{e:?}"
    );
}

#[test]
fn duplicate_series_name_is_an_error() {
    let e = failure(
        "date,gdp,cpi,gdp\n2000Q1,1,2,3\n",
        &[FILE, "line 1", "\"gdp\"", "columns 2 and 4"],
    );
    assert!(
        matches!(&e, DatasetError::DuplicateName { line: 1, name, columns, .. }
        if name == "gdp" && columns == &[2, 4]),
        "{e:?}"
    );
    // Case matters: these are two different series.
    let d = read("date,gdp,GDP\n2000Q1,1,2\n2000Q2,1,2\n").unwrap();
    assert_eq!(d.names, vec!["gdp", "GDP"]);
}

#[test]
fn wrong_row_width_is_an_error() {
    let e = failure(
        "date,gdp,cpi\n2000Q1,1,2\n2000Q2,1\n",
        &[FILE, "line 3", "2 cells", "header has 3"],
    );
    assert!(
        matches!(
            e,
            DatasetError::RowWidth {
                line: 3,
                found: 2,
                expected: 3,
                ..
            }
        ),
        "{e:?}"
    );
}

#[test]
fn unparseable_date_is_an_error() {
    let e = failure(
        "date,gdp\n2000Q4,1\n2000Q5,2\n",
        &[FILE, "line 3", "\"2000Q5\"", "expected like 2004Q3"],
    );
    assert!(
        matches!(
            e,
            DatasetError::BadDate {
                line: 3,
                error: PeriodError::BadQuarter { .. },
                ..
            }
        ),
        "{e:?}"
    );
    let e = failure("date,gdp\nJan 2000,1\n", &[FILE, "line 2", "\"Jan 2000\""]);
    assert!(matches!(e, DatasetError::BadDate { line: 2, .. }), "{e:?}");
}

#[test]
fn mixed_date_styles_are_an_error() {
    let e = failure(
        "date,gdp\n2000Q1,1\n2000Q2,2\n2000-07,3\n",
        &[FILE, "line 4", "\"2000-07\"", "line 2"],
    );
    assert!(
        matches!(
            e,
            DatasetError::MixedDateStyles {
                line: 4,
                style: LabelStyle::Month,
                ..
            }
        ),
        "{e:?}"
    );
}

#[test]
fn a_gap_in_the_dates_is_an_error() {
    let e = failure("date,gdp\n1998Q4,0\n1999Q1,1\n1999Q3,2\n", &[]);
    assert_eq!(
        e.to_string(),
        "economy.csv, line 4: 1999Q3 follows 1999Q1; 1999Q2 is missing"
    );
    assert!(matches!(e, DatasetError::DateGap { line: 4, .. }), "{e:?}");
}

#[test]
fn a_repeated_date_is_an_error() {
    let e = failure("date,gdp\n1999Q1,1\n1999Q2,2\n1999Q2,3\n", &[]);
    assert_eq!(
        e.to_string(),
        "economy.csv, line 4: 1999Q2 appears again (first on line 3)"
    );
    assert!(
        matches!(
            e,
            DatasetError::DuplicateDate {
                line: 4,
                first_line: 3,
                ..
            }
        ),
        "{e:?}"
    );
    let e = failure(
        "date,gdp\n1999Q1,1\n1999Q2,2\n1999Q3,3\n1999Q1,4\n",
        &[FILE, "line 5", "first on line 2"],
    );
    assert!(
        matches!(
            e,
            DatasetError::DuplicateDate {
                line: 5,
                first_line: 2,
                ..
            }
        ),
        "{e:?}"
    );
}

#[test]
fn dates_out_of_order_are_an_error() {
    let e = failure(
        "date,gdp\n1999Q2,1\n1999Q3,2\n1999Q1,3\n",
        &[FILE, "line 4", "1999Q1 comes after 1999Q3"],
    );
    assert!(
        matches!(e, DatasetError::OutOfOrder { line: 4, .. }),
        "{e:?}"
    );
}
