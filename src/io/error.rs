//! The I/O layer's error: every message names the file and, where known, the line and field.

use std::fmt;
use std::path::{Path, PathBuf};

/// Where in an input a problem was found.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Position {
    /// The file.
    pub path: PathBuf,
    /// 1-based line number, when the problem is on one line.
    pub line: Option<u64>,
    /// The field (column, property or key), when the problem is in one field.
    pub field: Option<String>,
}

impl Position {
    /// A position naming only a file.
    pub fn file(path: &Path) -> Self {
        Position {
            path: path.to_path_buf(),
            line: None,
            field: None,
        }
    }
    /// This position at a line.
    pub fn line(mut self, line: u64) -> Self {
        self.line = Some(line);
        self
    }
    /// This position at a field.
    pub fn field(mut self, field: impl Into<String>) -> Self {
        self.field = Some(field.into());
        self
    }
}

impl fmt::Display for Position {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.path.display())?;
        if let Some(l) = self.line {
            write!(f, ":{l}")?;
        }
        if let Some(fld) = &self.field {
            write!(f, ": field '{fld}'")?;
        }
        Ok(())
    }
}

/// An error reading or writing a file.
///
/// Its `Display` is the whole message, the operating system's words included; it returns no
/// `source()`, so that a printer that walks the chain of causes says them once.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum IoError {
    /// The file could not be opened, read or written.
    #[error("{}: {error}", path.display())]
    File {
        /// The file.
        path: PathBuf,
        /// The operating system's error.
        error: std::io::Error,
    },
    /// The content is wrong at a position.
    #[error("{at}: {message}")]
    Content {
        /// Where.
        at: Position,
        /// What was expected and what was found.
        message: String,
    },
}

impl IoError {
    /// A content error at a position.
    pub fn content(at: Position, message: impl Into<String>) -> Self {
        IoError::Content {
            at,
            message: message.into(),
        }
    }
    /// A file error.
    pub fn file(path: &Path, error: std::io::Error) -> Self {
        IoError::File {
            path: path.to_path_buf(),
            error,
        }
    }
    /// The position, for content errors.
    pub fn position(&self) -> Option<&Position> {
        match self {
            IoError::Content { at, .. } => Some(at),
            IoError::File { .. } => None,
        }
    }
}

/// A problem found by a validation pass: an error stops a run, a warning does not.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Finding {
    /// `error` or `warning`.
    pub severity: Severity,
    /// File, line and field, as text.
    pub at: String,
    /// What is wrong.
    pub message: String,
}

/// How serious a finding is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// Blocks the reduction.
    Error,
    /// Worth a look; does not block.
    Warning,
}

impl Finding {
    /// An error finding.
    pub fn error(at: impl fmt::Display, message: impl Into<String>) -> Self {
        Finding {
            severity: Severity::Error,
            at: at.to_string(),
            message: message.into(),
        }
    }
    /// A warning finding.
    pub fn warning(at: impl fmt::Display, message: impl Into<String>) -> Self {
        Finding {
            severity: Severity::Warning,
            at: at.to_string(),
            message: message.into(),
        }
    }
}

impl From<IoError> for Finding {
    fn from(e: IoError) -> Self {
        match e {
            IoError::Content { at, message } => Finding::error(at, message),
            IoError::File { path, error } => Finding::error(path.display(), error.to_string()),
        }
    }
}

impl fmt::Display for Finding {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let sev = match self.severity {
            Severity::Error => "error",
            Severity::Warning => "warning",
        };
        write!(f, "{sev}: {}: {}", self.at, self.message)
    }
}
