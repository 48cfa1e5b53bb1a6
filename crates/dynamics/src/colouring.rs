//! A proper colouring of the bond graph, for parallel Monte Carlo.
//!
//! Two sites joined by a bond must not change at the same time, since each one's energy
//! change depends on the other. Sites of one colour class share no bond, so a whole class
//! can be updated in parallel and the result does not depend on the order of updates.
//!
//! The colouring is greedy (common practice; the number of colours is at most the largest
//! number of neighbours plus one): occupied sites in index order take the smallest colour
//! not used by an already coloured neighbour. It is then improved by iterated greedy
//! recolouring (J. C. Culberson, "Iterated greedy graph coloring and the difficulty
//! landscape", Tech. Rep. TR 92-07, University of Alberta, 1992; quoted from memory): the
//! sites are coloured again class by class, the last class first, which can only keep or
//! lower the number of colours; it stops early at two colours, the fewest any graph with a
//! bond needs. It works for any lattice, basis, range of couplings and boundary
//! conditions, since it only follows the bond list. Nearest-neighbour simple-cubic and
//! honeycomb lattices of even size come out two-coloured.
//!
//! Finally each colour is split by basis site, so that all sites of a class have the same
//! bonds (the Monte Carlo kernel treats a block of them at once; see
//! `Hamiltonian::energy_changes_from`). A subset of an independent set is independent, so the
//! classes still form a proper colouring; where a colour holds one basis site only (any
//! one-site basis, the nearest-neighbour honeycomb) nothing changes.

use crate::error::StepError;
use spindrift_hamiltonian::{Hamiltonian, CHUNK};

/// Marks an uncoloured site.
const NONE: u16 = u16::MAX;

/// Most recolouring passes of the iterated greedy colouring.
const ITERATED_PASSES: usize = 6;

/// A bond as the colouring walks it: the far end's basis site and, per axis, the cell
/// offset reduced into `0..n` on a periodic axis (so that the neighbour's coordinate is
/// `c + o` less `n` at most once, without a division) or kept as is on an open one.
struct Step {
    to: usize,
    offset: [i64; 3],
}

/// The bonds of each basis site as [`Step`]s.
fn steps(h: &Hamiltonian) -> Vec<Vec<Step>> {
    let cell = h.cell();
    let (cells, periodic) = (cell.cells(), cell.periodic());
    (0..cell.basis_len())
        .map(|b| {
            h.bonds()
                .from_basis(b)
                .iter()
                .map(|bond| Step {
                    to: bond.to,
                    offset: std::array::from_fn(|k| {
                        let o = i64::from(bond.offset[k]);
                        if periodic[k] {
                            o.rem_euclid(cells[k] as i64)
                        } else {
                            o
                        }
                    }),
                })
                .collect()
        })
        .collect()
}

/// The cells of a basis site whose every bond stays inside the box without wrapping:
/// `lo[k] <= c[k] < hi[k]` on each axis. There the neighbour along bond `s` is site
/// `i + delta[s]`, one addition instead of [`neighbour`]'s per-axis tests (most sites of a
/// large box are inside; the result is the same site).
struct Interior {
    lo: [usize; 3],
    hi: [usize; 3],
    delta: Vec<isize>,
}

/// The [`Interior`] of each basis site, bonds in the order of [`steps`].
fn interiors(h: &Hamiltonian) -> Vec<Interior> {
    let cell = h.cell();
    let (cells, nb) = (cell.cells(), cell.basis_len());
    (0..nb)
        .map(|b| {
            let bonds = h.bonds().from_basis(b);
            let mut lo = [0usize; 3];
            let mut hi = cells;
            for bond in bonds {
                for k in 0..3 {
                    let o = bond.offset[k] as isize;
                    lo[k] = lo[k].max((-o).max(0) as usize);
                    hi[k] = hi[k].min(cells[k].saturating_sub(o.max(0) as usize));
                }
            }
            let delta = bonds
                .iter()
                .map(|bond| {
                    let o = bond.offset.map(|x| x as isize);
                    let row_step = o[2] * cells[1] as isize + o[1];
                    (row_step * nb as isize + bond.to as isize - b as isize) * cells[0] as isize + o[0]
                })
                .collect();
            Interior { lo, hi, delta }
        })
        .collect()
}

/// `Supercell::neighbour` of cell `c` along `step`, by comparisons instead of divisions.
#[inline]
fn neighbour(cells: [usize; 3], periodic: [bool; 3], nb: usize, c: [usize; 3], step: &Step) -> Option<usize> {
    let mut t = [0usize; 3];
    for k in 0..3 {
        let n = cells[k] as i64;
        let x = c[k] as i64 + step.offset[k];
        t[k] = if periodic[k] {
            (if x >= n { x - n } else { x }) as usize
        } else if x < 0 || x >= n {
            return None;
        } else {
            x as usize
        };
    }
    Some(((t[2] * cells[1] + t[1]) * nb + step.to) * cells[0] + t[0])
}

/// The sites `0 .. n` in index order with their cell coordinates and basis site, counted
/// up one by one rather than divided out (four integer divisions per site would cost more
/// than the colouring itself).
fn in_index_order(
    cells: [usize; 3],
    nb: usize,
    n: usize,
) -> impl Iterator<Item = (usize, [usize; 3], usize)> {
    let (mut c, mut b) = ([0usize; 3], 0usize);
    (0..n).map(move |i| {
        let here = (i, c, b);
        c[0] += 1;
        if c[0] == cells[0] {
            c[0] = 0;
            b += 1;
            if b == nb {
                b = 0;
                c[1] += 1;
                if c[1] == cells[1] {
                    c[1] = 0;
                    c[2] += 1;
                }
            }
        }
        here
    })
}

/// Greedy colouring of the sites in `order`, each given with its cell and basis site (all
/// `NONE` in `colour` beforehand): each takes the smallest colour that no already coloured
/// neighbour has. Returns the number of colours.
fn greedy(
    h: &Hamiltonian,
    steps: &[Vec<Step>],
    order: impl Iterator<Item = (usize, [usize; 3], usize)>,
    colour: &mut [u16],
    used: &mut Vec<usize>,
) -> Result<usize, StepError> {
    let cell = h.cell();
    let (cells, periodic, nb) = (cell.cells(), cell.periodic(), cell.basis_len());
    let interior = interiors(h);
    let mut count = 0usize;
    // `used[k] == i` marks colour `k` as taken by a neighbour of site `i`, so the marks
    // need no clearing from one site to the next (each site comes once per pass).
    used.iter_mut().for_each(|u| *u = usize::MAX);
    for (i, c, b) in order {
        let inner = &interior[b];
        let inside = (0..3).fold(true, |ok, k| ok & (c[k] >= inner.lo[k]) & (c[k] < inner.hi[k]));
        for (step, &delta) in steps[b].iter().zip(&inner.delta) {
            let j = if inside {
                Some(i.wrapping_add_signed(delta))
            } else {
                neighbour(cells, periodic, nb, c, step)
            };
            if let Some(j) = j {
                // A bond that wraps onto the site itself (a short periodic box) is no
                // constraint between two sites.
                if j != i && colour[j] != NONE {
                    used[colour[j] as usize] = i;
                }
            }
        }
        let free = used.iter().position(|&u| u != i).unwrap_or(used.len());
        if free >= NONE as usize {
            return Err(StepError::TooLarge { what: "colours", value: free + 1, limit: NONE as usize });
        }
        if free == used.len() {
            used.push(usize::MAX);
        }
        colour[i] = free as u16;
        count = count.max(free + 1);
    }
    Ok(count)
}

/// Occupied sites grouped into independent sets of the bond graph.
#[derive(Debug, Clone)]
pub struct Colouring {
    /// Site indices, colour by colour, ascending within a colour.
    sites: Vec<u32>,
    /// `starts[c] .. starts[c + 1]` is colour `c` in `sites`.
    starts: Vec<usize>,
    /// For colour `c` and chunk `k` of [`CHUNK`] sites, the position within the colour's
    /// list of its first site at or after `k * CHUNK`: `chunk_offsets[c * (chunks + 1) + k]`.
    chunk_offsets: Vec<u32>,
    chunks: usize,
}

impl Colouring {
    /// Colours the occupied sites of `h`'s supercell.
    pub fn new(h: &Hamiltonian) -> Result<Self, StepError> {
        let cell = h.cell();
        let n = cell.len();
        if n > u32::MAX as usize {
            return Err(StepError::TooLarge {
                what: "sites for Monte Carlo",
                value: n,
                limit: u32::MAX as usize,
            });
        }
        let mut colour = vec![NONE; n];
        let mut used: Vec<usize> = Vec::new();
        let steps = steps(h);
        let nb = cell.basis_len();
        let sites = in_index_order(cell.cells(), nb, n).filter(|&(i, _, _)| cell.is_occupied(i));
        let mut count = greedy(h, &steps, sites, &mut colour, &mut used)?;
        // Iterated greedy: recolouring class by class never needs more colours than
        // before, and often fewer. Passes alternate two class orders: the last class first,
        // and the largest class first.
        let mut order: Vec<u32> = vec![0; n];
        let mut size: Vec<usize> = Vec::new();
        for pass in 0..ITERATED_PASSES {
            // Two colours are the fewest possible once any bond joins two sites (greedy
            // gives one colour only when none does).
            if count <= 2 {
                break;
            }
            size.clear();
            size.resize(count, 0);
            for &c in colour.iter().filter(|&&c| c != NONE) {
                size[c as usize] += 1;
            }
            let mut classes: Vec<usize> = (0..count).rev().collect();
            if pass % 2 == 1 {
                classes.sort_by_key(|&c| std::cmp::Reverse(size[c]));
            }
            // Counting sort of the sites into that class order, ascending within a class.
            let mut start = vec![0usize; count];
            let mut acc = 0;
            for &c in &classes {
                start[c] = acc;
                acc += size[c];
            }
            for (i, &c) in colour.iter().enumerate() {
                if c != NONE {
                    order[start[c as usize]] = i as u32;
                    start[c as usize] += 1;
                }
            }
            colour.iter_mut().for_each(|c| *c = NONE);
            let sites = order[..acc].iter().map(|&i| {
                let (c, b) = cell.decompose(i as usize);
                (i as usize, c, b)
            });
            count = greedy(h, &steps, sites, &mut colour, &mut used)?;
        }
        // Split each colour by basis site: a class of the refined colouring is still an
        // independent set, and its sites all have the same bonds, which the Monte Carlo
        // kernel needs to treat a block of them at once. Empty classes are dropped.
        // The basis sites in site order, counted rather than divided out.
        let basis = || cell.basis_from(0);
        let mut used_class = vec![false; count * nb];
        for (c, b) in colour.iter().zip(basis()) {
            if *c != NONE {
                used_class[*c as usize * nb + b] = true;
            }
        }
        let mut renumber = vec![NONE as usize; count * nb];
        let mut classes = 0;
        for (r, used) in renumber.iter_mut().zip(&used_class) {
            if *used {
                *r = classes;
                classes += 1;
            }
        }
        if classes > NONE as usize {
            return Err(StepError::TooLarge { what: "colours", value: classes, limit: NONE as usize });
        }
        for (c, b) in colour.iter_mut().zip(basis()) {
            if *c != NONE {
                *c = renumber[*c as usize * nb + b] as u16;
            }
        }
        let count = classes;
        let mut starts = vec![0usize; count + 1];
        for &c in &colour {
            if c != NONE {
                starts[c as usize + 1] += 1;
            }
        }
        for c in 0..count {
            starts[c + 1] += starts[c];
        }
        let mut fill = starts.clone();
        let mut sites = vec![0u32; starts[count]];
        for (i, &c) in colour.iter().enumerate() {
            if c != NONE {
                sites[fill[c as usize]] = i as u32;
                fill[c as usize] += 1;
            }
        }
        let chunks = n.div_ceil(CHUNK);
        let mut chunk_offsets = vec![0u32; count * (chunks + 1)];
        for c in 0..count {
            let list = &sites[starts[c]..starts[c + 1]];
            for k in 0..=chunks {
                let first = (k * CHUNK) as u64;
                chunk_offsets[c * (chunks + 1) + k] = list.partition_point(|&s| (s as u64) < first) as u32;
            }
        }
        Ok(Self { sites, starts, chunk_offsets, chunks })
    }

    /// Number of colours.
    pub fn len(&self) -> usize {
        self.starts.len() - 1
    }

    /// True when no site is occupied.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The sites of colour `c`, ascending.
    pub fn class(&self, c: usize) -> &[u32] {
        &self.sites[self.starts[c]..self.starts[c + 1]]
    }

    /// Number of sites in the largest colour class.
    pub fn largest_class(&self) -> usize {
        (0..self.len()).map(|c| self.class(c).len()).max().unwrap_or(0)
    }

    /// Where chunk `k` of the supercell begins in the list of colour `c`: the entries of
    /// that list falling into chunk `k` are `offset(c, k) .. offset(c, k + 1)`.
    #[inline]
    pub(crate) fn offset(&self, c: usize, k: usize) -> usize {
        self.chunk_offsets[c * (self.chunks + 1) + k] as usize
    }

    /// Bytes held, per site of the supercell.
    pub fn bytes_per_site(&self, sites: usize) -> f64 {
        let bytes = self.sites.len() * 4 + self.starts.len() * 8 + self.chunk_offsets.len() * 4;
        bytes as f64 / sites.max(1) as f64
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use spindrift_hamiltonian::{add_shell, ShellCoupling, ShellRef, Species};
    use spindrift_lattice::{preset, BondList, Supercell};

    // The counted coordinates must be `Supercell::decompose` exactly (the lattice's own
    // definition, tested in its crate).
    #[test]
    fn counted_coordinates_match_the_supercell() {
        for (name, cells) in [("simple-cubic", [3, 4, 5]), ("fcc", [2, 3, 2]), ("honeycomb", [5, 1, 3])] {
            let cell = Supercell::new(preset(name, 3.0, None).unwrap(), cells, [true; 3], 1).unwrap();
            let mut count = 0;
            for (i, c, b) in in_index_order(cell.cells(), cell.basis_len(), cell.len()) {
                assert_eq!((c, b), cell.decompose(i), "{name} site {i}");
                count += 1;
            }
            assert_eq!(count, cell.len());
        }
    }

    // The division-free neighbour must be `Supercell::neighbour` exactly (the lattice's own
    // definition, tested in its crate), including boxes of one and two cells where offsets
    // of the third shell reach past the box, and open axes that cut bonds.
    #[test]
    fn neighbour_steps_match_the_supercell() {
        let cases = [
            ("simple-cubic", [2, 3, 1], [true, true, true]),
            ("simple-cubic", [3, 2, 2], [true, false, true]),
            ("bcc", [2, 2, 3], [false, true, true]),
            ("fcc", [2, 1, 3], [true, true, false]),
            ("honeycomb", [1, 4, 1], [true, true, false]),
            ("triangular", [5, 2, 1], [false, false, false]),
            ("simple-cubic", [9, 8, 7], [true, true, false]),
            ("fcc", [6, 5, 7], [false, true, true]),
            ("honeycomb", [8, 9, 2], [true, false, false]),
        ];
        for (name, cells, periodic) in cases {
            let cell = Supercell::new(preset(name, 3.0, None).unwrap(), cells, periodic, 1).unwrap();
            let mut bonds = BondList::new(cell.basis_len());
            for n in 1..=3 {
                let shell = ShellCoupling { shell: ShellRef::Index(n), j: 1.0, dmi: None, pair: None };
                add_shell(&cell, &mut bonds, &shell).unwrap();
            }
            let species = Species {
                name: "M".into(),
                moment: 2.0,
                damping: 0.1,
                anisotropy: 0.0,
                axis: [0.0, 0.0, 1.0],
            };
            let h = Hamiltonian::new(cell, vec![species], bonds, [0.0; 3]).unwrap();
            let steps = steps(&h);
            let interior = interiors(&h);
            let cell = h.cell();
            let mut checked = 0;
            for i in 0..h.len() {
                let (c, b) = cell.decompose(i);
                let inner = &interior[b];
                let inside = (0..3).all(|k| c[k] >= inner.lo[k] && c[k] < inner.hi[k]);
                for ((bond, step), &delta) in h.bonds().from_basis(b).iter().zip(&steps[b]).zip(&inner.delta)
                {
                    let expected = cell.neighbour(c, bond.offset, bond.to);
                    let ours = neighbour(cell.cells(), cell.periodic(), cell.basis_len(), c, step);
                    assert_eq!(ours, expected, "{name} {cells:?} site {i}");
                    if inside {
                        assert_eq!(
                            Some(i.wrapping_add_signed(delta)),
                            expected,
                            "{name} {cells:?} inner site {i}"
                        );
                    }
                    checked += 1;
                }
            }
            assert!(checked > 0, "{name}: no bonds");
        }
    }
}
