//! The whole Hamiltonian: the terms together, and the fused field evaluation that the
//! integrators call in their inner loop.
//!
//! Every directed bond `i -> j` is compiled into one 3x3 matrix `M_ij` with
//! `-dE/dS_i = sum_j M_ij S_j`: `M = J 1 + T + [D]x` where `[D]x S = S x D`. Exchange and
//! DMI then cost the same nine multiply-adds per bond, with no branch on the kind of
//! coupling. The matrix is stored already divided by `mu_i muB`, so the sum is the
//! effective field in tesla. The row kernel of the field takes a bond and its opposite
//! together where the couplings allow (see [`Entry`]), which saves a third of the work on
//! exchange-plus-DMI bonds.

use crate::anisotropy::Anisotropy;
use crate::constants::MU_B;
use crate::dmi::Dmi;
use crate::energy::EnergyTerms;
use crate::exchange::Exchange;
use crate::rows::{FlatRows, SpinRows};
use crate::species::Species;
use crate::term::Term;
use crate::zeeman::Zeeman;
use rayon::prelude::*;
use spindrift_lattice::{cross, dot, wrap_coordinate, wrap_index, BondList, Supercell, Vec3};

mod trials;

pub use trials::{TrialScratch, MIN_TRIAL_RUN};

/// Sites per parallel work item. Fixed, so that reductions add the same partial sums in
/// the same order whatever the number of threads.
pub const CHUNK: usize = 4096;

/// Problems with the physical parameters handed to [`Hamiltonian::new`].
#[derive(Debug, Clone, thiserror::Error, PartialEq)]
#[non_exhaustive]
pub enum HamiltonianError {
    /// A basis site names a species that does not exist.
    #[error("basis site {site} has species index {species}, but only {count} species are defined")]
    MissingSpecies {
        /// Basis site.
        site: usize,
        /// Species index.
        species: usize,
        /// Number of species.
        count: usize,
    },
    /// A species' moment is not positive.
    #[error("species `{name}`: moment must be positive, got {moment} muB")]
    BadMoment {
        /// Species name.
        name: String,
        /// The moment given.
        moment: f64,
    },
    /// A species' damping is negative or not finite.
    #[error("species `{name}`: damping must be >= 0, got {damping}")]
    BadDamping {
        /// Species name.
        name: String,
        /// The damping given.
        damping: f64,
    },
    /// An anisotropy axis of zero length.
    #[error("species `{name}`: anisotropy axis must be non-zero")]
    BadAxis {
        /// Species name.
        name: String,
    },
    /// The bond list is for a different basis.
    #[error("bond list has {bonds} basis sites but the crystal has {sites}")]
    BasisMismatch {
        /// Basis sites in the bond list.
        bonds: usize,
        /// Basis sites in the crystal.
        sites: usize,
    },
    /// A bond lands on the site it starts from through a short periodic axis
    /// ([`Supercell::self_image`]); leave it out when building the bond list.
    #[error(
        "a bond of basis site {site} at cell offset {offset:?} lands on the site itself in this \
         supercell (cells {cells:?}): it would couple a spin to itself"
    )]
    SelfImage {
        /// Basis site.
        site: usize,
        /// Cell offset of the bond.
        offset: [i32; 3],
        /// Cells of the supercell.
        cells: [usize; 3],
    },
}

/// One compiled directed bond.
#[derive(Debug, Clone, Copy)]
struct FusedBond {
    to: usize,
    offset: [i32; 3],
    /// Cartesian bond vector, Å: what finds each bond's opposite (see [`Entry`]).
    vector: Vec3,
    /// Linear index difference to the neighbour when no boundary is crossed.
    delta: isize,
    /// How the offset moves a cell coordinate along each axis of this supercell (for the
    /// Monte Carlo block kernel).
    steps: [trials::AxisStep; 3],
    /// `M_ij / (mu_i muB)`, T per unit spin.
    m: [Vec3; 3],
    /// `Some(J / (mu_i muB))` when `M_ij` is that multiple of the identity (no DMI, no
    /// tensor): the kernel then skips the six zero products, which changes no bit, since
    /// adding a zero product to a non-zero sum returns the sum.
    iso: Option<f64>,
    /// Parts kept apart for energies by term, meV.
    j: f64,
    d: Vec3,
    tensor: Option<[Vec3; 3]>,
}

/// One term of a site's bond sum in the row kernel (see `Hamiltonian::field_row`): a
/// single bond, or a bond and its opposite taken together.
///
/// A bond whose matrix is `M = j 1 + A` (isotropic exchange plus DMI: `A` antisymmetric)
/// and its opposite, the bond to the same basis site along the negated bond vector, whose
/// matrix is `M^T = j 1 - A` (the coupling seen from the other end, as in every
/// centrosymmetric arrangement: for a same-sublattice pair the cell offset negated, for
/// one between sublattices, as in bcc or fcc, another offset), add
/// `M s+ + M^T s- = j (s+ + s-) + A (s+ - s-)` to the sum: with `A` written as the vector
/// `e = (A_yz, A_zx, A_xy)`, 9 to 15 products and sums per pair of bonds instead of 12 to
/// 18 per bond (the same sum, grouped otherwise, so its last bits differ from the
/// bond-by-bond sum). Bonds with an anisotropic tensor, and bonds without an opposite
/// (a honeycomb layer's first shell), stay single.
#[derive(Debug, Clone, Copy)]
struct Entry {
    /// [`MATRIX`], [`IN_PLANE`] or [`ISO`] for a single bond; [`PAIR`], [`PAIR_PLANAR`] or
    /// [`PAIR_ISO`] for a pair.
    kind: u8,
    /// The bond, an index into the basis site's [`FusedBond`]s ...
    bond: usize,
    /// ... and for a pair its opposite (for a single bond, the bond again).
    opposite: usize,
    /// Pairs: `j`, T per unit spin (already divided by `mu muB`, as `M`).
    j: f64,
    /// Pairs: `e = (A_yz, A_zx, A_xy)`, T per unit spin.
    e: Vec3,
}

/// The row kernel's terms for one basis site's bonds `fused`: each bond paired with the
/// first later bond that is its opposite (see [`Entry`]), the rest single; grouped by kind
/// (in list order within a kind), so that the kernel's packs of one kind are as long as
/// they can be.
fn entries_of(fused: &[FusedBond]) -> Vec<Entry> {
    let transpose =
        |m: &[Vec3; 3]| -> [Vec3; 3] { std::array::from_fn(|a| std::array::from_fn(|b| m[b][a])) };
    // `M = j 1 + A` with `A` antisymmetric, exactly.
    let split = |m: &[Vec3; 3]| -> Option<(f64, Vec3)> {
        let j = m[0][0];
        let ok =
            m[1][1] == j && m[2][2] == j && (0..3).all(|a| (0..3).all(|b| a == b || m[a][b] == -m[b][a]));
        ok.then_some((j, [m[1][2], m[2][0], m[0][1]]))
    };
    let mut used = vec![false; fused.len()];
    let mut entries = Vec::with_capacity(fused.len());
    for (p, bond) in fused.iter().enumerate() {
        if used[p] {
            continue;
        }
        used[p] = true;
        let opposite = split(&bond.m).and_then(|je| {
            let q = (p + 1..fused.len()).find(|&q| {
                let other = &fused[q];
                !used[q]
                    && other.to == bond.to
                    && opposite_vectors(&bond.vector, &other.vector)
                    && other.m == transpose(&bond.m)
            })?;
            Some((q, je))
        });
        entries.push(match opposite {
            Some((q, (j, e))) => {
                used[q] = true;
                let kind = if e == [0.0; 3] {
                    PAIR_ISO
                } else if e[2] == 0.0 {
                    PAIR_PLANAR
                } else {
                    PAIR
                };
                Entry { kind, bond: p, opposite: q, j, e }
            }
            None => {
                let kind = if bond.iso.is_some() {
                    ISO
                } else if bond.m[0][1] == 0.0 && bond.m[1][0] == 0.0 {
                    IN_PLANE
                } else {
                    MATRIX
                };
                Entry { kind, bond: p, opposite: p, j: bond.iso.unwrap_or(0.0), e: [0.0; 3] }
            }
        });
    }
    entries.sort_by_key(|e| e.kind);
    entries
}

/// Whether the bond vectors `a` and `b` (Å) are opposite: `a + b = 0` up to the rounding
/// of the lattice's positions (1e-9 of the bond's length), which may leave the two ends of
/// a pair between sublattices a few units in the last place apart.
fn opposite_vectors(a: &Vec3, b: &Vec3) -> bool {
    let sum = [a[0] + b[0], a[1] + b[1], a[2] + b[2]];
    dot(sum, sum) <= 1e-18 * dot(*a, *a)
}

/// A bond set in the form the row kernel reads: per basis site, the compiled bonds and
/// their entries.
#[derive(Debug, Clone)]
struct RowBonds {
    fused: Vec<Vec<FusedBond>>,
    entries: Vec<Vec<Entry>>,
}

impl RowBonds {
    fn new(fused: Vec<Vec<FusedBond>>) -> Self {
        let entries = fused.iter().map(|f| entries_of(f)).collect();
        Self { fused, entries }
    }

    /// No bond at all.
    fn is_empty(&self) -> bool {
        self.fused.iter().all(Vec::is_empty)
    }
}

/// A spin system: supercell, species, couplings and applied field.
#[derive(Debug, Clone)]
pub struct Hamiltonian {
    cell: Supercell,
    species: Vec<Species>,
    bonds: BondList,
    exchange: Exchange,
    dmi: Dmi,
    anisotropy: Anisotropy,
    zeeman: Zeeman,
    fused: Vec<Vec<FusedBond>>,
    /// The terms of each basis site's bond sum in the row kernel: bonds paired with their
    /// opposites where the couplings allow, grouped by kind.
    entries: Vec<Vec<Entry>>,
    /// The bonds with only their exchange (isotropic and tensor) part, and with only their
    /// DMI part, for the energy by term through the row kernel
    /// ([`Hamiltonian::energy_terms`]).
    parts: [RowBonds; 2],
    /// Zero spins, a row (`n1 * nb`) or a run of rows ([`RUN_SITES`]), whichever is
    /// longer: what the row kernel reads for the side of a pair that an open face cuts.
    zeros: Vec<Vec3>,
    /// How far the bonds reach along `a1` and `a2`: the largest `|o1|` and `|o2|` of a
    /// bond's cell offset (for runs of rows, see [`Hamiltonian::run_rows`]).
    reach: [usize; 2],
    /// `mu muB` per basis site, meV/T.
    mu_mev: Vec<f64>,
    /// `2 k / (mu muB)` per basis site, T.
    k_field: Vec<f64>,
    /// `k` per basis site, meV.
    k: Vec<f64>,
    axis: Vec<Vec3>,
    field: Vec3,
    /// The on-site terms as flat rows per basis site, where they are diagonal.
    flat_onsite: Vec<Option<FlatOnSite>>,
    spin_count: usize,
}

impl Hamiltonian {
    /// Assembles the Hamiltonian. `bonds` holds every pair in both directions (as
    /// [`BondList::add_pair`] makes them); `field` is the applied field in T.
    pub fn new(
        cell: Supercell,
        species: Vec<Species>,
        bonds: BondList,
        field: Vec3,
    ) -> Result<Self, HamiltonianError> {
        let nb = cell.basis_len();
        if bonds.basis_len() != nb {
            return Err(HamiltonianError::BasisMismatch { bonds: bonds.basis_len(), sites: nb });
        }
        for s in &species {
            if !(s.moment.is_finite() && s.moment > 0.0) {
                return Err(HamiltonianError::BadMoment { name: s.name.clone(), moment: s.moment });
            }
            if !(s.damping.is_finite() && s.damping >= 0.0) {
                return Err(HamiltonianError::BadDamping { name: s.name.clone(), damping: s.damping });
            }
            if s.anisotropy != 0.0 && dot(s.axis, s.axis) == 0.0 {
                return Err(HamiltonianError::BadAxis { name: s.name.clone() });
            }
        }
        for site in 0..nb {
            if let Some(x) = bonds.from_basis(site).iter().find(|x| cell.self_image(site, x.to, x.offset)) {
                return Err(HamiltonianError::SelfImage { site, offset: x.offset, cells: cell.cells() });
            }
        }
        let mut basis_species = Vec::with_capacity(nb);
        for (site, b) in cell.crystal().basis.iter().enumerate() {
            if b.species >= species.len() {
                return Err(HamiltonianError::MissingSpecies {
                    site,
                    species: b.species,
                    count: species.len(),
                });
            }
            basis_species.push(&species[b.species]);
        }
        let mu_mev: Vec<f64> = basis_species.iter().map(|s| s.moment * MU_B).collect();
        let k: Vec<f64> = basis_species.iter().map(|s| s.anisotropy).collect();
        let axis: Vec<Vec3> = basis_species
            .iter()
            .map(|s| {
                let l = dot(s.axis, s.axis).sqrt();
                if l > 0.0 {
                    [s.axis[0] / l, s.axis[1] / l, s.axis[2] / l]
                } else {
                    [0.0, 0.0, 1.0]
                }
            })
            .collect();
        let k_field: Vec<f64> = (0..nb).map(|b| 2.0 * k[b] / mu_mev[b]).collect();
        let (cells, periodic) = (cell.cells(), cell.periodic());
        let [n1, n2, _] = cells;
        let fuse = |b: usize,
                    (to, o, vector): (usize, [i32; 3], Vec3),
                    j: f64,
                    d: Vec3,
                    tensor: Option<[Vec3; 3]>| {
            let delta = ((o[2] as isize * n2 as isize + o[1] as isize) * nb as isize + to as isize
                - b as isize)
                * n1 as isize
                + o[0] as isize;
            // [D]x S = S x D = (Sy Dz - Sz Dy, Sz Dx - Sx Dz, Sx Dy - Sy Dx).
            let mut m = [[j, d[2], -d[1]], [-d[2], j, d[0]], [d[1], -d[0], j]];
            if let Some(t) = tensor {
                for p in 0..3 {
                    for q in 0..3 {
                        m[p][q] += t[p][q];
                    }
                }
            }
            for row in &mut m {
                for v in row.iter_mut() {
                    *v /= mu_mev[b];
                }
            }
            let diagonal = (0..3).all(|p| (0..3).all(|q| p == q || m[p][q] == 0.0));
            let iso = (diagonal && m[1][1] == m[0][0] && m[2][2] == m[0][0]).then_some(m[0][0]);
            let steps = std::array::from_fn(|a| trials::AxisStep::new(o[a], cells[a], periodic[a]));
            FusedBond { to, offset: o, vector, delta, steps, m, iso, j, d, tensor }
        };
        // Matrix bonds before isotropic ones (otherwise in list order): the row kernel
        // applies runs of one kind together, so fewer runs mean fewer passes.
        let sorted = |mut fused: Vec<FusedBond>| {
            fused.sort_by_key(|x| x.iso.is_some());
            fused
        };
        let fused: Vec<Vec<FusedBond>> = (0..nb)
            .map(|b| {
                let all = bonds.from_basis(b).iter().map(|x| {
                    let c = &x.coupling;
                    fuse(b, (x.to, x.offset, x.vector), c.j, c.d, c.tensor)
                });
                sorted(all.collect())
            })
            .collect();
        // The same bonds with one part of their coupling each, for energies by term; a
        // bond without that part is left out.
        let exchange_part = RowBonds::new(
            fused
                .iter()
                .enumerate()
                .map(|(b, f)| {
                    let kept = f.iter().filter(|x| x.j != 0.0 || x.tensor.is_some());
                    sorted(
                        kept.map(|x| fuse(b, (x.to, x.offset, x.vector), x.j, [0.0; 3], x.tensor)).collect(),
                    )
                })
                .collect(),
        );
        let dmi_part = RowBonds::new(
            fused
                .iter()
                .enumerate()
                .map(|(b, f)| {
                    let kept = f.iter().filter(|x| x.d != [0.0; 3]);
                    sorted(kept.map(|x| fuse(b, (x.to, x.offset, x.vector), 0.0, x.d, None)).collect())
                })
                .collect(),
        );
        let entries = fused.iter().map(|f: &Vec<FusedBond>| entries_of(f)).collect();
        let zeros = vec![[0.0; 3]; (n1 * nb).max(RUN_SITES)];
        let reach = std::array::from_fn(|k| {
            fused.iter().flatten().map(|b: &FusedBond| b.offset[k].unsigned_abs() as usize).max().unwrap_or(0)
        });
        let moments = basis_species.iter().map(|s| s.moment).collect();
        let spin_count = cell.spin_count();
        let flat_onsite = flat_onsite(&k_field, &axis, field);
        Ok(Self {
            exchange: Exchange::new(&bonds),
            dmi: Dmi::new(&bonds),
            anisotropy: Anisotropy::new(k.clone(), axis.clone()),
            zeeman: Zeeman::new(moments, field),
            cell,
            species,
            bonds,
            fused,
            entries,
            parts: [exchange_part, dmi_part],
            zeros,
            reach,
            mu_mev,
            k_field,
            k,
            axis,
            field,
            flat_onsite,
            spin_count,
        })
    }

    /// The supercell.
    pub fn cell(&self) -> &Supercell {
        &self.cell
    }

    /// The species.
    pub fn species(&self) -> &[Species] {
        &self.species
    }

    /// The bonds, both directions, per basis site.
    pub fn bonds(&self) -> &BondList {
        &self.bonds
    }

    /// Number of sites (length of every spin array).
    pub fn len(&self) -> usize {
        self.cell.len()
    }

    /// True for an empty system (never after construction).
    pub fn is_empty(&self) -> bool {
        self.cell.is_empty()
    }

    /// Number of occupied sites.
    pub fn spin_count(&self) -> usize {
        self.spin_count
    }

    /// Applied field, T.
    pub fn field(&self) -> Vec3 {
        self.field
    }

    /// Sets the applied field, T.
    pub fn set_field(&mut self, b: Vec3) {
        self.field = b;
        self.zeeman.field = b;
        self.flat_onsite = flat_onsite(&self.k_field, &self.axis, b);
    }

    /// Moment of site `i`, μB (0 on a vacant site).
    pub fn moment(&self, i: usize) -> f64 {
        if self.cell.is_occupied(i) {
            self.mu_mev[self.cell.basis_of(i)] / MU_B
        } else {
            0.0
        }
    }

    /// `mu muB` per basis site, meV/T.
    pub fn basis_mu_mev(&self) -> &[f64] {
        &self.mu_mev
    }

    /// Gilbert damping per basis site.
    pub fn basis_damping(&self) -> Vec<f64> {
        self.cell.crystal().basis.iter().map(|b| self.species[b.species].damping).collect()
    }

    /// The individual terms, for energies by term and tests.
    pub fn terms(&self) -> [&dyn Term; 4] {
        [&self.exchange, &self.dmi, &self.anisotropy, &self.zeeman]
    }

    /// Index of the neighbour across `bond` of site `i` in cell `c`, if the boundary
    /// lets it exist. Inside the box this is one add; only bonds that cross a face pay
    /// for the wrap.
    #[inline(always)]
    fn neighbour(&self, i: usize, c: [usize; 3], bond: &FusedBond, cells: [usize; 3]) -> Option<usize> {
        let inside = (0..3).all(|k| ((c[k] as i64 + bond.offset[k] as i64) as u64) < cells[k] as u64);
        if inside {
            Some((i as isize + bond.delta) as usize)
        } else {
            self.cell.neighbour(c, bond.offset, bond.to)
        }
    }

    /// Effective field (T) of the spins on sites `start .. start + out.len()`, without the
    /// thermal field: `B_i = -(1/(mu_i muB)) dH/dS_i`. Vacant sites get a zero field.
    ///
    /// The range is cut into rows of cells along `a1` (`n1 * basis` consecutive sites). For
    /// each row and bond the neighbour row is resolved once (a [`SpinRows`] lookup), so the
    /// inner loop over the row reads `row[to * n1 + c1 + o1]` (each basis site's cells are
    /// consecutive sites, see `spindrift_lattice::Supercell`), with a wrap only for the
    /// few sites whose neighbour wraps around the row's ends. Each site still adds its bonds
    /// in the order of the bond list, so the result is bitwise that of a plain per-site loop.
    /// Whole rows of a one-site lattice whose neighbours lie in rows that follow one another
    /// go as one run: one long row for the kernel, then each row's end cells again (the
    /// private `run_ends`), so that the set-up of a row is paid once per run.
    ///
    /// Compiled for each instruction-set level and run on the widest the CPU has (see
    /// `spindrift_isa`); the bits are the same on every level.
    #[inline]
    pub fn field_range(&self, spins: &[Vec3], start: usize, out: &mut [Vec3]) {
        field_range_kernel(self, spins, start, None, out);
    }

    /// [`Hamiltonian::field_range`] plus a field `extra` of the same sites (T; the thermal
    /// field), `out[k] = field + extra[k]` with the bits of that addition after the field,
    /// vacant sites included (`0 + extra[k]`). Where the on-site terms and the last pack of
    /// a row go in one flat pass (see `RowPass::pairs_and_onsite`), the addition goes in
    /// that pass too, which spares the integrator a pass over its block of fields.
    #[inline]
    pub fn field_range_plus(&self, spins: &[Vec3], start: usize, extra: &[Vec3], out: &mut [Vec3]) {
        assert_eq!(extra.len(), out.len(), "one extra field per site");
        field_range_kernel(self, spins, start, Some(extra), out);
    }

    /// [`Hamiltonian::field_range`] reading the spins from `rows`, compiled for the
    /// instruction set of its caller (not dispatched): for integrators that keep only some
    /// rows, from within their own [`spindrift_isa::multiversion!`] kernels. The sites
    /// `start .. start + out.len()` must lie in rows that `rows` holds, as must the rows
    /// their bonds reach. With `extra`, as [`Hamiltonian::field_range_plus`].
    #[inline(always)]
    pub fn field_range_in<R: SpinRows>(
        &self,
        rows: &R,
        start: usize,
        extra: Option<&[Vec3]>,
        out: &mut [Vec3],
    ) {
        let nb = self.cell.basis_len();
        let [n1, n2, _] = self.cell.cells();
        let row_len = n1 * nb;
        let end = start + out.len();
        let mut lo = start;
        while lo < end {
            let r = lo / row_len;
            let row_start = r * row_len;
            // Whole rows go as a run where they can (one call of the row kernel, so that its
            // loops are compiled once).
            let run = if lo == row_start { self.run_rows(rows, r, (end - lo) / row_len) } else { 1 };
            let hi = (row_start + run * row_len).min(end);
            let extra = extra.map(|x| &x[lo - start..hi - start]);
            let out = &mut out[lo - start..hi - start];
            self.field_row::<true, R>(
                rows,
                [r % n2, r / n2],
                run,
                row_start,
                lo,
                (out, extra),
                (&self.fused, &self.entries),
            );
            if run > 1 {
                self.run_ends(rows, r, run, out, extra);
            }
            lo = hi;
        }
        if let Some(occ) = self.cell.occupation() {
            let vacant = out.iter_mut().zip(&occ[start..end]).enumerate().filter(|(_, (_, &o))| !o);
            match extra {
                Some(x) => vacant.for_each(|(k, (o, _))| *o = [0.0 + x[k][0], 0.0 + x[k][1], 0.0 + x[k][2]]),
                None => vacant.for_each(|(_, (o, _))| *o = [0.0; 3]),
            }
        }
    }

    /// Writes the field of the sites `lo .. lo + out.len()` of the row of cells
    /// `(*, c2, c3)` that starts at site `row_start`: the bond sum, plus the on-site terms
    /// when `ONSITE` (`(h + p e) + B`, the order the per-site sum has always used), over
    /// the bond set `(fused, entries)` (the Hamiltonian's own, or one part of it), plus
    /// `extra` (indexed as `out`) after the on-site terms where given (see
    /// [`Hamiltonian::field_range_plus`]). With `run` above 1, the `run` rows from it as one
    /// long row open at its ends, whose rows' end cells the caller computes again
    /// ([`Hamiltonian::run_ends`]).
    ///
    /// For each basis site the row's entries (single bonds and pairs of opposite bonds,
    /// see [`Entry`]) are resolved once to their neighbour rows, then applied in packs of
    /// up to [`PACK`] consecutive entries of one kind (see [`MATRIX`] and what follows):
    /// one pass over the row per pack, whose loop body adds the pack's entries to the
    /// site's sum in order, so that it vectorises and reads and writes `out` once per pack
    /// rather than once per bond. Cells whose neighbour across a bond of the pack wraps
    /// around the row's ends go one by one. When the last pack holds isotropic pairs (the
    /// exchange between layers of a film, or every bond of pure exchange) and the on-site
    /// terms take the flat pass, the two go in one flat pass (see [`RowPass::merges`]). Every site
    /// adds its entries in the same order either way, so the result is bitwise that of a
    /// plain per-site loop over the entries.
    #[inline(always)]
    fn field_row<const ONSITE: bool, R: SpinRows>(
        &self,
        rows: &R,
        c23: [usize; 2],
        run: usize,
        row_start: usize,
        lo: usize,
        (out, extra): (&mut [Vec3], Option<&[Vec3]>),
        (fused, entries): (&[Vec<FusedBond>], &[Vec<Entry>]),
    ) {
        let nb = self.cell.basis_len();
        let cells = self.cell.cells();
        let periodic = self.cell.periodic();
        // A run of rows (one-site basis only) is one long row, open at its ends.
        let n1 = (cells[0] * run) as i64;
        let hi = lo + out.len();
        for b in 0..nb {
            // Cells c1 of this row whose site b (at `row_start + b n1 + c1`) lies in lo .. hi.
            let base = (row_start + b * cells[0]) as i64;
            let first = (lo as i64 - base).clamp(0, n1);
            let last = (hi as i64 - base).clamp(0, n1);
            if first >= last {
                continue;
            }
            let mut pack = [RowBond::default(); PACK];
            let mut len = 0;
            // The first pack writes the sums; later ones add to them.
            let mut fresh = true;
            let row = RowPass {
                own: &rows.run(c23[0], c23[1], run).expect("a run that `run_rows` allowed")[b * cells[0]..],
                // out[c1 + shift] is the site of cell c1.
                shift: base - lo as i64,
                first,
                last,
                n1,
                periodic: periodic[0] && run == 1,
            };
            let bonds = &fused[b];
            for entry in &entries[b] {
                let (bond, opposite) = (&bonds[entry.bond], &bonds[entry.opposite]);
                let near = neighbour_row(rows, c23, run, cells, periodic, bond);
                // Plain `if`, not `bool::then` with a closure: no closure in this loop, so
                // that nothing in it is left out of line.
                let far = if is_pair(entry.kind) {
                    Some(neighbour_row(rows, c23, run, cells, periodic, opposite))
                } else {
                    None
                };
                let (near, far) = match (near, far) {
                    (Some(r), None) => (r, r),
                    (None, None | Some(None)) => continue,
                    // A pair with one side cut reads zeros there: `M 0` adds nothing.
                    (r, Some(r2)) => {
                        let zeros = |to: usize| &self.zeros[to * cells[0]..];
                        (r.unwrap_or(zeros(bond.to)), r2.unwrap_or(zeros(opposite.to)))
                    }
                };
                let next = RowBond {
                    row: near,
                    row2: far,
                    o1: bond.offset[0] as i64,
                    o1b: opposite.offset[0] as i64,
                    m: bond.m,
                    j: entry.j,
                    e: entry.e,
                    kind: entry.kind,
                };
                if len == PACK || (len > 0 && pack[0].kind != next.kind) {
                    row.apply(out, &pack[..len], fresh);
                    fresh = false;
                    len = 0;
                }
                pack[len] = next;
                len += 1;
            }
            let flat = if ONSITE { self.flat_onsite[b].as_ref() } else { None };
            if let Some(flat) = flat.filter(|_| row.merges(&pack[..len])) {
                row.pair_iso_onsite(out, &pack[..len], flat, fresh, extra);
                continue;
            }
            if len > 0 {
                row.apply(out, &pack[..len], fresh);
            } else if fresh {
                // No bond reaches this row: the sums are zero.
                row.zero(out);
            }
            if ONSITE {
                let onsite = OnSite { k_field: self.k_field[b], axis: self.axis[b], field: self.field };
                row.onsite(out, &onsite, flat);
            }
            if let Some(extra) = extra {
                row.add(out, extra);
            }
        }
    }

    /// Whole rows from row `r` (at most `whole`) that the row kernel takes as one run, or
    /// 1 (see [`Hamiltonian::run_ends`]). A run needs a one-site basis (each row one
    /// contiguous stretch of one basis site's cells, so consecutive rows are one longer
    /// stretch), rows within one plane whose neighbours across every bond lie in the same
    /// plane's rows without wrapping around along `a2` (so a bond's neighbour rows are
    /// consecutive too), rows long enough that most cells are not at their ends, and spins
    /// that `rows` holds as one slice.
    #[inline(always)]
    fn run_rows<R: SpinRows>(&self, rows: &R, r: usize, whole: usize) -> usize {
        let [n1, n2, _] = self.cell.cells();
        let [reach1, reach2] = self.reach;
        if self.cell.basis_len() != 1 || n1 < 4 * reach1.max(1) || reach1 > MAX_RUN_REACH || whole < 2 {
            return 1;
        }
        let c2 = r % n2;
        if c2 < reach2 || c2 + reach2 >= n2 {
            return 1;
        }
        let run = whole.min(n2 - reach2 - c2).min(RUN_SITES / n1);
        if run < 2 || rows.run(c2, r / n2, run).is_none() {
            return 1;
        }
        run
    }

    /// After the row kernel has taken the `run` whole rows from row `r` (see
    /// [`Hamiltonian::run_rows`]) as one row of `run n1` cells, which resolves the bonds and
    /// sets up its packs once for the run instead of once per row, the field of each row's
    /// end cells (within `reach1` of either end, where the long row found the wrong
    /// neighbours along `a1`) again: the entries in the kernel's order, each resolved once
    /// for the run, and each side read as the row kernel reads it (a pair whose both rows
    /// an open face cuts adds nothing, a side whose row it cuts reads zero, and a side cut
    /// along `a1` reads zero when the other side is there), then the on-site terms, flat
    /// where they are diagonal. Every end cell's sum is made of the same operations in the
    /// same order as on the row-by-row path, so the bits are the same; `extra` (indexed as
    /// `out`) goes last, as the row kernel adds it. Out of line: a few
    /// cells per row, and the row kernel's loops around it keep the compiler's inlining
    /// budget.
    #[inline(never)]
    fn run_ends<R: SpinRows>(
        &self,
        rows: &R,
        r: usize,
        run: usize,
        out: &mut [Vec3],
        extra: Option<&[Vec3]>,
    ) {
        let cells = self.cell.cells();
        let periodic = self.cell.periodic();
        let [n1, n2, _] = cells;
        let c23 = [r % n2, r / n2];
        let reach1 = self.reach[0];
        let zero = [0.0; 3];
        // The end cells: cell c1 of row k of the run is site k n1 + c1 of the run and of
        // `out`, at `ends[e] + k n1`.
        let mut ends = [0usize; 2 * MAX_RUN_REACH];
        let ends = &mut ends[..2 * reach1];
        for (e, c1) in ends.iter_mut().enumerate() {
            *c1 = if e < reach1 { e } else { n1 - 2 * reach1 + e };
        }
        let ends = &*ends;
        for k in 0..run {
            for &c1 in ends {
                out[k * n1 + c1] = zero;
            }
        }
        // The spin of a side: none where the cell's neighbour along a1 is cut, zero where
        // an open face cuts its row.
        let side = |run: Option<&[Vec3]>, k: usize, c1: usize, o1: i32| {
            let t1 = wrap_coordinate(c1 as i64 + o1 as i64, n1 as i64, periodic[0])? as usize;
            Some(match run {
                Some(run) => run[k * n1 + t1],
                None => zero,
            })
        };
        let bonds = &self.fused[0];
        for entry in &self.entries[0] {
            let (bond, opposite) = (&bonds[entry.bond], &bonds[entry.opposite]);
            let near = neighbour_row(rows, c23, run, cells, periodic, bond);
            with_kind!(entry.kind, KIND => {
                if is_pair(KIND) {
                    let far = neighbour_row(rows, c23, run, cells, periodic, opposite);
                    if near.is_none() && far.is_none() {
                        continue;
                    }
                    if periodic[0] {
                        // No side is cut along a1: each reads its row, or the row of zeros
                        // where an open face cuts it, and the pair adds its term (as below,
                        // without testing for what cannot be missing).
                        let (near, far) = (near.unwrap_or(&self.zeros), far.unwrap_or(&self.zeros));
                        let wrap = |c1: usize, o1: i32| wrap_index(c1 as i64 + o1 as i64, n1 as i64) as usize;
                        for k in 0..run {
                            for &c1 in ends {
                                let s = near[k * n1 + wrap(c1, bond.offset[0])];
                                let t = far[k * n1 + wrap(c1, opposite.offset[0])];
                                add_entry::<KIND>(&mut out[k * n1 + c1], &s, &t, &bond.m, entry.j, &entry.e);
                            }
                        }
                        continue;
                    }
                    for k in 0..run {
                        for &c1 in ends {
                            let (s, t) = (side(near, k, c1, bond.offset[0]), side(far, k, c1, opposite.offset[0]));
                            if s.is_some() || t.is_some() {
                                let (s, t) = (s.unwrap_or(zero), t.unwrap_or(zero));
                                add_entry::<KIND>(&mut out[k * n1 + c1], &s, &t, &bond.m, entry.j, &entry.e);
                            }
                        }
                    }
                } else if near.is_some() {
                    for k in 0..run {
                        for &c1 in ends {
                            if let Some(s) = side(near, k, c1, bond.offset[0]) {
                                add_entry::<KIND>(&mut out[k * n1 + c1], &s, &s, &bond.m, entry.j, &entry.e);
                            }
                        }
                    }
                }
            });
        }
        let own = rows.run(c23[0], c23[1], run).expect("a run that `run_rows` allowed");
        let onsite = OnSite { k_field: self.k_field[0], axis: self.axis[0], field: self.field };
        for k in 0..run {
            for &c1 in ends {
                let (h, s) = (&mut out[k * n1 + c1], &own[k * n1 + c1]);
                match &self.flat_onsite[0] {
                    Some(flat) => {
                        for a in 0..3 {
                            h[a] = h[a] + flat.d[a] * s[a] + flat.b[a];
                        }
                    }
                    None => onsite.add(h, s),
                }
                if let Some(extra) = extra {
                    let x = &extra[k * n1 + c1];
                    *h = [h[0] + x[0], h[1] + x[1], h[2] + x[2]];
                }
            }
        }
    }

    /// How far the bonds reach across rows: the largest `|o2|` and `|o3|` of a bond's
    /// cell offset `(o1, o2, o3)`, in cells along `a2` and `a3`.
    pub fn row_reach(&self) -> [usize; 2] {
        let mut reach = [0; 2];
        for bond in self.fused.iter().flatten() {
            for k in 0..2 {
                reach[k] = reach[k].max(bond.offset[k + 1].unsigned_abs() as usize);
            }
        }
        reach
    }

    /// Effective field (T) of every site, in parallel chunks.
    pub fn fields(&self, spins: &[Vec3], out: &mut [Vec3]) {
        out.par_chunks_mut(CHUNK)
            .enumerate()
            .for_each(|(k, chunk)| self.field_range(spins, k * CHUNK, chunk));
    }

    /// Exchange-plus-DMI field of site `i` in energy units, `sum_j M_ij S_j`, meV. With the
    /// on-site terms this gives Monte Carlo energy changes:
    /// `dE = -(s' - s).h - k [(s'.e)^2 - (s.e)^2] - mu muB B.(s' - s)`.
    #[inline]
    pub fn pair_field_mev(&self, spins: &[Vec3], i: usize) -> Vec3 {
        let (c, b) = self.cell.decompose(i);
        let cells = self.cell.cells();
        let bonds = &self.fused[b];
        let zero = [0.0; 3];
        let mut h = [0.0; 3];
        // The entries of the row kernel, in its order and with its operations; the block
        // kernel (`trials.rs`) does the same, which must give the same bits.
        for entry in &self.entries[b] {
            let bond = &bonds[entry.bond];
            let s = self.neighbour(i, c, bond, cells).map(|j| &spins[j]);
            if is_pair(entry.kind) {
                let t = self.neighbour(i, c, &bonds[entry.opposite], cells).map(|j| &spins[j]);
                // A side that an open face cuts reads a zero spin.
                if s.is_some() || t.is_some() {
                    let (s, t) = (s.unwrap_or(&zero), t.unwrap_or(&zero));
                    with_kind!(entry.kind, K => add_entry::<K>(&mut h, s, t, &bond.m, entry.j, &entry.e));
                }
            } else if let Some(s) = s {
                with_kind!(entry.kind, K => add_entry::<K>(&mut h, s, s, &bond.m, entry.j, &entry.e));
            }
        }
        let mu = self.mu_mev[b];
        [h[0] * mu, h[1] * mu, h[2] * mu]
    }

    /// On-site energy of site `i` holding spin `s` (anisotropy plus Zeeman), meV.
    #[inline]
    pub fn onsite_energy(&self, i: usize, s: Vec3) -> f64 {
        let b = self.cell.basis_of(i);
        let p = dot(s, self.axis[b]);
        -self.k[b] * (p * p) - self.mu_mev[b] * dot(self.field, s)
    }

    /// Energy change (meV) when site `i` goes from `spins[i]` to `new`.
    #[inline]
    pub fn energy_change(&self, spins: &[Vec3], i: usize, new: Vec3) -> f64 {
        let old = spins[i];
        let h = self.pair_field_mev(spins, i);
        let ds = [new[0] - old[0], new[1] - old[1], new[2] - old[2]];
        -dot(ds, h) + self.onsite_energy(i, new) - self.onsite_energy(i, old)
    }

    /// Energy by term, meV (totals, every pair once), bond by bond: the reference that
    /// [`Hamiltonian::energy_terms`] (what observers use, about 2.5 times as fast) and
    /// [`Hamiltonian::energy_total`] are tested against. Deterministic for any thread count.
    pub fn energy(&self, spins: &[Vec3]) -> EnergyTerms {
        let partial: Vec<EnergyTerms> = spins
            .par_chunks(CHUNK)
            .enumerate()
            .map(|(k, chunk)| self.energy_range(spins, k * CHUNK, chunk.len()))
            .collect();
        partial.iter().fold(EnergyTerms::default(), |acc, e| acc.add(e))
    }

    /// Total energy, meV: the same sum as `energy(spins).total()` up to rounding, about
    /// twice as fast, for samplers that need only the total. The pair part is
    /// `-1/2 sum_i mu_i muB S_i.h_i` with `h_i` the bond field of the row kernel.
    /// Deterministic for any thread count.
    pub fn energy_total(&self, spins: &[Vec3]) -> f64 {
        let partial: Vec<f64> = spins
            .par_chunks(CHUNK)
            .enumerate()
            .map(|(k, chunk)| self.energy_total_range(spins, k * CHUNK, chunk.len()))
            .collect();
        partial.iter().sum()
    }

    /// Walks sites `start .. start + len` in blocks of at most [`ENERGY_BLOCK`] sites, each
    /// within one row of cells, in order: `f(c23, row_start, lo, hi)` for the block
    /// `lo .. hi` of the row `(*, c2, c3)` that starts at site `row_start`.
    #[inline(always)]
    fn row_blocks(&self, start: usize, len: usize, mut f: impl FnMut([usize; 2], usize, usize, usize)) {
        let row_len = self.cell.cells()[0] * self.cell.basis_len();
        let n2 = self.cell.cells()[1];
        let end = start + len;
        let mut lo = start;
        while lo < end {
            let r = lo / row_len;
            let row_start = r * row_len;
            let hi = (row_start + row_len).min(end).min(lo + ENERGY_BLOCK);
            f([r % n2, r / n2], row_start, lo, hi);
            lo = hi;
        }
    }

    /// The total energy of the sites `start .. start + len`. The bond fields go through
    /// [`pair_field_block`], compiled per instruction-set level; the sums over the sites
    /// are sequential, so the same on every level.
    fn energy_total_range(&self, spins: &[Vec3], start: usize, len: usize) -> f64 {
        let rows = FlatRows::new(self, spins);
        let mut h = [[0.0; 3]; ENERGY_BLOCK];
        let mut total = 0.0;
        self.row_blocks(start, len, |c23, row_start, lo, hi| {
            let h = &mut h[..hi - lo];
            pair_field_block(self, &rows, c23, row_start, lo, h, (&self.fused, &self.entries));
            for ((s, hk), b) in spins[lo..hi].iter().zip(h.iter()).zip(self.cell.basis_from(lo)) {
                // Vacant sites hold zero spins and add nothing.
                let pair = -0.5 * self.mu_mev[b] * dot(*s, *hk);
                let onsite =
                    -self.k[b] * dot(*s, self.axis[b]).powi(2) - self.mu_mev[b] * dot(self.field, *s);
                total += pair + onsite;
            }
        });
        total
    }

    /// Energy by term, meV (totals, every pair once), through the row kernel: the pair
    /// terms as `-1/2 sum_i mu_i muB S_i.h_i` with `h_i` the field of the bonds' exchange
    /// part (isotropic and tensor) and, in a second pass, of their DMI part; the on-site
    /// terms per site (a part without bonds is skipped). The same sums as
    /// [`Hamiltonian::energy`] up to rounding, about 2.5 times as fast with DMI on
    /// 128x128x8 (the `field` bench); what observers record. Deterministic for any thread
    /// count.
    pub fn energy_terms(&self, spins: &[Vec3]) -> EnergyTerms {
        let partial: Vec<EnergyTerms> = spins
            .par_chunks(CHUNK)
            .enumerate()
            .map(|(k, chunk)| self.energy_terms_range(spins, k * CHUNK, chunk.len()))
            .collect();
        partial.iter().fold(EnergyTerms::default(), |acc, e| acc.add(e))
    }

    /// The energy by term of the sites `start .. start + len`, with the bond fields of
    /// each part through [`pair_field_block`] (see [`Hamiltonian::energy_total_range`]).
    fn energy_terms_range(&self, spins: &[Vec3], start: usize, len: usize) -> EnergyTerms {
        let rows = FlatRows::new(self, spins);
        let [exchange, dmi] = &self.parts;
        let mut h = [[0.0; 3]; ENERGY_BLOCK];
        let mut e = EnergyTerms::default();
        self.row_blocks(start, len, |c23, row_start, lo, hi| {
            let (h, s) = (&mut h[..hi - lo], &spins[lo..hi]);
            // Vacant sites hold zero spins and add nothing.
            let pair = |h: &[Vec3]| {
                let mut sum = 0.0;
                for ((s, h), b) in s.iter().zip(h).zip(self.cell.basis_from(lo)) {
                    sum += -0.5 * self.mu_mev[b] * dot(*s, *h);
                }
                sum
            };
            for (part, sum) in [(exchange, &mut e.exchange), (dmi, &mut e.dmi)] {
                if !part.is_empty() {
                    let set = (part.fused.as_slice(), part.entries.as_slice());
                    pair_field_block(self, &rows, c23, row_start, lo, h, set);
                    *sum += pair(h);
                }
            }
            for (s, b) in s.iter().zip(self.cell.basis_from(lo)) {
                e.anisotropy -= self.k[b] * dot(*s, self.axis[b]).powi(2);
                e.zeeman -= self.mu_mev[b] * dot(self.field, *s);
            }
        });
        e
    }

    fn energy_range(&self, spins: &[Vec3], start: usize, len: usize) -> EnergyTerms {
        let cells = self.cell.cells();
        let mut e = EnergyTerms::default();
        for i in start..start + len {
            let si = spins[i];
            if si == [0.0; 3] {
                continue;
            }
            let (c, b) = self.cell.decompose(i);
            for bond in &self.fused[b] {
                if let Some(j) = self.neighbour(i, c, bond, cells) {
                    let sj = spins[j];
                    let mut ex = bond.j * dot(si, sj);
                    if let Some(t) = bond.tensor {
                        ex += si[0] * dot(t[0], sj) + si[1] * dot(t[1], sj) + si[2] * dot(t[2], sj);
                    }
                    e.exchange -= 0.5 * ex;
                    e.dmi -= 0.5 * dot(bond.d, cross(si, sj));
                }
            }
            e.anisotropy -= self.k[b] * dot(si, self.axis[b]).powi(2);
            e.zeeman -= self.mu_mev[b] * dot(self.field, si);
        }
        e
    }

    /// Largest torque `max_i |S_i x B_i|` (T) for given fields, e.g. to test convergence.
    pub fn max_torque(spins: &[Vec3], fields: &[Vec3]) -> f64 {
        spins.iter().zip(fields).map(|(s, b)| dot(cross(*s, *b), cross(*s, *b))).fold(0.0, f64::max).sqrt()
    }

    /// An upper bound on the effective field any site can feel, T: the sum of the norms of
    /// its bond matrices, its anisotropy field and the applied field. Sets the time scale.
    pub fn max_field_bound(&self) -> f64 {
        let applied = dot(self.field, self.field).sqrt();
        (0..self.fused.len())
            .map(|b| {
                // The spectral norm of J 1 + [D]x is sqrt(J^2 + |D|^2); a tensor adds at
                // most its Frobenius norm.
                let bonds: f64 = self.fused[b]
                    .iter()
                    .map(|x| {
                        let t = x.tensor.map_or(0.0, |t| t.iter().map(|r| dot(*r, *r)).sum::<f64>().sqrt());
                        ((x.j * x.j + dot(x.d, x.d)).sqrt() + t) / self.mu_mev[b]
                    })
                    .sum();
                bonds + self.k_field[b].abs() + applied
            })
            .fold(0.0, f64::max)
    }
}

spindrift_isa::multiversion! {
    /// [`Hamiltonian::field_range`], compiled per instruction-set level.
    fn field_range_kernel(h: &Hamiltonian, spins: &[Vec3], start: usize, extra: Option<&[Vec3]>, out: &mut [Vec3]) {
        h.field_range_in(&FlatRows::new(h, spins), start, extra, out)
    }
}

spindrift_isa::multiversion! {
    /// The bond fields (no on-site terms) of the sites `lo .. lo + out.len()` of one row,
    /// over the bond set `set`, for the energies: [`Hamiltonian::field_row`] compiled per
    /// instruction-set level, called once per block of [`ENERGY_BLOCK`] sites. (The
    /// energies' loops over blocks once sat inside per-level kernels, but as a closure
    /// that the compiler left out of line, which compiles for the baseline level only;
    /// dispatching here instead keeps one copy of the row kernel per level, as before.)
    fn pair_field_block(
        h: &Hamiltonian,
        rows: &FlatRows<'_>,
        c23: [usize; 2],
        row_start: usize,
        lo: usize,
        out: &mut [Vec3],
        set: (&[Vec<FusedBond>], &[Vec<Entry>])
    ) {
        h.field_row::<false, FlatRows<'_>>(rows, c23, 1, row_start, lo, (out, None), set)
    }
}

/// Most sites in a run of rows that the field kernel takes as one (see
/// [`Hamiltonian::run_rows`]; the length of the zero row it may read).
const RUN_SITES: usize = 1024;

/// Most cells a bond may reach along `a1` for rows to go in runs (see
/// [`Hamiltonian::run_ends`], which lists the end cells on the stack).
const MAX_RUN_REACH: usize = 8;

/// Sites per block of the energy sums (`Hamiltonian::row_blocks`): the block's fields
/// (6 KB) stay in L1.
const ENERGY_BLOCK: usize = 256;

/// Most bonds applied in one pass over a row (see `Hamiltonian::field_row`).
const PACK: usize = 4;

/// One [`Entry`] resolved for a row: the neighbour of cell `c1` is `row[c1 + o1]`
/// (after wrapping `c1 + o1` at the row's ends), and for a pair the opposite one is
/// `row2[c1 + o1b]`.
#[derive(Debug, Clone, Copy, Default)]
struct RowBond<'a> {
    /// The neighbour row from the bond's target basis site on.
    row: &'a [Vec3],
    /// The opposite bond's row (a single bond: `row` again).
    row2: &'a [Vec3],
    o1: i64,
    o1b: i64,
    /// `M_ij / (mu_i muB)`, T per unit spin.
    m: [Vec3; 3],
    /// See [`Entry`]: `j` (also a single isotropic bond's `J / (mu muB)`) and `e`.
    j: f64,
    e: Vec3,
    kind: u8,
}

/// The on-site terms of one basis site.
#[derive(Debug, Clone, Copy)]
struct OnSite {
    /// `2 k / (mu muB)`, T.
    k_field: f64,
    axis: Vec3,
    /// Applied field, T.
    field: Vec3,
}

impl OnSite {
    /// `(h + p e) + B` with `p = k_field (s.e)`.
    #[inline(always)]
    fn add(&self, h: &mut Vec3, s: &Vec3) {
        let p = self.k_field * dot(*s, self.axis);
        for a in 0..3 {
            h[a] = h[a] + p * self.axis[a] + self.field[a];
        }
    }

    /// `k_field e_a e_a` per component `a` when the anisotropy field is diagonal in the
    /// Cartesian components (the axis along x, y or z, or no anisotropy): then
    /// `(h + p e) + B` is `(h_a + d_a s_a) + B_a` with the same bits (`s.e` is the one
    /// component times 1, the other products are zeros that do not change a sum), and the
    /// pass needs no regrouping of 3-vectors into vector registers.
    #[inline(always)]
    fn diagonal(&self) -> Option<Vec3> {
        let e = self.axis;
        let unit = |a: usize| (0..3).all(|b| e[b] == if a == b { 1.0 } else { 0.0 });
        if self.k_field == 0.0 || (0..3).any(unit) {
            Some([self.k_field * e[0], self.k_field * e[1], self.k_field * e[2]])
        } else {
            None
        }
    }
}

/// Numbers per step of the flat on-site pass: 64 sites' 3-vectors.
const FLAT_LEN: usize = 3 * 64;

/// Numbers per group of [`RowPass::pairs_and_onsite`]: 8 sites' 3-vectors, a period of the
/// on-site constants and a whole number of vectors at every level.
const GROUP: usize = 3 * 8;

/// One period ([`GROUP`] numbers) of flat on-site constants `c`, built from its first three
/// numbers so that the compiler knows the values repeat (see [`RowPass::pairs_and_onsite`]).
/// A function, not a closure, so that it is inlined into the per-level kernels.
#[inline(always)]
fn period(c: &[f64; FLAT_LEN]) -> [f64; GROUP] {
    let c3 = [c[0], c[1], c[2]];
    let mut p = [0.0; GROUP];
    for (l, x) in p.iter_mut().enumerate() {
        *x = c3[l % 3];
    }
    p
}

/// The on-site constants of one basis site as flat rows, for the pass over its cells of a
/// row (consecutive sites, so consecutive numbers) when [`OnSite::diagonal`] holds:
/// `d[3 k + a] = k_field e_a e_a` and `b[3 k + a] = B_a`.
#[derive(Debug, Clone)]
struct FlatOnSite {
    d: [f64; FLAT_LEN],
    b: [f64; FLAT_LEN],
}

impl FlatOnSite {
    fn new(onsite: &OnSite) -> Option<Self> {
        let d = onsite.diagonal()?;
        Some(Self { d: std::array::from_fn(|l| d[l % 3]), b: std::array::from_fn(|l| onsite.field[l % 3]) })
    }
}

/// [`FlatOnSite`] of every basis site (`None` where the axis is not Cartesian).
fn flat_onsite(k_field: &[f64], axis: &[Vec3], field: Vec3) -> Vec<Option<FlatOnSite>> {
    k_field
        .iter()
        .zip(axis)
        .map(|(&k_field, &axis)| FlatOnSite::new(&OnSite { k_field, axis, field }))
        .collect()
}

/// The cells `first .. last` of one basis site in a row, and how to reach their
/// neighbours.
struct RowPass<'a> {
    /// The evaluated row's spins from its basis site's first cell on: cell `c1`'s is
    /// `own[c1]`.
    own: &'a [Vec3],
    /// `out[c1 + shift]` is the site of cell `c1`.
    shift: i64,
    first: i64,
    last: i64,
    /// Cells along the row.
    n1: i64,
    /// Whether the row wraps around.
    periodic: bool,
}

impl RowPass<'_> {
    /// Adds the bonds of `pack` (one to [`PACK`], all of one kind) to the sums in `out`,
    /// or with `fresh` starts the sums with them.
    #[inline(always)]
    fn apply(&self, out: &mut [Vec3], pack: &[RowBond], fresh: bool) {
        macro_rules! dispatch {
            ($($k:literal),*) => {
                match (pack.len(), pack[0].kind, fresh) {
                    $(
                        ($k, MATRIX, false) => self.pack::<$k, MATRIX, false>(out, pack),
                        ($k, IN_PLANE, false) => self.pack::<$k, IN_PLANE, false>(out, pack),
                        ($k, ISO, false) => self.pack::<$k, ISO, false>(out, pack),
                        ($k, PAIR, false) => self.pack::<$k, PAIR, false>(out, pack),
                        ($k, PAIR_PLANAR, false) => self.pack::<$k, PAIR_PLANAR, false>(out, pack),
                        ($k, PAIR_ISO, false) => self.pack::<$k, PAIR_ISO, false>(out, pack),
                        ($k, MATRIX, true) => self.pack::<$k, MATRIX, true>(out, pack),
                        ($k, IN_PLANE, true) => self.pack::<$k, IN_PLANE, true>(out, pack),
                        ($k, ISO, true) => self.pack::<$k, ISO, true>(out, pack),
                        ($k, PAIR, true) => self.pack::<$k, PAIR, true>(out, pack),
                        ($k, PAIR_PLANAR, true) => self.pack::<$k, PAIR_PLANAR, true>(out, pack),
                        ($k, PAIR_ISO, true) => self.pack::<$k, PAIR_ISO, true>(out, pack),
                    )*
                    _ => unreachable!("a pack holds 1 to {PACK} entries of one kind"),
                }
            };
        }
        dispatch!(1, 2, 3, 4)
    }

    /// Sets the sums of the cells to zero.
    #[inline(always)]
    fn zero(&self, out: &mut [Vec3]) {
        for c1 in self.first..self.last {
            out[(c1 + self.shift) as usize] = [0.0; 3];
        }
    }

    /// The cells `inner_lo .. inner_hi` (within `first .. last`) whose neighbours across
    /// every bond of `pack` stay inside their rows; the others wrap around the row's ends.
    #[inline(always)]
    fn inner(&self, pack: &[RowBond]) -> (i64, i64) {
        let (mut lo, mut hi) = (self.first, self.last);
        for r in pack {
            lo = lo.max(-r.o1).max(-r.o1b);
            hi = hi.min(self.n1 - r.o1).min(self.n1 - r.o1b);
        }
        let lo = lo.min(self.last);
        (lo, hi.max(lo))
    }

    /// `apply` for a pack of exactly `K` bonds of the kind `KIND`, starting the
    /// sums at zero when `FRESH`.
    #[inline(always)]
    fn pack<const K: usize, const KIND: u8, const FRESH: bool>(&self, out: &mut [Vec3], pack: &[RowBond]) {
        let pack: &[RowBond; K] = pack.try_into().expect("pack of K bonds");
        let (first, last) = (self.first, self.last);
        let (inner_lo, inner_hi) = self.inner(pack);
        self.edges::<KIND>(out, pack, first, inner_lo, FRESH);
        if inner_lo < inner_hi {
            let len = (inner_hi - inner_lo) as usize;
            let k0 = (inner_lo + self.shift) as usize;
            let j0 = pack.map(|r| (inner_lo + r.o1) as usize);
            let j1 = pack.map(|r| (inner_lo + r.o1b) as usize);
            let m = pack.map(|r| r.m);
            let j = pack.map(|r| r.j);
            let e = pack.map(|r| r.e);
            // Plain slices, which the compiler vectorises: each basis site's cells are
            // consecutive sites (see `spindrift_lattice::Supercell`).
            let out = &mut out[k0..k0 + len];
            let s: [&[Vec3]; K] = std::array::from_fn(|p| &pack[p].row[j0[p]..j0[p] + len]);
            // A single bond has no second row: no slice (and no bounds check).
            let t: [&[Vec3]; K] =
                std::array::from_fn(|p| if is_pair(KIND) { &pack[p].row2[j1[p]..j1[p] + len] } else { s[p] });
            for (k, o) in out.iter_mut().enumerate() {
                let mut h = if FRESH { [0.0; 3] } else { *o };
                for p in 0..K {
                    add_entry::<KIND>(&mut h, &s[p][k], &t[p][k], &m[p], j[p], &e[p]);
                }
                *o = h;
            }
        }
        self.edges::<KIND>(out, pack, inner_hi, last, FRESH);
    }

    /// `pack` for the cells `from .. to`, whose neighbours may wrap around the row's ends
    /// (starting the sums at zero when `fresh`): a few cells at each end of a row, so one
    /// compiled copy per kind, out of line. Inlined (one copy per pack size, kind, start
    /// and instruction-set level, 48 per kernel and level) these loops made half of the
    /// field kernels' machine code and four fifths of this crate's compile time in release
    /// (12.4 against 2.6 minutes). The operations and their order are those of the packs'
    /// loops, so the bits are too; the call costs nothing measurable (callgrind: 0.3% more
    /// instructions in the field kernel).
    #[inline(never)]
    fn edges<const KIND: u8>(&self, out: &mut [Vec3], pack: &[RowBond], from: i64, to: i64, fresh: bool) {
        let zero = [0.0; 3];
        for c1 in from..to {
            let k = (c1 + self.shift) as usize;
            let mut h = if fresh { zero } else { out[k] };
            for r in pack {
                let near = wrap_coordinate(c1 + r.o1, self.n1, self.periodic).map(|t1| &r.row[t1 as usize]);
                if is_pair(KIND) {
                    let far =
                        wrap_coordinate(c1 + r.o1b, self.n1, self.periodic).map(|t1| &r.row2[t1 as usize]);
                    // A side that an open face cuts reads a zero spin, as in `field_row`.
                    if near.is_some() || far.is_some() {
                        let (s, t) = (near.unwrap_or(&zero), far.unwrap_or(&zero));
                        add_entry::<KIND>(&mut h, s, t, &r.m, r.j, &r.e);
                    }
                } else if let Some(s) = near {
                    add_entry::<KIND>(&mut h, s, s, &r.m, r.j, &r.e);
                }
            }
            out[k] = h;
        }
    }

    /// Whether the last pack `pack` and the on-site terms can go in one flat pass
    /// ([`RowPass::pair_iso_onsite`]): pairs without DMI.
    #[inline(always)]
    fn merges(&self, pack: &[RowBond]) -> bool {
        !pack.is_empty() && pack[0].kind == PAIR_ISO
    }

    /// The pack of isotropic pairs `pack` (see [`RowPass::merges`]), starting the sums when
    /// `fresh`, and the on-site terms in one flat pass ([`RowPass::pairs_and_onsite`]), then
    /// `extra` (indexed as `out`) where given.
    #[inline(always)]
    fn pair_iso_onsite(
        &self,
        out: &mut [Vec3],
        pack: &[RowBond],
        flat: &FlatOnSite,
        fresh: bool,
        extra: Option<&[Vec3]>,
    ) {
        macro_rules! dispatch {
            ($($k:literal),*) => {
                match (pack.len(), fresh, extra) {
                    $(
                        ($k, false, None) => self.pairs_and_onsite::<$k, false, false>(out, pack.try_into().expect("K"), flat, &[]),
                        ($k, true, None) => self.pairs_and_onsite::<$k, true, false>(out, pack.try_into().expect("K"), flat, &[]),
                        ($k, false, Some(x)) => self.pairs_and_onsite::<$k, false, true>(out, pack.try_into().expect("K"), flat, x),
                        ($k, true, Some(x)) => self.pairs_and_onsite::<$k, true, true>(out, pack.try_into().expect("K"), flat, x),
                    )*
                    _ => unreachable!("a pack holds 1 to {PACK} entries"),
                }
            };
        }
        dispatch!(1, 2, 3, 4)
    }

    /// One basis site's cells of a row as flat numbers: `K` isotropic pairs (starting the sums
    /// when `FRESH`), then the on-site terms, `((h + j (s + t)) + d s) + b` per number, and
    /// with `EXTRA` the number of `extra` (indexed as `out`; the thermal field) added last.
    /// These are the operations and the order of the pack's pass followed by the on-site
    /// pass, so the bits are the same as theirs, with the sums read and written once. The
    /// cells whose neighbours wrap around the row's ends go through `edges` and then the
    /// on-site terms, one by one. The numbers go in groups of [`GROUP`] (eight sites), a
    /// period of the on-site constants, which can then stay in vector registers. (The on-site
    /// pass alone is faster as it is, a loop over the row against the constants repeated to
    /// its length: in groups it took 1.5 times as long on a monolayer.)
    #[inline(always)]
    fn pairs_and_onsite<const K: usize, const FRESH: bool, const EXTRA: bool>(
        &self,
        out: &mut [Vec3],
        pack: &[RowBond; K],
        flat: &FlatOnSite,
        extra: &[Vec3],
    ) {
        let (first, last) = (self.first, self.last);
        // With one pair (the exchange between the layers of a film with DMI), one period
        // of the constants as locals built from their three numbers, which the compiler
        // then keeps in registers (six vectors of eight with AVX-512), where through
        // `flat` it read them from memory in every group, six of the loop's eighteen
        // vector loads. Criterion, sc128 with one shell, median time ratio over paired
        // rounds: 0.977, 0.920 and 0.942 (8, 12 and 8 rounds) with AVX-512, 0.967 and
        // 0.971 with AVX2, where the build against itself gave 0.964 and 1.005. With more
        // pairs AVX2 runs out of registers (three pairs spilled to the stack and took 1.11
        // and 1.13 times as long), so there the constants stay in memory.
        let local = if K == 1 { (period(&flat.d), period(&flat.b)) } else { ([0.0; GROUP], [0.0; GROUP]) };
        let (d, b): (&[f64], &[f64]) = if K == 1 { (&local.0, &local.1) } else { (&flat.d, &flat.b) };
        let (inner_lo, inner_hi) = self.inner(pack);
        // (Out of line: skipped where there is no such cell, as for pairs along a2 or a3.)
        for (from, to) in [(first, inner_lo), (inner_hi, last)].into_iter().filter(|(from, to)| from < to) {
            self.edges::<PAIR_ISO>(out, pack, from, to, FRESH);
            for c1 in from..to {
                let k = (c1 + self.shift) as usize;
                let (o, s) = (&mut out[k], &self.own[c1 as usize]);
                for a in 0..3 {
                    o[a] = o[a] + d[a] * s[a] + b[a];
                    if EXTRA {
                        o[a] += extra[k][a];
                    }
                }
            }
        }
        // A piece of a row with fewer cells than the bonds reach along it has no inner
        // cells, and its neighbours' offsets below could then fall outside the rows.
        if inner_lo >= inner_hi {
            return;
        }
        let lo = inner_lo as usize;
        let len = (inner_hi - inner_lo) as usize;
        let k0 = (inner_lo + self.shift) as usize;
        let out = out[k0..k0 + len].as_flattened_mut();
        let extra = if EXTRA { extra[k0..k0 + len].as_flattened() } else { &[] };
        let own = self.own[lo..lo + len].as_flattened();
        // Pair `p` reaches cell `c1 + o1` of its row, and `c1 + o1b` of the other.
        let from = |o1: i64| (inner_lo + o1) as usize;
        let s: [&[f64]; K] =
            std::array::from_fn(|p| pack[p].row[from(pack[p].o1)..from(pack[p].o1) + len].as_flattened());
        let t: [&[f64]; K] =
            std::array::from_fn(|p| pack[p].row2[from(pack[p].o1b)..from(pack[p].o1b) + len].as_flattened());
        let j = pack.map(|r| r.j);
        // Groups as arrays (`chunks_exact` yields slices of `GROUP` numbers, so the
        // conversions cannot fail), whose fixed length lets the loop keep `d` and `b` in
        // registers.
        let group = |x: &[f64]| -> [f64; GROUP] { x.try_into().expect("a whole group") };
        let mut groups = out.chunks_exact_mut(GROUP);
        let whole = len * 3 / GROUP * GROUP;
        for (g, o) in (&mut groups).enumerate() {
            let at = g * GROUP;
            let o: &mut [f64; GROUP] = o.try_into().expect("a whole group");
            let own = group(&own[at..at + GROUP]);
            let s: [[f64; GROUP]; K] = std::array::from_fn(|p| group(&s[p][at..at + GROUP]));
            let t: [[f64; GROUP]; K] = std::array::from_fn(|p| group(&t[p][at..at + GROUP]));
            // (Zeros where there is no extra field: not read, the compiler drops them.)
            let x = if EXTRA { group(&extra[at..at + GROUP]) } else { [0.0; GROUP] };
            for l in 0..GROUP {
                let mut h = if FRESH { 0.0 } else { o[l] };
                for p in 0..K {
                    h += j[p] * (s[p][l] + t[p][l]);
                }
                o[l] = h + d[l] * own[l] + b[l];
                if EXTRA {
                    o[l] += x[l];
                }
            }
        }
        let rest = groups.into_remainder();
        // The last few numbers: the first constants of the period.
        for (l, o) in rest.iter_mut().enumerate() {
            let mut h = if FRESH { 0.0 } else { *o };
            for p in 0..K {
                h += j[p] * (s[p][whole + l] + t[p][whole + l]);
            }
            *o = h + d[l] * own[whole + l] + b[l];
            if EXTRA {
                *o += extra[whole + l];
            }
        }
    }

    /// Adds `extra` (indexed as `out`) to the sums in `out`.
    #[inline(always)]
    fn add(&self, out: &mut [Vec3], extra: &[Vec3]) {
        let k0 = (self.first + self.shift) as usize;
        let len = (self.last - self.first) as usize;
        for (o, x) in out[k0..k0 + len].iter_mut().zip(&extra[k0..k0 + len]) {
            *o = [o[0] + x[0], o[1] + x[1], o[2] + x[2]];
        }
    }

    /// Adds the on-site terms to the sums in `out`.
    #[inline(always)]
    fn onsite(&self, out: &mut [Vec3], onsite: &OnSite, flat: Option<&FlatOnSite>) {
        let k0 = (self.first + self.shift) as usize;
        let len = (self.last - self.first) as usize;
        let first = self.first as usize;
        let spins = &self.own[first..first + len];
        let out = &mut out[k0..k0 + len];
        if let Some(flat) = flat {
            // The row as flat numbers against the constants repeated to the same period:
            // plain loops over slices, which vectorise without regrouping 3-vectors.
            let (out, spins) = (out.as_flattened_mut(), spins.as_flattened());
            for (o, s) in out.chunks_mut(FLAT_LEN).zip(spins.chunks(FLAT_LEN)) {
                for (((o, s), d), b) in o.iter_mut().zip(s).zip(&flat.d).zip(&flat.b) {
                    *o = *o + d * s + b;
                }
            }
        } else {
            for (o, s) in out.iter_mut().zip(spins) {
                onsite.add(o, s);
            }
        }
    }
}

/// Kinds of [`Entry`], and so of pack: single bonds with general 3x3 matrices, ...
const MATRIX: u8 = 0;
/// ... with `M_xy = M_yx = 0`, as exchange plus DMI whose vectors have no `z` component
/// (interfacial DMI with the normal along `z`, the usual film geometry): the kernel skips
/// those two products, which changes no bit (see [`FusedBond::iso`]), ...
const IN_PLANE: u8 = 1;
/// ... multiples of the identity, ...
const ISO: u8 = 2;
/// ... pairs of a bond and its opposite (see [`Entry`]) with DMI, ...
const PAIR: u8 = 3;
/// ... with DMI whose vector has no `z` component (`e_z = 0`: two products fewer, no bit
/// changed, as for [`IN_PLANE`]) ...
const PAIR_PLANAR: u8 = 4;
/// ... and without DMI.
const PAIR_ISO: u8 = 5;

/// Whether entries of `kind` are pairs of bonds.
#[inline(always)]
const fn is_pair(kind: u8) -> bool {
    kind >= PAIR
}

/// Adds an entry of kind `KIND` to the sum `o`: `o += M s` for a single bond (`M`, or `j`
/// when it is isotropic), `o += j (s + t) + A (s - t)` for a pair whose bonds reach `s`
/// and `t` (`A` given by `e`, see [`Entry`]).
#[inline(always)]
fn add_entry<const KIND: u8>(o: &mut Vec3, s: &Vec3, t: &Vec3, m: &[Vec3; 3], j: f64, e: &Vec3) {
    let add = entry_term::<KIND>(s, t, m, j, e);
    o[0] += add[0];
    o[1] += add[1];
    o[2] += add[2];
}

/// What [`add_entry`] adds, component by component (so `o[a] += term[a]` are the same
/// operations, for kernels that keep their sums elsewhere).
#[inline(always)]
fn entry_term<const KIND: u8>(s: &Vec3, t: &Vec3, m: &[Vec3; 3], j: f64, e: &Vec3) -> Vec3 {
    match KIND {
        ISO => [j * s[0], j * s[1], j * s[2]],
        IN_PLANE => [
            m[0][0] * s[0] + m[0][2] * s[2],
            m[1][1] * s[1] + m[1][2] * s[2],
            m[2][0] * s[0] + m[2][1] * s[1] + m[2][2] * s[2],
        ],
        MATRIX => std::array::from_fn(|a| m[a][0] * s[0] + m[a][1] * s[1] + m[a][2] * s[2]),
        _ => {
            let g = [s[0] + t[0], s[1] + t[1], s[2] + t[2]];
            let d = [s[0] - t[0], s[1] - t[1], s[2] - t[2]];
            match KIND {
                PAIR_ISO => [j * g[0], j * g[1], j * g[2]],
                // `A d = (e_z d_y - e_y d_z, e_x d_z - e_z d_x, e_y d_x - e_x d_y)`.
                PAIR_PLANAR => {
                    [j * g[0] - e[1] * d[2], j * g[1] + e[0] * d[2], j * g[2] + (e[1] * d[0] - e[0] * d[1])]
                }
                _ => [
                    j * g[0] + (e[2] * d[1] - e[1] * d[2]),
                    j * g[1] + (e[0] * d[2] - e[2] * d[0]),
                    j * g[2] + (e[1] * d[0] - e[0] * d[1]),
                ],
            }
        }
    }
}

/// `$body` with `$k` a `const` of the entry kind `$kind`, known only at run time: one
/// compiled copy of `$body` per kind, so that its loops hold no test of the kind.
macro_rules! with_kind {
    ($kind:expr, $k:ident => $body:expr) => {
        match $kind {
            ISO => {
                const $k: u8 = ISO;
                $body
            }
            IN_PLANE => {
                const $k: u8 = IN_PLANE;
                $body
            }
            MATRIX => {
                const $k: u8 = MATRIX;
                $body
            }
            PAIR => {
                const $k: u8 = PAIR;
                $body
            }
            PAIR_PLANAR => {
                const $k: u8 = PAIR_PLANAR;
                $body
            }
            _ => {
                const $k: u8 = PAIR_ISO;
                $body
            }
        }
    };
}
use with_kind;

/// The row that `bond` reaches from the row of cells `c23` (`(c2, c3)`), from the bond's
/// target basis site on, or none where an open face cuts it. A function rather than a
/// closure in `field_row`, so that it is inlined into the per-level kernels (as a closure
/// it stayed out of line, at the baseline level: 1.9% of a one-thread Heun step).
#[inline(always)]
fn neighbour_row<'r, R: SpinRows>(
    rows: &'r R,
    c23: [usize; 2],
    run: usize,
    cells: [usize; 3],
    periodic: [bool; 3],
    bond: &FusedBond,
) -> Option<&'r [Vec3]> {
    let mut t = [0usize; 2];
    for k in 0..2 {
        let x = c23[k] as i64 + bond.offset[k + 1] as i64;
        t[k] = wrap_coordinate(x, cells[k + 1] as i64, periodic[k + 1])? as usize;
    }
    Some(&rows.run(t[0], t[1], run).expect("a run that `run_rows` allowed")[bond.to * cells[0]..])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::builder::{add_shell, DmiKind, ShellCoupling, ShellRef};
    use spindrift_lattice::{preset, unit_hash, Coupling};

    impl Hamiltonian {
        /// The field as a plain per-site loop over the entries (the kernel before rows
        /// were resolved once per bond), for the bitwise comparison below: single bonds as
        /// full matrix products, pairs in the general form (every product, as `PAIR`).
        fn field_per_site(&self, spins: &[Vec3], i: usize) -> Vec3 {
            if !self.cell.is_occupied(i) {
                return [0.0; 3];
            }
            let (c, b) = self.cell.decompose(i);
            let mut h = [0.0; 3];
            let spin = |bond: &FusedBond| self.cell.neighbour(c, bond.offset, bond.to).map(|j| spins[j]);
            for entry in &self.entries[b] {
                let bond = &self.fused[b][entry.bond];
                if is_pair(entry.kind) {
                    let (s, t) = (spin(bond), spin(&self.fused[b][entry.opposite]));
                    if s.is_some() || t.is_some() {
                        let (s, t) = (s.unwrap_or([0.0; 3]), t.unwrap_or([0.0; 3]));
                        add_entry::<PAIR>(&mut h, &s, &t, &bond.m, entry.j, &entry.e);
                    }
                } else if let Some(s) = spin(bond) {
                    add_entry::<MATRIX>(&mut h, &s, &s, &bond.m, entry.j, &entry.e);
                }
            }
            let e = self.axis[b];
            let p = self.k_field[b] * dot(spins[i], e);
            [
                h[0] + p * e[0] + self.field[0],
                h[1] + p * e[1] + self.field[1],
                h[2] + p * e[2] + self.field[2],
            ]
        }
    }

    /// Couplings of a test system beyond lattice and shells (see [`test_system`]).
    pub(super) struct TestCouplings {
        /// Seed of the random occupation.
        pub(super) seed: u64,
        /// DMI strength, meV: interfacial (normal z) on shell 1, bulk on the others.
        pub(super) d: f64,
        /// Shells `1 .. dmi_shells + 1` carry DMI; farther ones are pure exchange.
        pub(super) dmi_shells: usize,
        /// Adds one bond with a full 3x3 tensor between the first and last basis sites.
        pub(super) tensor: bool,
        /// Anisotropy constant (meV) and axis (need not be normalised).
        pub(super) anisotropy: (f64, Vec3),
    }

    /// A general anisotropy axis, off every Cartesian direction.
    pub(super) const TILTED: (f64, Vec3) = (0.3, [0.1, 0.2, 1.0]);

    /// A one-species test system: `J = 3/shell` meV on `shells` shells, DMI and tensor as
    /// `c` says, a field in a general direction, occupancy `occ`.
    pub(super) fn test_system(
        name: &str,
        cells: [usize; 3],
        periodic: [bool; 3],
        shells: usize,
        occ: f64,
        c: TestCouplings,
    ) -> Hamiltonian {
        let mut crystal = preset(name, 2.5, None).unwrap();
        for s in crystal.basis.iter_mut() {
            s.occupancy = occ;
        }
        let nb = crystal.basis.len();
        let cell = Supercell::new(crystal, cells, periodic, c.seed).unwrap();
        let mut bonds = BondList::new(nb);
        for shell in 1..=shells {
            let kind =
                if shell == 1 { DmiKind::Interfacial { normal: [0.0, 0.0, 1.0] } } else { DmiKind::Bulk };
            let spec = ShellCoupling {
                shell: ShellRef::Index(shell),
                j: 3.0 / shell as f64,
                dmi: (shell <= c.dmi_shells).then_some((c.d, kind)),
                pair: None,
            };
            add_shell(&cell, &mut bonds, &spec).unwrap();
        }
        if c.tensor {
            let t = [[0.3, 0.1, -0.2], [0.05, -0.1, 0.4], [0.2, 0.3, 0.1]];
            let coupling = Coupling { j: 0.7, d: [0.1, -0.2, 0.3], tensor: Some(t) };
            bonds.add_pair(0, nb - 1, [1, 0, 0], [2.5, 0.0, 0.0], coupling).unwrap();
        }
        let species = vec![Species {
            name: "A".into(),
            moment: 2.0,
            damping: 0.1,
            anisotropy: c.anisotropy.0,
            axis: c.anisotropy.1,
        }];
        Hamiltonian::new(cell, species, bonds, [0.1, -0.3, 0.7]).unwrap()
    }

    /// A unit vector of site `i`, uniform on the sphere over sites, from `seed`.
    pub(super) fn unit(seed: u64, i: usize) -> Vec3 {
        let z = 2.0 * unit_hash(seed, 1, i as u64) - 1.0;
        let phi = std::f64::consts::TAU * unit_hash(seed, 2, i as u64);
        let r = (1.0 - z * z).sqrt();
        [r * phi.cos(), r * phi.sin(), z]
    }

    // Bonds pair up with their opposites along the negated bond vector (the coupling seen
    // from the other end is `M^T`, common practice), within a sublattice and between
    // sublattices (bcc); tensor bonds and bonds without an opposite (honeycomb) stay
    // single. Fails if the pairing finds nothing (the kernel would then run bond by bond).
    #[test]
    fn opposite_bonds_pair_up() {
        let kinds = |h: &Hamiltonian, b: usize| h.entries[b].iter().map(|e| e.kind).collect::<Vec<_>>();
        let c = |d, tensor| TestCouplings { seed: 1, d, dmi_shells: 1, tensor, anisotropy: TILTED };
        // Simple cubic, interfacial DMI with normal z on shell 1: the x and y pairs carry
        // DMI vectors in the plane, the z pair none.
        let h = test_system("simple-cubic", [4, 4, 4], [true; 3], 1, 1.0, c(0.7, false));
        assert_eq!(kinds(&h, 0), vec![PAIR_PLANAR, PAIR_PLANAR, PAIR_ISO]);
        // Bulk DMI on shell 2 (vectors along the bonds, with z parts): general pairs.
        let bulk = TestCouplings { dmi_shells: 2, ..c(0.7, false) };
        let h = test_system("simple-cubic", [4, 4, 4], [true; 3], 2, 1.0, bulk);
        assert_eq!(kinds(&h, 0).iter().filter(|&&k| k == PAIR).count(), 4, "{:?}", kinds(&h, 0));
        // The tensor joins the +x bond's coupling: the x bonds stay single, the y and z
        // pairs remain.
        let h = test_system("simple-cubic", [4, 4, 4], [true; 3], 1, 1.0, c(0.0, true));
        assert_eq!(kinds(&h, 0), vec![MATRIX, MATRIX, PAIR_ISO, PAIR_ISO]);
        // Honeycomb: a first-shell bond has no bond along its negated vector, so none pairs.
        let h = test_system("honeycomb", [4, 4, 1], [true, true, false], 1, 1.0, c(0.0, false));
        assert!(kinds(&h, 0).iter().all(|&k| !is_pair(k)));
        // bcc: the eight first-shell bonds join the two sublattices at eight cell offsets,
        // (0,0,0) opposite (-1,-1,-1) and so on: four pairs per site, with interfacial DMI
        // (normal z) planar ones; fcc (four sites per cubic cell): twelve bonds, six pairs.
        for (name, sites, pairs) in [("bcc", 2, 4), ("fcc", 4, 6)] {
            let h = test_system(name, [4, 4, 4], [true; 3], 1, 1.0, c(0.7, false));
            for b in 0..sites {
                assert_eq!(kinds(&h, b), vec![PAIR_PLANAR; pairs], "{name} basis site {b}");
                for entry in &h.entries[b] {
                    let (x, y) = (&h.fused[b][entry.bond], &h.fused[b][entry.opposite]);
                    assert_eq!(x.to, y.to);
                    assert!((0..3).all(|a| x.vector[a] == -y.vector[a]), "{:?} {:?}", x.vector, y.vector);
                }
            }
        }
    }

    // The row kernel must reproduce the per-site sum bit for bit (common practice for a
    // reordered loop that keeps each site's order of additions), for every boundary
    // combination, several bases and shells, dilution, boxes of one and two cells, rows
    // long enough for the vector path, and ranges that start and end inside rows.
    /// `field_range` over several ranges (whole, from the second site, from a site within
    /// the first row, a middle third, the last site, and one and two sites from every site
    /// of the first two rows, so that pieces of rows shorter than the bonds' reach along
    /// them start and end at every cell) equals `expected` bit for bit.
    fn assert_ranges_bitwise(h: &Hamiltonian, spins: &[Vec3], expected: &[Vec3], label: &str) {
        let n = h.len();
        let row = h.cell().cells()[0] * h.cell().basis_len();
        let short = (0..(2 * row).min(n)).flat_map(|start| [(start, 1), (start, 2.min(n - start))]);
        let ranges = [(0, n), (1, n - 1), (3, n / 2), (n / 3, n / 3 + 1), (n - 1, 1)];
        // An extra field, as the thermal field is added: `field + extra` with the bits of
        // that addition after the field, vacant sites included.
        let extra: Vec<Vec3> = (0..n).map(|i| unit(17, i).map(|x| 3.0 * x)).collect();
        for (start, len) in ranges.into_iter().chain(short) {
            let mut out = vec![[f64::NAN; 3]; len];
            h.field_range(spins, start, &mut out);
            let mut plus = vec![[f64::NAN; 3]; len];
            h.field_range_plus(spins, start, &extra[start..start + len], &mut plus);
            for (k, (o, p)) in out.iter().zip(&plus).enumerate() {
                let (e, x) = (expected[start + k], extra[start + k]);
                assert!(
                    (0..3).all(|a| o[a].to_bits() == e[a].to_bits()),
                    "{label} site {}: {o:?} != {e:?}",
                    start + k
                );
                let e = [e[0] + x[0], e[1] + x[1], e[2] + x[2]];
                assert!(
                    (0..3).all(|a| p[a].to_bits() == e[a].to_bits()),
                    "{label} site {} plus extra: {p:?} != {e:?}",
                    start + k
                );
            }
        }
    }

    /// Pure exchange (every entry an isotropic pair, so for each basis site the one pack
    /// and the on-site terms go in one flat pass that starts the sums, with the end cells
    /// of periodic and open rows one by one), bitwise against the per-site loop over the
    /// same entries, for several starts of the evaluated range. Our own behaviour: the
    /// merged pass must change no bit.
    #[test]
    fn pure_exchange_row_kernel_equals_per_site_sum_bitwise() {
        let cases = [
            ("simple-cubic", [21, 3, 3], [true, true, false], 3),
            ("simple-cubic", [19, 2, 2], [false, true, true], 2),
            ("simple-cubic", [150, 2, 2], [true, false, true], 1),
            // Four shells reach two cells along the row: the ranges that start or end one
            // cell from a row's end leave pieces with no inner cell.
            ("simple-cubic", [21, 3, 3], [true, true, false], 4),
            ("triangular", [17, 3, 2], [true, true, false], 2),
            ("fcc", [17, 2, 2], [true, false, true], 3),
            ("bcc", [9, 2, 2], [true, true, true], 2),
            // Planes of enough rows for runs of rows (see `runs_of_rows_are_taken`), their
            // rows periodic or open along a1, the planes periodic or open along a2, and a
            // reach of two cells along both.
            ("simple-cubic", [21, 6, 3], [true, true, false], 3),
            ("simple-cubic", [19, 7, 2], [false, false, true], 2),
            ("simple-cubic", [24, 8, 3], [true, true, true], 4),
        ];
        for (name, cells, periodic, shells) in cases {
            for anisotropy in [(0.3, [0.0, 0.0, 2.0]), (0.0, [0.3, 0.1, 0.5]), TILTED] {
                let couplings = TestCouplings { seed: 5, d: 0.0, dmi_shells: 0, tensor: false, anisotropy };
                let h = test_system(name, cells, periodic, shells, 1.0, couplings);
                let n = h.len();
                let spins: Vec<Vec3> = (0..n).map(|i| unit(4, i)).collect();
                let expected: Vec<Vec3> = (0..n).map(|i| h.field_per_site(&spins, i)).collect();
                assert_ranges_bitwise(
                    &h,
                    &spins,
                    &expected,
                    &format!("{name} {cells:?} axis {anisotropy:?}"),
                );
            }
        }
    }

    /// The systems the bitwise tests above and below give runs of rows do take them, so
    /// that those tests cover the run's kernel and its end cells; and the systems that
    /// cannot (several sites per cell, too few rows, rows too short) do not. Our own
    /// behaviour.
    #[test]
    fn runs_of_rows_are_taken() {
        let couplings = |shells| TestCouplings {
            seed: 5,
            d: 0.7,
            dmi_shells: shells,
            tensor: false,
            anisotropy: (0.3, [0.0, 0.0, 2.0]),
        };
        let run = |name, cells: [usize; 3], periodic, shells, r, whole| {
            let h = test_system(name, cells, periodic, shells, 1.0, couplings(shells));
            let spins = vec![[0.0, 0.0, 1.0]; h.len()];
            h.run_rows(&FlatRows::new(&h, &spins), r, whole)
        };
        // Rows 1 ..= 4 of six are interior along a2 (reach 1): a run of four from row 1,
        // three from row 2, none from rows 0 and 5, or with one row asked for.
        assert_eq!(run("simple-cubic", [21, 6, 3], [true, true, false], 3, 1, 5), 4);
        assert_eq!(run("simple-cubic", [21, 6, 3], [true, true, false], 3, 2, 9), 3);
        assert_eq!(run("simple-cubic", [21, 6, 3], [true, true, false], 3, 6, 9), 1);
        assert_eq!(run("simple-cubic", [21, 6, 3], [true, true, false], 3, 11, 9), 1);
        assert_eq!(run("simple-cubic", [21, 6, 3], [true, true, false], 3, 1, 1), 1);
        // Reach 2 along a1 and a2 (the fourth shell): rows 2 ..= 5 of eight.
        assert_eq!(run("simple-cubic", [24, 8, 3], [true, true, true], 4, 2, 8), 4);
        assert_eq!(run("simple-cubic", [24, 8, 3], [true, true, true], 4, 1, 8), 1);
        assert_eq!(run("triangular", [17, 6, 2], [true, true, false], 2, 7, 8), 4);
        // No run: two sites per cell; rows shorter than four cells per cell of reach; a
        // plane of three rows (one interior row).
        assert_eq!(run("bcc", [19, 6, 2], [false, true, true], 2, 1, 4), 1);
        assert_eq!(run("simple-cubic", [7, 6, 3], [true, true, false], 4, 2, 4), 1);
        assert_eq!(run("simple-cubic", [21, 3, 3], [true, true, false], 3, 1, 2), 1);
    }

    #[test]
    fn row_kernel_equals_per_site_sum_bitwise() {
        let cases = [
            ("simple-cubic", [7, 5, 4], [true, true, false], 3, 1.0),
            ("simple-cubic", [2, 3, 3], [true, false, true], 2, 1.0),
            ("bcc", [4, 3, 3], [false, true, true], 2, 0.8),
            ("honeycomb", [5, 4, 1], [true, true, false], 3, 1.0),
            ("hexagonal", [3, 3, 2], [false, false, false], 2, 0.9),
            ("triangular", [1, 6, 1], [true, true, false], 2, 1.0),
            ("fcc", [3, 4, 2], [true, true, true], 2, 1.0),
            // Rows long enough for the vector path, one and several basis sites, and fcc
            // to three shells (42 bonds: more than one group of resolved bonds).
            ("simple-cubic", [21, 3, 3], [true, true, false], 3, 1.0),
            ("simple-cubic", [19, 2, 2], [false, true, true], 1, 0.9),
            ("bcc", [19, 2, 2], [false, true, true], 2, 0.8),
            ("honeycomb", [18, 3, 1], [true, true, false], 3, 1.0),
            ("fcc", [17, 2, 2], [true, false, true], 3, 1.0),
            // A row longer than one step of the flat on-site pass (64 sites).
            ("simple-cubic", [150, 2, 2], [true, false, true], 1, 1.0),
            // Runs of rows (see `runs_of_rows_are_taken`): periodic and open rows and
            // planes, vacancies, a reach of two cells, and bonds that step along a1 and a2
            // at once (triangular).
            ("simple-cubic", [21, 6, 3], [true, true, false], 3, 1.0),
            ("simple-cubic", [19, 7, 2], [false, false, true], 2, 0.9),
            ("simple-cubic", [24, 8, 3], [true, true, true], 4, 1.0),
            ("triangular", [17, 6, 2], [true, true, false], 2, 1.0),
        ];
        // A tilted axis, and the axes and absent anisotropy for which the on-site pass runs
        // over flat numbers.
        let axes = [TILTED, (0.3, [0.0, 0.0, 2.0]), (-0.2, [1.0, 0.0, 0.0]), (0.0, [0.3, 0.1, 0.5])];
        for ((name, cells, periodic, shells, occ), anisotropy) in
            cases.into_iter().flat_map(|case| axes.map(|axis| (case, axis)))
        {
            // A bond with a full tensor in the long simple-cubic rows (single, beside pairs).
            let tensor = name == "simple-cubic" && cells[0] > 10;
            let couplings = TestCouplings { seed: 5, d: 0.7, dmi_shells: shells, tensor, anisotropy };
            let h = test_system(name, cells, periodic, shells, occ, couplings);
            let n = h.len();
            let spins: Vec<Vec3> =
                (0..n).map(|i| if h.cell().is_occupied(i) { unit(9, i) } else { [0.0; 3] }).collect();
            let expected: Vec<Vec3> = (0..n).map(|i| h.field_per_site(&spins, i)).collect();
            // The pairs' sums are the bond-by-bond sums regrouped (the identity of
            // `Entry`, plain algebra): equal up to rounding, relative to the sum of the
            // terms' sizes.
            let onsite = |i: usize| {
                let p = h.k_field[0] * dot(spins[i], h.axis[0]);
                [p * h.axis[0][0] + h.field[0], p * h.axis[0][1] + h.field[1], p * h.axis[0][2] + h.field[2]]
            };
            let scale: f64 =
                h.fused.iter().flatten().map(|b| b.m.iter().flatten().map(|x| x.abs()).sum::<f64>()).sum();
            for i in (0..n).filter(|&i| h.cell().is_occupied(i)) {
                // `pair_field_mev` sums bond by bond (meV); back to tesla.
                let mev = h.pair_field_mev(&spins, i);
                let bonds = mev.map(|x| x / h.mu_mev[0]);
                let on = onsite(i);
                for a in 0..3 {
                    let err = (expected[i][a] - (bonds[a] + on[a])).abs();
                    assert!(
                        err <= 1e-14 * (scale + 10.0),
                        "{name} site {i}: {:?} vs {bonds:?} + {on:?}",
                        expected[i]
                    );
                }
            }
            let by_bond = h.energy(&spins);
            let total = by_bond.total();
            assert!((h.energy_total(&spins) - total).abs() <= 1e-12 * (1.0 + total.abs()), "{name}");
            // By term through the row kernel: the same sums regrouped, term by term, to
            // rounding relative to the sizes of all terms (a term can be a small difference).
            let fast = h.energy_terms(&spins);
            let size = 1.0
                + [by_bond.exchange, by_bond.dmi, by_bond.anisotropy, by_bond.zeeman]
                    .map(f64::abs)
                    .iter()
                    .sum::<f64>();
            for (term, a, b) in [
                ("exchange", fast.exchange, by_bond.exchange),
                ("dmi", fast.dmi, by_bond.dmi),
                ("anisotropy", fast.anisotropy, by_bond.anisotropy),
                ("zeeman", fast.zeeman, by_bond.zeeman),
            ] {
                assert!((a - b).abs() <= 1e-12 * size, "{name} {cells:?} {term}: {a} vs {b}");
            }
            assert_ranges_bitwise(&h, &spins, &expected, &format!("{name} {cells:?} axis {anisotropy:?}"));
        }
    }
}
