//! The fused Heun step of large systems: predictor and corrector in one sweep over bands
//! of rows, with the predictor kept only for a window of rows.
//!
//! When the arrays outgrow the caches, a step of two whole passes streams every array
//! through memory several times (about 240 bytes per spin and step, measured). Here each
//! task takes a range of rows along `a2` over every plane and walks it in bands: it
//! computes the predictor (and the noise) of the rows just ahead of the band into a ring
//! of `band + 2 reach` rows per plane (`reach`: how many rows a bond spans along `a2`),
//! then corrects the band's rows from the ring, writing the new spins to a second spin
//! array. The predictor never goes to memory, the old spins are read once for the
//! predictor and once for the corrector (still cached), and the new spins are written
//! once. The caller's spin array and the second one are swapped at the end, so a failed
//! step leaves the old spins untouched.
//!
//! Every predictor is a function of the old spins and of the noise of its site and step
//! only, so the rows that two tasks both need (`reach` rows at each end of a task's range)
//! are computed twice with the same bits, and the result is bitwise that of the two-pass
//! step for any number of tasks.

use super::{correct, first_bad, predictor_chunk, CorrectorScratch, SiteConsts, StepContext, FUSED_BLOCK};
use rayon::prelude::*;
use spindrift_hamiltonian::{Hamiltonian, SpinRows};
use spindrift_lattice::{wrap_index, Vec3};

/// The geometry of the fused step.
#[derive(Debug, Clone, Copy)]
pub(super) struct Bands {
    /// Sites per row along `a1` (`n1` times the basis).
    row: usize,
    /// Rows per plane (`n2`).
    ny: usize,
    /// Planes (`n3`).
    nz: usize,
    periodic_y: bool,
    /// Rows a bond spans along `a2`, at most.
    reach: usize,
    /// Rows per band.
    band: usize,
    /// Rows per task, at least.
    per_task: usize,
}

impl Bands {
    /// The geometry for `h` with bands of about `band_bytes` of predictor and noise over
    /// every plane and tasks of at least `rows_per_reach` rows per row of reach, or `None`
    /// when the planes have too few rows for a ring of rows or for `threads` such tasks.
    pub(super) fn new(
        h: &Hamiltonian,
        band_bytes: usize,
        rows_per_reach: usize,
        threads: usize,
    ) -> Option<Self> {
        let [n1, ny, nz] = h.cell().cells();
        let row = n1 * h.cell().basis_len();
        let reach = h.row_reach()[0];
        let per_row = nz * row * 2 * std::mem::size_of::<Vec3>();
        // A row is found in the ring by its index modulo n2, so the ring must not hold
        // one row twice.
        let band = (band_bytes / per_row).max(1).min(ny.checked_sub(2 * reach)?);
        let per_task = rows_per_reach * reach.max(1);
        (band >= 1 && ny >= per_task * threads).then_some(Self {
            row,
            ny,
            nz,
            periodic_y: h.cell().periodic()[1],
            reach,
            band,
            per_task,
        })
    }

    /// Rows per plane in the ring.
    fn ring(&self) -> usize {
        self.band + 2 * self.reach
    }

    /// Sites in one task's ring over every plane.
    pub(super) fn ring_len(&self) -> usize {
        self.ring() * self.nz * self.row
    }

    /// Tasks for `threads` threads: one range of rows each, as many as the rows allow
    /// (fewer than the threads only when the step runs on more threads than the
    /// integrator was made for).
    pub(super) fn tasks(&self, threads: usize) -> usize {
        threads.min(self.ny / self.per_task).max(1)
    }

    /// Rows along `a2` per plane of task `t` of `tasks`.
    pub(super) fn rows_of(&self, t: usize, tasks: usize) -> std::ops::Range<usize> {
        t * self.ny / tasks..(t + 1) * self.ny / tasks
    }
}

/// One task's ring: the predictor and the scaled noise of `ring` rows of every plane, row
/// `u` of plane `z` (rows counted without wrapping, so from `-reach`) in slot
/// `z ring + (u mod ring)`.
#[derive(Debug, Clone)]
pub(super) struct Ring {
    predictor: Vec<Vec3>,
    noise: Vec<Vec3>,
}

impl Ring {
    pub(super) fn new(len: usize) -> Self {
        Self { predictor: vec![[0.0; 3]; len], noise: vec![[0.0; 3]; len] }
    }

    /// Sites it holds.
    #[cfg(test)]
    pub(super) fn len(&self) -> usize {
        self.predictor.len()
    }
}

/// The predictor rows of a ring as seen from a band whose window starts at row `lo`.
struct RingRows<'a> {
    predictor: &'a [Vec3],
    row: usize,
    ring: usize,
    ny: i64,
    /// First row of the window (unwrapped).
    lo: i64,
}

impl RingRows<'_> {
    /// Offset of row `c2` (wrapped) of plane `c3` in the ring.
    #[inline(always)]
    fn offset(&self, c2: usize, c3: usize) -> usize {
        // The one unwrapped row in the window `lo .. lo + ring` that is row c2.
        let u = self.lo + wrap_index(c2 as i64 - self.lo, self.ny);
        (c3 * self.ring + wrap_index(u, self.ring as i64) as usize) * self.row
    }
}

impl SpinRows for RingRows<'_> {
    #[inline(always)]
    fn row(&self, c2: usize, c3: usize) -> &[Vec3] {
        &self.predictor[self.offset(c2, c3)..][..self.row]
    }
}

/// Runs one task: corrects the rows `rows` of every plane, writing plane `z`'s new spins
/// to `out[z]`. Returns the first site whose new spin is not finite.
pub(super) fn run_task(
    ctx: &StepContext<'_>,
    bands: &Bands,
    spins: &[Vec3],
    ring: &mut Ring,
    rows: std::ops::Range<usize>,
    out: &mut [Option<&mut [Vec3]>],
) -> Option<usize> {
    let Bands { row, ny, nz, periodic_y, reach, band, .. } = *bands;
    let ring_rows = bands.ring();
    let (ny_i, reach_i) = (ny as i64, reach as i64);
    // The predictor and noise of unwrapped row u of every plane, into its ring slot.
    let predict = |ring: &mut Ring, u: i64| {
        if !periodic_y && !(0..ny_i).contains(&u) {
            return; // No such row: no bond reaches it.
        }
        let y = wrap_index(u, ny_i) as usize;
        let slot = wrap_index(u, ring_rows as i64) as usize;
        for z in 0..nz {
            let first = (z * ny + y) * row;
            let at = (z * ring_rows + slot) * row;
            predictor_chunk(
                ctx,
                spins,
                first,
                &mut ring.predictor[at..at + row],
                &mut ring.noise[at..at + row],
                FUSED_BLOCK,
            );
        }
    };
    let (y0, y1) = (rows.start as i64, rows.end as i64);
    for u in y0 - reach_i..y0 + reach_i {
        predict(ring, u);
    }
    let mut bad = None;
    let mut a = y0;
    while a < y1 {
        let b = (a + band as i64).min(y1);
        for u in a + reach_i..b + reach_i {
            predict(ring, u);
        }
        let view = RingRows { predictor: &ring.predictor, row, ring: ring_rows, ny: ny_i, lo: a - reach_i };
        for (z, out) in out.iter_mut().enumerate().take(nz) {
            let out = out.as_deref_mut().expect("every plane of a task has its rows");
            for y in a as usize..b as usize {
                let at = view.offset(y, z);
                let k = (y - rows.start) * row;
                let found = corrector_rows(
                    ctx,
                    &view,
                    spins,
                    (z * ny + y) * row,
                    &ring.predictor[at..at + row],
                    &ring.noise[at..at + row],
                    &mut out[k..k + row],
                );
                bad = first_bad(bad, found);
            }
        }
        a = b;
    }
    bad
}

spindrift_isa::multiversion! {
    /// The corrector of the sites `start .. start + out.len()` (within one row): field at
    /// the predictor from the ring, corrector, renormalisation, written to `out`; `pred`
    /// and `noise` are the sites' own ring slots, the old spins come from `spins`.
    /// Returns the first site whose new spin is not finite. Compiled per instruction-set
    /// level (same bits on each).
    fn corrector_rows(
        ctx: &StepContext<'_>,
        view: &RingRows<'_>,
        spins: &[Vec3],
        start: usize,
        pred: &[Vec3],
        noise: &[Vec3],
        out: &mut [Vec3]
    ) -> Option<usize> {
        let StepContext { h, consts, uniform, period, occupation, dt, thermal, .. } = *ctx;
        let mut field_block = [[0.0; 3]; FUSED_BLOCK];
        let mut scratch = CorrectorScratch::default();
        let mut bad = None;
        let blocks = out.chunks_mut(FUSED_BLOCK).zip(pred.chunks(FUSED_BLOCK)).zip(noise.chunks(FUSED_BLOCK));
        for (block, ((out, pred), noise)) in blocks.enumerate() {
            let first = start + block * FUSED_BLOCK;
            let len = out.len();
            let consts = SiteConsts::of(uniform, &consts[first % period..][..len]);
            let fields = &mut field_block[..len];
            h.field_range_in(view, first, thermal.is_some().then_some(noise), fields);
            let old = &spins[first..first + len];
            bad = first_bad(bad, correct(consts, (old, pred, fields), dt, out, (occupation, first), &mut scratch));
        }
        bad
    }
}

/// One fused step over the whole system: the new spins of every site into `next`, in
/// parallel over one range of rows per task. Returns the first site whose new spin is not
/// finite.
pub(super) fn step(
    ctx: &StepContext<'_>,
    bands: &Bands,
    spins: &[Vec3],
    next: &mut [Vec3],
    rings: &mut Vec<Ring>,
) -> Option<usize> {
    let tasks = bands.tasks(rayon::current_num_threads());
    if rings.len() < tasks {
        // Only when the step runs on more threads than when the integrator was made.
        rings.resize_with(tasks, || Ring::new(bands.ring_len()));
    }
    let (row, nz) = (bands.row, bands.nz);
    // Each task's rows of each plane, task by task: a handful of slice handles per step,
    // nothing in proportion to the system.
    let mut parts: Vec<Option<&mut [Vec3]>> = (0..tasks * nz).map(|_| None).collect();
    for (z, plane) in next.chunks_mut(bands.ny * row).enumerate() {
        let mut rest = plane;
        for t in 0..tasks {
            let (mine, after) = rest.split_at_mut(bands.rows_of(t, tasks).len() * row);
            parts[t * nz + z] = Some(mine);
            rest = after;
        }
    }
    parts
        .par_chunks_mut(nz)
        .zip(rings[..tasks].par_iter_mut())
        .enumerate()
        .map(|(t, (out, ring))| run_task(ctx, bands, spins, ring, bands.rows_of(t, tasks), out))
        .reduce(|| None, first_bad)
}
