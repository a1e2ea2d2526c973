//! The library's error type.
//!
//! Every failure that can be traced to something the user owns (a data file, a cell, an
//! experiment-file key, a model setting) carries a [`Location`] and says what was expected and
//! what was found, so the binary can print one line that tells the user where to look and what
//! to do. Only the binary adds context and prints; the library never prints.

use std::fmt;
use std::path::PathBuf;

/// Result alias used throughout the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Where in the user's input a problem was found. Every field is optional: a message names
/// whatever is known. Lines count from 1 (the first line of the file is line 1).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Location {
    /// The file, as the user named it (or as resolved relative to the experiment file).
    pub file: Option<PathBuf>,
    /// Line number, counting from 1.
    pub line: Option<u64>,
    /// Column, by its header name (or its number from 1 when there is no name).
    pub column: Option<String>,
    /// Key path in a TOML file, such as `datasets[1].file`.
    pub key: Option<String>,
}

impl Location {
    /// A location naming only a file.
    pub fn file(path: impl Into<PathBuf>) -> Self {
        Location {
            file: Some(path.into()),
            ..Default::default()
        }
    }

    /// A location naming only a key path (for settings that do not come from a file).
    pub fn key(key: impl Into<String>) -> Self {
        Location {
            key: Some(key.into()),
            ..Default::default()
        }
    }

    /// This location with a line number (from 1).
    pub fn with_line(mut self, line: u64) -> Self {
        self.line = Some(line);
        self
    }

    /// This location with a column name.
    pub fn with_column(mut self, column: impl Into<String>) -> Self {
        self.column = Some(column.into());
        self
    }

    /// This location with a key path.
    pub fn with_key(mut self, key: impl Into<String>) -> Self {
        self.key = Some(key.into());
        self
    }

    /// True when nothing is known.
    pub fn is_empty(&self) -> bool {
        self.file.is_none() && self.line.is_none() && self.column.is_none() && self.key.is_none()
    }
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut parts: Vec<String> = Vec::new();
        if let Some(file) = &self.file {
            parts.push(file.display().to_string());
        }
        if let Some(line) = self.line {
            parts.push(format!("line {line}"));
        }
        if let Some(column) = &self.column {
            parts.push(format!("column '{column}'"));
        }
        if let Some(key) = &self.key {
            parts.push(format!("key '{key}'"));
        }
        if parts.is_empty() {
            write!(f, "(no location)")
        } else {
            write!(f, "{}", parts.join(", "))
        }
    }
}

/// What kind of input problem was found. Tests match on this, so a message can be reworded
/// without breaking them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum InputKind {
    /// The file could not be opened or read.
    Unreadable,
    /// The file has no data at all.
    Empty,
    /// No header row was found.
    NoHeader,
    /// A column named in the experiment is not in the file, or a header is malformed.
    UnknownColumn,
    /// A unit that fickfit does not know.
    UnknownUnit,
    /// A cell that is not a number.
    NotANumber,
    /// NaN or an infinite value.
    NotFinite,
    /// A time before zero where that is not allowed.
    NegativeTime,
    /// Times that do not increase within one series.
    TimeNotIncreasing,
    /// The same row twice.
    DuplicateRow,
    /// A position outside the sample.
    PositionOutside,
    /// A sensor column with no position given.
    SensorWithoutPosition,
    /// An uncertainty that is zero or negative.
    BadUncertainty,
    /// Fewer points than the fit needs.
    TooFewPoints,
    /// A parameter is referenced but never defined.
    UndefinedParameter,
    /// Bounds that exclude the start value, or lower ≥ upper.
    BadBounds,
    /// A key that the experiment file does not know.
    UnknownKey,
    /// A key that is required but missing.
    MissingKey,
    /// A value of the right type but outside what makes sense physically.
    BadValue,
    /// The file is not valid TOML/CSV at all (syntax).
    Syntax,
    /// A row with a different number of cells than the header.
    RaggedRow,
    /// Text that is not valid UTF-8.
    Encoding,
}

/// The error type of the library.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A file could not be opened, read or written.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },

    /// A problem in the user's input (data file or experiment file), with its location.
    #[error("{location}: {message}")]
    Input {
        /// What kind of problem, for programs and tests.
        kind: InputKind,
        /// Where it is.
        location: Location,
        /// Expected versus found, and what to do, in plain words.
        message: String,
    },

    /// A model setting that is physically meaningless (negative thickness, D ≤ 0, ...).
    #[error("invalid setting '{setting}': {message}")]
    Setting {
        /// The setting, by its name (for example `thickness` or `ends.left.flux`).
        setting: String,
        /// Expected versus found.
        message: String,
    },

    /// The numerical solution failed (for example, the nonlinear step did not converge).
    #[error("solver failed at t = {time:e} s: {message}")]
    Solver {
        /// Model time in seconds at which it failed.
        time: f64,
        /// What went wrong.
        message: String,
    },

    /// The fit could not be carried out or its statistics could not be computed.
    #[error("fit failed: {0}")]
    Fit(String),

    /// A state that should not be reachable: a bug in fickfit, please report it.
    #[error("internal error (a bug in fickfit, please report it): {0}")]
    Internal(String),
}

impl Error {
    /// An input error.
    pub fn input(kind: InputKind, location: Location, message: impl Into<String>) -> Self {
        Error::Input {
            kind,
            location,
            message: message.into(),
        }
    }

    /// An invalid model setting.
    pub fn setting(setting: impl Into<String>, message: impl Into<String>) -> Self {
        Error::Setting {
            setting: setting.into(),
            message: message.into(),
        }
    }

    /// The input kind, when this is an input error.
    pub fn input_kind(&self) -> Option<InputKind> {
        match self {
            Error::Input { kind, .. } => Some(*kind),
            _ => None,
        }
    }

    /// The location, when this is an input error.
    pub fn location(&self) -> Option<&Location> {
        match self {
            Error::Input { location, .. } => Some(location),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn location_names_what_is_known() {
        let loc = Location::file("run1.csv")
            .with_line(12)
            .with_column("mass [mg]");
        assert_eq!(loc.to_string(), "run1.csv, line 12, column 'mass [mg]'");
        assert_eq!(Location::default().to_string(), "(no location)");
    }

    #[test]
    fn input_error_message_leads_with_location() {
        let e = Error::input(
            InputKind::NotANumber,
            Location::file("a.csv").with_line(3),
            "expected a number, found 'abc'",
        );
        assert_eq!(
            e.to_string(),
            "a.csv, line 3: expected a number, found 'abc'"
        );
        assert_eq!(e.input_kind(), Some(InputKind::NotANumber));
    }
}
