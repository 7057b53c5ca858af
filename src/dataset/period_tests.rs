//! Tests of period arithmetic, parsing and formatting.

use super::*;

const Q: Frequency = Frequency::Quarterly;
const M: Frequency = Frequency::Monthly;

#[test]
fn ordinals_follow_the_documented_formula() {
    assert_eq!(Period::quarterly(2004, 3).ordinal, 2004 * 4 + 2);
    assert_eq!(Period::monthly(2004, 7).ordinal, 2004 * 12 + 6);
    let p = Period::quarterly(2004, 3);
    assert_eq!((p.year(), p.sub()), (2004, 3));
    let m = Period::monthly(1999, 12);
    assert_eq!((m.year(), m.sub()), (1999, 12));
    assert_eq!(Frequency::Quarterly.periods_per_year(), 4);
    assert_eq!(Frequency::Monthly.periods_per_year(), 12);
}

#[test]
fn quarterly_labels_parse_in_all_spellings() {
    let want = Period::quarterly(2004, 3);
    for text in ["2004Q3", "2004q3", "2004-Q3", " 2004Q3 "] {
        assert_eq!(Period::parse(text, Q), Ok(want), "{text}");
    }
}

#[test]
fn monthly_labels_parse_in_all_spellings() {
    let want = Period::monthly(2004, 7);
    for text in ["2004-07", "2004M07", "2004m7", "2004-7", "2004M7"] {
        assert_eq!(Period::parse(text, M), Ok(want), "{text}");
    }
}

#[test]
fn iso_dates_map_to_the_containing_period() {
    assert_eq!(
        Period::parse("2004-07-01", Q),
        Ok(Period::quarterly(2004, 3))
    );
    assert_eq!(
        Period::parse("2004-09-30", Q),
        Ok(Period::quarterly(2004, 3))
    );
    assert_eq!(
        Period::parse("2004-10-01", Q),
        Ok(Period::quarterly(2004, 4))
    );
    assert_eq!(Period::parse("2004-01-31", M), Ok(Period::monthly(2004, 1)));
    assert_eq!(Period::parse("2004-02-29", M), Ok(Period::monthly(2004, 2)));
}

#[test]
fn display_round_trips_through_parse() {
    for p in [
        Period::quarterly(2004, 3),
        Period::quarterly(1990, 1),
        Period::quarterly(2023, 4),
    ] {
        assert_eq!(Period::parse(&p.to_string(), Q), Ok(p));
    }
    for p in [
        Period::monthly(2004, 7),
        Period::monthly(1990, 1),
        Period::monthly(2023, 12),
    ] {
        assert_eq!(Period::parse(&p.to_string(), M), Ok(p));
    }
    assert_eq!(Period::quarterly(2004, 3).to_string(), "2004Q3");
    assert_eq!(Period::monthly(2004, 7).to_string(), "2004-07");
}

#[test]
fn offset_crosses_year_boundaries() {
    assert_eq!(
        Period::quarterly(2004, 4).offset(1),
        Period::quarterly(2005, 1)
    );
    assert_eq!(
        Period::quarterly(2004, 1).offset(-1),
        Period::quarterly(2003, 4)
    );
    assert_eq!(
        Period::quarterly(2004, 3).offset(6),
        Period::quarterly(2006, 1)
    );
    assert_eq!(
        Period::monthly(2004, 12).offset(1),
        Period::monthly(2005, 1)
    );
    assert_eq!(
        Period::monthly(2004, 1).offset(-13),
        Period::monthly(2002, 12)
    );
}

#[test]
fn periods_since_counts_steps() {
    let a = Period::quarterly(2001, 2);
    let b = Period::quarterly(2004, 1);
    assert_eq!(b.periods_since(&a), 11);
    assert_eq!(a.periods_since(&b), -11);
    assert_eq!(
        Period::monthly(2005, 3).periods_since(&Period::monthly(2004, 11)),
        4
    );
}

#[test]
fn decimal_year_places_periods_within_the_year() {
    assert_eq!(Period::quarterly(2004, 1).decimal_year(), 2004.0);
    assert_eq!(Period::quarterly(2004, 3).decimal_year(), 2004.5);
    assert_eq!(Period::monthly(2004, 4).decimal_year(), 2004.25);
}

#[test]
fn bad_labels_say_what_was_expected() {
    let e = Period::parse("2004Q5", Q).unwrap_err();
    assert_eq!(
        e,
        PeriodError::BadQuarter {
            text: "2004Q5".into()
        }
    );
    assert_eq!(
        e.to_string(),
        r#""2004Q5" is not a quarter (expected like 2004Q3)"#
    );
    let e = Period::parse("2004-13", M).unwrap_err();
    assert!(matches!(e, PeriodError::BadMonth { .. }));
    assert!(e.to_string().contains("expected like 2004-07"), "{e}");
    let e = Period::parse("2003-02-29", M).unwrap_err();
    assert!(matches!(e, PeriodError::BadDate { .. }));
    assert!(e.to_string().contains("\"2003-02-29\""), "{e}");
    let e = Period::parse("July 2004", M).unwrap_err();
    assert!(matches!(e, PeriodError::Unrecognised { .. }));
    assert_eq!(Period::parse("  ", M), Err(PeriodError::Empty));
    assert!(matches!(
        Period::parse("200407", M),
        Err(PeriodError::Unrecognised { .. })
    ));
    assert!(matches!(
        Period::parse("2004-M07", M),
        Err(PeriodError::Unrecognised { .. })
    ));
}

#[test]
fn a_label_in_the_other_frequency_is_rejected() {
    let e = Period::parse("2004Q3", M).unwrap_err();
    assert!(matches!(
        e,
        PeriodError::WrongFrequency {
            freq: Frequency::Monthly,
            ..
        }
    ));
    assert!(e.to_string().contains("monthly"), "{e}");
    assert!(e.to_string().contains("expected like 2004-07"), "{e}");
    assert!(Period::parse("2004-07", Q).is_err());
}
