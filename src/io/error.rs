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
    /// A content error at a position; the message is any text or error.
    pub fn content(at: Position, message: impl fmt::Display) -> Self {
        IoError::Content {
            at,
            message: message.to_string(),
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

impl IoError {
    /// A TOML parse error of `text` (read from `path`) as a content error at its line. An unknown
    /// key or value is named with the nearest valid one ("unknown key 'rnage_ratio': did you mean
    /// 'range_ratio'?"), or with the valid ones when none is near.
    pub fn from_toml(e: &toml::de::Error, text: &str, path: &Path) -> Self {
        let mut at = Position::file(path);
        at.line = e
            .span()
            .map(|s| text[..s.start.min(text.len())].matches('\n').count() as u64 + 1);
        IoError::content(at, toml_message(e.message()))
    }
}

/// serde's words for an unknown field or variant ("unknown field `x`, expected one of `a`, `b`"),
/// said with a hint; any other message unchanged.
fn toml_message(message: &str) -> String {
    let what = if message.starts_with("unknown field `") {
        "key"
    } else if message.starts_with("unknown variant `") {
        "value"
    } else {
        return message.to_string();
    };
    // Quoted names sit between backticks: the unknown one first, then the valid ones.
    let quoted: Vec<&str> = message.split('`').skip(1).step_by(2).collect();
    let Some((word, valid)) = quoted.split_first() else {
        return message.to_string();
    };
    format!(
        "unknown {what} '{word}'{}",
        crate::compute::names::hint(word, valid.iter().copied())
    )
}

/// A problem found by a validation pass: an error stops a run, a warning does not.
///
/// It prints as `error: file:line: field 'x': message`; serialised (`ebbwise check --json`) it
/// is `{"severity", "at", "file", "line", "field", "message"}`, `at` being the position as
/// printed and `line` and `field` `null` when not known.
#[derive(Debug, Clone, PartialEq)]
pub struct Finding {
    /// `error` or `warning`.
    pub severity: Severity,
    /// File, line and field.
    pub at: Position,
    /// What is wrong.
    pub message: String,
}

impl serde::Serialize for Finding {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut m = s.serialize_struct("Finding", 6)?;
        m.serialize_field("severity", &self.severity)?;
        m.serialize_field("at", &self.at.to_string())?;
        m.serialize_field("file", &self.at.path.to_string_lossy())?;
        m.serialize_field("line", &self.at.line)?;
        m.serialize_field("field", &self.at.field)?;
        m.serialize_field("message", &self.message)?;
        m.end()
    }
}

/// How serious a finding is. Two levels on purpose: an error stops a reduction (and makes
/// `ebbwise check` exit 1), a warning does not; a third level would have no exit code to mean.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// Blocks the reduction.
    Error,
    /// Worth a look; does not block.
    Warning,
}

impl Finding {
    /// An error finding; the message is any text or error.
    pub fn error(at: Position, message: impl fmt::Display) -> Self {
        Finding {
            severity: Severity::Error,
            at,
            message: message.to_string(),
        }
    }
    /// A warning finding; the message is any text or error.
    pub fn warning(at: Position, message: impl fmt::Display) -> Self {
        Finding {
            severity: Severity::Warning,
            at,
            message: message.to_string(),
        }
    }
}

impl From<IoError> for Finding {
    fn from(e: IoError) -> Self {
        match e {
            IoError::Content { at, message } => Finding::error(at, message),
            IoError::File { path, error } => Finding::error(Position::file(&path), error),
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unknown_keys_and_values_get_the_nearest_valid_name() {
        // serde's texts for an unknown field and an unknown variant.
        assert_eq!(
            toml_message("unknown field `rnage_ratio`, expected one of `range_ratio`, `order`"),
            "unknown key 'rnage_ratio': did you mean 'range_ratio'?"
        );
        assert_eq!(
            toml_message("unknown variant `yards`, expected one of `m`, `ft`, `us_ft`"),
            "unknown value 'yards' (expected one of: m, ft, us_ft)"
        );
        assert_eq!(
            toml_message("unknown field `x`, there are no fields"),
            "unknown key 'x'"
        );
        assert_eq!(toml_message("invalid type: string"), "invalid type: string");
    }

    #[test]
    fn a_finding_prints_its_position_and_serialises_it_in_parts() {
        let f = Finding::warning(
            Position::file(Path::new("g1.csv")).line(4).field("time"),
            "time '2026-06-14T00:06:00Z' is duplicated",
        );
        assert_eq!(
            f.to_string(),
            "warning: g1.csv:4: field 'time': time '2026-06-14T00:06:00Z' is duplicated"
        );
        assert_eq!(
            serde_json::to_value(&f).unwrap(),
            serde_json::json!({
                "severity": "warning",
                "at": "g1.csv:4: field 'time'",
                "file": "g1.csv",
                "line": 4,
                "field": "time",
                "message": "time '2026-06-14T00:06:00Z' is duplicated"
            })
        );
        let g = Finding::error(Position::file(Path::new("s.csv")), "the file is empty");
        let v = serde_json::to_value(&g).unwrap();
        assert_eq!((v["line"].is_null(), v["field"].is_null()), (true, true));
    }
}
