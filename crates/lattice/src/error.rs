//! Errors of crystal and supercell construction.

use thiserror::Error;

/// What can be wrong with a described crystal or supercell.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum LatticeError {
    /// The preset name is not one of [`crate::PRESETS`].
    #[error("unknown lattice preset `{name}` (known: {known})")]
    UnknownPreset {
        /// The name given.
        name: String,
        /// The known names, comma separated.
        known: String,
    },
    /// A lattice constant is zero, negative or not finite.
    #[error("lattice constant must be a positive finite length, got {value}")]
    BadConstant {
        /// The value given, in ångström.
        value: f64,
    },
    /// The primitive vectors span no volume.
    #[error("lattice vectors are zero or collinear/coplanar (cell volume {volume:.3e} Å^3)")]
    DegenerateVectors {
        /// The cell volume, Å^3.
        volume: f64,
    },
    /// Two basis sites sit at the same place.
    #[error("basis sites {a} and {b} overlap (distance {distance:.3e} Å)")]
    OverlappingSites {
        /// First site index.
        a: usize,
        /// Second site index.
        b: usize,
        /// Their distance, Å.
        distance: f64,
    },
    /// A supercell dimension is zero.
    #[error("cells must be at least 1 along every axis, got {cells:?}")]
    EmptySupercell {
        /// The dimensions given.
        cells: [usize; 3],
    },
    /// The crystal has no basis site.
    #[error("the crystal has no sites")]
    NoSites,
    /// An occupancy outside `(0, 1]`.
    #[error("site {site}: occupancy must be in (0, 1], got {value}")]
    BadOccupancy {
        /// Basis site index.
        site: usize,
        /// The value given.
        value: f64,
    },
}
