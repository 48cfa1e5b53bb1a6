//! Spindrift's configuration reader, the only crate that knows TOML.
//!
//! Reading a config is the first of two stages. This crate does the first: [`load`] reads the file,
//! applies `--set KEY=VALUE` overrides ([`apply_set`]) to the parsed document, deserialises it into a
//! [`RawConfig`] that mirrors the TOML key for key, and checks that every unit suits its key. The
//! second stage, [`validate`], turns the returned [`Loaded`] into a `Hamiltonian` and a `Protocol`.
//!
//! Dimensional values are [`Quantity`]s (a number and the unit it was written in; [`QVec3`] for
//! vectors) that convert to the canonical units with [`Quantity::to`]: lengths in Å, energies in meV,
//! fields in T, temperatures in K, times in ps, moments in μB, angles in degrees.
//!
//! Every failure is a [`ConfigError`] naming the file, the dotted key path (`stage.0.temperature`), the
//! 1-based line where known, and what is wrong, with the closest valid name for a misspelt key or
//! value. [`line_of_key`] finds a key's line for errors found later.
//!
//! Architecture invariant: nothing here knows physics beyond units; no other crate knows TOML.
#![deny(missing_docs)]

mod bond_table;
mod error;
mod exact;
mod inputs;
mod load;
mod overrides;
pub mod protocol;
mod range;
pub mod raw;
pub mod system;
pub mod units;
mod validate;

pub use bond_table::{read_table, TablePair};
pub use error::{closest, edit_distance, line_of_key, ConfigError};
pub use inputs::config_difference;
pub use load::{load, load_str, Loaded};
pub use overrides::{apply_set, set_key_path};
pub use range::range_values;
pub use raw::RawConfig;
pub use units::{parse_wall_duration, Dimension, QVec3, Quantity, UnitError, WallDuration};
pub use validate::{validate, Validated};
