//! The field kernel on spins kept as three arrays of components (x, y, z), for a lattice
//! of one site per cell.
//!
//! The row kernel of [`Hamiltonian::field_range`] reads and writes 3-vectors, which its
//! vectorised loops regroup into vector registers: with 256-bit vectors on cores that
//! split them into two halves, the lane-crossing permutations cost as much as the
//! arithmetic (`bench/probes/layout`: the same passes on component arrays took half the
//! time on a first-generation Zen core). This kernel takes the same passes, entries, packs
//! and operations in the same order per site, over component arrays, so its sums are
//! bitwise those of the 3-vector kernel (tested below): an integrator that keeps its
//! spins as component arrays gets the same trajectory.
//!
//! Only a one-site basis for now: with several sites per cell the 3-vector kernel's
//! strided loop would become a strided loop over three arrays (measured slower, see
//! DEVELOPERS.md), where ordering each row by basis site would make it this loop.

use super::{
    add_entry, is_pair, neighbour_offsets, Entry, FlatOnSite, FusedBond, Hamiltonian, OnSite, ISO,
    IN_PLANE, MATRIX, PACK, PAIR, PAIR_ISO, PAIR_PLANAR,
};
use crate::rows::{ComponentRows, FlatComponents};
use spindrift_lattice::{wrap_coordinate, Vec3};

/// Three component rows (x, y, z).
type Rows3<'a> = [&'a [f64]; 3];

impl Hamiltonian {
    /// Whether [`Hamiltonian::field_range_components`] can evaluate this system: one site
    /// per cell.
    pub fn takes_components(&self) -> bool {
        self.cell.basis_len() == 1
    }

    /// [`Hamiltonian::field_range`] on spins as three component arrays `spins` (x, y, z,
    /// one number per site each), writing the fields (T) of the sites
    /// `start .. start + out[0].len()` into the three arrays `out`, which must be as long
    /// as one another. The same sums, bit for bit. Requires
    /// [`Hamiltonian::takes_components`].
    pub fn field_range_components(&self, spins: [&[f64]; 3], start: usize, out: [&mut [f64]; 3]) {
        field_components_kernel(self, spins, start, out);
    }

    /// [`Hamiltonian::field_range_components`] reading the spins from `rows`, compiled for
    /// the instruction set of its caller (not dispatched), as
    /// [`Hamiltonian::field_range_in`] is for 3-vectors.
    #[inline(always)]
    pub fn field_range_components_in<R: ComponentRows>(&self, rows: &R, start: usize, out: [&mut [f64]; 3]) {
        assert!(self.takes_components(), "the component kernel takes a lattice of one site per cell");
        let [n1, n2, _] = self.cell.cells();
        let [ox, oy, oz] = out;
        let len = ox.len();
        let (oy, oz) = (&mut oy[..len], &mut oz[..len]);
        let end = start + len;
        let mut lo = start;
        while lo < end {
            let r = lo / n1;
            let row_start = r * n1;
            let hi = (row_start + n1).min(end);
            let (a, b) = (lo - start, hi - start);
            self.component_row(
                rows,
                [r % n2, r / n2],
                lo - row_start,
                [&mut ox[a..b], &mut oy[a..b], &mut oz[a..b]],
            );
            lo = hi;
        }
        if let Some(occ) = self.cell.occupation() {
            for (k, &occupied) in occ[start..end].iter().enumerate() {
                if !occupied {
                    (ox[k], oy[k], oz[k]) = (0.0, 0.0, 0.0);
                }
            }
        }
    }

    /// The field of the cells `first .. first + out[0].len()` of the row of cells
    /// `(*, c2, c3)`: `Hamiltonian::field_row` with the on-site terms, for one basis site,
    /// on component arrays (the same entries, packs and order of operations).
    ///
    /// The packs are the runs of up to [`PACK`] entries of one kind in the entries' order,
    /// the same for every row: where an open face cuts a side of an entry, that side reads
    /// a row of zeros, where the 3-vector kernel leaves a cut single bond (or a pair cut on
    /// both sides) out of its packs. The bits are the same: the product of a coupling and
    /// a zero spin is a zero, and adding a zero leaves a sum as it is, since a sum that
    /// starts at `+0` is never `-0`. So each row's set-up is only the resolution of its
    /// entries' rows, inside each pack's compiled copy (no pack is built and copied).
    #[inline(always)]
    fn component_row<R: ComponentRows>(&self, rows: &R, c23: [usize; 2], first: usize, out: [&mut [f64]; 3]) {
        let cells = self.cell.cells();
        let periodic = self.cell.periodic();
        let first = first as i64;
        let row = ComponentPass {
            own: rows.row(c23[0], c23[1]),
            first,
            last: first + out[0].len() as i64,
            n1: cells[0] as i64,
            periodic: periodic[0],
        };
        let zero = &self.zeros.as_flattened()[..cells[0]];
        let resolve = Resolve { rows, c23, cells, periodic, zeros: [zero; 3], bonds: &self.fused[0] };
        let mut out = out;
        let entries = &self.entries[0];
        let flat = self.flat_onsite[0].as_ref();
        let mut fresh = true;
        let mut at = 0;
        while at < entries.len() {
            let kind = entries[at].kind;
            let mut len = 1;
            while len < PACK && at + len < entries.len() && entries[at + len].kind == kind {
                len += 1;
            }
            let pack = &entries[at..at + len];
            at += len;
            if let Some(flat) = flat.filter(|_| at == entries.len() && kind == PAIR_ISO) {
                row.pair_iso_onsite(&mut out, &resolve, pack, flat, fresh);
                return;
            }
            row.apply(&mut out, &resolve, pack, fresh);
            fresh = false;
        }
        if fresh {
            // No bond at all: the sums are zero.
            for o in out.iter_mut() {
                o.fill(0.0);
            }
        }
        let onsite = OnSite { k_field: self.k_field[0], axis: self.axis[0], field: self.field };
        row.onsite(&mut out, &onsite, flat);
    }
}

spindrift_isa::multiversion! {
    /// [`Hamiltonian::field_range_components`], compiled per instruction-set level.
    fn field_components_kernel(h: &Hamiltonian, spins: [&[f64]; 3], start: usize, out: [&mut [f64]; 3]) {
        h.field_range_components_in(&FlatComponents::new(h, spins), start, out)
    }
}

/// What resolves a row's entries to their neighbour rows.
struct Resolve<'r, R> {
    rows: &'r R,
    c23: [usize; 2],
    cells: [usize; 3],
    periodic: [bool; 3],
    /// A row of zero spins, for a side that an open face cuts.
    zeros: Rows3<'r>,
    bonds: &'r [FusedBond],
}

impl<'r, R: ComponentRows> Resolve<'r, R> {
    /// The component rows that `bond` reaches from the row, or the row of zeros where an
    /// open face cuts it (`neighbour_row` for component arrays, one basis site).
    #[inline(always)]
    fn side(&self, bond: &FusedBond) -> Rows3<'r> {
        match neighbour_offsets(self.c23, self.cells, self.periodic, bond) {
            Some([c2, c3]) => self.rows.row(c2, c3),
            None => self.zeros,
        }
    }

    /// `entry` resolved for the row.
    #[inline(always)]
    fn entry<const KIND: u8>(&self, entry: &Entry) -> ComponentBond<'r> {
        let (bond, opposite) = (&self.bonds[entry.bond], &self.bonds[entry.opposite]);
        let row = self.side(bond);
        ComponentBond {
            row,
            // A single bond has no second row.
            row2: if is_pair(KIND) { self.side(opposite) } else { row },
            o1: bond.offset[0] as i64,
            o1b: opposite.offset[0] as i64,
            m: bond.m,
            j: entry.j,
            e: entry.e,
        }
    }
}

/// One [`Entry`] resolved for a row of component arrays: the neighbour of cell `c1` is
/// cell `c1 + o1` of `row` (after wrapping at the row's ends), for a pair the opposite one
/// cell `c1 + o1b` of `row2`.
#[derive(Debug, Clone, Copy)]
struct ComponentBond<'a> {
    row: Rows3<'a>,
    row2: Rows3<'a>,
    o1: i64,
    o1b: i64,
    /// `M_ij / (mu_i muB)`, T per unit spin.
    m: [Vec3; 3],
    /// See [`Entry`].
    j: f64,
    e: Vec3,
}

/// The three components of cell `k` of `rows`.
#[inline(always)]
fn at(rows: &Rows3, k: usize) -> Vec3 {
    [rows[0][k], rows[1][k], rows[2][k]]
}

/// The three rows cut to `len` numbers from `from`, so that a loop over `0 .. len` needs
/// no bounds check.
#[inline(always)]
fn cut<'a>(rows: &Rows3<'a>, from: usize, len: usize) -> Rows3<'a> {
    [&rows[0][from..from + len], &rows[1][from..from + len], &rows[2][from..from + len]]
}

/// The cells `first .. last` of a row of a one-site basis on component arrays; the sums
/// of cell `c1` are `out[a][c1 - first]`.
struct ComponentPass<'a> {
    /// The evaluated row's spins.
    own: Rows3<'a>,
    first: i64,
    last: i64,
    /// Cells along the row.
    n1: i64,
    /// Whether the row wraps around.
    periodic: bool,
}

impl ComponentPass<'_> {
    /// `RowPass::apply`: the pack's entries added to the sums (started when `fresh`).
    #[inline(always)]
    fn apply<R: ComponentRows>(&self, out: &mut [&mut [f64]; 3], res: &Resolve<R>, pack: &[Entry], fresh: bool) {
        macro_rules! dispatch {
            ($($k:literal),*) => {
                match (pack.len(), pack[0].kind, fresh) {
                    $(
                        ($k, MATRIX, false) => self.pack::<$k, MATRIX, false, R>(out, res, pack),
                        ($k, IN_PLANE, false) => self.pack::<$k, IN_PLANE, false, R>(out, res, pack),
                        ($k, ISO, false) => self.pack::<$k, ISO, false, R>(out, res, pack),
                        ($k, PAIR, false) => self.pack::<$k, PAIR, false, R>(out, res, pack),
                        ($k, PAIR_PLANAR, false) => self.pack::<$k, PAIR_PLANAR, false, R>(out, res, pack),
                        ($k, PAIR_ISO, false) => self.pack::<$k, PAIR_ISO, false, R>(out, res, pack),
                        ($k, MATRIX, true) => self.pack::<$k, MATRIX, true, R>(out, res, pack),
                        ($k, IN_PLANE, true) => self.pack::<$k, IN_PLANE, true, R>(out, res, pack),
                        ($k, ISO, true) => self.pack::<$k, ISO, true, R>(out, res, pack),
                        ($k, PAIR, true) => self.pack::<$k, PAIR, true, R>(out, res, pack),
                        ($k, PAIR_PLANAR, true) => self.pack::<$k, PAIR_PLANAR, true, R>(out, res, pack),
                        ($k, PAIR_ISO, true) => self.pack::<$k, PAIR_ISO, true, R>(out, res, pack),
                    )*
                    _ => unreachable!("a pack holds 1 to {PACK} entries of one kind"),
                }
            };
        }
        dispatch!(1, 2, 3, 4)
    }

    /// `RowPass::inner`: the cells whose neighbours across every entry of `pack` stay
    /// inside their rows.
    #[inline(always)]
    fn inner(&self, pack: &[ComponentBond]) -> (i64, i64) {
        let (mut lo, mut hi) = (self.first, self.last);
        for r in pack {
            lo = lo.max(-r.o1).max(-r.o1b);
            hi = hi.min(self.n1 - r.o1).min(self.n1 - r.o1b);
        }
        let lo = lo.min(self.last);
        (lo, hi.max(lo))
    }

    /// `apply` for a pack of exactly `K` entries of the kind `KIND`: the inner cells in one
    /// loop over component slices cut to the pass's length (the form that vectorises
    /// without regrouping), the end cells one by one.
    #[inline(always)]
    fn pack<const K: usize, const KIND: u8, const FRESH: bool, R: ComponentRows>(
        &self,
        out: &mut [&mut [f64]; 3],
        res: &Resolve<R>,
        entries: &[Entry],
    ) {
        let pack: [ComponentBond; K] = std::array::from_fn(|p| res.entry::<KIND>(&entries[p]));
        let pack = &pack;
        let (inner_lo, inner_hi) = self.inner(pack);
        self.edges::<KIND>(out, pack, self.first, inner_lo, FRESH);
        if inner_lo < inner_hi {
            let len = (inner_hi - inner_lo) as usize;
            let k0 = (inner_lo - self.first) as usize;
            let [ox, oy, oz] = out;
            let (ox, oy, oz) = (&mut ox[k0..k0 + len], &mut oy[k0..k0 + len], &mut oz[k0..k0 + len]);
            let s: [Rows3; K] = std::array::from_fn(|p| cut(&pack[p].row, (inner_lo + pack[p].o1) as usize, len));
            let t: [Rows3; K] =
                std::array::from_fn(|p| cut(&pack[p].row2, (inner_lo + pack[p].o1b) as usize, len));
            let m = pack.map(|r| r.m);
            let j = pack.map(|r| r.j);
            let e = pack.map(|r| r.e);
            for k in 0..len {
                let mut h = if FRESH { [0.0; 3] } else { [ox[k], oy[k], oz[k]] };
                for p in 0..K {
                    let sv = at(&s[p], k);
                    // A single bond has no second row: no load.
                    let tv = if is_pair(KIND) { at(&t[p], k) } else { sv };
                    add_entry::<KIND>(&mut h, &sv, &tv, &m[p], j[p], &e[p]);
                }
                (ox[k], oy[k], oz[k]) = (h[0], h[1], h[2]);
            }
        }
        self.edges::<KIND>(out, pack, inner_hi, self.last, FRESH);
    }

    /// `RowPass::edges` on component arrays: the cells `from .. to`, whose neighbours may
    /// wrap around the row's ends, one by one and out of line (see there).
    #[inline(never)]
    fn edges<const KIND: u8>(
        &self,
        out: &mut [&mut [f64]; 3],
        pack: &[ComponentBond],
        from: i64,
        to: i64,
        fresh: bool,
    ) {
        let zero = [0.0; 3];
        for c1 in from..to {
            let k = (c1 - self.first) as usize;
            let mut h = if fresh { zero } else { [out[0][k], out[1][k], out[2][k]] };
            for r in pack {
                let near = wrap_coordinate(c1 + r.o1, self.n1, self.periodic).map(|t1| at(&r.row, t1 as usize));
                if is_pair(KIND) {
                    let far =
                        wrap_coordinate(c1 + r.o1b, self.n1, self.periodic).map(|t1| at(&r.row2, t1 as usize));
                    if near.is_some() || far.is_some() {
                        let (s, t) = (near.unwrap_or(zero), far.unwrap_or(zero));
                        add_entry::<KIND>(&mut h, &s, &t, &r.m, r.j, &r.e);
                    }
                } else if let Some(s) = near {
                    add_entry::<KIND>(&mut h, &s, &s, &r.m, r.j, &r.e);
                }
            }
            (out[0][k], out[1][k], out[2][k]) = (h[0], h[1], h[2]);
        }
    }

    /// `RowPass::pair_iso_onsite`: the last pack, of isotropic pairs, and the on-site terms
    /// in one pass per component, `((h + j (s + t)) + d s) + b`, the operations and order
    /// of the pack's pass followed by the on-site pass.
    #[inline(always)]
    fn pair_iso_onsite<R: ComponentRows>(
        &self,
        out: &mut [&mut [f64]; 3],
        res: &Resolve<R>,
        pack: &[Entry],
        flat: &FlatOnSite,
        fresh: bool,
    ) {
        macro_rules! dispatch {
            ($($k:literal),*) => {
                match (pack.len(), fresh) {
                    $(
                        ($k, false) => self.pairs_and_onsite::<$k, false, R>(out, res, pack, flat),
                        ($k, true) => self.pairs_and_onsite::<$k, true, R>(out, res, pack, flat),
                    )*
                    _ => unreachable!("a pack holds 1 to {PACK} entries"),
                }
            };
        }
        dispatch!(1, 2, 3, 4)
    }

    #[inline(always)]
    fn pairs_and_onsite<const K: usize, const FRESH: bool, R: ComponentRows>(
        &self,
        out: &mut [&mut [f64]; 3],
        res: &Resolve<R>,
        entries: &[Entry],
        flat: &FlatOnSite,
    ) {
        let pack: [ComponentBond; K] = std::array::from_fn(|p| res.entry::<PAIR_ISO>(&entries[p]));
        let pack = &pack;
        let (d, b) = ([flat.d[0], flat.d[1], flat.d[2]], [flat.b[0], flat.b[1], flat.b[2]]);
        let (inner_lo, inner_hi) = self.inner(pack);
        for (from, to) in [(self.first, inner_lo), (inner_hi, self.last)] {
            if from < to {
                self.edges::<PAIR_ISO>(out, pack, from, to, FRESH);
                for c1 in from..to {
                    let k = (c1 - self.first) as usize;
                    for a in 0..3 {
                        out[a][k] = out[a][k] + d[a] * self.own[a][c1 as usize] + b[a];
                    }
                }
            }
        }
        if inner_lo >= inner_hi {
            return;
        }
        let len = (inner_hi - inner_lo) as usize;
        let k0 = (inner_lo - self.first) as usize;
        let own = cut(&self.own, inner_lo as usize, len);
        let s: [Rows3; K] = std::array::from_fn(|p| cut(&pack[p].row, (inner_lo + pack[p].o1) as usize, len));
        let t: [Rows3; K] = std::array::from_fn(|p| cut(&pack[p].row2, (inner_lo + pack[p].o1b) as usize, len));
        // One loop per pair and component, each over zipped slices (which vectorise;
        // indexing the `K` pairs' slices in one loop left it scalar, with bounds checks,
        // for `K = 3`): each site's sum still takes the pairs in order, and a sum stored
        // between two loops keeps its bits.
        for a in 0..3 {
            let o = &mut out[a][k0..k0 + len];
            for p in 0..K {
                let (s, t, j) = (s[p][a], t[p][a], pack[p].j);
                let last = p + 1 == K;
                let (da, ba) = (d[a], b[a]);
                match (FRESH && p == 0, last) {
                    (true, true) => {
                        for (((o, s), t), own) in o.iter_mut().zip(s).zip(t).zip(own[a]) {
                            *o = 0.0 + j * (s + t) + da * own + ba;
                        }
                    }
                    (true, false) => {
                        for ((o, s), t) in o.iter_mut().zip(s).zip(t) {
                            *o = 0.0 + j * (s + t);
                        }
                    }
                    (false, true) => {
                        for (((o, s), t), own) in o.iter_mut().zip(s).zip(t).zip(own[a]) {
                            *o = *o + j * (s + t) + da * own + ba;
                        }
                    }
                    (false, false) => {
                        for ((o, s), t) in o.iter_mut().zip(s).zip(t) {
                            *o += j * (s + t);
                        }
                    }
                }
            }
        }
    }

    /// `RowPass::onsite`: the on-site terms added to the sums, per component where the
    /// anisotropy field is diagonal (`flat`), else per site `(h + p e) + B`.
    #[inline(always)]
    fn onsite(&self, out: &mut [&mut [f64]; 3], onsite: &OnSite, flat: Option<&FlatOnSite>) {
        let (first, len) = (self.first as usize, (self.last - self.first) as usize);
        let own = cut(&self.own, first, len);
        if let Some(flat) = flat {
            for a in 0..3 {
                let (d, b) = (flat.d[a], flat.b[a]);
                for (o, s) in out[a][..len].iter_mut().zip(own[a]) {
                    *o = *o + d * s + b;
                }
            }
        } else {
            let [ox, oy, oz] = out;
            let (ox, oy, oz) = (&mut ox[..len], &mut oy[..len], &mut oz[..len]);
            for k in 0..len {
                let mut h = [ox[k], oy[k], oz[k]];
                onsite.add(&mut h, &at(&own, k));
                (ox[k], oy[k], oz[k]) = (h[0], h[1], h[2]);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::tests::{test_system, unit, TestCouplings, TILTED};
    use super::*;

    /// The component kernel against the 3-vector kernel, bit for bit, over ranges that
    /// start and end inside rows. Our own behaviour: the two kernels take the same
    /// operations in the same order per site.
    fn assert_components_equal(h: &Hamiltonian, spins: &[Vec3], label: &str) {
        let n = h.len();
        let comps: [Vec<f64>; 3] = std::array::from_fn(|a| spins.iter().map(|s| s[a]).collect());
        let comps = [&comps[0][..], &comps[1][..], &comps[2][..]];
        for (start, len) in [(0, n), (1, n - 1), (3, n / 2), (n / 3, n / 3 + 1), (n - 1, 1)] {
            let mut expected = vec![[f64::NAN; 3]; len];
            h.field_range(spins, start, &mut expected);
            let mut out: [Vec<f64>; 3] = std::array::from_fn(|_| vec![f64::NAN; len]);
            let [x, y, z] = &mut out;
            h.field_range_components(comps, start, [x, y, z]);
            for (k, e) in expected.iter().enumerate() {
                assert!(
                    (0..3).all(|a| out[a][k].to_bits() == e[a].to_bits()),
                    "{label} site {}: {:?} != {e:?}",
                    start + k,
                    [out[0][k], out[1][k], out[2][k]]
                );
            }
        }
    }

    // Every kind of entry (tensor bonds single, planar and general DMI pairs, isotropic
    // pairs merged with the on-site pass), open and periodic rows, dilution, rows of one
    // cell to rows longer than the vector loops, Cartesian, tilted and absent axes.
    #[test]
    fn component_kernel_equals_vector_kernel_bitwise() {
        let cases = [
            ([21, 3, 3], [true, true, false], 3, 1.0, true),
            ([19, 2, 2], [false, true, true], 2, 0.9, true),
            ([150, 2, 2], [true, false, true], 1, 1.0, false),
            ([7, 5, 4], [true, true, false], 3, 1.0, false),
            ([2, 3, 3], [true, false, true], 2, 1.0, false),
            ([1, 4, 3], [true, true, false], 2, 0.8, false),
            ([33, 3, 2], [false, false, false], 2, 1.0, true),
        ];
        let axes = [TILTED, (0.3, [0.0, 0.0, 2.0]), (-0.2, [1.0, 0.0, 0.0]), (0.0, [0.3, 0.1, 0.5])];
        for (cells, periodic, shells, occ, tensor) in cases {
            for anisotropy in axes {
                for (d, dmi_shells) in [(0.7, shells), (0.7, 1), (0.0, 0)] {
                    let c = TestCouplings { seed: 5, d, dmi_shells, tensor, anisotropy };
                    let h = test_system("simple-cubic", cells, periodic, shells, occ, c);
                    let spins: Vec<Vec3> = (0..h.len())
                        .map(|i| if h.cell().is_occupied(i) { unit(9, i) } else { [0.0; 3] })
                        .collect();
                    let label = format!("{cells:?} {periodic:?} {shells} shells, DMI {d} on {dmi_shells}, axis {anisotropy:?}");
                    assert_components_equal(&h, &spins, &label);
                }
            }
        }
    }
}
