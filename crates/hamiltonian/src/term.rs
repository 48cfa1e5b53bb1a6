//! The interface every Hamiltonian term implements.

use spindrift_lattice::{Supercell, Vec3};

/// One term of the Hamiltonian. Energies in meV; gradients as `-dE/dS_i` in meV (the
/// caller divides by `mu_i muB` to get tesla).
///
/// These implementations favour clarity: they serve energies by term, tests and
/// set-up. The time-critical field of all terms together is
/// [`crate::Hamiltonian::field_range`], which tests prove equal to the sum of the terms.
pub trait Term: Send + Sync {
    /// Short name (`exchange`, `dmi`, `anisotropy`, `zeeman`).
    fn name(&self) -> &'static str;
    /// Total energy of the configuration, meV, every pair counted once.
    fn energy(&self, cell: &Supercell, spins: &[Vec3]) -> f64;
    /// Energy of every interaction that involves site `i`, with its spin set to `s`
    /// (pairs counted fully), meV. Differences of this give Monte Carlo energy changes.
    fn site_energy(&self, cell: &Supercell, spins: &[Vec3], i: usize, s: Vec3) -> f64;
    /// Adds `-dE/dS_i`, meV, for every site `i` to `out`.
    fn add_gradient(&self, cell: &Supercell, spins: &[Vec3], out: &mut [Vec3]);
}
