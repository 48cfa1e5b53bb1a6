//! Moment-weighted magnetisation, in total, by species and by layer.
//!
//! `m = sum_i mu_i S_i / sum_i mu_i` (INTERFACE.md), with `mu_i` the moment of site `i` in
//! Bohr magnetons, so `|m| <= 1` and a uniform state has `|m| = 1` whatever the mixture of
//! moments. The same formula restricted to the sites of one species or one layer gives the
//! partial magnetisations. Vacant sites hold the zero spin and carry no weight.
//!
//! All three are gathered in one pass over the spins, in chunks of
//! [`spindrift_hamiltonian::CHUNK`] sites whose partial sums are added in chunk order, so
//! the result is bitwise the same for any number of threads.

use crate::chunks::ChunkPlanes;
use crate::error::ObserveError;
use rayon::prelude::*;
use spindrift_hamiltonian::{Hamiltonian, CHUNK};
use spindrift_lattice::Vec3;

/// Magnetisations of one spin configuration (dimensionless, each `|m| <= 1`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Magnetization {
    /// Moment-weighted magnetisation of the whole system.
    pub total: Vec3,
    /// The same over the sites of each species, indexed like
    /// [`Hamiltonian::species`]; zero for a species without sites.
    pub by_species: Vec<Vec3>,
    /// The same over the sites of each layer along `a3`, indexed like
    /// [`spindrift_lattice::Supercell::layer`]; zero for a layer without spins.
    pub by_layer: Vec<Vec3>,
}

/// The weights of every site, fixed at construction.
#[derive(Debug, Clone)]
struct Weights {
    len: usize,
    /// Sites of one basis site in a row (`n1`; a plane, `n1 n2`, for a one-site basis):
    /// the pieces that the sums take whole (see `Supercell` for the site order).
    piece: usize,
    basis_len: usize,
    /// Sites per plane of cells, `n1 n2 nb`.
    plane: usize,
    layers_per_cell: usize,
    /// Moment of each basis site, μB.
    moment: Vec<f64>,
    species: Vec<usize>,
    /// Layer of each basis site within its cell.
    layer: Vec<usize>,
    /// Inverse total moment of the occupied sites (0 when there are none), 1/μB.
    inv_total: f64,
    inv_species: Vec<f64>,
    inv_layer: Vec<f64>,
    chunks: ChunkPlanes,
    /// Partial sums per chunk: total, species, then `span * layers_per_cell` layers.
    slot: usize,
}

/// Computes [`Magnetization`]s of a system.
///
/// Holds the per-basis-site weights and a scratch buffer of partial sums (a few vectors per
/// chunk of [`CHUNK`] sites, no per-spin data), so a measurement allocates nothing beyond
/// its result, and nothing at all with [`MagnetizationObserver::observe_into`].
#[derive(Debug, Clone)]
pub struct MagnetizationObserver {
    weights: Weights,
    scratch: Vec<Vec3>,
}

impl MagnetizationObserver {
    /// Prepares the weights of the sites of `hamiltonian` (moments from its species,
    /// occupation from its supercell).
    pub fn new(hamiltonian: &Hamiltonian) -> Self {
        let cell = hamiltonian.cell();
        let crystal = cell.crystal();
        let nb = cell.basis_len();
        let [n1, n2, _] = cell.cells();
        let species_count = hamiltonian.species().len();
        let layer_count = cell.layer_count();
        let layers_per_cell = cell.layers_per_cell();
        let species: Vec<usize> = crystal.basis.iter().map(|b| b.species).collect();
        let moment: Vec<f64> = species.iter().map(|&s| hamiltonian.species()[s].moment).collect();
        let layer = cell.basis_layers().to_vec();

        let mut total = 0.0;
        let mut by_species = vec![0.0; species_count];
        let mut by_layer = vec![0.0; layer_count];
        for (i, b) in (0..cell.len()).zip(cell.basis_from(0)) {
            if cell.is_occupied(i) {
                total += moment[b];
                by_species[species[b]] += moment[b];
                by_layer[cell.layer(i)] += moment[b];
            }
        }
        let inverse = |w: f64| if w > 0.0 { 1.0 / w } else { 0.0 };
        let chunks = ChunkPlanes::new(cell.len(), n1 * n2 * nb);
        let slot = 1 + species_count + chunks.span * layers_per_cell;
        let scratch = vec![[0.0; 3]; chunks.count * slot];
        Self {
            weights: Weights {
                len: cell.len(),
                piece: if nb == 1 { n1 * n2 } else { n1 },
                basis_len: nb,
                plane: n1 * n2 * nb,
                layers_per_cell,
                moment,
                species,
                layer,
                inv_total: inverse(total),
                inv_species: by_species.into_iter().map(inverse).collect(),
                inv_layer: by_layer.into_iter().map(inverse).collect(),
                chunks,
                slot,
            },
            scratch,
        }
    }

    /// Number of species (length of [`Magnetization::by_species`]).
    pub fn species_count(&self) -> usize {
        self.weights.inv_species.len()
    }

    /// Number of layers (length of [`Magnetization::by_layer`]).
    pub fn layer_count(&self) -> usize {
        self.weights.inv_layer.len()
    }

    /// The magnetisations of `spins` (one unit vector per site, zero on vacant sites).
    pub fn observe(&mut self, spins: &[Vec3]) -> Result<Magnetization, ObserveError> {
        let mut out = Magnetization::default();
        self.observe_into(spins, &mut out)?;
        Ok(out)
    }

    /// Like [`Self::observe`], writing into `out`; its vectors are resized once and then
    /// reused, so repeated calls do not allocate.
    pub fn observe_into(&mut self, spins: &[Vec3], out: &mut Magnetization) -> Result<(), ObserveError> {
        let w = &self.weights;
        if spins.len() != w.len {
            return Err(ObserveError::LengthMismatch { expected: w.len, got: spins.len() });
        }
        self.scratch
            .par_chunks_mut(w.slot)
            .zip(spins.par_chunks(CHUNK))
            .enumerate()
            .for_each(|(k, (acc, chunk))| w.accumulate(ChunkPlanes::start(k), chunk, acc));

        let species_count = w.inv_species.len();
        out.by_species.clear();
        out.by_species.resize(species_count, [0.0; 3]);
        out.by_layer.clear();
        out.by_layer.resize(w.inv_layer.len(), [0.0; 3]);
        let mut total = [0.0; 3];
        for (k, acc) in self.scratch.chunks(w.slot).enumerate() {
            add(&mut total, acc[0]);
            for s in 0..species_count {
                add(&mut out.by_species[s], acc[1 + s]);
            }
            let planes = w.chunks.planes(k);
            let first = planes.start * w.layers_per_cell;
            let local = &acc[1 + species_count..];
            for l in 0..planes.len() * w.layers_per_cell {
                add(&mut out.by_layer[first + l], local[l]);
            }
        }
        out.total = scale(total, w.inv_total);
        for (m, inv) in out.by_species.iter_mut().zip(&w.inv_species) {
            *m = scale(*m, *inv);
        }
        for (m, inv) in out.by_layer.iter_mut().zip(&w.inv_layer) {
            *m = scale(*m, *inv);
        }
        Ok(())
    }
}

impl Weights {
    /// Sums `mu_i S_i` over one chunk into its slot of partial sums.
    ///
    /// The chunk is cut into pieces of one basis site (a row's `n1` sites of it; for a
    /// one-site basis, whole planes), each summed first and weighted once, so that the
    /// accumulators of total, species and layer are touched once per piece rather than
    /// once per spin, and the sums vectorise (the order of additions is fixed by the
    /// chunk, so the result is the same for any thread count).
    fn accumulate(&self, start: usize, chunk: &[Vec3], acc: &mut [Vec3]) {
        acc.fill([0.0; 3]);
        let (nb, piece) = (self.basis_len, self.piece);
        let species_count = self.inv_species.len();
        let (head, layers) = acc.split_at_mut(1 + species_count);
        let first_plane = start / self.plane;
        let mut pos = 0;
        while pos < chunk.len() {
            let site = start + pos;
            let end = (pos + piece - site % piece).min(chunk.len());
            let b = (site / piece) % nb;
            let sum = sum_contiguous(&chunk[pos..end]);
            let mu = self.moment[b];
            let v = [mu * sum[0], mu * sum[1], mu * sum[2]];
            add(&mut head[0], v);
            add(&mut head[1 + self.species[b]], v);
            let layer_base = (site / self.plane - first_plane) * self.layers_per_cell;
            add(&mut layers[layer_base + self.layer[b]], v);
            pos = end;
        }
    }
}

/// Sum of 3-vectors in eight interleaved partial sums (so that it vectorises), added in a
/// fixed order at the end.
#[inline]
fn sum_contiguous(spins: &[Vec3]) -> Vec3 {
    const LANES: usize = 8;
    let mut lanes = [[0.0; 3]; LANES];
    let mut blocks = spins.chunks_exact(LANES);
    for block in &mut blocks {
        for (l, s) in lanes.iter_mut().zip(block) {
            add(l, *s);
        }
    }
    let mut total = [0.0; 3];
    for l in lanes {
        add(&mut total, l);
    }
    for s in blocks.remainder() {
        add(&mut total, *s);
    }
    total
}

#[inline(always)]
fn add(a: &mut Vec3, b: Vec3) {
    a[0] += b[0];
    a[1] += b[1];
    a[2] += b[2];
}

#[inline(always)]
fn scale(a: Vec3, s: f64) -> Vec3 {
    [a[0] * s, a[1] * s, a[2] * s]
}
