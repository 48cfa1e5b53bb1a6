//! Figures for Spindrift runs, drawn from plain data into PNG files.
//!
//! [`panels_png`] draws a grid of line charts ([`Panel`]s of [`Curve`]s, with error bars,
//! legends and automatic ranges); [`layer_png`] draws the top view of one layer of spins
//! ([`LayerView`]), coloured by `S_z` on Moreland's cool-warm map ([`cool_warm`]) with
//! arrows for the in-plane part. Curves take the colour-blind-safe [`OKABE_ITO`] palette.
//!
//! Text uses DejaVu Sans compiled into the binary, so figures render on a machine with no
//! system fonts. Each figure is drawn at twice its size and averaged down for smooth edges.
//!
//! Architecture invariant: this crate knows nothing of HDF5, configuration files or physics.
//! It draws numbers it is given; the caller chooses titles, labels and units.
#![deny(missing_docs)]

mod axis;
mod colour;
mod error;
mod font;
mod layer;
mod panels;
mod raster;

pub use colour::{cool_warm, OKABE_ITO};
pub use error::PlotError;
pub use layer::{layer_png, LayerView};
pub use panels::{panels_png, Curve, Panel};
