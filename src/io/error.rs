//! The typed error of the `io` stage.

use std::path::PathBuf;

/// A problem with a file or a value a user supplied. Each message names the file, the row
/// or key, what was found and what was expected.
#[derive(Debug, thiserror::Error)]
pub enum IoError {
    /// The file could not be opened, read or written at all.
    #[error("{path}: {source}")]
    File {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// The file was read but its content is wrong; `place` is a key, row or index.
    #[error("{path}: {place}: {message}")]
    Invalid {
        path: PathBuf,
        place: String,
        message: String,
    },
}

impl IoError {
    pub fn file(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        IoError::File {
            path: path.into(),
            source,
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
