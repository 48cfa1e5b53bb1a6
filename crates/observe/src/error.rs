//! Errors of the observers and estimators.

use thiserror::Error;

/// What can go wrong when observing spins or analysing samples.
#[derive(Debug, Clone, PartialEq, Error)]
#[non_exhaustive]
pub enum ObserveError {
    /// A spin array whose length is not the number of sites of the system.
    #[error("spin array has {got} entries, but the system has {expected} sites")]
    LengthMismatch {
        /// Number of sites of the system.
        expected: usize,
        /// Length of the array given.
        got: usize,
    },
    /// Too few samples or points for an estimate.
    #[error("{what}: need at least {need}, got {got}")]
    TooFew {
        /// The estimate asked for.
        what: &'static str,
        /// The minimum.
        need: usize,
        /// What was given.
        got: usize,
    },
    /// A temperature that is zero, negative or not finite where a fluctuation formula
    /// divides by it.
    #[error("{what} needs a positive finite temperature, got {value} K")]
    BadTemperature {
        /// The estimate asked for.
        what: &'static str,
        /// The temperature given, K.
        value: f64,
    },
    /// A spin count of zero for a per-spin normalisation.
    #[error("{what} needs a positive number of spins")]
    NoSpins {
        /// The estimate asked for.
        what: &'static str,
    },
    /// A NaN or infinity in the input.
    #[error("{what}: non-finite value at index {index}")]
    NonFinite {
        /// The input that holds it.
        what: &'static str,
        /// Position of the first offending entry.
        index: usize,
    },
    /// A negative error bar.
    #[error("{what}: negative error bar at index {index}")]
    NegativeError {
        /// The input that holds it.
        what: &'static str,
        /// Position of the offending entry.
        index: usize,
    },
    /// The same temperature twice in one curve.
    #[error("{what}: temperature {temperature} K appears more than once")]
    DuplicateTemperature {
        /// The input that holds it.
        what: &'static str,
        /// The repeated temperature, K.
        temperature: f64,
    },
    /// The susceptibility is largest at the first or last temperature of the scan, so the
    /// peak (and the Curie temperature) lies outside the scanned range.
    #[error("the susceptibility is largest at the edge of the scan ({temperature} K): the peak lies outside the scanned range")]
    PeakAtEdge {
        /// Temperature of the largest susceptibility, K.
        temperature: f64,
    },
    /// Binder-cumulant curves of fewer than two distinct system sizes.
    #[error("a Binder-cumulant crossing needs curves of at least two different sizes, got {sizes}")]
    TooFewSizes {
        /// Number of distinct sizes given.
        sizes: usize,
    },
    /// No pair of Binder-cumulant curves crosses (larger system above the smaller one
    /// below the crossing, below it above) within their common temperature range.
    #[error("the Binder-cumulant curves do not cross within their common temperature range")]
    NoCrossing,
}
