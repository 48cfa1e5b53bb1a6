//! Crystal geometry for Spindrift.
//!
//! A [`Crystal`] is three primitive vectors (ångström) and a basis of [`BasisSite`]s in
//! fractional coordinates; [`preset`] builds the common ones. A [`Supercell`] repeats the
//! crystal `cells = [n1, n2, n3]` times, periodic or open per axis, and numbers every site.
//! [`shells`] finds neighbour shells by distance for any lattice and basis, and a
//! [`BondList`] stores couplings once per basis site and cell offset, so its size does not
//! grow with the number of spins.
//!
//! Architecture invariant: this crate knows nothing of spins' dynamics, energies' units,
//! configuration files or threads. It is pure geometry and index arithmetic.
#![deny(missing_docs)]

mod bonds;
mod crystal;
mod error;
mod hash;
pub mod shells;
mod supercell;
mod vec3;
mod wrap;

pub use bonds::{Bond, BondList, Coupling};
pub use crystal::{preset, BasisSite, Crystal, PRESETS};
pub use error::LatticeError;
pub use hash::unit_hash;
pub use supercell::Supercell;
pub use vec3::{cross, dot, norm, Vec3};
pub use wrap::{wrap_coordinate, wrap_index};
