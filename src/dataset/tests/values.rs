//! Tests of cells, missing values, transforms and reading from a file.

use super::super::*;
use super::{FILE, QUARTERLY};

use super::{failure, read};

#[test]
fn text_in_a_number_cell_is_an_error() {
    let e = failure("date,gdp,unemployment\n2000Q1,1,2\n2000Q2,1,n/a?\n", &[]);
    assert_eq!(
        e.to_string(),
        "economy.csv, line 3, column 3 (unemployment): \"n/a?\" is not a number"
    );
    assert!(
        matches!(&e, DatasetError::NotANumber { line: 3, column: 3, series, .. } if series == "unemployment")
    );
    for bad in ["inf", "1,5", "12%", "-", "e5", "0x10"] {
        let text = format!("date,gdp\n2000Q1,1\n2000Q2,\"{bad}\"\n");
        let e = failure(&text, &[FILE, "line 3", "column 2 (gdp)"]);
        assert!(
            matches!(
                e,
                DatasetError::NotANumber {
                    line: 3,
                    column: 2,
                    ..
                }
            ),
            "{bad}: {e:?}"
        );
    }
}

#[test]
fn a_number_too_large_for_f64_is_an_error() {
    let e = failure(
        "date,gdp\n2000Q1,1\n2000Q2,1e999\n",
        &[FILE, "line 3", "column 2 (gdp)", "\"1e999\""],
    );
    assert!(
        matches!(
            e,
            DatasetError::OutOfRange {
                line: 3,
                column: 2,
                ..
            }
        ),
        "{e:?}"
    );
}

#[test]
fn leading_missing_values_are_trimmed_with_a_note() {
    let text = "\
date,gdp,house_prices,credit
1990Q1,1,,NA
1990Q2,2,NaN,na
1990Q3,3,.,5
1990Q4,4, ,6
1991Q1,5,,7
1991Q2,6,,8
1991Q3,7,100,9
1991Q4,8,101,10
";
    let d = read(text).unwrap();
    assert_eq!(d.first_period(), Period::quarterly(1991, 3));
    assert_eq!(d.lines, vec![8, 9]);
    assert_eq!(
        d.columns,
        vec![vec![7.0, 8.0], vec![100.0, 101.0], vec![9.0, 10.0]]
    );
    assert_eq!(
        d.notes,
        vec![
            "trimmed 6 leading rows (1990Q1–1991Q2) because series house_prices starts in 1991Q3 \
             (also starting late: credit from 1990Q3)"
        ]
    );
}

#[test]
fn a_single_late_series_gives_the_plain_note() {
    let d = read("date,gdp,cpi\n2000-01,1,\n2000-02,2,3\n2000-03,3,4\n").unwrap();
    assert_eq!(
        d.notes,
        vec!["trimmed 1 leading row (2000-01) because series cpi starts in 2000-02"]
    );
    assert_eq!(d.len(), 2);
}

#[test]
fn interior_missing_value_is_an_error() {
    let text = "date,gdp,unemployment\n2009Q1,1,5\n2009Q2,2,NA\n2009Q3,3,6\n";
    let e = failure(text, &[]);
    assert_eq!(
        e.to_string(),
        "economy.csv: series unemployment has no value on line 3 (2009Q2); interior missing values are not interpolated"
    );
    assert!(
        matches!(&e, DatasetError::InteriorMissing { line: 3, column: 3, series, .. } if series == "unemployment")
    );
}

#[test]
fn trailing_missing_values_are_an_error() {
    let text = "date,gdp,unemployment\n2009Q1,1,5\n2009Q2,2,6\n2009Q3,3,\n2009Q4,4,.\n";
    let e = failure(
        text,
        &[FILE, "line 4", "2009Q3", "unemployment", "trailing"],
    );
    assert!(
        matches!(&e, DatasetError::TrailingMissing { line: 4, column: 3, series, .. } if series == "unemployment")
    );
}

#[test]
fn a_series_without_values_is_an_error() {
    let e = failure(
        "date,gdp,credit\n2000Q1,1,\n2000Q2,2,NA\n",
        &[FILE, "column 3 (credit)", "lines 2–3"],
    );
    assert!(
        matches!(&e, DatasetError::EmptySeries { column: 3, series, .. } if series == "credit"),
        "{e:?}"
    );
}

#[test]
fn fewer_than_two_complete_rows_is_an_error() {
    let e = failure(
        "date,gdp,cpi\n2000Q1,1,\n2000Q2,2,\n2000Q3,3,4\n",
        &[FILE, "line 4", "only 1 complete row"],
    );
    assert!(
        matches!(
            e,
            DatasetError::TooFewRows {
                line: 4,
                rows: 1,
                ..
            }
        ),
        "{e:?}"
    );
    let e = failure("date,gdp\n2000-01-01,1\n", &[FILE, "line 2"]);
    assert!(
        matches!(
            e,
            DatasetError::TooFewRows {
                line: 2,
                rows: 1,
                ..
            }
        ),
        "{e:?}"
    );
}

#[test]
fn rows_with_no_values_are_skipped_and_lines_stay_true() {
    let d = read("date,gdp\n\n2000Q1,1\n,\n2000Q2,2\n").unwrap();
    assert_eq!(d.lines, vec![3, 5]);
    assert_eq!(d.notes, vec!["skipped 1 row with no values (line 4)"]);
}

#[test]
fn log100_transform_gives_model_units() {
    let d = read("date,gdp,rate\n2000Q1,100,-0.5\n2000Q2,110,0\n").unwrap();
    let t = d
        .transformed(&[Transform::Log100, Transform::AsIs])
        .unwrap();
    assert!((t[0][0] - 460.517_018_6).abs() < 1e-6, "{}", t[0][0]);
    assert!((t[0][1] - 470.048_036_3).abs() < 1e-6, "{}", t[0][1]);
    assert_eq!(t[1], vec![-0.5, 0.0]);
    let back = Transform::Log100.inverse(t[0][1]);
    assert!((back - 110.0).abs() < 1e-10, "{back}");
}

#[test]
fn log100_rejects_zero_and_negative_values() {
    let d = read("date,gdp,rate\n2000Q1,1,2\n2000Q2,1,0\n2000Q3,1,-1\n").unwrap();
    let e = d
        .transformed(&[Transform::AsIs, Transform::Log100])
        .unwrap_err();
    let message = e.to_string();
    for part in [
        FILE,
        "line 3",
        "2000Q2",
        "series rate",
        "value 0",
        "above zero",
    ] {
        assert!(message.contains(part), "{message:?} lacks {part:?}");
    }
    assert!(
        matches!(&e, DatasetError::TransformRejected { line: 3, series, value, .. }
        if series == "rate" && *value == 0.0)
    );
    let d = read("date,gdp\n2000Q1,1\n2000Q2,-2\n").unwrap();
    let e = d.transformed(&[Transform::Log100]).unwrap_err();
    assert!(
        matches!(&e, DatasetError::TransformRejected { line: 3, value, .. } if *value == -2.0),
        "{e:?}"
    );
    assert!(e.to_string().contains("series gdp"), "{e}");
}

#[test]
fn transform_count_must_match_series() {
    let d = read(QUARTERLY).unwrap();
    let e = d.transformed(&[Transform::AsIs]).unwrap_err();
    assert!(
        matches!(
            e,
            DatasetError::TransformCount {
                expected: 2,
                found: 1,
                ..
            }
        ),
        "{e:?}"
    );
    assert!(e.to_string().contains(FILE), "{e}");
}

#[test]
fn reading_a_file_names_it_in_messages() {
    let dir = tempfile::tempdir().unwrap();
    let good = dir.path().join("history.csv");
    std::fs::write(&good, QUARTERLY).unwrap();
    let d = Dataset::read(&good).unwrap();
    assert_eq!(d.source, good);
    assert_eq!(d.len(), 3);

    let bad = dir.path().join("broken_history.csv");
    std::fs::write(&bad, "date,gdp\n2000Q1,1\n2000Q2,lots\n").unwrap();
    let e = Dataset::read(&bad).unwrap_err();
    assert!(
        matches!(
            e,
            DatasetError::NotANumber {
                line: 3,
                column: 2,
                ..
            }
        ),
        "{e:?}"
    );
    let message = e.to_string();
    assert!(
        message.contains("broken_history.csv, line 3, column 2 (gdp)"),
        "{message}"
    );

    let missing = dir.path().join("absent.csv");
    let e = Dataset::read(&missing).unwrap_err();
    assert!(matches!(e, DatasetError::Io { .. }), "{e:?}");
    assert!(e.to_string().contains("absent.csv"), "{e}");
}

#[test]
fn invalid_utf8_names_the_line() {
    let bytes: &[u8] = b"date,gdp\n2000Q1,1\n2000Q2,\xff\n";
    let e = Dataset::from_reader(FILE, bytes).unwrap_err();
    assert!(matches!(e, DatasetError::NotUtf8 { line: 3, .. }), "{e:?}");
    assert!(e.to_string().contains("economy.csv, line 3"), "{e}");
}

#[test]
fn line_numbers_count_blank_lines_and_crlf_endings() {
    let e = failure("\n\ndate,gdp,gdp\r\n2000Q1,1,2\r\n", &[FILE, "line 3"]);
    assert!(
        matches!(e, DatasetError::DuplicateName { line: 3, .. }),
        "{e:?}"
    );
    let text = "date,gdp\r\n2000Q1,1\r\n\r\n\r\n2000Q2,x\r\n";
    let e = failure(text, &[FILE, "line 5", "column 2 (gdp)"]);
    assert!(
        matches!(e, DatasetError::NotANumber { line: 5, .. }),
        "{e:?}"
    );
    let d = read("date,gdp\r\n\r\n2000Q1,1\r\n2000Q2,2\r\n").unwrap();
    assert_eq!(d.lines, vec![3, 4]);
}

#[test]
fn periods_sort_by_time() {
    let mut v = vec![
        Period::quarterly(2001, 1),
        Period::quarterly(1999, 4),
        Period::quarterly(2000, 2),
    ];
    v.sort();
    assert_eq!(
        v,
        vec![
            Period::quarterly(1999, 4),
            Period::quarterly(2000, 2),
            Period::quarterly(2001, 1)
        ]
    );
}
