//! Frequencies, periods, and the date labels that name them.
//!
//! A [`Period`] is an ordinal count of quarters or months since year 0, so
//! arithmetic (offsets, distances) is plain integer arithmetic. Labels are
//! parsed in three styles: quarter labels (`2004Q3`), month labels (`2004-07`,
//! `2004M07`) and ISO dates (`2004-07-01`), which map to the quarter or month
//! containing them.

use super::error::quoted;
use std::fmt;

use serde::{Deserialize, Serialize};

/// How often a dataset is observed. (Ordered only so that [`Period`] can be.)
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub enum Frequency {
    Quarterly,
    Monthly,
}

impl Frequency {
    /// 4 for quarterly data, 12 for monthly data.
    pub fn periods_per_year(self) -> usize {
        match self {
            Frequency::Quarterly => 4,
            Frequency::Monthly => 12,
        }
    }

    /// "quarterly" or "monthly".
    pub fn name(self) -> &'static str {
        match self {
            Frequency::Quarterly => "quarterly",
            Frequency::Monthly => "monthly",
        }
    }

    /// An example label in this frequency, for messages.
    pub fn example(self) -> &'static str {
        match self {
            Frequency::Quarterly => "2004Q3",
            Frequency::Monthly => "2004-07",
        }
    }
}

impl fmt::Display for Frequency {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A period as an ordinal: quarterly = year*4 + (quarter-1), monthly = year*12 + (month-1).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Period {
    pub freq: Frequency,
    pub ordinal: i64,
}

impl Period {
    /// The given quarter of the given year.
    ///
    /// # Panics
    /// If `quarter` is not in 1..=4 (a programming error; user text goes through [`Period::parse`]).
    pub fn quarterly(year: i32, quarter: u32) -> Period {
        assert!(
            (1..=4).contains(&quarter),
            "quarter {quarter} is not in 1..=4"
        );
        Period {
            freq: Frequency::Quarterly,
            ordinal: i64::from(year) * 4 + i64::from(quarter) - 1,
        }
    }

    /// The given month of the given year.
    ///
    /// # Panics
    /// If `month` is not in 1..=12 (a programming error; user text goes through [`Period::parse`]).
    pub fn monthly(year: i32, month: u32) -> Period {
        assert!((1..=12).contains(&month), "month {month} is not in 1..=12");
        Period {
            freq: Frequency::Monthly,
            ordinal: i64::from(year) * 12 + i64::from(month) - 1,
        }
    }

    /// The quarter or month (in `freq`) that contains the given calendar month.
    fn containing(freq: Frequency, year: i32, month: u32) -> Period {
        match freq {
            Frequency::Quarterly => Period::quarterly(year, (month - 1) / 3 + 1),
            Frequency::Monthly => Period::monthly(year, month),
        }
    }

    fn per_year(&self) -> i64 {
        self.freq.periods_per_year() as i64
    }

    /// Calendar year.
    pub fn year(&self) -> i32 {
        self.ordinal.div_euclid(self.per_year()) as i32
    }

    /// Quarter (1..=4) or month (1..=12) within the year.
    pub fn sub(&self) -> u32 {
        self.ordinal.rem_euclid(self.per_year()) as u32 + 1
    }

    /// The period `k` steps later (earlier when `k` is negative).
    pub fn offset(&self, k: i64) -> Period {
        Period {
            freq: self.freq,
            ordinal: self.ordinal + k,
        }
    }

    /// Number of periods from `earlier` to `self` (negative if `earlier` is later).
    pub fn periods_since(&self, earlier: &Period) -> i64 {
        debug_assert_eq!(self.freq, earlier.freq, "periods of different frequencies");
        self.ordinal - earlier.ordinal
    }

    /// Parse a period label in a known frequency: quarterly "2004Q3" (also "2004q3", "2004-Q3"),
    /// monthly "2004-07" (also "2004M07", "2004m7"), or an ISO date "2004-07-01" / "2004-09-30"
    /// which maps to the quarter/month containing it.
    pub fn parse(text: &str, freq: Frequency) -> Result<Period, PeriodError> {
        let label = Label::parse(text)?;
        label
            .period(freq)
            .ok_or_else(|| PeriodError::WrongFrequency {
                text: text.trim().to_string(),
                style: label.style,
                freq,
            })
    }

    /// Decimal year for plotting: year + (sub-1)/periods_per_year.
    pub fn decimal_year(&self) -> f64 {
        f64::from(self.year()) + f64::from(self.sub() - 1) / self.per_year() as f64
    }
}

impl fmt::Display for Period {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.freq {
            Frequency::Quarterly => write!(f, "{:04}Q{}", self.year(), self.sub()),
            Frequency::Monthly => write!(f, "{:04}-{:02}", self.year(), self.sub()),
        }
    }
}

/// The style a date label is written in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LabelStyle {
    /// `2004Q3`, `2004q3`, `2004-Q3`.
    Quarter,
    /// `2004-07`, `2004M07`, `2004m7`.
    Month,
    /// `2004-07-01`.
    Date,
}

impl LabelStyle {
    /// Words for messages: "a quarter label (like 2004Q3)", ...
    pub fn describe(self) -> &'static str {
        match self {
            LabelStyle::Quarter => "a quarter label (like 2004Q3)",
            LabelStyle::Month => "a month label (like 2004-07)",
            LabelStyle::Date => "an ISO date (like 2004-07-01)",
        }
    }
}

/// Why a period label could not be read.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum PeriodError {
    #[error("the date is empty (expected a label like 2004Q3, 2004-07 or 2004-07-01)")]
    Empty,
    #[error("{} is not a quarter (expected like 2004Q3)", quoted(.text))]
    BadQuarter { text: String },
    #[error("{} is not a month (expected like 2004-07 or 2004M07)", quoted(.text))]
    BadMonth { text: String },
    #[error("{} is not a calendar date (expected like 2004-07-01)", quoted(.text))]
    BadDate { text: String },
    #[error("{} is not a date label (expected like 2004Q3, 2004-07 or 2004-07-01)", quoted(.text))]
    Unrecognised { text: String },
    #[error("{} is {}, but the data are {freq} (expected like {})", quoted(.text), .style.describe(), .freq.example())]
    WrongFrequency {
        text: String,
        style: LabelStyle,
        freq: Frequency,
    },
}

/// A parsed date label, before a frequency is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Label {
    pub style: LabelStyle,
    pub year: i32,
    /// Quarter for [`LabelStyle::Quarter`], month otherwise.
    pub sub: u32,
}

impl Label {
    /// Read a label in any of the accepted styles.
    pub fn parse(text: &str) -> Result<Label, PeriodError> {
        let t = text.trim();
        if t.is_empty() {
            return Err(PeriodError::Empty);
        }
        let unrecognised = || PeriodError::Unrecognised {
            text: t.to_string(),
        };
        let digits = t.bytes().take_while(u8::is_ascii_digit).count();
        if digits != 4 {
            return Err(unrecognised());
        }
        let (year_text, rest) = t.split_at(4);
        let year: i32 = year_text.parse().map_err(|_| unrecognised())?;
        let (dashed, rest) = match rest.strip_prefix('-') {
            Some(r) => (true, r),
            None => (false, rest),
        };
        let make = |style, sub| Label { style, year, sub };
        match rest.as_bytes().first() {
            Some(b'Q' | b'q') => match small_number(&rest[1..]) {
                Some(q @ 1..=4) => Ok(make(LabelStyle::Quarter, q)),
                _ => Err(PeriodError::BadQuarter {
                    text: t.to_string(),
                }),
            },
            Some(b'M' | b'm') if !dashed => match small_number(&rest[1..]) {
                Some(m @ 1..=12) => Ok(make(LabelStyle::Month, m)),
                _ => Err(PeriodError::BadMonth {
                    text: t.to_string(),
                }),
            },
            Some(b'0'..=b'9') if dashed => month_or_date(t, year, rest),
            _ => Err(unrecognised()),
        }
    }

    /// The period this label names in `freq`, if the style fits the frequency.
    pub fn period(&self, freq: Frequency) -> Option<Period> {
        match (self.style, freq) {
            (LabelStyle::Quarter, Frequency::Quarterly) => {
                Some(Period::quarterly(self.year, self.sub))
            }
            (LabelStyle::Month, Frequency::Monthly) => Some(Period::monthly(self.year, self.sub)),
            (LabelStyle::Date, _) => Some(Period::containing(freq, self.year, self.sub)),
            _ => None,
        }
    }

    /// Calendar month count (year*12 + month-1); meaningful for month labels and dates.
    pub fn month_index(&self) -> i64 {
        i64::from(self.year) * 12 + i64::from(self.sub) - 1
    }
}

/// `rest` follows "YYYY-": either "MM" (month label) or "MM-DD" (ISO date).
fn month_or_date(text: &str, year: i32, rest: &str) -> Result<Label, PeriodError> {
    match rest.split_once('-') {
        None => match small_number(rest) {
            Some(m @ 1..=12) => Ok(Label {
                style: LabelStyle::Month,
                year,
                sub: m,
            }),
            _ => Err(PeriodError::BadMonth {
                text: text.to_string(),
            }),
        },
        Some((month, day)) => {
            let bad = || PeriodError::BadDate {
                text: text.to_string(),
            };
            let month = small_number(month)
                .filter(|m| (1..=12).contains(m))
                .ok_or_else(bad)?;
            let day = small_number(day).ok_or_else(bad)?;
            if day == 0 || day > days_in_month(year, month) {
                return Err(bad());
            }
            Ok(Label {
                style: LabelStyle::Date,
                year,
                sub: month,
            })
        }
    }
}

/// One or two ASCII digits.
fn small_number(s: &str) -> Option<u32> {
    if s.is_empty() || s.len() > 2 || !s.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    s.parse().ok()
}

fn days_in_month(year: i32, month: u32) -> u32 {
    let leap = (year % 4 == 0 && year % 100 != 0) || year % 400 == 0;
    match month {
        2 if leap => 29,
        2 => 28,
        4 | 6 | 9 | 11 => 30,
        _ => 31,
    }
}

#[cfg(test)]
#[path = "period_tests.rs"]
mod tests;
