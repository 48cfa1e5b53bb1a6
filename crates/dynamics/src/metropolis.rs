//! Metropolis Monte Carlo with single-spin moves.
//!
//! # Moves
//!
//! Each attempt picks one of three trial moves for spin `S` (fixed probabilities, so the
//! mixture is as symmetric as its parts). All use the random numbers of one
//! [`NoiseStream::trial`] draw: a `pick` uniform on `{0, 1/8, ..., 7/8}`, an isotropic
//! vector `g` (a uniform direction on the sphere times a radius uniform on `(0, 3)`, so that
//! `<|g|^2> = 3` as for three standard normal deviates) and the acceptance test's `u`:
//!
//! * with probability [`P_CONE`], a random-walk move `S' = (S + sigma g) / |S + sigma g|`:
//!   since the law of `g` is isotropic, the density of `S'` depends only on the angle
//!   between `S` and `S'`, so the move is symmetric; `sigma` sets its reach and is tuned
//!   (see below);
//! * with probability [`P_UNIFORM`], a new direction uniform on the sphere, `S' = g / |g|`;
//!   it decorrelates fast at high temperature;
//! * otherwise the reflection `S' = -S`, which crosses anisotropy barriers that small moves
//!   cannot.
//!
//! The probabilities are multiples of `1/8`, which `pick` resolves exactly.
//!
//! A move that changes the energy by `dE` (meV, [`Hamiltonian::energy_change`]) is
//! accepted with probability `min(1, exp(-dE / kB T))` (N. Metropolis, A. W. Rosenbluth,
//! M. N. Rosenbluth, A. H. Teller and E. Teller, J. Chem. Phys. 21, 1087 (1953)): when
//! `dE <= 0` or `u < exp(-dE / kB T)` for a uniform `u` on `[0, 1)` in steps of `2^-32`,
//! with the exponential of `crate::acceptance` (no library call, the same bits on every
//! instruction-set level). At `T = 0` only moves with `dE <= 0` are accepted.
//!
//! # Adapting the random-walk move
//!
//! When a sweep is called with `adapt = true`, `sigma` is updated after the sweep from the
//! acceptance rate `r` of its random-walk moves: `sigma <- sigma (1/2 + r) / (3/2 - r)`, which
//! leaves `sigma` alone at `r = 1/2`, grows it when most moves pass and shrinks it when most
//! fail, by at most a factor 3 per sweep; `sigma` stays within
//! [[`SIGMA_MIN`], [`SIGMA_MAX`]]. Aiming at one half is common practice for
//! random-walk moves. Adapting breaks detailed balance, so the engine adapts during
//! equilibration only and measures with `adapt = false`, where `sigma` is fixed and the
//! chain samples the Boltzmann distribution exactly. `sigma` is state to checkpoint
//! ([`Metropolis::sigma`], [`Metropolis::set_sigma`]).
//!
//! # Energy bookkeeping
//!
//! [`SweepStats::energy_change`] is the sum of the accepted energy changes of a sweep, so
//! a sampler can follow the total energy without evaluating it after every sweep. The
//! changes are summed as integers in units of `2^-32` meV: an integer sum does not depend
//! on how rayon groups the chunks, so it is the same for any thread count, which a
//! floating-point reduction would not guarantee.
//!
//! # Moment bookkeeping
//!
//! [`SweepStats::moment`] is the fixed-point moment sum of [`MomentTally`] of the spins
//! after the sweep, gathered from the decided spins while they are still in the cache:
//! every occupied site is decided exactly once per sweep, in one class, and keeps that
//! spin to the end of the sweep, and the tally is an integer sum, independent of order. So
//! a sampler reads the magnetisation of every sweep without a pass over the spins, and it
//! equals [`MomentTally::units`] of the spins bit for bit.
//!
//! # Parallel and reproducible
//!
//! Sites are coloured so that no bond joins two sites of one colour ([`Colouring`]; each
//! class holds one basis site); a sweep visits the classes in order and updates all sites
//! of a class at once (a thick film: of a class within a block of layers, see below).
//! Within a class the trial of site `i` in sweep `n` uses only the
//! fixed spins of other classes and the random numbers `trial(n, i)` of stream 1, drawn for
//! every site whatever its move (one Philox block per site; see `spindrift_noise`'s
//! `trial.rs` for the layout and precision of the words). So a sweep gives bitwise the
//! same spins for any thread count.
//!
//! Before this layout (one draw per trial), a sweep drew two Philox blocks per site (three
//! Gaussians for `g` and four uniforms); the same seed therefore gives a different, equally
//! valid chain than runs of earlier versions.
//!
//! Since the trials of a class read only spins of other classes, a decided spin can
//! replace its old one at once. Deciding runs 64 sites at a time in phases without
//! branches, so that they vectorise: random numbers in bulk, trial spins (every move
//! computed, one selected), energy changes ([`Hamiltonian::energy_changes_in`]),
//! acceptance; then the 64 decided spins are written back while their cache lines are
//! still in L1. How a sweep is shared among threads:
//!
//! * A film open along `a3` with enough layers (at least eight for bonds that reach the
//!   next layer) is swept in blocks of layers (`layer_blocks.rs`): the even blocks in
//!   parallel, each with the result of class after class (the classes go through the
//!   block in a wavefront over tiles, so it is read from memory once), then the odd
//!   blocks; two parallel regions per sweep and no buffer (with more threads than a
//!   phase has blocks, that phase goes class by class through a buffer, with the same
//!   result). The
//!   blocks follow from the lattice alone, not from the thread count. This changes the
//!   order of the updates (not their law): a block's sites see the new spins of the
//!   blocks before them, where the passes below update a class over the whole lattice at
//!   once, so the chain of such a film differs from what the passes would give (and from
//!   versions before the blocks).
//! * Otherwise class by class. Each thread takes a slab of rows of cells (`slabs.rs`; one
//!   thread, the whole lattice). Per class, the trials of the sites next to another slab
//!   are decided first, by all threads from the whole array into a buffer; then each
//!   thread writes back those of its slab and decides the rest of its slab in place, in
//!   tiles that keep the neighbours in the cache, with no barrier until the class is done.
//! * Where slabs do not pay (too few rows for the threads), class by class: blocks of at
//!   most [`BLOCK`] sites, decided in parallel into a buffer, then written back in
//!   parallel over chunks of the spin array.
//!
//! The thread count changes no result (tested): which thread decides a trial and when it
//! is written back do not matter, and the sums are integers. The blocks of layers save
//! two parallel regions per sweep of a two-colour lattice (each costs a wake-up of the
//! other threads, tens of microseconds on a virtual machine): on this project's 2-core
//! machine, sweeps of 64x64x8 ran about 40% faster and of 128x128x8 about 13% (see
//! DEVELOPERS.md). Memory: 4 bytes per site for the class lists; with several threads, a
//! buffer of 24 bytes per site of the largest class's boundary (or of `min(largest class,
//! BLOCK)` sites, or, for a film in blocks with more threads than blocks per phase, of a
//! class's sites in one phase: about 6 bytes per site of a two-colour lattice) and the
//! slabs' lists (at most 4 bytes per boundary site).

use crate::acceptance::boltzmann_factor;
use crate::colouring::Colouring;
use crate::error::{check_len, StepError};
use crate::layer_blocks::LayerBlocks;
use crate::moment::{component_units, MomentTally};
use crate::slabs::Slabs;
use crate::trial_groups::trial_groups;
use rayon::prelude::*;
use spindrift_hamiltonian::constants::K_B;
use spindrift_hamiltonian::{Hamiltonian, TrialScratch, CHUNK};
use spindrift_lattice::{dot, Supercell, Vec3};
use spindrift_noise::{NoiseStream, STREAM_METROPOLIS};
use std::ops::Range;

/// Probability of the random-walk move (a multiple of 1/8, see the module documentation).
pub const P_CONE: f64 = 0.75;
/// Probability of the uniform move (a multiple of 1/8; the reflection takes the rest,
/// 0.125).
pub const P_UNIFORM: f64 = 0.125;
// `pick` resolves eighths only.
const _: () = assert!(P_CONE * 8.0 == (P_CONE * 8.0) as u32 as f64);
const _: () = assert!(P_UNIFORM * 8.0 == (P_UNIFORM * 8.0) as u32 as f64);
/// Smallest random-walk width.
pub const SIGMA_MIN: f64 = 1e-6;
/// Largest random-walk width; at this width the move is practically uniform.
pub const SIGMA_MAX: f64 = 100.0;
/// Initial random-walk width.
pub const SIGMA_START: f64 = 0.5;
/// Sites per block of a colour where several threads share a class without slabs.
pub const BLOCK: usize = 64 * CHUNK;

/// Units per meV of the integer energy sum (see "Energy bookkeeping" in the module
/// documentation): `2^32`, so a rounding costs at most `2^-33` meV per accepted move.
const ENERGY_SCALE: f64 = 4_294_967_296.0;

/// Sites whose trials are decided together, in buffers on the stack (about 8 KiB).
const DRAWS: usize = 64;

/// Counts of one sweep.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SweepStats {
    /// Accepted trial moves.
    pub accepted: u64,
    /// Attempted trial moves (one per occupied site).
    pub attempted: u64,
    /// Sum of the energy changes of the accepted moves, meV: the total energy after the
    /// sweep minus before, up to rounding (each change is rounded to a multiple of
    /// `2^-32` meV; see the module documentation).
    pub energy_change: f64,
    /// The fixed-point moment sum of the spins after the sweep, per component, exactly
    /// [`MomentTally::units`] of them (see the module documentation).
    pub moment: [i128; 3],
}

impl SweepStats {
    /// Fraction of moves accepted (0 when none were attempted).
    pub fn acceptance(&self) -> f64 {
        if self.attempted == 0 {
            0.0
        } else {
            self.accepted as f64 / self.attempted as f64
        }
    }
}

#[derive(Debug, Clone, Copy, Default)]
struct Counts {
    accepted: u64,
    attempted: u64,
    cone_accepted: u64,
    cone_attempted: u64,
    /// Sum of accepted energy changes in units of `1 / ENERGY_SCALE` meV.
    energy_change: i128,
    /// Fixed-point moment sum of the decided spins (units of [`MomentTally`]).
    moment: [i128; 3],
}

impl Counts {
    fn add(self, o: Self) -> Self {
        Self {
            accepted: self.accepted + o.accepted,
            attempted: self.attempted + o.attempted,
            cone_accepted: self.cone_accepted + o.cone_accepted,
            cone_attempted: self.cone_attempted + o.cone_attempted,
            energy_change: self.energy_change + o.energy_change,
            moment: crate::moment::add(self.moment, o.moment),
        }
    }
}

/// Metropolis sampler. Owns the colouring and a buffer; the caller owns the spins.
#[derive(Debug, Clone)]
pub struct Metropolis {
    stream: NoiseStream,
    colouring: Colouring,
    tally: MomentTally,
    buffer: Vec<Vec3>,
    sigma: f64,
    len: usize,
    /// The split among threads for the thread count `slab_threads` (0: none made yet),
    /// `None` where it does not pay (see [`Slabs::new`]).
    slabs: Option<Slabs>,
    slab_threads: usize,
    /// The blocks of a film thick enough for them (see `layer_blocks.rs`), which then
    /// decide every sweep on any thread count.
    layer_blocks: Option<LayerBlocks>,
}

impl Metropolis {
    /// A sampler for the supercell of `h`, drawing from stream 1 of `seed`. Colours the
    /// bond graph once.
    pub fn new(h: &Hamiltonian, seed: u64) -> Result<Self, StepError> {
        let colouring = Colouring::new(h)?;
        let layer_blocks = LayerBlocks::new(h, &colouring);
        Ok(Self {
            stream: NoiseStream::new(seed, STREAM_METROPOLIS),
            colouring,
            tally: MomentTally::new(h),
            // Sized by the first sweep that needs it (one thread, with no slab boundary, none).
            buffer: Vec::new(),
            sigma: SIGMA_START,
            len: h.len(),
            slabs: None,
            slab_threads: 0,
            layer_blocks,
        })
    }

    /// The colouring of the bond graph.
    pub fn colouring(&self) -> &Colouring {
        &self.colouring
    }

    /// The number of blocks of layers a sweep decides in turn (see the module
    /// documentation), or 0 where sweeps go class by class over the whole lattice.
    pub fn layer_blocks(&self) -> usize {
        self.layer_blocks.as_ref().map_or(0, LayerBlocks::len)
    }

    /// The fixed-point moment sum that [`SweepStats::moment`] is given in.
    pub fn tally(&self) -> &MomentTally {
        &self.tally
    }

    /// Width of the random-walk move (dimensionless, relative to the unit spin).
    pub fn sigma(&self) -> f64 {
        self.sigma
    }

    /// Sets the width of the random-walk move, clamped to [[`SIGMA_MIN`], [`SIGMA_MAX`]]
    /// (e.g. when resuming from a checkpoint).
    pub fn set_sigma(&mut self, sigma: f64) {
        self.sigma = if sigma.is_nan() { SIGMA_START } else { sigma.clamp(SIGMA_MIN, SIGMA_MAX) };
    }

    /// Bytes held per site of the supercell (colour lists and, once a sweep has run on
    /// several threads, the buffer and the split of the lattice).
    pub fn bytes_per_site(&self) -> f64 {
        let buffers = self.buffer.len() * std::mem::size_of::<Vec3>();
        let slabs = self.slabs.as_ref().map_or(0, Slabs::bytes);
        let blocks = self.layer_blocks.as_ref().map_or(0, LayerBlocks::bytes);
        self.colouring.bytes_per_site(self.len) + (buffers + slabs + blocks) as f64 / self.len.max(1) as f64
    }

    /// One sweep: one trial move per occupied site, at `temperature` (K). `sweep_index`
    /// selects the random numbers (pass `0, 1, 2, ...`, and the same index again when a
    /// run resumes). With `adapt`, tunes the random-walk width after the sweep (equilibration
    /// only; see the module documentation).
    pub fn sweep(
        &mut self,
        h: &Hamiltonian,
        spins: &mut [Vec3],
        temperature: f64,
        sweep_index: u64,
        adapt: bool,
    ) -> Result<SweepStats, StepError> {
        check_len(self.len, spins.len())?;
        check_len(self.len, h.len())?;
        if !(temperature.is_finite() && temperature >= 0.0) {
            return Err(StepError::BadParameter {
                name: "temperature",
                value: temperature,
                expected: "finite and >= 0 K",
            });
        }
        if let Some(blocks) = self.layer_blocks.take() {
            let stats = self.sweep_in_layer_blocks(&blocks, h, spins, temperature, sweep_index, adapt);
            self.layer_blocks = Some(blocks);
            return Ok(stats);
        }
        let threads = rayon::current_num_threads();
        if self.slab_threads != threads {
            // Once per run (or when the thread count changes), not per sweep.
            self.slabs = Slabs::new(h, &self.colouring, threads);
            self.slab_threads = threads;
        }
        match self.slabs.take() {
            Some(slabs) => {
                let stats = self.sweep_in_slabs(&slabs, h, spins, temperature, sweep_index, adapt);
                self.slabs = Some(slabs);
                Ok(stats)
            }
            None => self.sweep_in_blocks(h, spins, temperature, sweep_index, adapt, BLOCK),
        }
    }

    /// [`Metropolis::sweep`] with colour blocks of `block_len` sites (at least one, at most
    /// [`BLOCK`]), for arguments already checked.
    fn sweep_in_blocks(
        &mut self,
        h: &Hamiltonian,
        spins: &mut [Vec3],
        temperature: f64,
        sweep_index: u64,
        adapt: bool,
        block_len: usize,
    ) -> Result<SweepStats, StepError> {
        debug_assert!((1..=BLOCK).contains(&block_len));
        let need = self.colouring.largest_class().min(block_len);
        if self.buffer.len() < need {
            self.buffer.resize(need, [0.0; 3]);
        }
        // At T = 0 this is infinite and only downhill moves pass.
        let beta = 1.0 / (K_B * temperature);
        let stream = self.stream;
        let sigma = self.sigma;
        let n = spins.len();
        let mut total = Counts::default();

        for c in 0..self.colouring.len() {
            let class = self.colouring.class(c);
            // Every site of a class has the same basis site.
            let weight = class_weight(&self.tally, class, h.cell());
            let mut block_start = 0;
            while block_start < class.len() {
                let block = &class[block_start..(block_start + block_len).min(class.len())];
                let buffer = &mut self.buffer[..block.len()];
                // Decide every trial of the block; the spins of this colour do not change
                // until all are decided, and no trial reads another spin of its colour.
                let ctx = TrialContext { h, stream, sigma, beta, step: sweep_index, weight };
                total = total.add(decide_in_chunks(&ctx, spins, buffer, block));

                // Write back, in parallel over the chunks of the spin array that hold
                // sites of this block.
                let buffer = &self.buffer[..block.len()];
                let colouring = &self.colouring;
                let block_end = block_start + block.len();
                let first_chunk = block[0] as usize / CHUNK;
                let last_chunk = block[block.len() - 1] as usize / CHUNK;
                let write = |k: usize, chunk: &mut [Vec3]| {
                    let lo = colouring.offset(c, k).max(block_start);
                    let hi = colouring.offset(c, k + 1).min(block_end);
                    let base = k * CHUNK;
                    for (&i, &s) in class[lo..hi].iter().zip(&buffer[lo - block_start..hi - block_start]) {
                        chunk[i as usize - base] = s;
                    }
                };
                let region = &mut spins[first_chunk * CHUNK..((last_chunk + 1) * CHUNK).min(n)];
                if last_chunk == first_chunk {
                    write(first_chunk, region);
                } else {
                    region
                        .par_chunks_mut(CHUNK)
                        .enumerate()
                        .for_each(|(kk, chunk)| write(first_chunk + kk, chunk));
                }
                block_start = block_end;
            }
        }
        Ok(self.finish(total, adapt))
    }

    /// [`Metropolis::sweep`] split among threads by `slabs` (made for the current thread
    /// count), for arguments already checked. Per class: the boundary trials are decided
    /// by all threads from the whole array, then each thread writes back the boundary
    /// results of its slab and decides its interior in place, tile by tile, with no
    /// barrier until the class is done.
    fn sweep_in_slabs(
        &mut self,
        slabs: &Slabs,
        h: &Hamiltonian,
        spins: &mut [Vec3],
        temperature: f64,
        sweep_index: u64,
        adapt: bool,
    ) -> SweepStats {
        if self.buffer.len() < slabs.largest_boundary() {
            self.buffer.resize(slabs.largest_boundary(), [0.0; 3]);
        }
        let Self { stream, colouring, tally, buffer, sigma, .. } = self;
        let beta = 1.0 / (K_B * temperature);
        let mut total = Counts::default();
        for c in 0..colouring.len() {
            let class = colouring.class(c);
            let weight = class_weight(tally, class, h.cell());
            let ctx = TrialContext { h, stream: *stream, sigma: *sigma, beta, step: sweep_index, weight };
            let boundary = slabs.boundary(c);
            let decided = &mut buffer[..boundary.len()];
            total = total.add(decide_in_chunks(&ctx, spins, decided, boundary));
            let pass = SlabPass { slabs, c, class, boundary, decided: &buffer[..boundary.len()] };
            total = total.add(slab_pass(&pass, &ctx, 0..slabs.len(), spins));
        }
        self.finish(total, adapt)
    }

    /// [`Metropolis::sweep`] in the blocks of a film (see `layer_blocks.rs`), for
    /// arguments already checked: the even blocks in parallel, then the odd ones.
    fn sweep_in_layer_blocks(
        &mut self,
        blocks: &LayerBlocks,
        h: &Hamiltonian,
        spins: &mut [Vec3],
        temperature: f64,
        sweep_index: u64,
        adapt: bool,
    ) -> SweepStats {
        let ctx = TrialContext {
            h,
            stream: self.stream,
            sigma: self.sigma,
            beta: 1.0 / (K_B * temperature),
            step: sweep_index,
            weight: 0.0,
        };
        let threads = rayon::current_num_threads();
        let pass = BlockPass { blocks, colouring: &self.colouring, tally: &self.tally, cell: h.cell() };
        // The buffer of a phase's class, where a phase has fewer blocks than threads.
        let mut need = 0;
        for p in (0..2).filter(|&p| threads > blocks.phase(p).len()) {
            for c in 0..self.colouring.len() {
                need = need.max(pass.class_len(c, blocks.phase(p)));
            }
        }
        if self.buffer.len() < need {
            self.buffer.resize(need, [0.0; 3]);
        }
        let mut total = Counts::default();
        for p in 0..2 {
            let ks = blocks.phase(p);
            if threads <= ks.len() {
                total = total.add(block_phase(&pass, &ctx, ks, spins, 0));
                continue;
            }
            // Fewer blocks than threads: class by class, through the buffer.
            for c in 0..self.colouring.len() {
                let ctx = TrialContext { weight: pass.weight(c), ..ctx };
                let len = pass.class_len(c, ks);
                total = total.add(decide_blocks(&pass, &ctx, c, ks, spins, &mut self.buffer[..len]));
                write_blocks(&pass, c, ks, &self.buffer[..len], spins, 0);
            }
        }
        self.finish(total, adapt)
    }

    /// The statistics of a sweep from its counts; adapts the random-walk width if asked.
    fn finish(&mut self, total: Counts, adapt: bool) -> SweepStats {
        if adapt && total.cone_attempted > 0 {
            let r = total.cone_accepted as f64 / total.cone_attempted as f64;
            self.set_sigma(self.sigma * (0.5 + r) / (1.5 - r));
        }
        SweepStats {
            accepted: total.accepted,
            attempted: total.attempted,
            energy_change: total.energy_change as f64 / ENERGY_SCALE,
            moment: total.moment,
        }
    }
}

/// What the slabs share in the pass of one class (see [`Metropolis::sweep_in_slabs`]).
struct SlabPass<'a> {
    slabs: &'a Slabs,
    /// The class and its sites.
    c: usize,
    class: &'a [u32],
    /// The class's boundary sites and their decided spins.
    boundary: &'a [u32],
    decided: &'a [Vec3],
}

/// The pass of slabs `range` over `spins`, their sites (from the first slab's first);
/// halves run in parallel.
fn slab_pass(pass: &SlabPass<'_>, ctx: &TrialContext<'_>, range: Range<usize>, spins: &mut [Vec3]) -> Counts {
    if range.len() == 1 {
        return slab_class(pass, ctx, range.start, spins);
    }
    let mid = (range.start + range.end) / 2;
    let (a, b) = spins.split_at_mut(pass.slabs.start(mid) - pass.slabs.start(range.start));
    let (x, y) =
        rayon::join(|| slab_pass(pass, ctx, range.start..mid, a), || slab_pass(pass, ctx, mid..range.end, b));
    x.add(y)
}

/// Slab `p`'s part of a class: writes back its boundary results, then decides its
/// interior trials in place. `slab` holds the slab's sites.
fn slab_class(pass: &SlabPass<'_>, ctx: &TrialContext<'_>, p: usize, slab: &mut [Vec3]) -> Counts {
    let origin = pass.slabs.sites(p).start;
    for k in pass.slabs.boundary_in(pass.c, p) {
        slab[pass.boundary[k] as usize - origin] = pass.decided[k];
    }
    let mut counts = Counts::default();
    for r in pass.slabs.interior(pass.c, p) {
        counts =
            counts.add(decide_in_place(ctx, slab, origin, &pass.class[r.start as usize..r.end as usize]));
    }
    counts
}

/// The [`MomentTally`] weight of a colour class's basis site (every site of a class has
/// the same), 0 for an empty class.
fn class_weight(tally: &MomentTally, class: &[u32], cell: &Supercell) -> f64 {
    class.first().map_or(0.0, |&i| tally.weight(cell.basis_of(i as usize)))
}

/// What the blocks of a phase share (see [`Metropolis::sweep_in_layer_blocks`]).
struct BlockPass<'a> {
    blocks: &'a LayerBlocks,
    colouring: &'a Colouring,
    tally: &'a MomentTally,
    /// The supercell: each class's basis site.
    cell: &'a Supercell,
}

/// The blocks `ks` of one phase over `window`, which holds sites `origin ..` and their
/// windows; halves run in parallel, each on its blocks' windows.
fn block_phase(
    pass: &BlockPass<'_>,
    ctx: &TrialContext<'_>,
    ks: &[usize],
    window: &mut [Vec3],
    origin: usize,
) -> Counts {
    match ks {
        [] => Counts::default(),
        [k] => block(pass, ctx, *k, window, origin),
        _ => {
            let (low, high) = ks.split_at(ks.len() / 2);
            let split = pass.blocks.window_start(high[0]);
            let (a, b) = window.split_at_mut(split - origin);
            let (x, y) = rayon::join(
                || block_phase(pass, ctx, low, a, origin),
                || block_phase(pass, ctx, high, b, split),
            );
            x.add(y)
        }
    }
}

/// Decides every site of block `k` in place, in its order; `window` holds sites `origin
/// ..` and every neighbour of the block's sites.
fn block(
    pass: &BlockPass<'_>,
    ctx: &TrialContext<'_>,
    k: usize,
    window: &mut [Vec3],
    origin: usize,
) -> Counts {
    let mut counts = Counts::default();
    for (c, r) in pass.blocks.order(k) {
        let c = *c as usize;
        let sites = &pass.colouring.class(c)[r.start as usize..r.end as usize];
        let ctx = TrialContext { weight: pass.weight(c), ..*ctx };
        counts = counts.add(decide_in_place(&ctx, window, origin, sites));
    }
    counts
}

impl BlockPass<'_> {
    /// The [`MomentTally`] weight of class `c`'s basis site.
    fn weight(&self, c: usize) -> f64 {
        class_weight(self.tally, self.colouring.class(c), self.cell)
    }

    /// Class `c`'s sites in block `k`.
    fn class_sites(&self, c: usize, k: usize) -> &[u32] {
        &self.colouring.class(c)[self.blocks.class_range(c, k)]
    }

    /// Class `c`'s sites in blocks `ks`, in all.
    fn class_len(&self, c: usize, ks: &[usize]) -> usize {
        ks.iter().map(|&k| self.blocks.class_range(c, k).len()).sum()
    }
}

/// Decides class `c`'s sites in blocks `ks` from `spins` into `out` (block after block),
/// in parallel over the blocks and over chunks of each.
fn decide_blocks(
    pass: &BlockPass<'_>,
    ctx: &TrialContext<'_>,
    c: usize,
    ks: &[usize],
    spins: &[Vec3],
    out: &mut [Vec3],
) -> Counts {
    match ks {
        [] => Counts::default(),
        [k] => decide_in_chunks(ctx, spins, out, pass.class_sites(c, *k)),
        _ => {
            let (low, high) = ks.split_at(ks.len() / 2);
            let (a, b) = out.split_at_mut(pass.class_len(c, low));
            let (x, y) = rayon::join(
                || decide_blocks(pass, ctx, c, low, spins, a),
                || decide_blocks(pass, ctx, c, high, spins, b),
            );
            x.add(y)
        }
    }
}

/// Writes the spins [`decide_blocks`] decided for class `c` in blocks `ks` into `window`
/// (sites `origin ..`), in parallel over the blocks' windows.
fn write_blocks(
    pass: &BlockPass<'_>,
    c: usize,
    ks: &[usize],
    decided: &[Vec3],
    window: &mut [Vec3],
    origin: usize,
) {
    match ks {
        [] => {}
        [k] => {
            for (&i, s) in pass.class_sites(c, *k).iter().zip(decided) {
                window[i as usize - origin] = *s;
            }
        }
        _ => {
            let (low, high) = ks.split_at(ks.len() / 2);
            let (a, b) = decided.split_at(pass.class_len(c, low));
            let split = pass.blocks.window_start(high[0]);
            let (wa, wb) = window.split_at_mut(split - origin);
            rayon::join(
                || write_blocks(pass, c, low, a, wa, origin),
                || write_blocks(pass, c, high, b, wb, split),
            );
        }
    }
}

/// Decides the trials of `sites` into `out`, in parallel chunks of [`CHUNK`] sites.
fn decide_in_chunks(ctx: &TrialContext<'_>, spins: &[Vec3], out: &mut [Vec3], sites: &[u32]) -> Counts {
    // Chunks of at most `CHUNK` trials, and one per thread where that leaves at least a
    // group of trials (`DRAWS`) to each: a slab's boundary of a few thousand sites, which
    // the slab passes decide before anything else, went to one thread while the others
    // waited. The chunks change no result: every trial reads only `spins`, groups of
    // trials give the same bits however they are cut, and the counts are integer sums.
    let chunk =
        sites.len().div_ceil(rayon::current_num_threads()).next_multiple_of(DRAWS).clamp(DRAWS, CHUNK);
    if sites.len() <= chunk {
        decide(ctx, spins, out, sites)
    } else {
        out.par_chunks_mut(chunk)
            .zip(sites.par_chunks(chunk))
            .map(|(o, s)| decide(ctx, spins, o, s))
            .reduce(Counts::default, Counts::add)
    }
}

/// What every trial of one class shares.
#[derive(Clone, Copy)]
struct TrialContext<'a> {
    h: &'a Hamiltonian,
    stream: NoiseStream,
    sigma: f64,
    /// `1 / kB T`, 1/meV (infinite at 0 K).
    beta: f64,
    /// The sweep index, the step of the random numbers.
    step: u64,
    /// The [`MomentTally`] weight of the class's basis site, μB.
    weight: f64,
}

/// Where the decided spins of a group of trials go: the spins they are decided from,
/// and a store for the decisions.
trait Decisions {
    /// The spins of sites `origin() ..`.
    fn spins(&self) -> &[Vec3];
    /// The site of `spins()[0]`.
    fn origin(&self) -> usize;
    /// Keeps the decided spins of `sites`, components `new` (x, y, z), the group of trials
    /// from position `k0` of the call's site list; `stretch` is where `spins()` holds them
    /// as one stretch, if it does (see [`stretch`]).
    fn store(&mut self, k0: usize, sites: &[u32], stretch: Option<Stretch>, new: [&[f64]; 3]);
}

/// Decisions into a buffer, the spins unchanged (the trials of one class may then be
/// decided by several threads from one array).
struct IntoBuffer<'a> {
    spins: &'a [Vec3],
    out: &'a mut [Vec3],
}

impl Decisions for IntoBuffer<'_> {
    #[inline(always)]
    fn spins(&self) -> &[Vec3] {
        self.spins
    }
    #[inline(always)]
    fn origin(&self) -> usize {
        0
    }
    #[inline(always)]
    fn store(&mut self, k0: usize, _: &[u32], _: Option<Stretch>, new: [&[f64]; 3]) {
        let [x, y, z] = new;
        for (((o, x), y), z) in self.out[k0..k0 + x.len()].iter_mut().zip(x).zip(y).zip(z) {
            *o = [*x, *y, *z];
        }
    }
}

/// Decisions written straight into the spins, `spins[j]` being site `origin + j`: the
/// trials of a class read only spins of other classes, so a decided spin can replace
/// its old one at once, while its cache line is still at hand.
struct InPlace<'a> {
    spins: &'a mut [Vec3],
    origin: usize,
}

impl Decisions for InPlace<'_> {
    #[inline(always)]
    fn spins(&self) -> &[Vec3] {
        self.spins
    }
    #[inline(always)]
    fn origin(&self) -> usize {
        self.origin
    }
    #[inline(always)]
    fn store(&mut self, _: usize, sites: &[u32], stretch: Option<Stretch>, new: [&[f64]; 3]) {
        let [x, y, z] = new;
        let n = x.len();
        match stretch {
            // Every spin of a stretch: no index per site.
            Some(Stretch::Whole(stretch)) => {
                for (((c, x), y), z) in self.spins[stretch].iter_mut().zip(x).zip(y).zip(z) {
                    *c = [*x, *y, *z];
                }
            }
            // Every other spin of a stretch: no index per site.
            Some(Stretch::Pairs(stretch)) => {
                let flat = self.spins[stretch.clone()].as_flattened_mut();
                for (((c, x), y), z) in flat.chunks_exact_mut(6).zip(x).zip(y).zip(z) {
                    (c[0], c[1], c[2]) = (*x, *y, *z);
                }
                self.spins[stretch.end - 1] = [x[n - 1], y[n - 1], z[n - 1]];
            }
            None => {
                for (k, &i) in sites.iter().enumerate() {
                    self.spins[i as usize - self.origin] = [x[k], y[k], z[k]];
                }
            }
        }
    }
}

/// Where a window of spins holds a group's sites as one stretch (see [`stretch`]).
#[derive(Debug, Clone)]
enum Stretch {
    /// Every spin of the range: the sites step by one, as one basis site's cells along a
    /// row do (a sublattice of bcc is a colour class).
    Whole(Range<usize>),
    /// Every other spin of the range, its first and last included: the sites step by two,
    /// as a checkerboard class does along a row of cells.
    Pairs(Range<usize>),
}

/// Where a window of `len` spins from site `origin` holds `sites` as one stretch (their
/// spins, and for a step of two those between), if the sites step by two (`sites[k] =
/// sites[0] + 2 k`) or by one, and the window holds them all. The steps are tested
/// without branches, so that it vectorises.
#[inline(always)]
fn stretch(sites: &[u32], origin: usize, len: usize) -> Option<Stretch> {
    let i0 = *sites.first()?;
    let steps_by =
        |d: u32| sites.iter().enumerate().fold(true, |ok, (k, &i)| ok & (i == i0.wrapping_add(d * k as u32)));
    let start = (i0 as usize).checked_sub(origin)?;
    let n = sites.len();
    if steps_by(2) {
        (start + 2 * n - 1 <= len).then(|| Stretch::Pairs(start..start + 2 * n - 1))
    } else if steps_by(1) {
        (start + n <= len).then(|| Stretch::Whole(start..start + n))
    } else {
        None
    }
}

spindrift_isa::multiversion! {
    /// Decides the trials of `sites` (one colour class, so no trial reads another's spin)
    /// from `spins` into `out`. Compiled per instruction-set level (same bits on each).
    fn decide(ctx: &TrialContext<'_>, spins: &[Vec3], out: &mut [Vec3], sites: &[u32]) -> Counts {
        decide_into(ctx, IntoBuffer { spins, out }, sites)
    }
}

spindrift_isa::multiversion! {
    /// Decides the trials of `sites` (one colour class) and writes each decided spin into
    /// `spins`, which holds sites `origin ..` and every neighbour of `sites`. Compiled per
    /// instruction-set level (same bits on each).
    fn decide_in_place(ctx: &TrialContext<'_>, spins: &mut [Vec3], origin: usize, sites: &[u32]) -> Counts {
        decide_into(ctx, InPlace { spins, origin }, sites)
    }
}

/// The body of [`decide`] and [`decide_in_place`].
#[inline(always)]
fn decide_into(ctx: &TrialContext<'_>, mut to: impl Decisions, sites: &[u32]) -> Counts {
    let TrialContext { h, stream, sigma, beta, step, weight } = *ctx;
    let mut counts = Counts::default();
    // A few sites at a time, in phases without branches: random numbers in bulk (bitwise
    // the per-site values), trial spins, energy changes, acceptance. On the stack. Old,
    // trial and chosen spins are kept as three arrays of components (x, y, z), which the
    // loops read and write without regrouping 3-vectors.
    let mut kick = [[0.0; DRAWS]; 3];
    let mut pick = [0.0; DRAWS];
    let mut accept = [0.0; DRAWS];
    let mut old = [[0.0; DRAWS]; 3];
    let mut trials = [[0.0; DRAWS]; 3];
    let mut chosen = [[0.0; DRAWS]; 3];
    let mut de = [0.0; DRAWS];
    let mut units = [0.0; DRAWS];
    // Acceptance masks, all ones for an accepted move.
    let mut keep = [0u64; DRAWS];
    // The energy kernel's sums, cleared once here rather than for every group.
    let mut scratch = TrialScratch::default();
    let row_len = h.cell().cells()[0] * h.cell().basis_len();
    for group in trial_groups(sites, row_len, DRAWS) {
        let (k0, sites) = (group.start, &sites[group]);
        // At most `DRAWS` sites, restated so that the compiler knows it below.
        let n = sites.len().min(DRAWS);
        let sites = &sites[..n];
        let (pick, accept) = (&mut pick[..n], &mut accept[..n]);
        let (de, units, keep) = (&mut de[..n], &mut units[..n], &mut keep[..n]);
        stream.fill_trial_at_in(step, sites, kick.each_mut().map(|c| &mut c[..n]), pick, accept);
        let (spins, origin) = (to.spins(), to.origin());
        let stretch = stretch(sites, origin, spins.len());
        {
            let [ox, oy, oz] = old.each_mut().map(|c| &mut c[..n]);
            match stretch.clone() {
                // Every spin of a stretch: no index per site.
                Some(Stretch::Whole(stretch)) => {
                    let rows = ox.iter_mut().zip(oy.iter_mut()).zip(oz.iter_mut());
                    for (((x, y), z), s) in rows.zip(&spins[stretch]) {
                        (*x, *y, *z) = (s[0], s[1], s[2]);
                    }
                }
                // Every other spin of a stretch: no index per site.
                Some(Stretch::Pairs(stretch)) => {
                    let flat = spins[stretch.clone()].as_flattened();
                    let rows = ox.iter_mut().zip(oy.iter_mut()).zip(oz.iter_mut());
                    for (((x, y), z), c) in rows.zip(flat.chunks_exact(6)) {
                        (*x, *y, *z) = (c[0], c[1], c[2]);
                    }
                    [ox[n - 1], oy[n - 1], oz[n - 1]] = spins[stretch.end - 1];
                }
                None => {
                    for (k, &i) in sites.iter().enumerate() {
                        [ox[k], oy[k], oz[k]] = spins[i as usize - origin];
                    }
                }
            }
        }
        {
            let [ox, oy, oz] = old.each_ref().map(|c| &c[..n]);
            let [kx, ky, kz] = kick.each_ref().map(|c| &c[..n]);
            let [tx, ty, tz] = trials.each_mut().map(|c| &mut c[..n]);
            // Zipped slices, not indices: indexed, the compiler ran the last eight trials of
            // every group (a whole vector) through a scalar copy of the loop, one square root
            // and division at a time.
            let olds = ox.iter().zip(oy).zip(oz);
            let kicks = kx.iter().zip(ky).zip(kz).zip(pick.iter());
            let outs = tx.iter_mut().zip(ty.iter_mut()).zip(tz.iter_mut());
            for (((tx, ty), tz), (((ox, oy), oz), (((kx, ky), kz), pick))) in outs.zip(olds.zip(kicks)) {
                [*tx, *ty, *tz] = trial_spin([*ox, *oy, *oz], *pick, [*kx, *ky, *kz], sigma);
            }
        }
        let (o, t) = (old.each_ref().map(|c| &c[..n]), trials.each_ref().map(|c| &c[..n]));
        h.energy_changes_in(spins, origin, sites, o, t, de, &mut scratch);
        // `|` rather than `||`: the factor is computed for every site, so the loop has
        // no branch. A NaN change (a move of zero length) fails both tests.
        for k in 0..n {
            let d = de[k];
            let p = (d <= 0.0) | (accept[k] < boltzmann_factor(-d * beta));
            let m = u64::from(p).wrapping_neg();
            keep[k] = m;
            units[k] = f64::from_bits((d * ENERGY_SCALE).round().to_bits() & m);
        }
        // Selects by bit masks, which the compiler keeps free of branches.
        for ((c, t), s) in chosen.iter_mut().zip(&t).zip(&o) {
            for (((c, t), s), m) in c[..n].iter_mut().zip(*t).zip(*s).zip(keep.iter()) {
                *c = f64::from_bits((t.to_bits() & m) | (s.to_bits() & !m));
            }
        }
        let (mut accepted, mut cone_attempted, mut cone_accepted) = (0u64, 0u64, 0u64);
        for k in 0..n {
            let cone = u64::from(pick[k] < P_CONE);
            let p = keep[k] & 1;
            accepted += p;
            cone_attempted += cone;
            cone_accepted += cone & p;
        }
        let chosen = chosen.each_ref().map(|c| &c[..n]);
        counts.attempted += n as u64;
        counts.accepted += accepted;
        counts.cone_attempted += cone_attempted;
        counts.cone_accepted += cone_accepted;
        counts.energy_change += integer_sum(units);
        counts.moment = crate::moment::add(counts.moment, component_units(weight, chosen));
        to.store(k0, sites, stretch, chosen);
    }
    counts
}

/// The trial spin for spin `s` (see "Moves" in the module documentation): `choice`
/// (uniform on `{0, 1/8, ..., 7/8}`) picks the move, `g` is the isotropic vector of the draw. Without branches;
/// a random-walk move of zero length gives NaN, which the acceptance test rejects.
#[inline(always)]
fn trial_spin(s: Vec3, choice: f64, g: Vec3, sigma: f64) -> Vec3 {
    let cone = choice < P_CONE;
    let reflect = choice >= P_CONE + P_UNIFORM;
    let v = if cone { [s[0] + sigma * g[0], s[1] + sigma * g[1], s[2] + sigma * g[2]] } else { g };
    let inv = 1.0 / dot(v, v).sqrt();
    let t = [v[0] * inv, v[1] * inv, v[2] * inv];
    if reflect {
        [-s[0], -s[1], -s[2]]
    } else {
        t
    }
}

/// The sum of integers held as `f64`, exactly, as an `i128`. When every term is below
/// `2^51` in magnitude (and there are at most `2^11`, so that the sum fits in `i64`), it
/// adds them in `i64`, each converted by adding `1.5 * 2^52`: that sum is exact and lies in
/// `[2^52, 2^53)`, where the bits of a double minus those of `1.5 * 2^52` are the integer
/// (the `i64` sum of the bits wraps; the difference does not). That conversion vectorises on every
/// level; the saturating `as i64` does not.
#[inline(always)]
fn integer_sum(units: &[f64]) -> i128 {
    const LIMIT: f64 = 2_251_799_813_685_248.0; // 2^51
    const MAGIC: f64 = 6_755_399_441_055_744.0; // 1.5 * 2^52
    let small = units.iter().fold(true, |ok, u| ok & (u.abs() < LIMIT));
    if small && units.len() <= 1 << 11 {
        let sum = units.iter().fold(0i64, |acc, &u| acc.wrapping_add((u + MAGIC).to_bits() as i64));
        i128::from(sum.wrapping_sub((units.len() as i64).wrapping_mul(MAGIC.to_bits() as i64)))
    } else {
        units.iter().map(|&u| u as i128).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::heun::tests::system_of;
    use crate::slabs::TILE_BYTES;

    // A block's size changes no bit (see the module documentation): sweeps in blocks of
    // one site, of a few sites, of sizes that split the runs of a class and its chunks,
    // and of `BLOCK`, on one and two threads, give the same spins and the same counts, on
    // a diluted simple cubic lattice with two shells (four colours) and on bcc (two basis
    // sites, so classes of two sublattices); and so does the one-thread sweep, which
    // writes each decided spin back at once. Common practice for a reordering.
    #[test]
    fn block_size_changes_no_bit() {
        for h in [
            system_of("simple-cubic", [24, 20, 6], 2, [true, true, false], 0.9),
            system_of("bcc", [10, 12, 8], 2, [true, false, true], 1.0),
        ] {
            let mut start = vec![[0.0; 3]; h.len()];
            crate::initial::random(&h, &mut start, 5).unwrap();
            let run = |block: usize, threads: usize| {
                let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
                let mut mc = Metropolis::new(&h, 3).unwrap();
                let mut s = start.clone();
                let stats: Vec<SweepStats> = pool.install(|| {
                    (0..6).map(|n| mc.sweep_in_blocks(&h, &mut s, 120.0, n, n < 3, block).unwrap()).collect()
                });
                let bits: Vec<[u64; 3]> = s.iter().map(|v| v.map(f64::to_bits)).collect();
                (bits, stats, mc.sigma().to_bits())
            };
            let reference = run(BLOCK, 1);
            assert!(reference.1.iter().all(|st| st.accepted > 0 && st.accepted < st.attempted));
            let mut mc = Metropolis::new(&h, 3).unwrap();
            let mut s = start.clone();
            let pool = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
            let stats: Vec<SweepStats> =
                pool.install(|| (0..6).map(|n| mc.sweep(&h, &mut s, 120.0, n, n < 3).unwrap()).collect());
            let bits: Vec<[u64; 3]> = s.iter().map(|v| v.map(f64::to_bits)).collect();
            assert!((bits, stats, mc.sigma().to_bits()) == reference, "in place, one thread");
            for threads in [1, 2] {
                for block in [1, 7, 64, 100, 1000, BLOCK] {
                    assert!(run(block, threads) == reference, "blocks of {block}, {threads} threads");
                }
            }
        }
    }

    // Splitting a sweep among threads by slabs changes no bit (see the module
    // documentation and `slabs.rs`): sweeps on 1 to 4 threads, which split the lattice
    // (one thread: one slab, visited in tiles), give the spins, counts and width of
    // blocks on one thread, on a diluted simple cubic lattice with
    // two shells, a periodic one with three, a film of one layer (split along a2) and bcc
    // (two basis sites). Common practice for a reordering.
    #[test]
    fn slabs_change_no_bit() {
        for h in [
            system_of("simple-cubic", [24, 20, 12], 2, [true, true, false], 0.9),
            system_of("simple-cubic", [12, 10, 16], 3, [true, true, true], 1.0),
            system_of("simple-cubic", [32, 48, 1], 1, [true, true, false], 1.0),
            system_of("bcc", [10, 12, 16], 2, [true, false, true], 1.0),
        ] {
            let mut start = vec![[0.0; 3]; h.len()];
            crate::initial::random(&h, &mut start, 5).unwrap();
            // Tiles of two rows along a2, so that the order differs from the index order.
            let tile = 2 * 3 * 24 * h.cell().cells()[0] * h.cell().basis_len();
            let run = |threads: usize, slabs: bool| {
                let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
                let mut mc = Metropolis::new(&h, 3).unwrap();
                // Films thick enough are swept in blocks of layers (tested below).
                mc.layer_blocks = None;
                if slabs {
                    mc.slabs = Slabs::with_tiles(&h, &mc.colouring, threads, tile);
                    mc.slab_threads = threads;
                }
                let mut s = start.clone();
                let sweep = |mc: &mut Metropolis, s: &mut [Vec3], n: u64| {
                    if slabs {
                        mc.sweep(&h, s, 120.0, n, n < 3).unwrap()
                    } else {
                        mc.sweep_in_blocks(&h, s, 120.0, n, n < 3, BLOCK).unwrap()
                    }
                };
                let stats: Vec<SweepStats> =
                    pool.install(|| (0..6).map(|n| sweep(&mut mc, &mut s, n)).collect());
                let bits: Vec<[u64; 3]> = s.iter().map(|v| v.map(f64::to_bits)).collect();
                ((bits, stats, mc.sigma().to_bits()), mc.slabs.is_some())
            };
            let (reference, _) = run(1, false);
            assert!(reference.1.iter().all(|st| st.accepted > 0 && st.accepted < st.attempted));
            for threads in [1, 2, 3, 4] {
                let (result, split) = run(threads, true);
                assert!(split, "{threads} threads did not split the lattice");
                assert!(result == reference, "{threads} threads");
            }
        }
    }

    // Sweeping a film in blocks of layers (`layer_blocks.rs`) on 1 to 4 threads gives the
    // spins, counts and width of one thread deciding the blocks' sites one range after
    // another in the blocks' order (even blocks, then odd ones) on the whole array, and of
    // one thread deciding each block class after class (the classes' sites in index
    // order), which the wavefront within a block must equal bit for bit; on a diluted
    // simple cubic film with two shells (four colours, four blocks, so that 3 and 4
    // threads take the buffered path), bcc (two basis sites, open along a1 too, eight
    // blocks) and a film of 9 layers (four unequal blocks). Common practice for a
    // parallel version of a sequential loop.
    #[test]
    fn layer_blocks_are_the_sequential_order() {
        for h in [
            system_of("simple-cubic", [24, 20, 12], 2, [true, true, false], 0.9),
            system_of("bcc", [10, 12, 16], 2, [false, true, false], 1.0),
            system_of("simple-cubic", [16, 10, 9], 1, [true, true, false], 1.0),
        ] {
            let mut start = vec![[0.0; 3]; h.len()];
            crate::initial::random(&h, &mut start, 5).unwrap();
            // One thread, block after block: in the blocks' own order, or class by class.
            let sequential = |mc: &mut Metropolis, s: &mut [Vec3], n: u64, class_major: bool| {
                let blocks = mc.layer_blocks.take().unwrap();
                let beta = 1.0 / (K_B * 120.0);
                let mut total = Counts::default();
                for &k in blocks.phase(0).iter().chain(blocks.phase(1)) {
                    let ranges: Vec<(u32, Range<u32>)> = if class_major {
                        let r = |c: usize| blocks.class_range(c, k);
                        (0..mc.colouring.len())
                            .map(|c| (c as u32, r(c).start as u32..r(c).end as u32))
                            .collect()
                    } else {
                        blocks.order(k).to_vec()
                    };
                    for (c, r) in ranges {
                        let class = mc.colouring.class(c as usize);
                        let weight = mc.tally.weight(h.cell().basis_of(class[0] as usize));
                        let ctx =
                            TrialContext { h: &h, stream: mc.stream, sigma: mc.sigma, beta, step: n, weight };
                        let sites = &class[r.start as usize..r.end as usize];
                        total = total.add(decide_in_place(&ctx, s, 0, sites));
                    }
                }
                mc.layer_blocks = Some(blocks);
                mc.finish(total, n < 3)
            };
            // Tiles of the default size (one per block on these small lattices) or of a row
            // or two (many, wrapping around a periodic a2).
            let run = |threads: usize, parallel: Option<bool>, tile_bytes: usize| {
                let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
                let mut mc = Metropolis::new(&h, 3).unwrap();
                mc.layer_blocks = LayerBlocks::with_tiles(&h, &mc.colouring, tile_bytes);
                assert!(mc.layer_blocks() >= 4, "{:?} not swept in blocks of layers", h.cell().cells());
                let mut s = start.clone();
                let stats: Vec<SweepStats> = pool.install(|| {
                    (0..6)
                        .map(|n| match parallel {
                            None => mc.sweep(&h, &mut s, 120.0, n, n < 3).unwrap(),
                            Some(class_major) => sequential(&mut mc, &mut s, n, class_major),
                        })
                        .collect()
                });
                let bits: Vec<[u64; 3]> = s.iter().map(|v| v.map(f64::to_bits)).collect();
                (bits, stats, mc.sigma().to_bits())
            };
            let reference = run(1, Some(false), TILE_BYTES);
            assert!(reference.1.iter().all(|st| st.accepted > 0 && st.accepted < st.attempted));
            for tile_bytes in [TILE_BYTES, 1] {
                assert!(run(1, Some(false), tile_bytes) == reference, "own order, tiles of {tile_bytes} B");
                assert!(
                    run(1, Some(true), tile_bytes) == reference,
                    "class after class, tiles of {tile_bytes} B"
                );
                for threads in [1, 2, 3, 4] {
                    assert!(
                        run(threads, None, tile_bytes) == reference,
                        "{threads} threads, tiles of {tile_bytes} B"
                    );
                }
            }
        }
    }
}
