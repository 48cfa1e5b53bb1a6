//! The interface every Hamiltonian term implements.

use spindrift_lattice::{dot, Supercell, Vec3};

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

/// A pair term described by its gradient at one site; the [`Term`] methods follow from
/// it, because pair energies are linear in each spin: `E_i(s) = -s.h_i` with
/// `h_i = -dE/dS_i`, and the total counts every pair from both ends, so it is half the
/// sum of `-S_i.h_i`.
pub(crate) trait PairTerm: Send + Sync {
    /// Short name.
    const NAME: &'static str;
    /// `-dE/dS_i` of this term at site `i`, meV.
    fn pair_gradient(&self, cell: &Supercell, spins: &[Vec3], i: usize) -> Vec3;
}

impl<P: PairTerm> Term for P {
    fn name(&self) -> &'static str {
        P::NAME
    }

    fn energy(&self, cell: &Supercell, spins: &[Vec3]) -> f64 {
        (0..spins.len()).map(|i| -0.5 * dot(spins[i], self.pair_gradient(cell, spins, i))).sum()
    }

    fn site_energy(&self, cell: &Supercell, spins: &[Vec3], i: usize, s: Vec3) -> f64 {
        -dot(s, self.pair_gradient(cell, spins, i))
    }

    fn add_gradient(&self, cell: &Supercell, spins: &[Vec3], out: &mut [Vec3]) {
        for (i, o) in out.iter_mut().enumerate() {
            let h = self.pair_gradient(cell, spins, i);
            for a in 0..3 {
                o[a] += h[a];
            }
        }
    }
}
