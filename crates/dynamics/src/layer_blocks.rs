//! A film's layers in blocks, swept as a checkerboard of blocks: a Monte Carlo sweep with
//! two parallel phases and no buffer, whatever the number of colour classes.
//!
//! Where the supercell is open along `a3` and has at least [`MIN_BLOCKS`] times `2 r`
//! layers (`r` the reach of the bonds along `a3` in layers, [`Hamiltonian::row_reach`]; one
//! layer per block when no bond leaves its layer), the layers are grouped into blocks of
//! at least `2 r` layers each, as many as fit but a multiple of four (each phase then has
//! an even number of blocks to halve among threads). A sweep first decides every site of
//! the even blocks, then every site of the odd ones; within a block, the colour classes
//! in a wavefront over tiles, which gives the result of one class after another (see
//! "Order within a block"). Two blocks of one phase are at least `2 r` layers apart, so no bond
//! joins them, and their sites read only spins that no other block of the phase writes.
//!
//! Each block of a phase gets a window of the spin array of its own: from the middle of
//! the block below to the middle of the block above (layer-wise, the lower half rounded
//! down), which holds every neighbour of its sites, as the halves are at least `r` layers
//! thick. The windows of a phase are disjoint ranges of the array, so they are plain
//! mutable slices, one per task, and a phase is one parallel region in which each block
//! decides its sites in place. Against the colour passes of `slabs.rs`, which need two
//! regions per class (the sites next to another slab are decided from the whole array
//! into a buffer first), a sweep of a two-colour lattice is two regions instead of four
//! and writes no buffer.
//!
//! With more threads than blocks in a phase, a phase goes class by class instead: the
//! class's sites in all the phase's blocks are decided from the whole array into a buffer
//! in parallel chunks, then written back, block by block in parallel. A class has no bond
//! within itself, so this is the same result as deciding each block's class in place.
//!
//! The blocks and their order follow from the supercell and the bonds alone, never from
//! the thread count, so a sweep gives bitwise the same spins on any number of threads.
//! The order differs from the colour passes' (a block's sites see the new spins of the
//! blocks decided before them), so the chain differs from that of a lattice swept by
//! colour passes; both are sequences of single-site Metropolis updates, each visiting
//! every site once per sweep.
//!
//! # Order within a block
//!
//! A block's layers are cut along `a2` into tiles: a few rows of every layer of the
//! block, each tile at least as many rows as the bonds reach along `a2`, so a site's
//! neighbours lie in its own tile or the two next to it (on a ring of tiles where `a2` is
//! periodic). Deciding one class after another, tile after tile, would read the whole
//! block from memory once per class; instead the classes follow each other tile by tile,
//! a wavefront: at time `t`, class after class, class `c` decides its sites in tile
//! `u = (c + p) mod T` with `p = t - 2c`, if `0 <= p < T` (`T` tiles). So class 1 works one
//! tile behind class 0, class 2 one behind class 1, and each reads rows that the class
//! before it has just left in the cache.
//!
//! This gives bitwise the result of deciding the block class after class: a site's
//! decision reads the new spins of its neighbours of lower classes and the old ones of
//! higher classes in both orders, provided that for classes `a < b` and tiles `u`, `v`
//! next to each other (or equal) class `a` takes `u` no later than class `b` takes `v`
//! (at the same time, the lower class goes first). With `x = (u - a) mod T`, `v = u + e`
//! (`e` in `{-1, 0, 1}`) and `d = b - a >= 1`, the times are `2a + x` and `2b + ((x + e -
//! d) mod T)`, whose difference is `d + e >= 0` when `x + e - d >= 0` and `d + e + jT > 0`
//! (some `j >= 1`) otherwise. Starting class `c` at tile `c` is what makes this hold
//! across the seam of a periodic `a2`; the same holds on an open one. A site's neighbours
//! along `a3` lie in its own tile or in other blocks, which no task writes during the
//! phase.

use crate::colouring::Colouring;
use crate::slabs::TILE_BYTES;
use spindrift_hamiltonian::Hamiltonian;
use std::ops::Range;

/// Fewest blocks: four, so that each phase has at least two blocks to share.
pub(crate) const MIN_BLOCKS: usize = 4;

/// The blocks of a film and the order of its sites within each.
#[derive(Debug, Clone)]
pub(crate) struct LayerBlocks {
    /// Block `k` holds sites `starts[k] .. starts[k + 1]`.
    starts: Vec<usize>,
    /// Block `k`'s window starts at `window_at[k]` (the middle of block `k - 1`, or 0);
    /// it ends where block `k + 2`'s starts (or at the end of the array).
    window_at: Vec<usize>,
    /// The blocks of phase 0 (even) and phase 1 (odd).
    phases: [Vec<usize>; 2],
    /// Block `k`'s sites in the order they are decided: ranges of positions in the list
    /// of a class, `(class, range)`, from `order[order_at[k]]` to `order[order_at[k + 1]]`.
    order: Vec<(u32, Range<u32>)>,
    order_at: Vec<usize>,
    /// For class `c`, the position in its site list of its first site at or after block
    /// `k`'s first: `class_at[c * (blocks + 1) + k]`.
    class_at: Vec<u32>,
}

impl LayerBlocks {
    /// The blocks of `h`'s supercell, or `None` where it is periodic along `a3` or has
    /// too few layers for [`MIN_BLOCKS`] blocks.
    pub(crate) fn new(h: &Hamiltonian, colouring: &Colouring) -> Option<Self> {
        Self::with_tiles(h, colouring, TILE_BYTES)
    }

    /// [`LayerBlocks::new`] with tiles of `tile_bytes` (tests use small ones).
    pub(crate) fn with_tiles(h: &Hamiltonian, colouring: &Colouring, tile_bytes: usize) -> Option<Self> {
        let cell = h.cell();
        let [n1, n2, n3] = cell.cells();
        if cell.periodic()[2] {
            return None;
        }
        let reach = h.row_reach()[1];
        let thinnest = (2 * reach).max(1);
        // The most blocks of at least `thinnest` layers, a multiple of four, so that each
        // phase has an even number of blocks to halve among threads.
        let blocks = (n3 / thinnest) & !3;
        if blocks < MIN_BLOCKS {
            return None;
        }
        // Layers per block: as even as they go, the spare layers to the even blocks
        // first, then to the odd ones, so that the blocks of a phase weigh alike as far
        // as they can.
        let (base, spare) = (n3 / blocks, n3 % blocks);
        let rank = |k: usize| if k % 2 == 0 { k / 2 } else { blocks / 2 + k / 2 };
        let layers: Vec<usize> = (0..blocks).map(|k| base + usize::from(rank(k) < spare)).collect();
        let mut first_layer = vec![0];
        for &l in &layers {
            first_layer.push(first_layer.last().unwrap() + l);
        }
        let row_len = n1 * cell.basis_len();
        let layer_len = n2 * row_len;
        let starts: Vec<usize> = first_layer.iter().map(|&z| z * layer_len).collect();
        let window_at = (0..blocks)
            .map(|k| if k == 0 { 0 } else { (first_layer[k - 1] + layers[k - 1] / 2) * layer_len })
            .collect();
        let phases = [(0..blocks).step_by(2).collect(), (1..blocks).step_by(2).collect()];

        // Rows along a2 per tile: the tiles a class works on at one time (three, see the
        // module documentation) in a block's layers and the layers its bonds reach take
        // at most `tile_bytes` of spins; and at least the bonds' reach along a2, so that
        // a tile's sites have neighbours in the tiles next to it and no farther. The rows
        // are shared out evenly, so no tile has fewer.
        let reach2 = h.row_reach()[0];
        let row_bytes = (base + 1 + 2 * reach) * row_len * std::mem::size_of::<[f64; 3]>();
        let rows = (tile_bytes / (3 * row_bytes)).max(reach2).clamp(1, n2);
        let tiles = n2 / rows;
        let tile_rows = |u: usize| u * n2 / tiles..(u + 1) * n2 / tiles;
        let classes = colouring.len();
        let mut order: Vec<(u32, Range<u32>)> = Vec::new();
        let mut order_at = vec![0];
        let mut class_at = Vec::with_capacity(classes * (blocks + 1));
        for c in 0..classes {
            let class = colouring.class(c);
            class_at.extend(starts.iter().map(|&i| first_at(class, i)));
        }
        for k in 0..blocks {
            for (c, u) in wavefront(classes, tiles) {
                let at = |i: usize| first_at(colouring.class(c), i);
                let ys = tile_rows(u);
                for z in first_layer[k]..first_layer[k + 1] {
                    let (a, b) =
                        (at(z * layer_len + ys.start * row_len), at(z * layer_len + ys.end * row_len));
                    let fresh = order.len() == order_at[k];
                    match order.last_mut() {
                        // Adjacent ranges of a class in one block make one.
                        Some((last_c, last)) if !fresh && *last_c as usize == c && last.end == a => {
                            last.end = b
                        }
                        _ if a < b => order.push((c as u32, a..b)),
                        _ => {}
                    }
                }
            }
            order_at.push(order.len());
        }
        Some(Self { starts, window_at, phases, order, order_at, class_at })
    }

    /// Number of blocks.
    pub(crate) fn len(&self) -> usize {
        self.starts.len() - 1
    }

    /// The blocks of phase `p` (0: even, 1: odd), ascending.
    pub(crate) fn phase(&self, p: usize) -> &[usize] {
        &self.phases[p]
    }

    /// Where block `k`'s window starts: the window runs to where block `k + 2`'s starts.
    pub(crate) fn window_start(&self, k: usize) -> usize {
        self.window_at[k]
    }

    /// The sites of block `k`, a range of the spin array (the sweep needs only the
    /// windows; the tests check the blocks).
    #[cfg(test)]
    pub(crate) fn sites(&self, k: usize) -> Range<usize> {
        self.starts[k]..self.starts[k + 1]
    }

    /// Block `k`'s sites in the order they are decided, the classes in a wavefront over
    /// tiles (see the module documentation): `(class, range of positions in the class's
    /// site list)`.
    pub(crate) fn order(&self, k: usize) -> &[(u32, Range<u32>)] {
        &self.order[self.order_at[k]..self.order_at[k + 1]]
    }

    /// The positions in class `c`'s site list of the class's sites in block `k`, in
    /// index order.
    pub(crate) fn class_range(&self, c: usize, k: usize) -> Range<usize> {
        let at = c * (self.len() + 1) + k;
        self.class_at[at] as usize..self.class_at[at + 1] as usize
    }

    /// Bytes held.
    pub(crate) fn bytes(&self) -> usize {
        (self.starts.len() + self.window_at.len() + self.phases[0].len() + self.phases[1].len()) * 8
            + self.order.len() * std::mem::size_of::<(u32, Range<u32>)>()
            + self.order_at.len() * 8
            + self.class_at.len() * 4
    }
}

/// The order of the (class, tile) pairs of a block, `classes` classes over a ring of
/// `tiles` tiles: at time `t = 0, 1, ...`, class after class, class `c` takes its tile
/// `(c + t - 2c) mod tiles` if `0 <= t - 2c < tiles` (see the module documentation).
fn wavefront(classes: usize, tiles: usize) -> impl Iterator<Item = (usize, usize)> {
    (0..2 * classes.saturating_sub(1) + tiles).flat_map(move |t| {
        (0..classes)
            .filter_map(move |c| t.checked_sub(2 * c).filter(|&p| p < tiles).map(|p| (c, (c + p) % tiles)))
    })
}

/// The position in `class` (ascending sites) of its first site at or after site `i`.
fn first_at(class: &[u32], i: usize) -> u32 {
    class.partition_point(|&s| (s as usize) < i) as u32
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::heun::tests::{stacked_system_of, system_of};

    // Every neighbour of a block's site lies in the block's window, the windows of a phase
    // are disjoint and ascending, each block's sites lie in its own window, and every
    // occupied site is listed once, in its own block, and a block's sites of a class are
    // one range of the class's list (`class_range`); on simple cubic films with one to
    // three shells (one, three of them diluted), bcc (two basis sites) and a stack of
    // square layers with no bond between them (one layer per block), with tiles of a few
    // rows and of whole layers. The neighbours come from the bond list and the
    // supercell's own wrapping (`Supercell::neighbour`), not from the blocks' layer
    // arithmetic. Our own behaviour.
    #[test]
    fn windows_hold_every_neighbour() {
        let systems = [
            system_of("simple-cubic", [16, 12, 12], 1, [true, true, false], 1.0),
            system_of("simple-cubic", [10, 12, 17], 3, [true, true, false], 0.8),
            system_of("bcc", [6, 8, 16], 2, [false, true, false], 1.0),
            stacked_system_of("square", Some(9.0), [12, 10, 5], 2, [true, true, false], 1.0),
        ];
        let mut made = 0;
        for h in &systems {
            let colouring = Colouring::new(h).unwrap();
            let cell = h.cell();
            let row_bytes = 24 * cell.cells()[0] * cell.basis_len();
            for tile in [3 * row_bytes, TILE_BYTES] {
                let blocks = LayerBlocks::with_tiles(h, &colouring, tile)
                    .unwrap_or_else(|| panic!("no blocks for {:?}, reach {:?}", cell.cells(), h.row_reach()));
                made += 1;
                let n = blocks.len();
                assert!(n >= MIN_BLOCKS && n % 4 == 0);
                assert_eq!((blocks.sites(0).start, blocks.sites(n - 1).end), (0, h.len()));
                let window = |k: usize| {
                    blocks.window_start(k)..if k + 2 < n { blocks.window_start(k + 2) } else { h.len() }
                };
                for p in 0..2 {
                    let ks = blocks.phase(p);
                    assert!(ks.iter().all(|&k| k % 2 == p) && ks.len() == (n + 1 - p) / 2);
                    for pair in ks.windows(2) {
                        assert!(window(pair[0]).end <= window(pair[1]).start, "windows {pair:?} overlap");
                    }
                }
                let mut seen = vec![0u8; h.len()];
                for k in 0..n {
                    let (own, win) = (blocks.sites(k), window(k));
                    assert!(win.start <= own.start && own.end <= win.end);
                    for c in 0..colouring.len() {
                        let class = colouring.class(c);
                        let inside: Vec<u32> =
                            class.iter().copied().filter(|&i| own.contains(&(i as usize))).collect();
                        assert_eq!(&class[blocks.class_range(c, k)], &inside[..], "class {c} in block {k}");
                    }
                    for (c, r) in blocks.order(k) {
                        for &i in &colouring.class(*c as usize)[r.start as usize..r.end as usize] {
                            let i = i as usize;
                            seen[i] += 1;
                            assert!(own.contains(&i), "site {i} listed in block {k}");
                            let (cl, b) = cell.decompose(i);
                            for bond in h.bonds().from_basis(b) {
                                if let Some(j) = cell.neighbour(cl, bond.offset, bond.to) {
                                    assert!(
                                        win.contains(&j),
                                        "site {i}'s neighbour {j} outside block {k}'s window"
                                    );
                                }
                            }
                        }
                    }
                }
                for (i, &m) in seen.iter().enumerate() {
                    assert_eq!(m, u8::from(cell.is_occupied(i)), "site {i} listed {m} times");
                }
            }
        }
        assert_eq!(made, 8);
        // Periodic along a3, or too few layers for four blocks of two: none.
        for h in [
            system_of("simple-cubic", [8, 8, 16], 1, [true, true, true], 1.0),
            system_of("simple-cubic", [8, 8, 7], 1, [true, true, false], 1.0),
            system_of("simple-cubic", [32, 48, 1], 1, [true, true, false], 1.0),
        ] {
            assert!(LayerBlocks::new(&h, &Colouring::new(&h).unwrap()).is_none());
        }
    }

    // The wavefront order decides every bonded pair of a block's sites in the order of
    // their classes (the lower class first), which is what makes it give bitwise the
    // result of deciding the block class after class; on films periodic and open along
    // a2, with one to four shells (four: bonds reaching two rows along a2 and a3), fcc
    // (several classes, four basis sites) and tiles from one row to whole layers, so
    // that the tiles wrap around the seam of a periodic a2. The neighbours come from the
    // bond list and `Supercell::neighbour`. Our own behaviour.
    #[test]
    fn order_decides_bonded_sites_by_class() {
        let systems = [
            system_of("simple-cubic", [16, 12, 12], 1, [true, true, false], 1.0),
            system_of("simple-cubic", [10, 13, 17], 4, [true, true, false], 0.9),
            system_of("simple-cubic", [9, 11, 8], 2, [true, false, false], 1.0),
            system_of("bcc", [6, 10, 16], 2, [false, true, false], 1.0),
            system_of("fcc", [5, 9, 8], 1, [true, true, false], 1.0),
        ];
        let mut checked = 0;
        for h in &systems {
            let colouring = Colouring::new(h).unwrap();
            let cell = h.cell();
            let mut class_of = vec![usize::MAX; h.len()];
            for c in 0..colouring.len() {
                colouring.class(c).iter().for_each(|&i| class_of[i as usize] = c);
            }
            for tile in [1, 4 * 24 * cell.cells()[0] * cell.basis_len(), TILE_BYTES, usize::MAX / 4] {
                let blocks = LayerBlocks::with_tiles(h, &colouring, tile).unwrap();
                let mut position = vec![usize::MAX; h.len()];
                for k in 0..blocks.len() {
                    let sites = blocks.order(k).iter().flat_map(|(c, r)| {
                        colouring.class(*c as usize)[r.start as usize..r.end as usize].iter()
                    });
                    for (at, &i) in sites.enumerate() {
                        position[i as usize] = at;
                    }
                    for i in blocks.sites(k).filter(|&i| cell.is_occupied(i)) {
                        let (cl, b) = cell.decompose(i);
                        for bond in h.bonds().from_basis(b) {
                            let Some(j) = cell.neighbour(cl, bond.offset, bond.to) else { continue };
                            if !blocks.sites(k).contains(&j)
                                || !cell.is_occupied(j)
                                || class_of[j] == class_of[i]
                            {
                                continue;
                            }
                            checked += 1;
                            assert_eq!(
                                class_of[j] < class_of[i],
                                position[j] < position[i],
                                "{:?}, tile {tile} bytes: site {i} (class {}) and its neighbour {j} (class {}) in block {k}",
                                cell.cells(),
                                class_of[i],
                                class_of[j]
                            );
                        }
                    }
                }
            }
        }
        assert!(checked > 100_000, "{checked} pairs checked");
        // Every (class, tile) once, for many and few tiles.
        for (classes, tiles) in [(1, 1), (2, 1), (2, 7), (5, 3), (8, 20)] {
            let mut pairs: Vec<(usize, usize)> = wavefront(classes, tiles).collect();
            assert!(pairs.iter().all(|&(c, u)| c < classes && u < tiles));
            pairs.sort_unstable();
            pairs.dedup();
            assert_eq!(pairs.len(), classes * tiles);
        }
    }
}
