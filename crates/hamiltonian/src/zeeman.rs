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

    fn energy(&self, _cell: &Supercell, spins: &[Vec3]) -> f64 {
        let nb = self.moment.len();
        spins.iter().enumerate().map(|(i, s)| -self.moment[i % nb] * MU_B * dot(self.field, *s)).sum()
    }

    fn site_energy(&self, _cell: &Supercell, _spins: &[Vec3], i: usize, s: Vec3) -> f64 {
        -self.moment[i % self.moment.len()] * MU_B * dot(self.field, s)
    }

    fn add_gradient(&self, _cell: &Supercell, _spins: &[Vec3], out: &mut [Vec3]) {
        let nb = self.moment.len();
        for (i, o) in out.iter_mut().enumerate() {
            let m = self.moment[i % nb] * MU_B;
            for a in 0..3 {
                o[a] += m * self.field[a];
            }
        }
    }
}
