//! Supercells: the crystal repeated `n1 x n2 x n3` times, with a linear numbering of sites.
//!
//! Site numbering is `i = ((c3 * n2 + c2) * nb + b) * n1 + c1` for cell `(c1, c2, c3)` and
//! basis site `b`: a row of cells along `a1` is one contiguous block of `n1 nb` spins, and
//! within it each basis site's `n1` spins are contiguous (basis-major within the row), so
//! neighbours along `a1` are adjacent and the field kernel's loops over a row run over
//! consecutive spins whatever the basis (with the basis innermost, as before 2026-12-05,
//! lattices of several sites per cell took strided loops that the compiler left scalar).

use crate::crystal::Crystal;
use crate::error::LatticeError;
use crate::hash::unit_hash;
use crate::vec3::Vec3;

/// A finite piece of crystal: dimensions, boundary conditions, and which sites are occupied.
#[derive(Debug, Clone)]
pub struct Supercell {
    crystal: Crystal,
    cells: [usize; 3],
    periodic: [bool; 3],
    /// `None` when every site is occupied (the common case costs no memory).
    occupied: Option<Vec<bool>>,
    /// Layer of each basis site within its cell along `a3`.
    basis_layer: Vec<usize>,
    layers_per_cell: usize,
}

impl Supercell {
    /// Builds the supercell; sites with `occupancy < 1` are kept with that probability,
    /// drawn from `seed` by a stateless hash so the draw never depends on order.
    pub fn new(
        crystal: Crystal,
        cells: [usize; 3],
        periodic: [bool; 3],
        seed: u64,
    ) -> Result<Self, LatticeError> {
        if cells.contains(&0) {
            return Err(LatticeError::EmptySupercell { cells });
        }
        let nb = crystal.basis.len();
        let n = cells[0] * cells[1] * cells[2] * nb;
        let occupied = if crystal.basis.iter().any(|s| s.occupancy < 1.0) {
            // Drawn per site in the order of the numbering before 2026-12-05 (basis innermost),
            // so that a seed dilutes the same sites as it did then.
            let [n1, n2, n3] = cells;
            let mut occupied = vec![false; n];
            for c3 in 0..n3 {
                for c2 in 0..n2 {
                    for c1 in 0..n1 {
                        for (b, site) in crystal.basis.iter().enumerate() {
                            let old = basis_innermost_index(cells, nb, [c1, c2, c3], b);
                            occupied[((c3 * n2 + c2) * nb + b) * n1 + c1] =
                                unit_hash(seed, 0x0CC, old as u64) < site.occupancy;
                        }
                    }
                }
            }
            Some(occupied)
        } else {
            None
        };
        // Distinct heights along a3 (fractional, reduced to [0, 1)) define the layers of a cell.
        let mut heights: Vec<f64> = Vec::new();
        let frac_z = |s: &crate::BasisSite| s.position[2] - s.position[2].floor();
        for s in &crystal.basis {
            let z = frac_z(s);
            if !heights.iter().any(|h| (h - z).abs() < 1e-6) {
                heights.push(z);
            }
        }
        heights.sort_by(|a, b| a.partial_cmp(b).expect("finite heights"));
        let basis_layer = crystal
            .basis
            .iter()
            .map(|s| heights.iter().position(|h| (h - frac_z(s)).abs() < 1e-6).expect("height listed"))
            .collect();
        Ok(Self { crystal, cells, periodic, occupied, basis_layer, layers_per_cell: heights.len() })
    }

    /// The crystal this supercell repeats.
    pub fn crystal(&self) -> &Crystal {
        &self.crystal
    }

    /// Number of cells along each axis.
    pub fn cells(&self) -> [usize; 3] {
        self.cells
    }

    /// Periodic boundary per axis.
    pub fn periodic(&self) -> [bool; 3] {
        self.periodic
    }

    /// Number of basis sites per cell.
    pub fn basis_len(&self) -> usize {
        self.crystal.basis.len()
    }

    /// Number of sites, occupied or not (the length of every per-site array).
    pub fn len(&self) -> usize {
        self.cells[0] * self.cells[1] * self.cells[2] * self.basis_len()
    }

    /// True when the supercell has no sites (never, after construction).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Number of occupied sites: the number of spins.
    pub fn spin_count(&self) -> usize {
        match &self.occupied {
            None => self.len(),
            Some(o) => o.iter().filter(|&&x| x).count(),
        }
    }

    /// Whether site `i` carries a spin.
    #[inline]
    pub fn is_occupied(&self, i: usize) -> bool {
        self.occupied.as_ref().is_none_or(|o| o[i])
    }

    /// Occupation mask, `None` when every site is occupied.
    pub fn occupation(&self) -> Option<&[bool]> {
        self.occupied.as_deref()
    }

    /// Linear index of basis site `b` in cell `c`.
    #[inline(always)]
    pub fn index(&self, c: [usize; 3], b: usize) -> usize {
        ((c[2] * self.cells[1] + c[1]) * self.basis_len() + b) * self.cells[0] + c[0]
    }

    /// Cell and basis site of linear index `i`.
    #[inline(always)]
    pub fn decompose(&self, i: usize) -> ([usize; 3], usize) {
        let nb = self.basis_len();
        let c1 = i % self.cells[0];
        let r = i / self.cells[0];
        let b = r % nb;
        let row = r / nb;
        ([c1, row % self.cells[1], row / self.cells[1]], b)
    }

    /// Basis site of linear index `i`.
    #[inline(always)]
    pub fn basis_of(&self, i: usize) -> usize {
        (i / self.cells[0]) % self.basis_len()
    }

    /// Sites per row of cells along `a1`, `n1 nb`: a row is a contiguous block of sites.
    #[inline(always)]
    pub fn row_len(&self) -> usize {
        self.cells[0] * self.basis_len()
    }

    /// Per-site values listed in the site order used before 2026-12-05, with the basis
    /// innermost (`i = ((c3 n2 + c2) n1 + c1) nb + b`), in the present order. The two
    /// orders are the same for a one-site basis. `None` when `values` is not one per site.
    pub fn from_basis_innermost<T: Copy>(&self, values: &[T]) -> Option<Vec<T>> {
        if values.len() != self.len() {
            return None;
        }
        let nb = self.basis_len();
        Some(
            (0..self.len())
                .map(|i| {
                    let (c, b) = self.decompose(i);
                    values[basis_innermost_index(self.cells, nb, c, b)]
                })
                .collect(),
        )
    }

    /// The basis sites of sites `i, i + 1, ...` (endless, wrapping after the last site):
    /// in each row `n1` sites of basis site 0, then `n1` of basis site 1, and so on. No
    /// division per site, for loops over ranges of sites.
    #[inline]
    pub fn basis_from(&self, i: usize) -> impl Iterator<Item = usize> {
        let (n1, nb) = (self.cells[0], self.basis_len());
        let (mut c1, mut b) = (i % n1, (i / n1) % nb);
        std::iter::from_fn(move || {
            let this = b;
            c1 += 1;
            if c1 == n1 {
                c1 = 0;
                b = if b + 1 == nb { 0 } else { b + 1 };
            }
            Some(this)
        })
    }

    /// The site reached from cell `c` by `offset` cells, on basis site `to`, or `None`
    /// where an open boundary cuts the bond.
    #[inline(always)]
    pub fn neighbour(&self, c: [usize; 3], offset: [i32; 3], to: usize) -> Option<usize> {
        let mut t = [0usize; 3];
        for k in 0..3 {
            let x = c[k] as i64 + offset[k] as i64;
            t[k] = crate::wrap_coordinate(x, self.cells[k] as i64, self.periodic[k])? as usize;
        }
        Some(self.index(t, to))
    }

    /// Whether a bond with this cell offset can exist at all in this supercell: along an
    /// open axis the offset must be shorter than the box, and along a periodic axis of a
    /// single cell only offset 0 exists (an image of the same column is not a neighbour).
    pub fn offset_allowed(&self, offset: [i32; 3]) -> bool {
        (0..3).all(|k| {
            let n = self.cells[k] as i64;
            let o = offset[k] as i64;
            if self.periodic[k] {
                n > 1 || o == 0
            } else {
                o.abs() < n
            }
        })
    }

    /// Whether a bond from basis site `from` to basis site `to` at cell `offset` lands on
    /// the site it starts from: the same basis site, no offset along open axes, and along
    /// periodic ones an offset that wraps to zero (a multiple of the axis's cells, as an
    /// offset of 2 along an axis of 2 cells), not zero along all three. Such a bond would
    /// couple a spin to itself: a constant for isotropic exchange, an on-site term for a
    /// tensor, and in a Metropolis energy change, which is linear in the moved spin for
    /// every other bond, a term that breaks detailed balance. The builders leave these
    /// bonds out with a warning, as [`Supercell::offset_allowed`] leaves out offsets off the
    /// only cell of a periodic axis.
    pub fn self_image(&self, from: usize, to: usize, offset: [i32; 3]) -> bool {
        from == to
            && offset != [0, 0, 0]
            && (0..3).all(|k| {
                let o = offset[k] as i64;
                if self.periodic[k] {
                    o.rem_euclid(self.cells[k] as i64) == 0
                } else {
                    o == 0
                }
            })
    }

    /// Cartesian position of site `i`, Å (cell origin plus basis position).
    pub fn position(&self, i: usize) -> Vec3 {
        let (c, b) = self.decompose(i);
        let f = self.crystal.basis[b].position;
        self.crystal.to_cartesian([c[0] as f64 + f[0], c[1] as f64 + f[1], c[2] as f64 + f[2]])
    }

    /// Layers per cell along `a3` (distinct basis heights).
    pub fn layers_per_cell(&self) -> usize {
        self.layers_per_cell
    }

    /// Number of layers along `a3` in the whole supercell.
    pub fn layer_count(&self) -> usize {
        self.cells[2] * self.layers_per_cell
    }

    /// Layer index of site `i`, counted from 0 along `a3`.
    #[inline]
    pub fn layer(&self, i: usize) -> usize {
        let (c, b) = self.decompose(i);
        c[2] * self.layers_per_cell + self.basis_layer[b]
    }

    /// Layer of each basis site within its cell.
    pub fn basis_layers(&self) -> &[usize] {
        &self.basis_layer
    }

    /// Species index of site `i`.
    #[inline]
    pub fn species(&self, i: usize) -> usize {
        self.crystal.basis[self.basis_of(i)].species
    }
}

/// The index of basis site `b` in cell `c` in the numbering used before 2026-12-05, with
/// the basis innermost: `((c3 n2 + c2) n1 + c1) nb + b`.
fn basis_innermost_index(cells: [usize; 3], nb: usize, c: [usize; 3], b: usize) -> usize {
    ((c[2] * cells[1] + c[1]) * cells[0] + c[0]) * nb + b
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::preset;

    #[test]
    fn index_round_trips_and_layers_count_heights() {
        let s =
            Supercell::new(preset("bcc", 2.87, None).unwrap(), [3, 4, 5], [true, true, false], 1).unwrap();
        assert_eq!(s.len(), 3 * 4 * 5 * 2);
        for i in 0..s.len() {
            let (c, b) = s.decompose(i);
            assert_eq!(s.index(c, b), i);
        }
        assert_eq!(s.layer_count(), 10);
        assert_eq!(s.layer(s.index([0, 0, 2], 1)), 5);
        assert_eq!(s.neighbour([0, 0, 4], [0, 0, 1], 0), None);
        assert_eq!(s.neighbour([0, 0, 0], [-1, 0, 0], 0), Some(s.index([2, 0, 0], 0)));
    }

    /// `self_image` is true exactly for the nonzero offsets whose bond `neighbour` resolves
    /// to the starting site itself (our own definition: the site reached is the site left).
    #[test]
    fn self_images_are_the_bonds_that_return_to_their_site() {
        let s =
            Supercell::new(preset("bcc", 2.87, None).unwrap(), [2, 3, 1], [true, true, false], 1).unwrap();
        let mut found = 0;
        for from in 0..2 {
            for to in 0..2 {
                for o1 in -4..=4 {
                    for o2 in -4..=4 {
                        for o3 in -1..=1 {
                            let o = [o1, o2, o3];
                            let start = s.index([1, 2, 0], from);
                            let lands = s.neighbour([1, 2, 0], o, to) == Some(start) && o != [0, 0, 0];
                            assert_eq!(s.self_image(from, to, o), lands, "{from} -> {to} at {o:?}");
                            found += usize::from(lands);
                        }
                    }
                }
            }
        }
        // Offsets (2k, 3l, 0) other than zero, for each of the two sites: 5 x 3 - 1.
        assert_eq!(found, 2 * 14);
    }

    // The order documented at the top of this file (our own definition): within a row of
    // cells each basis site's cells are consecutive sites, rows follow each other along a2
    // then a3; `basis_from` counts what `basis_of` divides out; the old order maps over.
    #[test]
    fn sites_are_basis_major_within_rows() {
        let s = Supercell::new(preset("honeycomb", 2.5, None).unwrap(), [3, 2, 2], [true, true, false], 1)
            .unwrap();
        assert_eq!(s.row_len(), 6);
        assert_eq!(s.index([0, 0, 0], 1), 3);
        assert_eq!(s.index([2, 0, 0], 0), 2);
        assert_eq!(s.index([0, 1, 0], 0), 6);
        assert_eq!(s.index([1, 1, 1], 1), 12 + 6 + 3 + 1);
        let counted: Vec<usize> = s.basis_from(4).take(s.len()).collect();
        for (k, b) in counted.iter().enumerate() {
            assert_eq!(*b, s.decompose((4 + k) % s.len()).1, "site {}", 4 + k);
            assert_eq!(*b, s.basis_of((4 + k) % s.len()));
        }
        let old: Vec<usize> = (0..s.len()).collect();
        let new = s.from_basis_innermost(&old).unwrap();
        for (i, &o) in new.iter().enumerate() {
            let (c, b) = s.decompose(i);
            assert_eq!(o, ((c[2] * 2 + c[1]) * 3 + c[0]) * 2 + b, "site {i}");
        }
        assert!(s.from_basis_innermost(&old[1..]).is_none());
    }

    // Dilution keeps the sites it chose before the site order changed (our own behaviour):
    // the mask drawn per site of the old numbering, `((c3 n2 + c2) n1 + c1) nb + b`, and
    // reordered, is the mask.
    #[test]
    fn dilution_keeps_its_sites_across_the_site_order() {
        let mut c = preset("bcc", 2.87, None).unwrap();
        c.basis[1].occupancy = 0.6;
        let s = Supercell::new(c.clone(), [5, 4, 3], [true, true, false], 9).unwrap();
        let old: Vec<bool> =
            (0..s.len()).map(|i| unit_hash(9, 0x0CC, i as u64) < c.basis[i % 2].occupancy).collect();
        assert_eq!(s.from_basis_innermost(&old).unwrap(), s.occupation().unwrap());
        assert!(old.iter().any(|o| !o), "some site is vacant");
    }

    #[test]
    fn dilution_follows_occupancy() {
        let mut c = preset("square", 3.0, None).unwrap();
        c.basis[0].occupancy = 0.7;
        let s = Supercell::new(c, [100, 100, 1], [true; 3], 42).unwrap();
        let f = s.spin_count() as f64 / s.len() as f64;
        // Binomial standard deviation sqrt(0.21/1e4) = 0.0046; 5 sigma.
        assert!((f - 0.7).abs() < 0.023, "{f}");
    }
}
