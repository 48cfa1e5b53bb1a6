//! What Spindrift measures on spins, and how it averages the measurements.
//!
//! - [`MagnetizationObserver`] gives the moment-weighted [`Magnetization`] of a spin
//!   configuration, in total, by species and by layer, in one pass.
//! - [`ChargeObserver`] gives the [`TopologicalCharge`] of each layer by the lattice
//!   solid-angle method, from [`solid_angle`]s of a triangulation that costs no memory per
//!   spin.
//! - [`statistics`] collects [`Samples`] of a Monte Carlo or thermostat run and turns
//!   them into [`ThermoAverages`] (magnetisation, susceptibility, heat capacity, Binder
//!   cumulant, energy, each with a statistical error), by [`blocking`] analysis,
//!   [`jackknife`] over blocks and the [`autocorrelation_time`].
//! - [`curie`] finds the Curie temperature of a scan from the [`susceptibility_peak`] or
//!   the [`binder_crossing`] of several sizes.
//!
//! Observers are built once from the system ([`spindrift_hamiltonian::Hamiltonian`] or its
//! [`spindrift_lattice::Supercell`]) and then measure spin arrays indexed like the
//! supercell's sites, vacant sites holding the zero vector. They run in parallel over fixed
//! chunks of [`spindrift_hamiltonian::CHUNK`] sites and add the partial sums in chunk order,
//! so every result is bitwise the same for any number of threads; a measurement allocates
//! at most its result.
//!
//! Architecture invariant: this crate knows nothing of time integration, Monte Carlo moves,
//! stages or files; it measures spins and analyses series of numbers.
#![deny(missing_docs)]

mod atan2;
mod charge;
mod chunks;
pub mod curie;
mod error;
mod fft;
mod magnetization;
mod resample;
pub mod statistics;

pub use charge::{solid_angle, ChargeObserver, TopologicalCharge};
pub use curie::{binder_crossing, susceptibility_peak, BinderCrossings, BinderCurve, CurieFit, ScanPoint};
pub use error::ObserveError;
pub use magnetization::{Magnetization, MagnetizationObserver};
pub use statistics::{autocorrelation_time, blocking, jackknife, Estimate, Samples, ThermoAverages};
