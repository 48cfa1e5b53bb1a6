//! A split of the supercell among threads for Monte Carlo sweeps.
//!
//! The sites of a row of cells (the cells along `a1` at given coordinates along `a2` and
//! `a3`) are contiguous in the spin array, and rows follow one another, so a range of rows
//! is a range of the array. Each thread takes one such slab of rows. A site is *interior*
//! when every neighbour its bonds can reach lies in its own slab: its thread can decide its
//! trial from the slab alone and write the result back at once, with no other thread
//! involved. The other sites of a slab
//! (the *boundary*: the rows next to another slab, through a periodic wrap too) are
//! decided from the whole array by all threads together first, and each thread then writes
//! back the boundary results of its own slab.
//!
//! Whether a row is interior follows from how far the bonds reach across rows
//! ([`Hamiltonian::row_reach`]): every row within that reach along `a2` and `a3` (wrapped
//! on a periodic axis, dropped past an open face, where no bond is read) must be in the
//! slab. This is conservative for a bond set that reaches less far in some directions.
//!
//! # Order
//!
//! A slab's interior is visited in tiles: a few rows along `a2` (the tile), in each layer
//! along `a3` in turn, then the next tile. The layers a bond reaches above and below then
//! hold rows of the same tile, read a moment ago and still in the cache, where in index
//! order a whole layer (6 MB for 512 x 512 cells) passes between a row's reads as a
//! neighbour from above and from below. On a film of one layer this is index order.
//!
//! A split never changes a result: the trials of a colour class read only spins of other
//! classes, so it does not matter which thread decides a trial, when it is written back,
//! or in which order; the counts are integer sums.

use crate::colouring::Colouring;
use spindrift_hamiltonian::Hamiltonian;
use spindrift_lattice::wrap_coordinate;
use std::ops::Range;

/// Bytes of spins in the rows of one tile (see "Order" in the module documentation): a
/// quarter of a 2 MB L2 cache, so that the spins a tile reads stay in it with room for
/// the rest. The blocks of layers (`layer_blocks.rs`) tile with it too.
pub(crate) const TILE_BYTES: usize = 512 * 1024;

/// The split of one supercell and colouring among a number of threads.
#[derive(Debug, Clone)]
pub(crate) struct Slabs {
    /// `starts[p] .. starts[p + 1]` are the sites of slab `p`.
    starts: Vec<usize>,
    /// The boundary sites, class by class, ascending within a class.
    boundary: Vec<u32>,
    /// For class `c` and slab `p`, the position in `boundary` of the slab's first boundary
    /// site of the class: `boundary_at[c * (slabs + 1) + p]`; the class's are
    /// `boundary_at[c * (slabs + 1)] .. boundary_at[c * (slabs + 1) + slabs]`.
    boundary_at: Vec<usize>,
    /// Ranges of positions in a class's site list that are interior, by class and slab:
    /// those of class `c` and slab `p` are `interior[interior_at[c * slabs + p] ..
    /// interior_at[c * slabs + p + 1]]`.
    interior: Vec<Range<u32>>,
    interior_at: Vec<usize>,
    /// The largest number of boundary sites of one class.
    largest_boundary: usize,
}

impl Slabs {
    /// The split of `h`'s supercell into `threads` slabs of whole rows, or `None` when it
    /// would not pay: fewer rows than twice the threads, or fewer than half of the occupied
    /// sites interior. One thread has one slab, all interior.
    pub(crate) fn new(h: &Hamiltonian, colouring: &Colouring, threads: usize) -> Option<Self> {
        Self::with_tiles(h, colouring, threads, TILE_BYTES)
    }

    /// [`Slabs::new`] with tiles of `tile_bytes` (tests use small ones).
    pub(crate) fn with_tiles(
        h: &Hamiltonian,
        colouring: &Colouring,
        threads: usize,
        tile_bytes: usize,
    ) -> Option<Self> {
        let cell = h.cell();
        let [n1, n2, n3] = cell.cells();
        let periodic = cell.periodic();
        let rows = n2 * n3;
        if threads == 0 || (threads > 1 && rows < 2 * threads) {
            return None;
        }
        let row_len = n1 * cell.basis_len();
        // Slab p holds rows first_row(p) .. first_row(p + 1).
        let first_row = |p: usize| p * rows / threads;
        let slab_of_row: Vec<usize> =
            (0..threads).flat_map(|p| std::iter::repeat_n(p, first_row(p + 1) - first_row(p))).collect();
        let [reach2, reach3] = h.row_reach().map(|r| r as i64);
        let interior_row: Vec<bool> = (0..rows)
            .map(|r| {
                let p = slab_of_row[r];
                let (c2, c3) = ((r % n2) as i64, (r / n2) as i64);
                (-reach3..=reach3).all(|d3| {
                    (-reach2..=reach2).all(|d2| {
                        let t2 = wrap_coordinate(c2 + d2, n2 as i64, periodic[1]);
                        let t3 = wrap_coordinate(c3 + d3, n3 as i64, periodic[2]);
                        match (t2, t3) {
                            (Some(t2), Some(t3)) => slab_of_row[t3 as usize * n2 + t2 as usize] == p,
                            _ => true,
                        }
                    })
                })
            })
            .collect();

        // Rows along a2 per tile: the tile's rows in the layers a bond reaches take at most
        // `tile_bytes` of spins.
        let layers = 2 * reach3 as usize + 1;
        let tile = (tile_bytes / (layers * row_len * std::mem::size_of::<[f64; 3]>())).clamp(1, n2);

        let slabs = threads;
        let mut boundary = Vec::new();
        let mut boundary_at = Vec::with_capacity(colouring.len() * (slabs + 1));
        let mut interior: Vec<Range<u32>> = Vec::new();
        let mut interior_at = vec![0];
        let mut interior_sites = 0;
        let mut largest_boundary = 0;
        for c in 0..colouring.len() {
            let class = colouring.class(c);
            let class_boundary = boundary.len();
            // The position in the class of its first site at or after row r.
            let at_row = |r: usize| class.partition_point(|&i| (i as usize) < r * row_len);
            for p in 0..slabs {
                boundary_at.push(boundary.len());
                let (r_lo, r_hi) = (first_row(p), first_row(p + 1));
                // Row by row (a search per row, not a division per site).
                let mut first = at_row(r_lo);
                for r in r_lo..r_hi {
                    let end = at_row(r + 1);
                    if interior_row[r] {
                        interior_sites += end - first;
                    } else {
                        boundary.extend_from_slice(&class[first..end]);
                    }
                    first = end;
                }
                // The interior tile by tile: rows y0 .. y1 of each layer of the slab in turn.
                let open = interior.len();
                for y0 in (0..n2).step_by(tile) {
                    let y1 = (y0 + tile).min(n2);
                    for c3 in r_lo / n2..r_hi.div_ceil(n2) {
                        let (mut r, end) = ((c3 * n2 + y0).max(r_lo), (c3 * n2 + y1).min(r_hi));
                        while r < end {
                            let mut e = r;
                            while e < end && interior_row[e] {
                                e += 1;
                            }
                            let (a, b) = (at_row(r) as u32, at_row(e) as u32);
                            let fresh = interior.len() == open;
                            match interior.last_mut() {
                                // Adjacent ranges of a class and slab make one.
                                Some(last) if !fresh && last.end == a => last.end = b,
                                _ if a < b => interior.push(a..b),
                                _ => {}
                            }
                            r = e + 1;
                        }
                    }
                }
                interior_at.push(interior.len());
            }
            boundary_at.push(boundary.len());
            largest_boundary = largest_boundary.max(boundary.len() - class_boundary);
        }
        let occupied = boundary.len() + interior_sites;
        if 2 * interior_sites < occupied {
            return None;
        }
        let starts = (0..=slabs).map(|p| first_row(p) * row_len).collect();
        Some(Self { starts, boundary, boundary_at, interior, interior_at, largest_boundary })
    }

    /// Number of slabs (the threads it was made for).
    pub(crate) fn len(&self) -> usize {
        self.starts.len() - 1
    }

    /// The sites of slab `p`, a range of the spin array.
    pub(crate) fn sites(&self, p: usize) -> Range<usize> {
        self.starts[p]..self.starts[p + 1]
    }

    /// The first site of slabs `p ..`, for splitting the spin array.
    pub(crate) fn start(&self, p: usize) -> usize {
        self.starts[p]
    }

    /// The boundary sites of class `c`, ascending.
    pub(crate) fn boundary(&self, c: usize) -> &[u32] {
        let at = c * (self.len() + 1);
        &self.boundary[self.boundary_at[at]..self.boundary_at[at + self.len()]]
    }

    /// Positions within [`Slabs::boundary`]`(c)` of the boundary sites of class `c` in slab
    /// `p`.
    pub(crate) fn boundary_in(&self, c: usize, p: usize) -> Range<usize> {
        let at = c * (self.len() + 1);
        let first = self.boundary_at[at];
        self.boundary_at[at + p] - first..self.boundary_at[at + p + 1] - first
    }

    /// Ranges of positions within class `c`'s site list ([`Colouring::class`]) of the
    /// interior sites of slab `p`.
    pub(crate) fn interior(&self, c: usize, p: usize) -> &[Range<u32>] {
        let at = c * self.len() + p;
        &self.interior[self.interior_at[at]..self.interior_at[at + 1]]
    }

    /// The largest number of boundary sites of one class.
    pub(crate) fn largest_boundary(&self) -> usize {
        self.largest_boundary
    }

    /// Bytes held.
    pub(crate) fn bytes(&self) -> usize {
        self.starts.len() * 8
            + self.boundary.len() * 4
            + self.boundary_at.len() * 8
            + self.interior.len() * 8
            + self.interior_at.len() * 8
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::heun::tests::system_of;

    // Every neighbour of an interior site lies in its slab, every occupied site is listed
    // once (interior or boundary, in its own slab), on lattices with one and two basis
    // sites, one to three shells, open and periodic axes, 1 to 5 slabs, films of one layer
    // (split along a2) included, with tiles of whole layers and of a few rows. The neighbours come from the bond list and the supercell's
    // own wrapping (`Supercell::neighbour`), not from the plan's row arithmetic. Our own
    // behaviour.
    #[test]
    fn interior_sites_reach_only_their_slab() {
        let systems = [
            system_of("simple-cubic", [16, 12, 12], 1, [true, true, false], 1.0),
            system_of("simple-cubic", [10, 12, 16], 3, [true, true, true], 0.8),
            system_of("simple-cubic", [24, 40, 1], 2, [true, true, false], 1.0),
            system_of("bcc", [6, 8, 16], 2, [false, true, true], 1.0),
        ];
        let mut made = 0;
        for h in &systems {
            let colouring = Colouring::new(h).unwrap();
            let cell = h.cell();
            let row_bytes = 24 * cell.cells()[0] * cell.basis_len();
            for (threads, tile) in
                (1..=5).flat_map(|t| [(t, TILE_BYTES), (t, 3 * row_bytes), (t, 7 * row_bytes)])
            {
                let Some(slabs) = Slabs::with_tiles(h, &colouring, threads, tile) else { continue };
                made += 1;
                assert_eq!(slabs.sites(threads - 1).end, h.len());
                let slab_of = |i: usize| (0..threads).find(|&p| slabs.sites(p).contains(&i)).unwrap();
                let mut seen = vec![0u8; h.len()];
                for c in 0..colouring.len() {
                    let class = colouring.class(c);
                    for p in 0..threads {
                        for r in slabs.interior(c, p) {
                            for &i in &class[r.start as usize..r.end as usize] {
                                let i = i as usize;
                                seen[i] += 1;
                                assert_eq!(slab_of(i), p, "interior site {i} listed in the wrong slab");
                                let (cl, b) = cell.decompose(i);
                                for bond in h.bonds().from_basis(b) {
                                    if let Some(j) = cell.neighbour(cl, bond.offset, bond.to) {
                                        assert_eq!(
                                            slab_of(j),
                                            p,
                                            "site {i}'s neighbour {j}, {threads} slabs"
                                        );
                                    }
                                }
                            }
                        }
                        let boundary = slabs.boundary(c);
                        for &i in &boundary[slabs.boundary_in(c, p)] {
                            seen[i as usize] += 1;
                            assert_eq!(slab_of(i as usize), p, "boundary site {i} listed in the wrong slab");
                        }
                    }
                }
                for (i, &n) in seen.iter().enumerate() {
                    assert_eq!(n, u8::from(cell.is_occupied(i)), "site {i} listed {n} times");
                }
            }
        }
        assert!(made >= 42, "only {made} splits made");
        // Too few rows for the threads: no split.
        let chain = system_of("simple-cubic", [64, 2, 1], 1, [true, true, false], 1.0);
        assert!(Slabs::new(&chain, &Colouring::new(&chain).unwrap(), 2).is_none());
    }
}
