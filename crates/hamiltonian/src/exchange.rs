//! Exchange: isotropic `J` and an optional 3x3 tensor per bond.
//!
//! Energy `E = - sum_{i<j} [ J_ij S_i.S_j + S_i.T_ij.S_j ]`, so `J > 0` is ferromagnetic.
//! Gradient `-dE/dS_i = sum_j (J_ij S_j + T_ij S_j)`. Bonds are stored in both
//! directions with `T_ji = T_ij^T`, so the energy is half the sum over directed bonds.

use crate::term::PairTerm;
use spindrift_lattice::{dot, BondList, Supercell, Vec3};

#[derive(Debug, Clone)]
struct ExchangeBond {
    to: usize,
    offset: [i32; 3],
    j: f64,
    tensor: Option<[Vec3; 3]>,
}

/// The exchange term.
#[derive(Debug, Clone)]
pub struct Exchange {
    per_basis: Vec<Vec<ExchangeBond>>,
}

impl Exchange {
    /// Takes the exchange part of every bond.
    pub fn new(bonds: &BondList) -> Self {
        let per_basis = (0..bonds.basis_len())
            .map(|b| {
                bonds
                    .from_basis(b)
                    .iter()
                    .filter(|x| x.coupling.j != 0.0 || x.coupling.tensor.is_some())
                    .map(|x| ExchangeBond {
                        to: x.to,
                        offset: x.offset,
                        j: x.coupling.j,
                        tensor: x.coupling.tensor,
                    })
                    .collect()
            })
            .collect();
        Self { per_basis }
    }
}

impl PairTerm for Exchange {
    const NAME: &'static str = "exchange";

    fn pair_gradient(&self, cell: &Supercell, spins: &[Vec3], i: usize) -> Vec3 {
        let (c, b) = cell.decompose(i);
        let mut h = [0.0; 3];
        for bond in &self.per_basis[b] {
            let Some(j) = cell.neighbour(c, bond.offset, bond.to) else { continue };
            let s = spins[j];
            for a in 0..3 {
                h[a] += bond.j * s[a];
            }
            if let Some(t) = bond.tensor {
                for a in 0..3 {
                    h[a] += dot(t[a], s);
                }
            }
        }
        h
    }
}
