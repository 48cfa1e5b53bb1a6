//! Errors of the integrators and of initial states.

use thiserror::Error;

/// What can go wrong in a step, an iteration or a sweep.
#[derive(Debug, Clone, PartialEq, Error)]
#[non_exhaustive]
pub enum StepError {
    /// A spin became non-finite (or zero) at `site` during step (or iteration) `step`.
    /// [`crate::Heun::step`] and [`crate::Relaxer::iterate`] leave the spins exactly as
    /// they were before the failing call, so the caller still holds the last good state.
    #[error("spin {site} became non-finite at step {step}")]
    NonFinite {
        /// The smallest site index that failed.
        site: usize,
        /// The step, iteration or sweep index of the failing call.
        step: u64,
    },
    /// The spin array does not have one entry per site of the supercell.
    #[error("spin array has {got} entries but the supercell has {expected} sites")]
    LengthMismatch {
        /// Sites of the supercell.
        expected: usize,
        /// Length of the array given.
        got: usize,
    },
    /// A parameter is out of range (negative temperature, non-positive time step, ...).
    #[error("{name} = {value} is out of range ({expected})")]
    BadParameter {
        /// Parameter name.
        name: &'static str,
        /// The value given.
        value: f64,
        /// What is accepted.
        expected: &'static str,
    },
    /// The system is too large for an index type of the integrator.
    #[error("{what}: {value} exceeds the limit {limit}")]
    TooLarge {
        /// What overflowed.
        what: &'static str,
        /// Its value.
        value: usize,
        /// The largest supported value.
        limit: usize,
    },
}

/// What can be wrong with a requested initial state.
#[derive(Debug, Clone, PartialEq, Error)]
#[non_exhaustive]
pub enum InitError {
    /// The spin array does not have one entry per site of the supercell.
    #[error("spin array has {got} entries but the supercell has {expected} sites")]
    LengthMismatch {
        /// Sites of the supercell.
        expected: usize,
        /// Length of the array given.
        got: usize,
    },
    /// A direction of zero length or with non-finite components.
    #[error("{what} must be a finite non-zero vector, got {value:?}")]
    BadDirection {
        /// Which direction.
        what: &'static str,
        /// The vector given.
        value: [f64; 3],
    },
    /// A given spin on an occupied site is zero or not finite, so it cannot be normalised.
    #[error("spin of site {site} is zero or not finite ({value:?})")]
    BadSpin {
        /// Site index.
        site: usize,
        /// The vector given.
        value: [f64; 3],
    },
    /// A scalar parameter out of range.
    #[error("{name} = {value} is out of range ({expected})")]
    BadParameter {
        /// Parameter name.
        name: &'static str,
        /// The value given.
        value: f64,
        /// What is accepted.
        expected: &'static str,
    },
}

/// Checks that `spins` has one entry per site.
pub(crate) fn check_len(expected: usize, got: usize) -> Result<(), StepError> {
    if expected == got {
        Ok(())
    } else {
        Err(StepError::LengthMismatch { expected, got })
    }
}

/// The smaller of two optional failing sites, so that the reported site does not depend on
/// the order in which parallel chunks finish.
pub(crate) fn first_bad(a: Option<usize>, b: Option<usize>) -> Option<usize> {
    match (a, b) {
        (Some(x), Some(y)) => Some(x.min(y)),
        (x, y) => x.or(y),
    }
}
