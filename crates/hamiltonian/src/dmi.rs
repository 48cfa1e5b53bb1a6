//! Dzyaloshinskii-Moriya interaction.
//!
//! Energy `E = - sum_{i<j} D_ij.(S_i x S_j)`; since `D.(S_i x S_j) = S_i.(S_j x D)`, the
//! gradient is `-dE/dS_i = sum_j S_j x D_ij`. Bonds are stored in both directions with
//! `D_ji = -D_ij`, which leaves the pair energy unchanged.
//!
//! Vectors from shells: interfacial `D_ij = d (n x r_ij/|r_ij|)` with `n` the interface
//! normal (in-plane, perpendicular to the bond), bulk `D_ij = d r_ij/|r_ij|`
//! (see [`interfacial_vector`] and [`bulk_vector`]).

use crate::term::PairTerm;
use spindrift_lattice::{cross, norm, BondList, Supercell, Vec3};

/// Interfacial DMI vector `d (n x r/|r|)`, meV.
pub fn interfacial_vector(d: f64, normal: Vec3, r: Vec3) -> Vec3 {
    let l = norm(r);
    let c = cross(normal, [r[0] / l, r[1] / l, r[2] / l]);
    [d * c[0], d * c[1], d * c[2]]
}

/// Bulk DMI vector `d r/|r|`, meV.
pub fn bulk_vector(d: f64, r: Vec3) -> Vec3 {
    let l = norm(r);
    [d * r[0] / l, d * r[1] / l, d * r[2] / l]
}

#[derive(Debug, Clone)]
struct DmiBond {
    to: usize,
    offset: [i32; 3],
    d: Vec3,
}

/// The DMI term.
#[derive(Debug, Clone)]
pub struct Dmi {
    per_basis: Vec<Vec<DmiBond>>,
}

impl Dmi {
    /// Takes the DMI part of every bond.
    pub fn new(bonds: &BondList) -> Self {
        let per_basis = (0..bonds.basis_len())
            .map(|b| {
                bonds
                    .from_basis(b)
                    .iter()
                    .filter(|x| x.coupling.d != [0.0; 3])
                    .map(|x| DmiBond { to: x.to, offset: x.offset, d: x.coupling.d })
                    .collect()
            })
            .collect();
        Self { per_basis }
    }
}

impl PairTerm for Dmi {
    const NAME: &'static str = "dmi";

    fn pair_gradient(&self, cell: &Supercell, spins: &[Vec3], i: usize) -> Vec3 {
        let (c, b) = cell.decompose(i);
        let mut h = [0.0; 3];
        for bond in &self.per_basis[b] {
            let Some(j) = cell.neighbour(c, bond.offset, bond.to) else { continue };
            let x = cross(spins[j], bond.d);
            for a in 0..3 {
                h[a] += x[a];
            }
        }
        h
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use spindrift_lattice::dot;

    /// Interfacial DMI vectors lie in the plane and perpendicular to their bond, and the
    /// reverse bond carries -D (definition in INTERFACE.md; common practice).
    #[test]
    fn interfacial_vectors_are_in_plane_and_perpendicular() {
        let n = [0.0, 0.0, 1.0];
        for r in [[2.7, 0.0, 0.0], [1.35, 2.338, 0.0], [-1.0, 0.5, 0.0]] {
            let d = interfacial_vector(1.5, n, r);
            assert!(dot(d, n).abs() < 1e-12);
            assert!(dot(d, r).abs() < 1e-12);
            assert!((norm(d) - 1.5).abs() < 1e-12);
            let back = interfacial_vector(1.5, n, [-r[0], -r[1], -r[2]]);
            for a in 0..3 {
                assert!((back[a] + d[a]).abs() < 1e-12);
            }
        }
    }
}
