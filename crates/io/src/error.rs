//! The one error type of this crate: every variant names the file it concerns and what
//! was being done, so a user can act on the message alone.

use std::path::{Path, PathBuf};

use spindrift_engine::SinkError;

/// A failure to read or write a run's files.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum IoError {
    /// The file or folder does not exist.
    #[error("{}: no such file or folder", path.display())]
    NotFound {
        /// The missing path.
        path: PathBuf,
    },
    /// The HDF5 library reported a failure.
    #[error("{}: {what}: {detail}", path.display())]
    Hdf5 {
        /// The HDF5 file.
        path: PathBuf,
        /// What was being done (names the group or dataset).
        what: String,
        /// The library's message.
        detail: String,
    },
    /// The operating system reported a failure (permissions, full disk, rename).
    #[error("{}: {what}: {source}", path.display())]
    Os {
        /// The file or folder.
        path: PathBuf,
        /// What was being done.
        what: String,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// A JSON file could not be written or parsed.
    #[error("{}: {what}: {source}", path.display())]
    Json {
        /// The JSON file.
        path: PathBuf,
        /// What was being done.
        what: String,
        /// The underlying error.
        #[source]
        source: serde_json::Error,
    },
    /// The file exists but is not a file of the expected kind (another HDF5 file, or not
    /// HDF5 at all).
    #[error("{}: not a {expected} file ({found})", path.display())]
    Foreign {
        /// The file.
        path: PathBuf,
        /// The expected `format` attribute (`spindrift-run` or `spindrift-checkpoint`).
        expected: &'static str,
        /// What was found instead.
        found: String,
    },
    /// The file was written by a newer program with a format this one cannot read.
    #[error("{}: format_version {found} is newer than the supported {supported}", path.display())]
    Version {
        /// The file.
        path: PathBuf,
        /// The version in the file.
        found: u64,
        /// The newest version this program reads.
        supported: u64,
    },
    /// The content does not fit what was asked or what the format says (a shape, a row
    /// count, a missing stage or dataset, a record of the wrong length).
    #[error("{}: {what}", path.display())]
    Invalid {
        /// The file.
        path: PathBuf,
        /// What does not fit.
        what: String,
    },
}

impl IoError {
    /// The file or folder the error concerns.
    pub fn path(&self) -> &Path {
        match self {
            IoError::NotFound { path }
            | IoError::Hdf5 { path, .. }
            | IoError::Os { path, .. }
            | IoError::Json { path, .. }
            | IoError::Foreign { path, .. }
            | IoError::Version { path, .. }
            | IoError::Invalid { path, .. } => path,
        }
    }

    pub(crate) fn hdf5(path: &Path, what: impl Into<String>, err: hdf5::Error) -> Self {
        // The library's message spans lines (its error stack); one line reads better.
        let detail = err.to_string().split('\n').map(str::trim).collect::<Vec<_>>().join(" ");
        IoError::Hdf5 { path: path.to_path_buf(), what: what.into(), detail }
    }

    pub(crate) fn os(path: &Path, what: impl Into<String>, source: std::io::Error) -> Self {
        if source.kind() == std::io::ErrorKind::NotFound {
            return IoError::NotFound { path: path.to_path_buf() };
        }
        IoError::Os { path: path.to_path_buf(), what: what.into(), source }
    }

    pub(crate) fn invalid(path: &Path, what: impl Into<String>) -> Self {
        IoError::Invalid { path: path.to_path_buf(), what: what.into() }
    }
}

impl From<IoError> for SinkError {
    fn from(err: IoError) -> Self {
        SinkError::new(err.to_string())
    }
}

/// Attaches a file path and a description to HDF5 results.
pub(crate) trait Hdf5Context<T> {
    /// Maps an HDF5 error to [`IoError::Hdf5`] with `what` computed only on failure.
    fn ctx<S: Into<String>>(self, path: &Path, what: impl FnOnce() -> S) -> Result<T, IoError>;
}

impl<T> Hdf5Context<T> for hdf5::Result<T> {
    fn ctx<S: Into<String>>(self, path: &Path, what: impl FnOnce() -> S) -> Result<T, IoError> {
        self.map_err(|e| IoError::hdf5(path, what(), e))
    }
}

// Errors cross threads (a writer thread, `anyhow` in the CLI), so they must stay Send + Sync.
const _: fn() = || {
    fn send_sync<T: Send + Sync + 'static>() {}
    send_sync::<IoError>();
};
