//! The classical spin Hamiltonian of Spindrift.
//!
//! `H = - sum_{i<j} J_ij S_i.S_j - sum_{i<j} D_ij.(S_i x S_j) - sum_{i<j} S_i.T_ij.S_j
//!      - sum_i k_i (S_i.e_i)^2 - sum_i mu_i muB B.S_i`
//!
//! with unit spins, energies in meV, moments in μB and fields in T. Each term is a
//! [`Term`] in a file of its own ([`Exchange`], [`Dmi`], [`Anisotropy`], [`Zeeman`]); the
//! [`Hamiltonian`] holds them together with a fused field kernel for the integrators.
//! [`curie`] gives mean-field and RPA Curie temperatures; [`timestep`] the recommended
//! time step.
//!
//! Architecture invariant: the Hamiltonian knows nothing of time integration, noise,
//! threads' scheduling beyond data-parallel loops, or files.
#![deny(missing_docs)]

mod anisotropy;
mod builder;
pub mod constants;
pub mod curie;
mod dmi;
mod energy;
mod exchange;
mod hamiltonian;
mod rows;
mod species;
mod term;
pub mod timestep;
mod zeeman;

pub use anisotropy::Anisotropy;
pub use builder::{add_shell, DmiKind, NoNeighbours, ShellCoupling, ShellFound, ShellRef};
pub use dmi::{bulk_vector, interfacial_vector, Dmi};
pub use energy::EnergyTerms;
pub use exchange::Exchange;
pub use hamiltonian::{Hamiltonian, HamiltonianError, TrialScratch, CHUNK, MIN_TRIAL_RUN};
pub use rows::{FlatRows, SpinRows};
pub use species::Species;
pub use term::Term;
pub use zeeman::Zeeman;
