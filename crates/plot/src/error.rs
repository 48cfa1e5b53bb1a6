//! The one error type of the crate.

use std::path::PathBuf;

/// Why a figure could not be made.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PlotError {
    /// The PNG file could not be created or written.
    #[error("cannot write {}: {source}", path.display())]
    Io {
        /// The file that was being written.
        path: PathBuf,
        /// The operating system's reason.
        #[source]
        source: std::io::Error,
    },
    /// The drawing library or the PNG encoder failed; the message is theirs.
    #[error("cannot render the figure: {0}")]
    Render(String),
    /// There is nothing to draw: no panels, no finite point in any curve, or no site.
    #[error("nothing to plot: {what}")]
    EmptyData {
        /// What was empty, e.g. `"panels"` or `"layer 'top' sites"`.
        what: String,
    },
    /// The data are inconsistent (lengths that differ, a spacing that is not a positive
    /// number) or the figure would exceed 16 million pixels.
    #[error("invalid plot data: {what}")]
    InvalidData {
        /// What is wrong, naming the curve or view.
        what: String,
    },
}

impl PlotError {
    /// Wraps any error of the drawing back end as [`PlotError::Render`].
    pub(crate) fn render(e: impl std::fmt::Display) -> Self {
        PlotError::Render(e.to_string())
    }
}
