//! Error types shared by every stage.
//!
//! Bad user input is reported as an [`InputError`]: one message that names the
//! file, the 1-based line (the header being line 1, as an editor shows it) and
//! the field, and says what was expected. Library code never panics on user
//! data; it returns one of these.

use std::fmt;
use std::path::{Path, PathBuf};

/// What kind of defect an [`InputError`] describes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum InputErrorKind {
    /// The file could not be opened or read (missing, unreadable, a loop of links).
    Unreadable,
    /// The file is empty, truncated or not text.
    Malformed,
    /// A required key, column or file is missing.
    Missing,
    /// A key, column or id that is not expected here (unknown or duplicated).
    Unexpected,
    /// A value of the wrong type, or not a finite number.
    BadValue,
    /// A value outside its plausible or declared range.
    OutOfRange,
    /// Two parts of the input disagree (rates, coverage, ids across files).
    Inconsistent,
}

/// One defect in an input file, with where it is and what was expected.
#[derive(Debug, Clone, PartialEq)]
pub struct InputError {
    /// The file at fault.
    pub file: PathBuf,
    /// 1-based line in that file, when the defect sits on a line.
    pub line: Option<usize>,
    /// The field (key, column or id) at fault, when there is one.
    pub field: Option<String>,
    /// What kind of defect this is.
    pub kind: InputErrorKind,
    /// What is wrong and what was expected, in plain words.
    pub message: String,
}

impl InputError {
    /// A new error about `file` of the given kind.
    pub fn new(file: impl AsRef<Path>, kind: InputErrorKind, message: impl Into<String>) -> Self {
        InputError {
            file: file.as_ref().to_path_buf(),
            line: None,
            field: None,
            kind,
            message: message.into(),
        }
    }

    /// Sets the 1-based line.
    pub fn at_line(mut self, line: usize) -> Self {
        self.line = Some(line);
        self
    }

    /// Sets the field (key, column or id).
    pub fn field(mut self, field: impl Into<String>) -> Self {
        self.field = Some(field.into());
        self
    }
}

impl fmt::Display for InputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let Some(line) = self.line {
            write!(f, ", line {line}")?;
        }
        if let Some(field) = &self.field {
            write!(f, ", field `{field}`")?;
        }
        // One error, one line: parsers' messages that span lines (e.g.
        // "invalid array\nexpected `]`") are joined with "; ".
        let mut parts = self
            .message
            .lines()
            .map(str::trim)
            .filter(|l| !l.is_empty());
        write!(f, ": {}", parts.next().unwrap_or(""))?;
        for p in parts {
            write!(f, "; {p}")?;
        }
        Ok(())
    }
}

impl std::error::Error for InputError {}

/// The crate's error type.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// Bad input: a session, protocol, scenario or configuration file.
    #[error("{0}")]
    Input(Box<InputError>),
    /// Reading or writing a file failed for a reason other than its content.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file or folder involved.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// The data are valid but cannot support the requested analysis
    /// (e.g. a DoF that never moves, too few samples for the folds).
    #[error("{0}")]
    Analysis(String),
    /// A caller passed arguments that contradict each other.
    #[error("invalid argument: {0}")]
    Argument(String),
}

impl From<InputError> for Error {
    fn from(e: InputError) -> Self {
        Error::Input(Box::new(e))
    }
}

impl Error {
    /// An I/O error about `path`.
    pub fn io(path: impl AsRef<Path>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.as_ref().to_path_buf(),
            source,
        }
    }

    /// The input error inside, if this is one.
    pub fn as_input(&self) -> Option<&InputError> {
        match self {
            Error::Input(e) => Some(e),
            _ => None,
        }
    }
}

/// Result with the crate's [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;
