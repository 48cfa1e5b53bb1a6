//! Zeeman energy in a uniform applied field.
//!
//! Energy `E = - sum_i mu_i muB B.S_i` (μB in meV/T, B in T), gradient
//! `-dE/dS_i = mu_i muB B`.

use crate::constants::MU_B;
use crate::term::Term;
use spindrift_lattice::{dot, Supercell, Vec3};

/// The Zeeman term, with moments (μB) per basis site and the field (T).
#[derive(Debug, Clone)]
pub struct Zeeman {
    moment: Vec<f64>,
    /// Applied field, T.
    pub field: Vec3,
}

impl Zeeman {
    /// Moments per basis site, μB; field in T.
    pub fn new(moment: Vec<f64>, field: Vec3) -> Self {
        Self { moment, field }
    }
}

impl Term for Zeeman {
    fn name(&self) -> &'static str {
        "zeeman"
    }

    fn energy(&self, cell: &Supercell, spins: &[Vec3]) -> f64 {
        spins.iter().zip(cell.basis_from(0)).map(|(s, b)| -self.moment[b] * MU_B * dot(self.field, *s)).sum()
    }

    fn site_energy(&self, cell: &Supercell, _spins: &[Vec3], i: usize, s: Vec3) -> f64 {
        -self.moment[cell.basis_of(i)] * MU_B * dot(self.field, s)
    }

    fn add_gradient(&self, cell: &Supercell, _spins: &[Vec3], out: &mut [Vec3]) {
        for (o, b) in out.iter_mut().zip(cell.basis_from(0)) {
            let m = self.moment[b] * MU_B;
            for a in 0..3 {
                o[a] += m * self.field[a];
            }
        }
    }
}
