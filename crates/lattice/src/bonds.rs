//! Translation-symmetric bond tables.
//!
//! A bond is stored once per basis site and cell offset, not per spin: the coupling of
//! site `(c, from)` to `(c + offset, to)` is the same in every cell `c`. Each pair is kept
//! in both directions, so the field on a site is a sum over its own list; the reverse bond
//! carries the same `J`, the opposite DMI vector `D_ji = -D_ij`, and the transposed tensor.

use crate::error::LatticeError;
use crate::vec3::Vec3;

/// The coupling of one directed bond `i -> j`, energies in meV.
///
/// Its energy is `-J S_i.S_j - D.(S_i x S_j) - S_i.T.S_j`, with `T` an optional tensor
/// added to the isotropic `J` (its symmetric anisotropic part, by convention; an
/// antisymmetric part is better given as `d`).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Coupling {
    /// Isotropic exchange `J`, meV (`J > 0` ferromagnetic).
    pub j: f64,
    /// Dzyaloshinskii-Moriya vector `D_ij`, meV.
    pub d: Vec3,
    /// Extra 3x3 exchange tensor `T_ij`, meV, row-major.
    pub tensor: Option<[Vec3; 3]>,
}

impl Coupling {
    /// The same interaction seen from the other end of the bond.
    pub fn reversed(&self) -> Self {
        Self {
            j: self.j,
            d: [-self.d[0], -self.d[1], -self.d[2]],
            tensor: self.tensor.map(|t| {
                let mut r = [[0.0; 3]; 3];
                for a in 0..3 {
                    for b in 0..3 {
                        r[a][b] = t[b][a];
                    }
                }
                r
            }),
        }
    }

    /// Sum of two couplings on the same bond.
    pub fn merged(&self, other: &Self) -> Self {
        let tensor = match (self.tensor, other.tensor) {
            (None, None) => None,
            (a, b) => {
                let z = [[0.0; 3]; 3];
                let (a, b) = (a.unwrap_or(z), b.unwrap_or(z));
                let mut r = z;
                for p in 0..3 {
                    for q in 0..3 {
                        r[p][q] = a[p][q] + b[p][q];
                    }
                }
                Some(r)
            }
        };
        Self {
            j: self.j + other.j,
            d: [self.d[0] + other.d[0], self.d[1] + other.d[1], self.d[2] + other.d[2]],
            tensor,
        }
    }
}

/// One directed bond of a basis site.
#[derive(Debug, Clone, PartialEq)]
pub struct Bond {
    /// Basis site at the far end.
    pub to: usize,
    /// Cell offset of the far end.
    pub offset: [i32; 3],
    /// Cartesian bond vector, Å.
    pub vector: Vec3,
    /// The coupling, seen from this end.
    pub coupling: Coupling,
}

/// Bonds grouped by the basis site they start from, each pair in both directions.
#[derive(Debug, Clone, Default)]
pub struct BondList {
    per_basis: Vec<Vec<Bond>>,
}

impl BondList {
    /// An empty list for a basis of `basis_len` sites.
    pub fn new(basis_len: usize) -> Self {
        Self { per_basis: vec![Vec::new(); basis_len] }
    }

    /// Adds the pair `(from, cell 0) -- (to, cell offset)` in both directions. A coupling
    /// on a bond that already exists is added to it, so exchange and DMI given separately
    /// for the same shell end on one bond.
    pub fn add_pair(
        &mut self,
        from: usize,
        to: usize,
        offset: [i32; 3],
        vector: Vec3,
        coupling: Coupling,
    ) -> Result<(), LatticeError> {
        if from >= self.per_basis.len() || to >= self.per_basis.len() {
            return Err(LatticeError::NoSites);
        }
        if from == to && offset == [0, 0, 0] {
            // A site is not its own neighbour; callers filter this, nothing to add.
            return Ok(());
        }
        self.insert(from, to, offset, vector, coupling);
        let back = [-offset[0], -offset[1], -offset[2]];
        self.insert(to, from, back, [-vector[0], -vector[1], -vector[2]], coupling.reversed());
        Ok(())
    }

    fn insert(&mut self, from: usize, to: usize, offset: [i32; 3], vector: Vec3, coupling: Coupling) {
        let list = &mut self.per_basis[from];
        if let Some(b) = list.iter_mut().find(|b| b.to == to && b.offset == offset) {
            b.coupling = b.coupling.merged(&coupling);
        } else {
            list.push(Bond { to, offset, vector, coupling });
        }
    }

    /// The bonds starting from basis site `b`.
    pub fn from_basis(&self, b: usize) -> &[Bond] {
        &self.per_basis[b]
    }

    /// Number of basis sites.
    pub fn basis_len(&self) -> usize {
        self.per_basis.len()
    }

    /// Number of directed bonds (twice the number of pairs) per cell.
    pub fn directed_len(&self) -> usize {
        self.per_basis.iter().map(Vec::len).sum()
    }

    /// Drops bonds whose coupling vanishes entirely.
    pub fn prune(&mut self) {
        for list in &mut self.per_basis {
            list.retain(|b| {
                b.coupling.j != 0.0
                    || b.coupling.d != [0.0; 3]
                    || b.coupling.tensor.is_some_and(|t| t != [[0.0; 3]; 3])
            });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reverse_bond_carries_opposite_dmi_and_transposed_tensor() {
        let mut l = BondList::new(2);
        let t = [[1.0, 2.0, 3.0], [4.0, 5.0, 6.0], [7.0, 8.0, 9.0]];
        let c = Coupling { j: 3.0, d: [0.1, 0.2, 0.3], tensor: Some(t) };
        l.add_pair(0, 1, [1, 0, 0], [2.0, 0.0, 0.0], c).unwrap();
        let back = &l.from_basis(1)[0];
        assert_eq!(back.offset, [-1, 0, 0]);
        assert_eq!(back.coupling.d, [-0.1, -0.2, -0.3]);
        assert_eq!(back.coupling.tensor.unwrap()[0][1], 4.0);
        // A second coupling on the same bond merges.
        l.add_pair(0, 1, [1, 0, 0], [2.0, 0.0, 0.0], Coupling { j: 1.0, ..Default::default() }).unwrap();
        assert_eq!(l.from_basis(0).len(), 1);
        assert_eq!(l.from_basis(0)[0].coupling.j, 4.0);
        assert_eq!(l.directed_len(), 2);
    }
}
