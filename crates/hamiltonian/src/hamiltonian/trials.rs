//! Energy changes of many independent one-spin moves at once: the block kernel behind
//! [`Hamiltonian::energy_changes_from`], for Monte Carlo.
//!
//! A block of at most [`LANES`] sites is handled in phases, each a loop over the sites
//! without branches where it matters, so that the compiler vectorises across sites:
//!
//! 1. The basis site of each site (for a basis of several sites), and the runs of the
//!    block: groups of at least [`MIN_TRIAL_RUN`] consecutive sites of one basis site in
//!    one row of cells (a row holds each basis site's cells contiguously, see
//!    `spindrift_lattice::Supercell`) whose indices step by 1 or 2 (a checkerboard class
//!    of a simple cubic lattice steps by 2, one sublattice of bcc by 1). Along a run every
//!    bond's neighbours step
//!    alike, so for each bond the neighbour row is found once and the neighbours' spins
//!    are read with strided contiguous loads (wide loads and shuffles, no gathers), in at
//!    most two stretches, before and after a periodic wrap (for a pair of bonds, at most
//!    seven segments where each side is one stretch or cut).
//! 2. Sites in no run take the per-site path: cell coordinates without integer division
//!    (which does not vectorise): for integers `0 <= x < 2^32` and `1 <= n < 2^32`, with
//!    `x = q n + r`, the product `x * (1/n)` of rounded numbers is `x/n` within a relative
//!    `2^-52 (1 + 2^-52)`, an absolute error below `2^-20 / n`, while `x/n` lies in
//!    `[q, q + 1 - 1/n]`; so its truncation is `q` or `q - 1`, and the remainder
//!    `x - (q - 1) n >= n` tells which. Then per bond and axis `t = c + o` wrapped once
//!    (periodic) or checked against the faces (open), with the per-bond constants of
//!    [`AxisStep`], the linear index, and a masked load of the neighbour's spin.
//! 3. The energy change from the pair field and the on-site terms.
//!
//! Each site adds the entries of the row kernel (single bonds, and bonds paired with their
//! opposites, `j (s+ + s-) + A (s+ - s-)`: see `Entry`) in their order and with the same
//! operations as the one-site [`Hamiltonian::pair_field_mev`]: a single bond that an open
//! face cuts is skipped, a pair reads a zero spin for a cut side (and is skipped when both
//! are). So the result is that of [`Hamiltonian::energy_change`] bit for bit whichever
//! path a site takes (tested below). When the sites of a block have different basis sites,
//! all take the per-site path, and phases 2 and 3 run once per basis site, each site
//! keeping the result of its own; a Monte Carlo colour class split by basis site needs one
//! pass.

use super::{
    entry_term, is_pair, with_kind, Entry, FusedBond, Hamiltonian, IN_PLANE, ISO, MATRIX, PAIR, PAIR_ISO,
    PAIR_PLANAR,
};
use spindrift_lattice::{dot, wrap_index, Vec3};

/// Sites per block: the per-site arrays of a block (about 4 KiB) stay in L1.
pub(super) const LANES: usize = 64;

/// Shortest run of sites read with strided loads (see `add_bonds_by_runs`); a block's
/// sites in shorter stretches of a row take the per-site path, which costs several times
/// as much per site (the Monte Carlo sweep groups its trials so as to leave none).
pub const MIN_TRIAL_RUN: usize = 4;

/// Sites `k0 .. k0 + len` of a block: one basis site of one row of cells, the first in
/// cell `c`, each the next `dc` cells along a1 (1 or 2: a run steps by one or two sites,
/// which are one or two cells).
struct Run {
    k0: usize,
    len: usize,
    c: [u32; 3],
    dc: u32,
}

/// `h[k] += product(spins[j0 + D (k - k0)])` for `k0 <= k < k0 + n`: contiguous loads of
/// `D` spins per site, which the compiler turns into wide loads and shuffles.
#[inline(always)]
fn add_strided<const D: usize>(
    spins: &[Vec3],
    j0: usize,
    h: &mut Fields,
    k0: usize,
    n: usize,
    product: impl Fn(Vec3) -> Vec3,
) {
    let flat = spins.as_flattened();
    // The last site's group of `D` spins may run past the end of the array.
    let full = if 3 * (j0 + D * n) <= flat.len() { n } else { n - 1 };
    let [h0, h1, h2] = h;
    let groups = flat[3 * j0..3 * (j0 + D * full)].chunks_exact(3 * D);
    let rows = h0[k0..k0 + full].iter_mut().zip(&mut h1[k0..k0 + full]).zip(&mut h2[k0..k0 + full]);
    for (((x, y), z), g) in rows.zip(groups) {
        let add = product([g[0], g[1], g[2]]);
        *x += add[0];
        *y += add[1];
        *z += add[2];
    }
    for k in full..n {
        let add = product(spins[j0 + D * k]);
        h0[k0 + k] += add[0];
        h1[k0 + k] += add[1];
        h2[k0 + k] += add[2];
    }
}

/// `h[k] += product(spins[js + D (k - k0)], spins[jt + D (k - k0)])` for
/// `k0 <= k < k0 + n`: [`add_strided`] for the two sides of a pair.
#[inline(always)]
fn add_strided_pair<const D: usize>(
    spins: &[Vec3],
    js: usize,
    jt: usize,
    h: &mut Fields,
    k0: usize,
    n: usize,
    product: impl Fn(Vec3, Vec3) -> Vec3,
) {
    let [h0, h1, h2] = h;
    if n == 1 {
        // A segment of one site (a periodic row's wrap): the tail's arithmetic without
        // the strided loop's set-up.
        let add = product(spins[js], spins[jt]);
        h0[k0] += add[0];
        h1[k0] += add[1];
        h2[k0] += add[2];
        return;
    }
    let flat = spins.as_flattened();
    let fits = |j0: usize| 3 * (j0 + D * n) <= flat.len();
    let full = if fits(js) && fits(jt) { n } else { n - 1 };
    let near = flat[3 * js..3 * (js + D * full)].chunks_exact(3 * D);
    let far = flat[3 * jt..3 * (jt + D * full)].chunks_exact(3 * D);
    let rows = h0[k0..k0 + full].iter_mut().zip(&mut h1[k0..k0 + full]).zip(&mut h2[k0..k0 + full]);
    for ((((x, y), z), g), f) in rows.zip(near).zip(far) {
        let add = product([g[0], g[1], g[2]], [f[0], f[1], f[2]]);
        *x += add[0];
        *y += add[1];
        *z += add[2];
    }
    for k in full..n {
        let add = product(spins[js + D * k], spins[jt + D * k]);
        h0[k0 + k] += add[0];
        h1[k0 + k] += add[1];
        h2[k0 + k] += add[2];
    }
}

/// Cell coordinates of the sites of a block, axis-major.
type Coords = [[u32; LANES]; 3];
/// Pair fields of the sites of a block, component-major, T per unit spin.
type Fields = [[f64; LANES]; 3];

/// Scratch of [`Hamiltonian::energy_changes_in`]: the pair fields of a block of trials
/// (1.5 KiB). It is zero between calls: the kernel adds each block's fields to zero sums
/// and zeroes them as it reads them, so a caller that keeps one scratch for many blocks
/// spares a `memset` of the sums per block of 64 trials (which had 2% of a sweep's perf
/// samples).
#[derive(Debug, Clone)]
pub struct TrialScratch {
    h: Fields,
}

impl Default for TrialScratch {
    fn default() -> Self {
        Self { h: [[0.0; LANES]; 3] }
    }
}

/// The spins of sites `origin .. origin + spins.len()` (see
/// [`Hamiltonian::energy_changes_in`]); the kernel indexes it by site.
#[derive(Clone, Copy)]
struct Window<'a> {
    spins: &'a [Vec3],
    origin: usize,
}

impl Window<'_> {
    /// Position in the window of site `j`, which must not lie before it.
    #[inline(always)]
    fn at(&self, j: usize) -> usize {
        j - self.origin
    }
}

/// How a bond moves a cell coordinate along one axis (all `u32`, from the bond's offset
/// `o` and the box length `n`). Kept with each bond ([`FusedBond::steps`]): made once per
/// Hamiltonian, since `o mod n` is an integer division.
#[derive(Debug, Clone, Copy)]
pub(super) struct AxisStep {
    /// The coordinates `c` with `lo <= c < hi` have a neighbour along this axis.
    lo: u32,
    hi: u32,
    /// `t = c + add` (wrapping) for `c < wrap`, else `t = c - wrap`: for a periodic axis
    /// `add = o mod n` and `wrap = n - add`; for an open one `add = o` (two's complement)
    /// and `wrap = u32::MAX`, which no coordinate reaches.
    add: u32,
    wrap: u32,
}

impl AxisStep {
    pub(super) fn new(o: i32, n: usize, periodic: bool) -> Self {
        let n = n as i64;
        let o = i64::from(o);
        if periodic {
            let add = wrap_index(o, n);
            Self { lo: 0, hi: n as u32, add: add as u32, wrap: (n - add) as u32 }
        } else {
            let lo = (-o).clamp(0, n);
            let hi = (n - o.max(0)).clamp(lo, n);
            Self { lo: lo as u32, hi: hi as u32, add: o as u32, wrap: u32::MAX }
        }
    }

    /// The neighbour's coordinate and whether it exists.
    #[inline(always)]
    fn step(&self, c: u32) -> (u32, bool) {
        let t = if c < self.wrap { c.wrapping_add(self.add) } else { c.wrapping_sub(self.wrap) };
        (t, c >= self.lo && c < self.hi)
    }
}

/// `floor(x / n)` given `inv = 1 / n` rounded: the truncated product is the quotient or
/// one less (see the module documentation), which the remainder tells apart.
#[inline(always)]
fn quotient(x: u32, n: u32, inv: f64) -> u32 {
    let q = (f64::from(x) * inv) as u32;
    if x.wrapping_sub(q.wrapping_mul(n)) >= n {
        q + 1
    } else {
        q
    }
}

impl Hamiltonian {
    /// Energy changes (meV) of one-spin moves of many sites at once: `out[k]` is
    /// [`Hamiltonian::energy_change`]`(spins, sites[k], new_k)` bit for bit, with `new_k =
    /// [new[0][k], new[1][k], new[2][k]]` (the moves as three arrays of components, which
    /// the kernel reads without regrouping 3-vectors), each site evaluated against `spins`
    /// as given (for sites that share no bond, such as a Monte Carlo colour class, the
    /// changes add up), with `old` the components of `spins[sites[k]]`, handed in by a
    /// caller that has read them already. Vectorised over the sites in blocks of 64,
    /// fastest when the sites of a block share one basis site. Panics if the lengths
    /// differ or a site is outside `spins`; `old` is not checked against `spins`.
    #[inline(always)]
    pub fn energy_changes_from(
        &self,
        spins: &[Vec3],
        sites: &[u32],
        old: [&[f64]; 3],
        new: [&[f64]; 3],
        out: &mut [f64],
    ) {
        self.energy_changes_in(spins, 0, sites, old, new, out, &mut TrialScratch::default());
    }

    /// [`Hamiltonian::energy_changes_from`] given a window of the spins: `window[j]` is the
    /// spin of site `origin + j`. Every neighbour that a bond of a listed site reaches
    /// must lie in the window (sites and results are as for the whole array); this lets
    /// a thread decide the trials of its own part of the lattice while it writes that part,
    /// without a view of the spins other threads write. The kernel's sums live in
    /// `scratch`, which a caller deciding many blocks of trials keeps for all of them, so
    /// that no call clears them (the same bits with a new scratch). Panics if the four
    /// lengths differ or a site or a neighbour lies outside the window; `old` is not
    /// checked.
    // Eight arguments: the window and its origin, the trials (sites, old and new spins), the
    // output and the scratch; a struct for them would only be unpacked again here.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    pub fn energy_changes_in(
        &self,
        window: &[Vec3],
        origin: usize,
        sites: &[u32],
        old: [&[f64]; 3],
        new: [&[f64]; 3],
        out: &mut [f64],
        scratch: &mut TrialScratch,
    ) {
        let n = sites.len();
        assert!(
            old.iter().chain(&new).all(|c| c.len() == n) && out.len() == n,
            "one trial and one output per site"
        );
        if self.len() > u32::MAX as usize {
            // Beyond the block kernel's 32-bit cell arithmetic: one site at a time.
            assert!(origin == 0, "a window of the spins needs fewer than 2^32 sites");
            for (k, (&i, o)) in sites.iter().zip(out.iter_mut()).enumerate() {
                *o = self.energy_change(window, i as usize, [new[0][k], new[1][k], new[2][k]]);
            }
            return;
        }
        let spins = Window { spins: window, origin };
        for (b, (s, d)) in sites.chunks(LANES).zip(out.chunks_mut(LANES)).enumerate() {
            let block = b * LANES..b * LANES + s.len();
            let (o, t) = (old.map(|c| &c[block.clone()]), new.map(|c| &c[block.clone()]));
            self.energy_changes_block_from(spins, s, o, t, d, &mut scratch.h);
        }
    }

    /// [`Hamiltonian::energy_changes_from`] for at most [`LANES`] sites; the supercell has
    /// fewer than `2^32` sites.
    #[inline(always)]
    fn energy_changes_block_from(
        &self,
        spins: Window<'_>,
        sites: &[u32],
        old: [&[f64]; 3],
        new: [&[f64]; 3],
        out: &mut [f64],
        h: &mut Fields,
    ) {
        let len = sites.len().min(LANES);
        let (sites, out) = (&sites[..len], &mut out[..len]);
        let [ox, oy, oz] = old.map(|c| &c[..len]);
        let [nx, ny, nz] = new.map(|c| &c[..len]);
        let nb = self.cell.basis_len() as u32;
        let cells = self.cell.cells();
        let (n1, n2) = (cells[0] as u32, cells[1] as u32);
        let (inv_nb, inv1, inv2) = (1.0 / f64::from(nb), 1.0 / f64::from(n1), 1.0 / f64::from(n2));

        // Phase 1: the basis site of each site (all the same for a one-site basis): site
        // `i` is cell `i mod n1` of the row piece `i / n1`, whose basis site is that piece
        // modulo the basis.
        let mut basis = [0u32; LANES];
        if nb > 1 {
            for (b, &i) in basis.iter_mut().zip(sites) {
                let piece = quotient(i, n1, inv1);
                *b = piece - quotient(piece, nb, inv_nb) * nb;
            }
        }
        let b0 = basis[0];
        let mixed = basis[..len].iter().fold(0, |acc, &b| acc | (b ^ b0)) != 0;
        let passes = if mixed { 0..nb } else { b0..b0 + 1 };
        // Cell coordinates of every site, needed only where a site is in no run.
        let coordinates = || {
            let mut c: Coords = [[0; LANES]; 3];
            for (k, &i) in sites.iter().enumerate() {
                let piece = quotient(i, n1, inv1);
                let row = if nb == 1 { piece } else { quotient(piece, nb, inv_nb) };
                c[0][k] = i - piece * n1;
                c[2][k] = quotient(row, n2, inv2);
                c[1][k] = row - c[2][k] * n2;
            }
            c
        };
        let mut c: Option<Coords> = None;

        for b in passes {
            let bu = b as usize;
            // Phase 2: the pair field sum_j M_ij S_j, T per unit spin, added to `h`, which
            // is zero here (see `TrialScratch`).
            debug_assert!(h.iter().all(|c| c.iter().all(|&x| x == 0.0)), "a zero scratch");
            let mut generic = [mixed; LANES];
            if !mixed {
                self.add_bonds_by_runs(spins, sites, bu, h, &mut generic);
            }
            if generic[..len].iter().fold(false, |any, &g| any | g) {
                let c = c.get_or_insert_with(coordinates);
                for entry in &self.entries[bu] {
                    with_kind!(entry.kind, K => self.add_entry::<K>(spins, bu, entry, c, &generic, h, len));
                }
            }
            // Phase 3: the energy change, as in `energy_change`.
            let mu = self.mu_mev[bu];
            let k_b = self.k[bu];
            let e = self.axis[bu];
            let field = self.field;
            let onsite = |s: Vec3| {
                let p = dot(s, e);
                -k_b * (p * p) - mu * dot(field, s)
            };
            // Each sum is zeroed as it is read, which leaves the scratch zero for the next
            // pass or call (a loop that reads what it clears is not turned into a `memset`).
            let [h0, h1, h2] = &mut *h;
            for k in 0..len {
                let hm = [h0[k] * mu, h1[k] * mu, h2[k] * mu];
                (h0[k], h1[k], h2[k]) = (0.0, 0.0, 0.0);
                let (s, t) = ([ox[k], oy[k], oz[k]], [nx[k], ny[k], nz[k]]);
                let ds = [t[0] - s[0], t[1] - s[1], t[2] - s[2]];
                let de = -dot(ds, hm) + onsite(t) - onsite(s);
                out[k] = if basis[k] == b { de } else { out[k] };
            }
        }
    }

    /// Adds the pair fields of the runs of the block: maximal groups of at least
    /// [`MIN_TRIAL_RUN`] consecutive sites of one basis site in one row of cells whose indices
    /// step by 1 or 2 (a checkerboard class steps by 2, a sublattice of bcc by 1). Along a run
    /// each bond's neighbours step alike, so their spins are read with plain strided loads
    /// instead of gathers. Sites in no such run are marked in `generic`.
    #[inline(always)]
    fn add_bonds_by_runs(
        &self,
        spins: Window<'_>,
        sites: &[u32],
        b: usize,
        h: &mut Fields,
        generic: &mut [bool; LANES],
    ) {
        let len = sites.len();
        let cells = self.cell.cells();
        let nb = self.cell.basis_len() as u32;
        let (n1, n2) = (cells[0] as u32, cells[1] as u32);
        let mut k0 = 0;
        while k0 < len {
            // One integer division per run, not per site. A run stays within one basis
            // site's piece of a row, `n1` sites.
            let i0 = sites[k0];
            let piece = i0 / n1;
            let row = piece / nb;
            let piece_end = (piece + 1) * n1;
            let d = if k0 + 1 < len { sites[k0 + 1].wrapping_sub(i0) } else { 0 };
            let mut k1 = k0 + 1;
            if d == 1 || d == 2 {
                // The longest the run can be: the rest of the block, or the sites `i0 + k d`
                // left in the row's piece. Most often it is all of them (a row of a
                // checkerboard class or of a sublattice, up to the block's end): tested
                // first without branches, which vectorises. Steps of `d` between neighbours
                // are sites `i0 + k d`; compared so (rather than pairwise through `windows`,
                // which stays a scalar loop) it vectorises. (Until 2026-12-05 the test ran
                // over the whole rest of the block and the run was otherwise extended site
                // by site: on rows shorter than a block, as in periodic cubes, that cost
                // about 9 instructions per site and sweep.)
                let most = (len - k0).min((piece_end - i0).div_ceil(d) as usize);
                let whole = sites[k0..k0 + most]
                    .iter()
                    .enumerate()
                    .fold(true, |ok, (k, &s)| ok & (s == i0.wrapping_add(d.wrapping_mul(k as u32))));
                if whole {
                    k1 = k0 + most;
                } else {
                    while k1 < len && sites[k1].wrapping_sub(sites[k1 - 1]) == d && sites[k1] < piece_end {
                        k1 += 1;
                    }
                }
            }
            if k1 - k0 >= MIN_TRIAL_RUN {
                let c = [i0 - piece * n1, row % n2, row / n2];
                let run = Run { k0, len: k1 - k0, c, dc: d };
                for entry in &self.entries[b] {
                    if d == 1 {
                        with_kind!(entry.kind, K => self.add_entry_run::<1, K>(spins, b, entry, &run, h));
                    } else {
                        with_kind!(entry.kind, K => self.add_entry_run::<2, K>(spins, b, entry, &run, h));
                    }
                }
            } else {
                generic[k0..k1].iter_mut().for_each(|g| *g = true);
            }
            k0 = k1;
        }
    }

    /// Where `bond`'s neighbours of the sites of `run` lie (see [`Side`]).
    #[inline(always)]
    fn side(&self, bond: &FusedBond, run: &Run) -> Side {
        let cells = self.cell.cells();
        let steps = &bond.steps;
        let x = steps[0];
        let (t2, v2) = steps[1].step(run.c[1]);
        let (t3, v3) = steps[2].step(run.c[2]);
        let nb = self.cell.basis_len();
        let row = ((t3 as usize * cells[1] + t2 as usize) * nb + bond.to) * cells[0];
        let at = Side { lo: 0, split: 0, hi: 0, x, row, c0: run.c[0], dc: run.dc };
        if !(v2 && v3) {
            return at;
        }
        // The number of sites of the run whose coordinate along a1 is below `limit`. A run
        // steps by one or two sites, so by one or two cells: a shift, not a division.
        debug_assert!(run.dc == 1 || run.dc == 2);
        let below = |limit: u32| -> usize {
            let cells = limit.saturating_sub(run.c[0]) as usize;
            let sites = if run.dc == 1 { cells } else { cells.div_ceil(2) };
            sites.min(run.len)
        };
        let (lo, hi) = (below(x.lo), below(x.hi));
        Side { lo, split: below(x.wrap).clamp(lo, hi), hi, ..at }
    }

    /// Adds one entry (a bond, or a pair of opposite bonds) of kind `KIND` to the pair
    /// fields of a run whose indices step by `D`. Along the run each
    /// bond's neighbours are linear in the site on at most two stretches (before and after
    /// a periodic wrap), read by [`add_strided`]; for a pair the two bonds' stretches and
    /// cuts split the run into at most seven segments, on each of which every side is
    /// linear or cut (reading zero spins, as [`Hamiltonian::pair_field_mev`] does).
    #[inline(always)]
    fn add_entry_run<const D: usize, const KIND: u8>(
        &self,
        spins: Window<'_>,
        b: usize,
        entry: &Entry,
        run: &Run,
        h: &mut Fields,
    ) {
        let bonds = &self.fused[b];
        let near = self.side(&bonds[entry.bond], run);
        let (m, j, e) = (&bonds[entry.bond].m, entry.j, &entry.e);
        let zero = [0.0; 3];
        let window = spins.spins;
        if !is_pair(KIND) {
            for (ka, kb) in [(near.lo, near.split), (near.split, near.hi)] {
                if let (true, Some(j0)) = (ka < kb, near.at(ka)) {
                    add_strided::<D>(window, spins.at(j0), h, run.k0 + ka, kb - ka, |s| {
                        entry_term::<KIND>(&s, &s, m, j, e)
                    });
                }
            }
            return;
        }
        let far = self.side(&bonds[entry.opposite], run);
        if let (Some(js), Some(jt)) = (near.whole(run.len), far.whole(run.len)) {
            // Both sides one stretch over the whole run (no cut, no wrap), as for the bonds
            // of a checkerboard class that do not run along a1: the one segment the cuts
            // below would find, without sorting them.
            add_strided_pair::<D>(window, spins.at(js), spins.at(jt), h, run.k0, run.len, |s, t| {
                entry_term::<KIND>(&s, &t, m, j, e)
            });
            return;
        }
        if near.lo == 0 && near.hi == run.len && far.lo == 0 && far.hi == run.len {
            // Both sides present for every site of the run, each wrapping at most once (the
            // bonds along a1 of a periodic row): at most three segments, cut at the two
            // splits, without sorting the cuts below.
            let (a, z) = (near.split.min(far.split), near.split.max(far.split));
            for (ka, kb) in [(0, a), (a, z), (z, run.len)] {
                if let (true, Some(js), Some(jt)) = (ka < kb, near.at(ka), far.at(ka)) {
                    add_strided_pair::<D>(
                        window,
                        spins.at(js),
                        spins.at(jt),
                        h,
                        run.k0 + ka,
                        kb - ka,
                        |s, t| entry_term::<KIND>(&s, &t, m, j, e),
                    );
                }
            }
            return;
        }
        let mut cuts = [0, near.lo, near.split, near.hi, far.lo, far.split, far.hi, run.len];
        cuts.sort_unstable();
        for w in cuts.windows(2) {
            let (ka, kb) = (w[0], w[1]);
            if ka == kb {
                continue;
            }
            let (k0, n) = (run.k0 + ka, kb - ka);
            match (near.at(ka), far.at(ka)) {
                (Some(js), Some(jt)) => {
                    add_strided_pair::<D>(window, spins.at(js), spins.at(jt), h, k0, n, |s, t| {
                        entry_term::<KIND>(&s, &t, m, j, e)
                    })
                }
                (Some(js), None) => add_strided::<D>(window, spins.at(js), h, k0, n, |s| {
                    entry_term::<KIND>(&s, &zero, m, j, e)
                }),
                (None, Some(jt)) => add_strided::<D>(window, spins.at(jt), h, k0, n, |t| {
                    entry_term::<KIND>(&zero, &t, m, j, e)
                }),
                (None, None) => {}
            }
        }
    }

    /// Adds one entry of kind `KIND` to the pair fields of the sites of a block marked in
    /// `lanes`, from their cell coordinates `c`: a single bond skips sites whose neighbour
    /// an open face cuts off; a pair reads a zero spin for a cut side and skips sites where
    /// both are.
    #[inline(always)]
    #[allow(clippy::too_many_arguments)]
    fn add_entry<const KIND: u8>(
        &self,
        spins: Window<'_>,
        b: usize,
        entry: &Entry,
        c: &Coords,
        lanes: &[bool; LANES],
        h: &mut Fields,
        len: usize,
    ) {
        let bonds = &self.fused[b];
        let near = Lookup::new(self, &bonds[entry.bond]);
        let far = Lookup::new(self, &bonds[entry.opposite]);
        let (m, j, e) = (&bonds[entry.bond].m, entry.j, &entry.e);
        let [h0, h1, h2] = h;
        let (h0, h1, h2) = (&mut h0[..len], &mut h1[..len], &mut h2[..len]);
        let (c0, c1, c2) = (&c[0][..len], &c[1][..len], &c[2][..len]);
        let mut outside = false;
        for k in 0..len {
            let cell = [c0[k], c1[k], c2[k]];
            let (s, vs, os) = near.spin(spins, cell);
            let (t, vt, ot) = if is_pair(KIND) { far.spin(spins, cell) } else { (s, vs, os) };
            outside |= (os | ot) & lanes[k];
            let valid = (vs | vt) & lanes[k];
            let add = entry_term::<KIND>(&s, &t, m, j, e);
            // Skipping (rather than adding a zero) keeps the bits of the one-site sum.
            h0[k] = if valid { h0[k] + add[0] } else { h0[k] };
            h1[k] = if valid { h1[k] + add[1] } else { h1[k] };
            h2[k] = if valid { h2[k] + add[2] } else { h2[k] };
        }
        assert!(!outside, "a neighbour outside the window of spins");
    }
}

/// Where one bond's neighbours of the sites `0 .. len` of a run lie: sites `k < lo` and
/// `k >= hi` have none (an open face cuts the bond, or the whole run's row is cut along
/// a2 or a3: then `lo = hi = 0`); for the others the neighbour's coordinate along a1 is
/// the site's plus `x.add` before `split` and minus `x.wrap` from it (a periodic wrap), so
/// its index steps by `D` from site to site on `lo .. split` and on `split .. hi`.
#[derive(Clone, Copy)]
struct Side {
    lo: usize,
    split: usize,
    hi: usize,
    x: AxisStep,
    /// First site index of the bond's target basis site in the neighbours' row of cells.
    row: usize,
    c0: u32,
    dc: u32,
}

impl Side {
    /// The neighbour's index of the run's first site when every site of the run (`len` of
    /// them) has a neighbour and their indices step alike throughout (no wrap).
    #[inline(always)]
    fn whole(&self, len: usize) -> Option<usize> {
        (self.lo == 0 && self.split == len && self.hi == len).then(|| self.at(0)).flatten()
    }

    /// The neighbour's index of site `k` of the run, if it has one.
    #[inline(always)]
    fn at(&self, k: usize) -> Option<usize> {
        (self.lo <= k && k < self.hi).then(|| {
            let (t, _) = self.x.step(self.c0 + self.dc * k as u32);
            self.row + t as usize
        })
    }
}

/// One bond's neighbour of a site given its cell coordinates, without integer division.
struct Lookup {
    steps: [AxisStep; 3],
    n1: u32,
    n2: u32,
    nb: u32,
    to: u32,
}

impl Lookup {
    #[inline(always)]
    fn new(h: &Hamiltonian, bond: &FusedBond) -> Self {
        let cells = h.cell.cells();
        Self {
            steps: bond.steps,
            n1: cells[0] as u32,
            n2: cells[1] as u32,
            nb: h.cell.basis_len() as u32,
            to: bond.to as u32,
        }
    }

    /// The neighbour's spin (zero where an open face cuts the bond), whether it exists, and
    /// whether it exists but lies outside the window.
    #[inline(always)]
    fn spin(&self, spins: Window<'_>, c: [u32; 3]) -> (Vec3, bool, bool) {
        let (t0, v0) = self.steps[0].step(c[0]);
        let (t1, v1) = self.steps[1].step(c[1]);
        let (t2, v2) = self.steps[2].step(c[2]);
        let valid = v0 & v1 & v2;
        let j = ((t2.wrapping_mul(self.n2).wrapping_add(t1)).wrapping_mul(self.nb).wrapping_add(self.to))
            .wrapping_mul(self.n1)
            .wrapping_add(t0);
        // Where the bond is cut, `j` may be any value; the load is masked. A neighbour
        // outside the window (below the origin too, by wrapping) is the caller's error,
        // reported as the third value rather than by a branch here, which would keep the
        // loop from vectorising.
        match spins.spins.get((j as usize).wrapping_sub(spins.origin)) {
            Some(s) if valid => (*s, true, false),
            None => ([0.0; 3], false, valid),
            _ => ([0.0; 3], false, false),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::tests::{test_system, unit, TestCouplings, TILTED};
    use super::*;
    use spindrift_lattice::unit_hash;

    /// The components of `v` as three arrays, x, y, z.
    fn split(v: &[Vec3]) -> [Vec<f64>; 3] {
        std::array::from_fn(|a| v.iter().map(|s| s[a]).collect())
    }

    /// The arrays of [`split`] as the kernel takes them.
    fn parts(c: &[Vec<f64>; 3]) -> [&[f64]; 3] {
        c.each_ref().map(Vec::as_slice)
    }

    // Against integer division (common practice): exact for the extremes of both operands
    // and a spread of values between.
    #[test]
    fn reciprocal_quotient_is_floor_division() {
        let values = (0..4000u32).map(|k| k.wrapping_mul(1_073_741_827)).chain([
            0,
            1,
            2,
            3,
            127,
            128,
            129,
            u32::MAX - 1,
            u32::MAX,
            1 << 31,
            (1 << 31) - 1,
        ]);
        let values: Vec<u32> = values.collect();
        for &n in values.iter().filter(|&&n| n > 0) {
            for &x in &values {
                assert_eq!(quotient(x, n, 1.0 / f64::from(n)), x / n, "{x} / {n}");
            }
        }
    }

    // The block kernel must give the one-site energy change bit for bit, with or without the
    // present spins handed in and with a scratch kept from call to call (the one-site change
    // is checked against total energy differences in tests/hamiltonian.rs), whichever path a
    // site takes:
    // strided runs of step 1 and 2 (all sites, every other site, one sublattice), runs cut by
    // row ends and periodic wraps, scattered and descending lists (per-site path), blocks
    // mixing basis sites; on every boundary combination, bases of one to four sites,
    // several shells, dilution, a tensor bond, and boxes of one and two cells along an
    // axis, where offsets reach past the box.
    #[test]
    fn block_kernel_equals_one_site_change_bitwise() {
        let cases = [
            ("simple-cubic", [8, 6, 4], [true, true, false], 1, false, 1.0),
            ("simple-cubic", [7, 5, 3], [true, false, true], 3, false, 1.0),
            ("simple-cubic", [2, 3, 1], [true, true, true], 3, false, 1.0),
            ("simple-cubic", [9, 2, 2], [false, true, false], 2, true, 0.8),
            ("bcc", [4, 3, 3], [false, true, true], 2, false, 0.8),
            ("honeycomb", [6, 4, 1], [true, true, false], 3, true, 1.0),
            ("triangular", [1, 6, 1], [true, true, false], 2, false, 1.0),
            ("fcc", [3, 4, 2], [true, true, true], 2, false, 1.0),
            ("hexagonal", [5, 3, 2], [false, false, false], 2, false, 0.9),
        ];
        for (name, cells, periodic, shells, tensor, occ) in cases {
            let couplings = TestCouplings { seed: 7, d: 0.6, dmi_shells: 2, tensor, anisotropy: TILTED };
            let h = test_system(name, cells, periodic, shells, occ, couplings);
            let n = h.len();
            let nb = h.cell().basis_len();
            let spins: Vec<Vec3> =
                (0..n).map(|i| if h.cell().is_occupied(i) { unit(3, i) } else { [0.0; 3] }).collect();
            let mut lists: Vec<Vec<u32>> = vec![
                (0..n as u32).collect(),
                (0..n as u32).step_by(2).collect(),
                (1..n as u32).step_by(2).collect(),
                (0..n as u32).rev().collect(),
                (0..n as u32).filter(|&i| unit_hash(5, 0, u64::from(i)) < 0.4).collect(),
            ];
            lists.extend((0..nb as u32).map(|b| (b..n as u32).step_by(nb).collect()));
            // One sublattice, and one sublattice's checkerboard half.
            let cell = h.cell();
            let sublattice = |b: usize| (0..n as u32).filter(move |&i| cell.basis_of(i as usize) == b);
            lists.extend((0..nb).map(|b| sublattice(b).collect::<Vec<u32>>()));
            lists.extend((0..nb).map(|b| sublattice(b).step_by(2).collect::<Vec<u32>>()));
            for sites in lists {
                let new: Vec<Vec3> = sites.iter().map(|&i| unit(8, i as usize)).collect();
                let old: Vec<Vec3> = sites.iter().map(|&i| spins[i as usize]).collect();
                let (o, t) = (split(&old), split(&new));
                let mut out = vec![f64::NAN; sites.len()];
                h.energy_changes_from(&spins, &sites, parts(&o), parts(&t), &mut out);
                for ((&i, t), o) in sites.iter().zip(&new).zip(&out) {
                    let e = h.energy_change(&spins, i as usize, *t);
                    assert_eq!(o.to_bits(), e.to_bits(), "{name} {cells:?} site {i}: {o} != {e}");
                }
                // One scratch kept over calls of 37 sites (blocks that split runs and
                // basis sites; the kernel leaves the scratch zero), the same bits.
                let mut scratch = TrialScratch::default();
                let mut again = vec![f64::NAN; sites.len()];
                for k0 in (0..sites.len()).step_by(37) {
                    let r = k0..(k0 + 37).min(sites.len());
                    let (o, t) = (parts(&o).map(|c| &c[r.clone()]), parts(&t).map(|c| &c[r.clone()]));
                    h.energy_changes_in(&spins, 0, &sites[r.clone()], o, t, &mut again[r], &mut scratch);
                }
                assert_eq!(
                    out.iter().map(|x| x.to_bits()).collect::<Vec<_>>(),
                    again.iter().map(|x| x.to_bits()).collect::<Vec<_>>(),
                    "{name} {cells:?} with a kept scratch"
                );
            }
        }
    }

    // A window of the spins gives the bits of the whole array (our own behaviour) when it
    // holds every neighbour: layers of cells cut out of open and periodic boxes, runs of
    // step 1 and 2 and the per-site path, one and two basis sites, three shells.
    #[test]
    fn window_gives_the_bits_of_the_whole_array() {
        let cases = [
            ("simple-cubic", [8, 6, 10], [true, true, false], 1),
            ("simple-cubic", [7, 5, 12], [false, true, true], 3),
            ("bcc", [4, 3, 9], [true, false, true], 2),
        ];
        for (name, cells, periodic, shells) in cases {
            let couplings =
                TestCouplings { seed: 3, d: 0.6, dmi_shells: 2, tensor: false, anisotropy: TILTED };
            let h = test_system(name, cells, periodic, shells, 1.0, couplings);
            let layer = h.len() / cells[2];
            let spins: Vec<Vec3> = (0..h.len()).map(|i| unit(4, i)).collect();
            // Sites of layers 3 .. 5; every bond here reaches one layer at most (the third
            // shell of simple cubic, (1, 1, 1), too), so layers 2 .. 6 hold the neighbours.
            let (first, last) = (3 * layer as u32, 6 * layer as u32);
            let lists: [Vec<u32>; 3] = [
                (first..last).collect(),
                (first..last).step_by(2).collect(),
                (first..last).filter(|&i| unit_hash(9, 0, u64::from(i)) < 0.5).collect(),
            ];
            let window = &spins[2 * layer..7 * layer];
            for sites in lists {
                let new: Vec<Vec3> = sites.iter().map(|&i| unit(8, i as usize)).collect();
                let old: Vec<Vec3> = sites.iter().map(|&i| spins[i as usize]).collect();
                let (o, t) = (split(&old), split(&new));
                let (mut whole, mut part) = (vec![f64::NAN; sites.len()], vec![f64::NAN; sites.len()]);
                h.energy_changes_from(&spins, &sites, parts(&o), parts(&t), &mut whole);
                h.energy_changes_in(
                    window,
                    2 * layer,
                    &sites,
                    parts(&o),
                    parts(&t),
                    &mut part,
                    &mut TrialScratch::default(),
                );
                for ((&i, a), b) in sites.iter().zip(&whole).zip(&part) {
                    assert_eq!(a.to_bits(), b.to_bits(), "{name} site {i}");
                }
            }
        }
    }

    // A window that lacks a neighbour panics rather than reading a zero spin, on the
    // strided path and on the per-site path (our own behaviour).
    #[test]
    fn window_without_a_neighbour_panics() {
        let couplings = TestCouplings { seed: 3, d: 0.6, dmi_shells: 2, tensor: false, anisotropy: TILTED };
        let h = test_system("simple-cubic", [8, 6, 10], [true, true, false], 1, 1.0, couplings);
        let layer = h.len() / 10;
        let spins: Vec<Vec3> = (0..h.len()).map(|i| unit(4, i)).collect();
        let window = &spins[3 * layer..7 * layer];
        // Layer 3's sites reach layer 2, outside the window.
        let strided: Vec<u32> = (3 * layer as u32..4 * layer as u32).collect();
        let scattered: Vec<u32> = vec![3 * layer as u32 + 5, 3 * layer as u32 + 1, 4 * layer as u32 + 7];
        for sites in [strided, scattered] {
            let new: Vec<Vec3> = sites.iter().map(|&i| unit(8, i as usize)).collect();
            let old: Vec<Vec3> = sites.iter().map(|&i| spins[i as usize]).collect();
            let (o, t) = (split(&old), split(&new));
            let mut out = vec![0.0; sites.len()];
            let call = std::panic::AssertUnwindSafe(|| {
                h.energy_changes_in(
                    window,
                    3 * layer,
                    &sites,
                    parts(&o),
                    parts(&t),
                    &mut out,
                    &mut TrialScratch::default(),
                )
            });
            assert!(std::panic::catch_unwind(call).is_err(), "sites {sites:?}");
        }
    }
}
