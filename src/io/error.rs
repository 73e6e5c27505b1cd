//! The typed error of the `io` stage.

use std::path::PathBuf;

/// A problem with a file or a value a user supplied. Each message names the file, the row
/// or key, what was found and what was expected.
#[derive(Debug, thiserror::Error)]
pub enum IoError {
    /// The file could not be opened, read or written at all. The operating system's reason
    /// is part of the message, once; it is deliberately not a `source()` as well, so an
    /// error chain printed with `{:#}` does not repeat it.
    #[error("{path}: {}", file_reason(.error, .expected.as_deref()))]
    File {
        path: PathBuf,
        error: std::io::Error,
        /// What the caller expected to find there, e.g. "the site description site.toml".
        expected: Option<String>,
    },
    /// The file was read but its content is wrong; `place` is a key, row or index.
    #[error("{path}: {place}: {message}")]
    Invalid {
        path: PathBuf,
        place: String,
        message: String,
    },
}

/// "not found; expected …" for a missing file, the operating system's words otherwise.
fn file_reason(error: &std::io::Error, expected: Option<&str>) -> String {
    let reason = match error.kind() {
        std::io::ErrorKind::NotFound => "not found".to_string(),
        std::io::ErrorKind::PermissionDenied => "permission denied".to_string(),
        std::io::ErrorKind::IsADirectory => "is a directory, expected a file".to_string(),
        _ => error.to_string(),
    };
    match expected {
        Some(what) => format!("{reason}; expected {what}"),
        None => reason,
    }
}

impl IoError {
    pub fn file(path: impl Into<PathBuf>, error: std::io::Error) -> Self {
        IoError::File {
            path: path.into(),
            error,
            expected: None,
        }
    }

    /// Like [`IoError::file`], saying what the caller expected at `path`.
    pub fn file_expected(
        path: impl Into<PathBuf>,
        error: std::io::Error,
        expected: impl Into<String>,
    ) -> Self {
        IoError::File {
            path: path.into(),
            error,
            expected: Some(expected.into()),
        }
    }

    pub fn invalid(
        path: impl Into<PathBuf>,
        place: impl Into<String>,
        message: impl Into<String>,
    ) -> Self {
        IoError::Invalid {
            path: path.into(),
            place: place.into(),
            message: message.into(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn file_errors_state_the_reason_once() {
        let err = IoError::file_expected(
            "site/site.toml",
            std::io::Error::from(std::io::ErrorKind::NotFound),
            "the site description site.toml",
        );
        assert_eq!(
            err.to_string(),
            "site/site.toml: not found; expected the site description site.toml"
        );
        // The chain printed by the CLI (`{:#}` of an anyhow error) holds the reason once.
        assert!(std::error::Error::source(&err).is_none());
        let chained = format!("{:#}", anyhow::Error::from(err));
        assert_eq!(chained.matches("not found").count(), 1, "{chained}");
        let other = IoError::file("x.npy", std::io::Error::other("disk on fire"));
        assert_eq!(other.to_string(), "x.npy: disk on fire");
    }
}
