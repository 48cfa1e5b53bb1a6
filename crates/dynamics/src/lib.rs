//! Time integration and sampling for Spindrift.
//!
//! * [`Heun`]: the stochastic Landau-Lifshitz-Gilbert equation with Heun's
//!   predictor-corrector ([`heun`] states the equation, the noise and the scheme).
//! * [`Relaxer`]: zero-temperature energy minimisation by projected steepest descent with
//!   Barzilai-Borwein steps ([`mod@relax`]).
//! * [`Metropolis`]: Metropolis Monte Carlo sweeps with adaptive Gaussian, uniform and
//!   reflection moves, parallel over the colour classes of a [`Colouring`] of the bond
//!   graph ([`metropolis`]).
//! * [`initial`]: initial states (uniform, random, skyrmion, helix, given spins).
//!
//! All follow one step API: the caller owns the spins, `&mut [[f64; 3]]` with one entry per
//! site of the Hamiltonian's supercell (vacant sites hold `[0, 0, 0]` and keep it); an
//! integrator owns only scratch buffers, allocated when it is built, and a step allocates
//! nothing. Times are in ps, fields in T, temperatures in K, energies in meV.
//!
//! Determinism: random numbers are addressed by `(seed, stream, step, site)` through
//! `spindrift_noise` (stream 0: thermal field, 1: Metropolis, 2: random initial state),
//! every parallel loop works on fixed chunks of `spindrift_hamiltonian::CHUNK` sites, and
//! sums are added chunk by chunk in order, so results are bitwise the same for any number
//! of threads, and a run resumed with the same step or sweep index continues exactly.
//!
//! Sources of methods and test references are named beside them; their bibliographic
//! details are quoted from memory.
//!
//! Architecture invariant: this crate knows nothing of configuration files, output
//! formats, stages or observers; it steps spins under a `Hamiltonian`.
#![deny(missing_docs)]

mod acceptance;
mod colouring;
mod error;
pub mod heun;
pub mod initial;
mod layer_blocks;
pub mod metropolis;
mod moment;
pub mod relax;
mod slabs;
mod trial_groups;

pub use colouring::Colouring;
pub use error::{InitError, StepError};
pub use heun::{Heun, HeunParams};
pub use initial::{favoured_helicity, favoured_helicity_for, InitialState};
pub use metropolis::{Metropolis, SweepStats};
pub use moment::MomentTally;
pub use relax::{relax, RelaxParams, RelaxReport, Relaxer, RelaxerState};
