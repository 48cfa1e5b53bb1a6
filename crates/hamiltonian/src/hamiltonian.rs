//! The whole Hamiltonian: the terms together, and the fused field evaluation that the
//! integrators call in their inner loop.
//!
//! Every directed bond `i -> j` is compiled into one 3x3 matrix `M_ij` with
//! `-dE/dS_i = sum_j M_ij S_j`: `M = J 1 + T + [D]x` where `[D]x S = S x D`. Exchange and
//! DMI then cost the same nine multiply-adds per bond, with no branch on the kind of
//! coupling. The matrix is stored already divided by `mu_i muB`, so the sum is the
//! effective field in tesla.

use crate::anisotropy::Anisotropy;
use crate::constants::MU_B;
use crate::dmi::Dmi;
use crate::energy::EnergyTerms;
use crate::exchange::Exchange;
use crate::species::Species;
use crate::term::Term;
use crate::zeeman::Zeeman;
use rayon::prelude::*;
use spindrift_lattice::{cross, dot, BondList, Supercell, Vec3};

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
}

/// One compiled directed bond.
#[derive(Debug, Clone, Copy)]
struct FusedBond {
    to: usize,
    offset: [i32; 3],
    /// Linear index difference to the neighbour when no boundary is crossed.
    delta: isize,
    /// `M_ij / (mu_i muB)`, T per unit spin.
    m: [Vec3; 3],
    /// Parts kept apart for energies by term, meV.
    j: f64,
    d: Vec3,
    tensor: Option<[Vec3; 3]>,
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
    /// `mu muB` per basis site, meV/T.
    mu_mev: Vec<f64>,
    /// `2 k / (mu muB)` per basis site, T.
    k_field: Vec<f64>,
    /// `k` per basis site, meV.
    k: Vec<f64>,
    axis: Vec<Vec3>,
    field: Vec3,
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
        let k_field = (0..nb).map(|b| 2.0 * k[b] / mu_mev[b]).collect();
        let [n1, n2, _] = cell.cells();
        let fused = (0..nb)
            .map(|b| {
                bonds
                    .from_basis(b)
                    .iter()
                    .map(|x| {
                        let c = &x.coupling;
                        let o = x.offset;
                        let delta = ((o[2] as isize * n2 as isize + o[1] as isize) * n1 as isize
                            + o[0] as isize)
                            * nb as isize
                            + x.to as isize
                            - b as isize;
                        // [D]x S = S x D = (Sy Dz - Sz Dy, Sz Dx - Sx Dz, Sx Dy - Sy Dx).
                        let d = c.d;
                        let mut m = [[c.j, d[2], -d[1]], [-d[2], c.j, d[0]], [d[1], -d[0], c.j]];
                        if let Some(t) = c.tensor {
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
                        FusedBond { to: x.to, offset: o, delta, m, j: c.j, d, tensor: c.tensor }
                    })
                    .collect()
            })
            .collect();
        let moments = basis_species.iter().map(|s| s.moment).collect();
        let spin_count = cell.spin_count();
        Ok(Self {
            exchange: Exchange::new(&bonds),
            dmi: Dmi::new(&bonds),
            anisotropy: Anisotropy::new(k.clone(), axis.clone()),
            zeeman: Zeeman::new(moments, field),
            cell,
            species,
            bonds,
            fused,
            mu_mev,
            k_field,
            k,
            axis,
            field,
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
    }

    /// Moment of site `i`, μB (0 on a vacant site).
    pub fn moment(&self, i: usize) -> f64 {
        if self.cell.is_occupied(i) {
            self.mu_mev[i % self.mu_mev.len()] / MU_B
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
    pub fn field_range(&self, spins: &[Vec3], start: usize, out: &mut [Vec3]) {
        let nb = self.cell.basis_len();
        let cells = self.cell.cells();
        let (mut c, mut b) = self.cell.decompose(start);
        let occupation = self.cell.occupation();
        for (k, o) in out.iter_mut().enumerate() {
            let i = start + k;
            if occupation.is_some_and(|occ| !occ[i]) {
                *o = [0.0; 3];
            } else {
                let mut h = [0.0; 3];
                for bond in &self.fused[b] {
                    if let Some(j) = self.neighbour(i, c, bond, cells) {
                        let s = spins[j];
                        for a in 0..3 {
                            h[a] += bond.m[a][0] * s[0] + bond.m[a][1] * s[1] + bond.m[a][2] * s[2];
                        }
                    }
                }
                let e = self.axis[b];
                let p = self.k_field[b] * dot(spins[i], e);
                for a in 0..3 {
                    o[a] = h[a] + p * e[a] + self.field[a];
                }
            }
            b += 1;
            if b == nb {
                b = 0;
                c[0] += 1;
                if c[0] == cells[0] {
                    c[0] = 0;
                    c[1] += 1;
                    if c[1] == cells[1] {
                        c[1] = 0;
                        c[2] += 1;
                    }
                }
            }
        }
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
        let mut h = [0.0; 3];
        for bond in &self.fused[b] {
            if let Some(j) = self.neighbour(i, c, bond, cells) {
                let s = spins[j];
                for a in 0..3 {
                    h[a] += bond.m[a][0] * s[0] + bond.m[a][1] * s[1] + bond.m[a][2] * s[2];
                }
            }
        }
        let mu = self.mu_mev[b];
        [h[0] * mu, h[1] * mu, h[2] * mu]
    }

    /// On-site energy of site `i` holding spin `s` (anisotropy plus Zeeman), meV.
    #[inline]
    pub fn onsite_energy(&self, i: usize, s: Vec3) -> f64 {
        let b = i % self.mu_mev.len();
        -self.k[b] * dot(s, self.axis[b]).powi(2) - self.mu_mev[b] * dot(self.field, s)
    }

    /// Energy change (meV) when site `i` goes from `spins[i]` to `new`.
    #[inline]
    pub fn energy_change(&self, spins: &[Vec3], i: usize, new: Vec3) -> f64 {
        let old = spins[i];
        let h = self.pair_field_mev(spins, i);
        let ds = [new[0] - old[0], new[1] - old[1], new[2] - old[2]];
        -dot(ds, h) + self.onsite_energy(i, new) - self.onsite_energy(i, old)
    }

    /// Energy by term, meV (totals, every pair once). Deterministic for any thread count.
    pub fn energy(&self, spins: &[Vec3]) -> EnergyTerms {
        let partial: Vec<EnergyTerms> = spins
            .par_chunks(CHUNK)
            .enumerate()
            .map(|(k, chunk)| self.energy_range(spins, k * CHUNK, chunk.len()))
            .collect();
        partial.iter().fold(EnergyTerms::default(), |acc, e| acc.add(e))
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
