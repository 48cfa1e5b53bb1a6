//! Uniaxial anisotropy per species.
//!
//! Energy `E = - sum_i k_i (S_i.e_i)^2` (`k > 0`: easy axis along `e`), gradient
//! `-dE/dS_i = 2 k_i (S_i.e_i) e_i`.

use crate::term::Term;
use spindrift_lattice::{dot, Supercell, Vec3};

/// The anisotropy term, with `k` (meV) and unit axis per basis site.
#[derive(Debug, Clone)]
pub struct Anisotropy {
    k: Vec<f64>,
    axis: Vec<Vec3>,
}

impl Anisotropy {
    /// Constants per basis site.
    pub fn new(k: Vec<f64>, axis: Vec<Vec3>) -> Self {
        Self { k, axis }
    }
}

impl Term for Anisotropy {
    fn name(&self) -> &'static str {
        "anisotropy"
    }

    fn energy(&self, cell: &Supercell, spins: &[Vec3]) -> f64 {
        spins.iter().zip(cell.basis_from(0)).map(|(s, b)| -self.k[b] * dot(*s, self.axis[b]).powi(2)).sum()
    }

    fn site_energy(&self, cell: &Supercell, _spins: &[Vec3], i: usize, s: Vec3) -> f64 {
        let b = cell.basis_of(i);
        -self.k[b] * dot(s, self.axis[b]).powi(2)
    }

    fn add_gradient(&self, cell: &Supercell, spins: &[Vec3], out: &mut [Vec3]) {
        for ((i, o), b) in out.iter_mut().enumerate().zip(cell.basis_from(0)) {
            let (k, e) = (self.k[b], self.axis[b]);
            let p = 2.0 * k * dot(spins[i], e);
            for a in 0..3 {
                o[a] += p * e[a];
            }
        }
    }
}
