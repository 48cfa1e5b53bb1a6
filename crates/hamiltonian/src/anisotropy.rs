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

    fn energy(&self, _cell: &Supercell, spins: &[Vec3]) -> f64 {
        let nb = self.k.len();
        spins.iter().enumerate().map(|(i, s)| -self.k[i % nb] * dot(*s, self.axis[i % nb]).powi(2)).sum()
    }

    fn site_energy(&self, _cell: &Supercell, _spins: &[Vec3], i: usize, s: Vec3) -> f64 {
        let b = i % self.k.len();
        -self.k[b] * dot(s, self.axis[b]).powi(2)
    }

    fn add_gradient(&self, _cell: &Supercell, spins: &[Vec3], out: &mut [Vec3]) {
        let nb = self.k.len();
        for (i, o) in out.iter_mut().enumerate() {
            let (k, e) = (self.k[i % nb], self.axis[i % nb]);
            let p = 2.0 * k * dot(spins[i], e);
            for a in 0..3 {
                o[a] += p * e[a];
            }
        }
    }
}
