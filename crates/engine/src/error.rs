//! Errors of a run.

use crate::sink::SinkError;
use thiserror::Error;

/// Why a run could not go on.
#[derive(Debug, Clone, Error)]
#[non_exhaustive]
pub enum EngineError {
    /// Records could not be stored.
    // Not `#[from]`: that would make the message a `source` too, and a report of the
    // error chain (`{:#}`) would print it twice.
    #[error("output: {0}")]
    Sink(SinkError),
    /// The spins became non-finite; the last good state was saved.
    #[error("stage {stage}: spin {site} became non-finite at step {step} (time step too large, or couplings too strong?); the last good state was saved")]
    NonFinite {
        /// Stage index.
        stage: usize,
        /// Step within the stage.
        step: u64,
        /// Site index.
        site: usize,
    },
    /// Averages that overflowed (the fluctuations of energies too large for `f64`: couplings,
    /// moments or fields far outside any physical range); the last state was saved.
    #[error("stage {stage}: {message}; the last state was saved")]
    Overflow {
        /// Stage index.
        stage: usize,
        /// What overflowed.
        message: String,
    },
    /// Something the configuration should have caught (a bug or an unusual system).
    #[error("stage {stage}: {message}")]
    Setup {
        /// Stage index.
        stage: usize,
        /// What went wrong.
        message: String,
    },
}

impl From<SinkError> for EngineError {
    fn from(e: SinkError) -> Self {
        EngineError::Sink(e)
    }
}
