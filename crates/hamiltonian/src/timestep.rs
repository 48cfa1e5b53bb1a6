//! Choice of the time step.
//!
//! Heun's method follows precession at angular frequency `omega = gamma B` accurately
//! when `omega dt` is small; we recommend the step that makes the fastest possible
//! precession (the bound of [`crate::Hamiltonian::max_field_bound`]) turn by
//! [`PHASE_PER_STEP`] radians, rounded down to 1, 2 or 5 times a power of ten.

use crate::constants::GAMMA_PER_PS;
use crate::hamiltonian::Hamiltonian;

/// Precession angle per step at the largest field, rad (common practice for Heun: a few
/// hundredths of a radian keeps the phase error per period far below a percent).
pub const PHASE_PER_STEP: f64 = 0.05;

/// Recommended time step, ps.
pub fn recommended_dt(h: &Hamiltonian) -> f64 {
    let omega = GAMMA_PER_PS * h.max_field_bound().max(1e-3);
    nice_floor(PHASE_PER_STEP / omega)
}

/// Rounds down to 1, 2 or 5 times a power of ten.
pub fn nice_floor(x: f64) -> f64 {
    let p = 10f64.powf(x.log10().floor());
    let m = x / p;
    let f = if m >= 5.0 {
        5.0
    } else if m >= 2.0 {
        2.0
    } else {
        1.0
    };
    f * p
}
