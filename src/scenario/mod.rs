//! Scenarios: the RON file ([`schema`]), people's units turned into rows ([`units`]), and
//! the bridge to the engine ([`setup`]).

pub mod conditions;
pub mod layout;
pub mod schema;
pub mod setup;
pub mod units;

use std::path::{Path, PathBuf};

pub use schema::describe_drivers;
pub use schema::{
    Bound, Centre, CheckSettings, CorridorSpec, DriverSpec, FixedSpec, LargestRoot, ModelSpec,
    PinSpec, ScenarioFile, SeriesSpec, TargetSpec, Units,
};
pub use setup::Setup;

use crate::dataset::DatasetError;
use crate::model::ModelError;

/// Everything that can be wrong with a scenario; messages name the file, field, series or pin.
#[derive(Debug, thiserror::Error)]
pub enum ScenarioError {
    #[error("cannot read scenario {}: {error}", path.display())]
    Io {
        path: PathBuf,
        error: std::io::Error,
    },
    #[error("{}:{line}:{column}: {message}", path.display())]
    Syntax {
        path: PathBuf,
        line: usize,
        column: usize,
        message: String,
    },
    #[error("{field}: {why}")]
    Invalid { field: String, why: String },
    #[error("{field}: unknown series {name:?} (the choices are {known})")]
    UnknownSeries {
        field: String,
        name: String,
        known: String,
    },
    #[error("{field}: unknown shock {name:?} (shocks are named after the model series: {known})")]
    UnknownShock {
        field: String,
        name: String,
        known: String,
    },
    #[error("{field} ({label}): {why}")]
    Condition {
        field: String,
        label: String,
        why: String,
    },
    #[error(
        "too few observations: the estimation window {window} has {rows} periods, but {lags} lags need at least {} (lags + 3)",
        lags.saturating_add(3)
    )]
    TooFewObservations {
        rows: usize,
        lags: usize,
        window: String,
    },
    #[error(transparent)]
    Dataset(#[from] DatasetError),
    #[error("model: {0}")]
    Model(ModelError),
}

/// Names for a message: all of them when few, else the first twelve and how many more.
pub fn listing(names: &[String]) -> String {
    const SHOWN: usize = 12;
    let shown: Vec<String> = names
        .iter()
        .take(SHOWN)
        .map(|n| crate::dataset::short(n))
        .collect();
    match names.len().saturating_sub(SHOWN) {
        0 => shown.join(", "),
        more => format!("{} and {more} more", shown.join(", ")),
    }
}

fn ron_options() -> ron::Options {
    ron::Options::default().with_default_extension(ron::extensions::Extensions::IMPLICIT_SOME)
}

/// Parse scenario text; `path` is used in messages only.
pub fn parse(text: &str, path: &Path) -> Result<ScenarioFile, ScenarioError> {
    ron_options().from_str(text).map_err(|e| {
        let (line, column) = (e.span.start.line, e.span.start.col);
        // The parser notices a string left open only where the next quote closes it: name the
        // earlier line whose quotes do not pair up.
        let open = text
            .lines()
            .take(line.saturating_sub(1))
            .position(unpaired_quote)
            .map(|i| {
                format!(
                    " (line {} has a string that is not closed: a \" is missing)",
                    i + 1
                )
            })
            .unwrap_or_default();
        ScenarioError::Syntax {
            path: path.to_path_buf(),
            line,
            column,
            message: format!("{}{open}", plain_names(&e.code.to_string())),
        }
    })
}

/// True when a line (outside its `//` comment) has an odd number of unescaped quotes.
fn unpaired_quote(line: &str) -> bool {
    let mut quotes = 0;
    let mut chars = line.chars().peekable();
    let mut inside = false;
    while let Some(c) = chars.next() {
        match c {
            '\\' if inside => {
                chars.next();
            }
            '"' => {
                inside = !inside;
                quotes += 1;
            }
            '/' if !inside && chars.peek() == Some(&'/') => break,
            _ => {}
        }
    }
    quotes % 2 == 1
}

/// Error messages speak of the file's parts, not of the program's type names.
fn plain_names(message: &str) -> String {
    [
        ("`ScenarioFile`", "the scenario"),
        ("`SeriesSpec`", "a series"),
        ("`PinSpec`", "a pin"),
        ("`CorridorSpec`", "a corridor"),
        ("`CheckSettings`", "checks(...)"),
        (
            "data did not match any variant of untagged enum Bound",
            "a bound is a number, or a list with one number (or None) per period",
        ),
        ("`MinnesotaSettings`", "minnesota(...)"),
        ("`FlatSettings`", "flat(...)"),
        ("`FixedSpec`", "fixed(...)"),
        ("`Window`", "window(...)"),
    ]
    .iter()
    .fold(message.to_string(), |m, (from, to)| m.replace(from, to))
}

/// Read and parse a scenario file (UTF-8 text; a byte that is not names its line).
pub fn read(path: &Path) -> Result<ScenarioFile, ScenarioError> {
    let bytes = std::fs::read(path).map_err(|error| ScenarioError::Io {
        path: path.to_path_buf(),
        error,
    })?;
    let text = String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let bytes = e.as_bytes();
        let line = 1 + bytes[..at].iter().filter(|&&b| b == b'\n').count();
        let column = 1 + at
            - bytes[..at]
                .iter()
                .rposition(|&b| b == b'\n')
                .map_or(0, |p| p + 1);
        ScenarioError::Syntax {
            path: path.to_path_buf(),
            line,
            column,
            message: format!(
                "byte 0x{:02x} is not UTF-8 text; save the scenario as UTF-8",
                bytes[at]
            ),
        }
    })?;
    parse(&text, path)
}

/// Read a scenario and load its dataset.
pub fn load(path: &Path) -> Result<Setup, ScenarioError> {
    Setup::new(read(path)?, path)
}

/// The scenario as RON text, readable and parseable by [`parse`].
pub fn to_text(file: &ScenarioFile) -> String {
    let config = ron::ser::PrettyConfig::new()
        .struct_names(false)
        .extensions(ron::extensions::Extensions::IMPLICIT_SOME);
    ron::ser::to_string_pretty(file, config).unwrap_or_else(|e| format!("// cannot write: {e}"))
}
