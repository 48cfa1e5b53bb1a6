//! Species: the per-atom parameters shared by every site of one kind.

use spindrift_lattice::Vec3;

/// One magnetic species.
#[derive(Debug, Clone, PartialEq)]
pub struct Species {
    /// Name used in configs and output.
    pub name: String,
    /// Moment, μB (> 0).
    pub moment: f64,
    /// Gilbert damping (dimensionless, >= 0).
    pub damping: f64,
    /// Uniaxial anisotropy constant `k`, meV per atom (`k > 0`: easy axis).
    pub anisotropy: f64,
    /// Unit anisotropy axis.
    pub axis: Vec3,
}
