//! Stochastic Landau-Lifshitz-Gilbert dynamics with Heun's predictor-corrector.
//!
//! # Equation
//!
//! In Landau-Lifshitz form (INTERFACE.md, "Physics conventions"),
//!
//! `dS_i/dt = f(S_i, B_i) = - gamma/(1+alpha_i^2) [ S_i x B_i + alpha_i S_i x (S_i x B_i) ]`,
//!
//! with `gamma` in rad/(ps T), `B_i = -(1/(mu_i muB)) dH/dS_i + b_i` in T and `t` in ps.
//! The thermal field `b_i` is white noise with
//! `<b_ia(t) b_jb(t')> = 2 alpha_i kB T / (gamma mu_i muB) delta_ij delta_ab delta(t - t')`
//! (W. F. Brown, Phys. Rev. 130, 1677 (1963)). Over one step `dt` its mean is a Gaussian of
//! variance `2 alpha_i kB T / (gamma mu_i muB dt)` per component: `kB T` in meV over
//! `mu_i muB` in meV/T is a field in T, and dividing by `gamma dt` (in 1/T) leaves T^2.
//!
//! # Scheme
//!
//! Heun's method in the Stratonovich sense: one noise draw `b_i` per spin and step, used in
//! both stages (J. L. Garcia-Palacios and F. J. Lazaro, Phys. Rev. B 58, 14937 (1998)):
//!
//! * predictor `P_i = S_i + dt f(S_i, B_i(S) + b_i)`,
//! * corrector `S_i' = S_i + dt/2 [f(S_i, B_i(S) + b_i) + f(P_i, B_i(P) + b_i)]
//!   = (S_i + P_i + dt f(P_i, B_i(P) + b_i)) / 2`,
//! * then `S_i'` is renormalised to unit length.
//!
//! The second form of the corrector needs no copy of `f(S)`: the predictor carries it.
//! For systems that fit the caches the step is two passes over the sites, run in parallel
//! with rayon over chunks of [`CHUNK`] sites. Larger systems (more than 2^19 sites) take
//! one fused pass: each thread walks its range of rows in bands, computing the predictor
//! just ahead of the band into a small ring of rows and correcting the band from it (see
//! the `fused` module), so that only the spins travel to and from memory. Every site's
//! result depends only on its inputs, never on the order or the scheduling of the pieces,
//! and
//! the noise of step `n` at site `i` is `NoiseStream::new(seed, 0).gaussian3_dense(n, i)`
//! scaled by the site's standard deviation (in the generator, on the Box-Muller radii, when
//! every site has the same one), so the result is bitwise the same for any thread count,
//! and a resumed run that passes the same step index draws the same noise.
//!
//! # Memory
//!
//! Two arrays of `N` 3-vectors (48 bytes per site): the predictor, and the scaled noise,
//! which the corrector overwrites with the new spins as it consumes it; the step then swaps
//! that array with the caller's, so that the pre-step spins stay untouched until the step
//! has succeeded (see [`Heun::step`] on errors). The fused step of a large system holds
//! instead a second spin array (24 bytes per site), which the step writes and then swaps
//! with the caller's, and one ring of rows per thread (a band and `2 reach` rows over
//! every plane: 1.4 MiB for 1000 x 1000 x 10). The field at the predictor lives only in a
//! block of `BLOCK` sites on the stack (1024; `FUSED_BLOCK`, 256, in the fused step).
//! [`Heun::step`] allocates nothing in proportion to the system: the fused step makes one
//! list of slice handles (threads times planes) per step.

use crate::error::{check_len, first_bad, StepError};
use rayon::prelude::*;
use spindrift_hamiltonian::constants::{GAMMA_PER_PS, K_B};
use spindrift_hamiltonian::{Hamiltonian, CHUNK};
use spindrift_lattice::{cross, dot, Vec3};
use spindrift_noise::{NoiseStream, STREAM_LLG_THERMAL};

/// `$body` with `$c` the closure `k -> (gamma_ll, alpha)` of site `k` of a block whose
/// constants are `$consts` (a [`SiteConsts`]): one compiled copy of `$body` for a pair
/// shared by every site, one for a run of per-site constants, so that neither loop tests
/// which it has.
macro_rules! with_consts {
    ($consts:expr, $c:ident => $body:expr) => {
        match $consts {
            SiteConsts::Uniform(pair) => {
                let $c = |_: usize| pair;
                $body
            }
            SiteConsts::PerSite(run) => {
                let $c = |k: usize| (run[k].gamma_ll, run[k].alpha);
                $body
            }
        }
    };
}

mod fused;

/// Parameters of one Heun step. Both may change from step to step (a temperature ramp
/// passes a new temperature; a field ramp calls [`Hamiltonian::set_field`] between steps).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HeunParams {
    /// Time step, ps. Default `0.001` (1 fs); see
    /// `spindrift_hamiltonian::timestep::recommended_dt` for a system's own choice.
    pub dt: f64,
    /// Temperature of the thermal field, K. Default `0` (deterministic dynamics).
    pub temperature: f64,
}

impl Default for HeunParams {
    fn default() -> Self {
        Self { dt: 1e-3, temperature: 0.0 }
    }
}

/// Constants of one basis site for the current step.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct SiteConst {
    /// `gamma / (1 + alpha^2)`, rad/(ps T).
    gamma_ll: f64,
    /// Gilbert damping.
    alpha: f64,
    /// Standard deviation of each thermal-field component over one step, T.
    sigma: f64,
}

/// The right-hand side `f(S, B)` of the Landau-Lifshitz equation, 1/ps.
#[inline(always)]
fn llg_rhs(s: Vec3, b: Vec3, gamma_ll: f64, alpha: f64) -> Vec3 {
    let t = cross(s, b);
    let d = cross(s, t);
    [-gamma_ll * (t[0] + alpha * d[0]), -gamma_ll * (t[1] + alpha * d[1]), -gamma_ll * (t[2] + alpha * d[2])]
}

/// Heun's corrector for one site before renormalisation: `(S + P + dt f(P, B)) / 2`, with
/// `B` the field at the predictor (thermal part included).
#[inline(always)]
fn unnormalised((gamma_ll, alpha): (f64, f64), s: Vec3, p: Vec3, b: Vec3, dt: f64) -> Vec3 {
    let f = llg_rhs(p, b, gamma_ll, alpha);
    [0.5 * (s[0] + p[0] + dt * f[0]), 0.5 * (s[1] + p[1] + dt * f[1]), 0.5 * (s[2] + p[2] + dt * f[2])]
}

/// Whether `x`, a sum of squares or the inverse of its square root, is positive and finite,
/// so that the renormalisation is good. One comparison catches NaN, infinity and a
/// collapsed spin alike: `0 < x < inf` is `1 <= bits <= bits(largest finite)` for the bits
/// of a double that is not negative (a NaN's bits lie above), one unsigned comparison of
/// the bits less one, where `x.is_finite() && x > 0.0` compiled to about eighteen vector
/// instructions per four sites. For `x = n2` and `x = 1 / sqrt(n2)` it gives the same
/// answer: `n2 = 0` and `n2 = inf` give `inf` and `0`, NaN gives NaN, and every positive
/// finite `n2` (subnormals included) gives a positive finite inverse.
#[inline(always)]
fn good_norm(x: f64) -> bool {
    x.to_bits().wrapping_sub(1) < f64::INFINITY.to_bits() - 1
}

/// Heun's corrector for one site: [`unnormalised`] renormalised. A result that is not
/// finite or has collapsed to zero is reported as not good, and the old spin is returned in
/// its place.
#[inline(always)]
fn corrected(c: (f64, f64), s: Vec3, p: Vec3, b: Vec3, dt: f64) -> (Vec3, bool) {
    let v = unnormalised(c, s, p, b, dt);
    let n2 = dot(v, v);
    let (good, inv) = (good_norm(n2), 1.0 / n2.sqrt());
    (if good { [v[0] * inv, v[1] * inv, v[2] * inv] } else { s }, good)
}

/// Euler's predictor over one block, `pred[k] = S + dt f(S, B)` with the spins `here` and
/// the fields `pred` (overwritten), site `k`'s `(gamma_ll, alpha)` from `c(k)` (see
/// [`with_consts!`]).
#[inline(always)]
fn predict_block(c: impl Fn(usize) -> (f64, f64), here: &[Vec3], pred: &mut [Vec3], dt: f64) {
    for k in 0..pred.len() {
        let (gamma_ll, alpha) = c(k);
        let s = here[k];
        let f = llg_rhs(s, pred[k], gamma_ll, alpha);
        pred[k] = [s[0] + dt * f[0], s[1] + dt * f[1], s[2] + dt * f[2]];
    }
}

/// Sites per piece of [`correct_block`]; its scratch, four arrays of this many numbers
/// (8 KiB), stays in L1 beside the block's fields.
const PIECE: usize = 256;

/// Scratch of [`correct_block`]: a piece's unnormalised spins as three arrays of
/// components, and their squared norms, then inverse norms. Made once per chunk of the
/// two-pass step and once per row of the fused step, like the field block (a new one per
/// block costs a zeroing of 8 KiB per block).
#[derive(Debug, Clone)]
struct CorrectorScratch {
    v: [[f64; PIECE]; 3],
    inv: [f64; PIECE],
}

impl Default for CorrectorScratch {
    fn default() -> Self {
        Self { v: [[0.0; PIECE]; 3], inv: [0.0; PIECE] }
    }
}

/// The corrector over one block: `out[k]` from the old spin `old[k]`, the
/// predictor `pred[k]` and the field at the predictor `fields[k]`, site `k`'s
/// `(gamma_ll, alpha)` from `c(k)` (see [`with_consts!`]), as [`corrected`] gives it, bit
/// for bit. Returns how many sites failed, vacant ones included ([`first_failed`] finds
/// the first other one again); a failed site keeps its old spin.
///
/// Pieces of [`PIECE`] sites, each in two loops without branches, so that they vectorise:
/// the unnormalised spins and their squared norms into `scratch`, then the inverse norms,
/// the count of failures and the new spins. In one loop, each four sites' square root and
/// division ended a chain of dependent operations long enough that few iterations were in
/// flight at once, and perf put half of the corrector's samples on the instructions that
/// waited for them; in a loop of their own the square roots and divisions of many sites
/// overlap. sc128 at 300 K, one thread side by side: median 1.036 over ten rounds, each at
/// least 1.00; perf samples of the corrector against the generator's 0.97 -> 0.84. A
/// piece with a failure has its failed sites set back to their old spins in a loop of its
/// own (a diluted lattice's vacant sites always fail). The count of failures costs one
/// instruction per vector of sites, where a flag per site stored for the search took
/// eight (183.1 -> 181.4 instructions per site and step of 128x128x8, callgrind, v3, one
/// thread; the time unchanged).
#[inline(always)]
fn correct_block(
    c: impl Fn(usize) -> (f64, f64),
    (old, pred, fields): (&[Vec3], &[Vec3], &[Vec3]),
    dt: f64,
    out: &mut [Vec3],
    scratch: &mut CorrectorScratch,
) -> usize {
    let mut failed = 0u64;
    for first in (0..out.len()).step_by(PIECE) {
        let len = PIECE.min(out.len() - first);
        let piece = first..first + len;
        let (old, pred, fields) = (&old[piece.clone()], &pred[piece.clone()], &fields[piece.clone()]);
        let out = &mut out[piece];
        let [vx, vy, vz] = scratch.v.each_mut().map(|c| &mut c[..len]);
        let inv = &mut scratch.inv[..len];
        for k in 0..len {
            let v = unnormalised(c(first + k), old[k], pred[k], fields[k], dt);
            (vx[k], vy[k], vz[k]) = (v[0], v[1], v[2]);
            inv[k] = dot(v, v);
        }
        let before = failed;
        for (k, o) in out.iter_mut().enumerate() {
            let n = 1.0 / inv[k].sqrt();
            inv[k] = n;
            failed += u64::from(!good_norm(n));
            *o = [vx[k] * n, vy[k] * n, vz[k] * n];
        }
        if failed > before {
            for ((o, &s), &n) in out.iter_mut().zip(old).zip(inv.iter()) {
                if !good_norm(n) {
                    *o = s;
                }
            }
        }
    }
    failed as usize
}

/// The LLG constants `(gamma_ll, alpha)` of a block's sites: one pair for every site, or
/// the block's run of [`SiteConst`]s. Each kernel loop is compiled for both (through
/// [`with_consts!`]); with one pair it is read once and kept in registers, where a loop
/// over the run regroups the constants of every few sites from their 24-byte records into
/// vector registers (one pair: 10 instructions fewer per site and step, 4.6% of a step of
/// 128x128x8 in callgrind at v3).
#[derive(Debug, Clone, Copy)]
enum SiteConsts<'a> {
    Uniform((f64, f64)),
    PerSite(&'a [SiteConst]),
}

impl<'a> SiteConsts<'a> {
    /// `block`, the constants of a block's sites, or `uniform` when every basis site has
    /// the same.
    #[inline(always)]
    fn of(uniform: Option<(f64, f64)>, block: &'a [SiteConst]) -> Self {
        uniform.map_or(Self::PerSite(block), Self::Uniform)
    }
}

/// Vacant sites among the `len` sites from site `first`: their spins are zero, so their
/// correctors always fail (which is what keeps them zero). A block with no more failures
/// than this is spared the search of [`first_failed`], which would find none.
fn vacant(occupation: Option<&[bool]>, first: usize, len: usize) -> usize {
    occupation.map_or(0, |o| o[first..first + len].iter().filter(|&&o| !o).count())
}

/// The first occupied site of a block starting at site `first` whose corrector fails, the
/// block's corrector evaluated again ([`corrected`], the same bits) where
/// [`correct_block`] counted more failures than the block has vacant sites. Arguments as
/// for [`correct_block`].
#[cold]
fn first_failed(
    c: impl Fn(usize) -> (f64, f64),
    (old, pred, fields): (&[Vec3], &[Vec3], &[Vec3]),
    dt: f64,
    occupation: Option<&[bool]>,
    first: usize,
) -> Option<usize> {
    (0..old.len())
        .find(|&k| {
            !corrected(c(k), old[k], pred[k], fields[k], dt).1 && occupation.is_none_or(|o| o[first + k])
        })
        .map(|k| first + k)
}

/// [`correct_block`] with the constants `consts`, then the first occupied site that failed
/// ([`first_failed`]) where the block, of sites `first ..`, has more failures than vacant
/// sites: what both steps' correctors do with a block.
#[inline(always)]
fn correct(
    consts: SiteConsts<'_>,
    (old, pred, fields): (&[Vec3], &[Vec3], &[Vec3]),
    dt: f64,
    out: &mut [Vec3],
    (occupation, first): (Option<&[bool]>, usize),
    scratch: &mut CorrectorScratch,
) -> Option<usize> {
    let failed = with_consts!(consts, c => correct_block(c, (old, pred, fields), dt, out, scratch));
    if failed > vacant(occupation, first, out.len()) {
        with_consts!(consts, c => first_failed(c, (old, pred, fields), dt, occupation, first))
    } else {
        None
    }
}

/// Sites per block within a chunk of the two passes: the predictor's field and noise, and
/// the corrector's field buffer on the stack (24 KiB), stay in L1 or close to it between
/// being made and being used, and a block of a one-site lattice holds several rows, which
/// the field kernel takes as one run (`Hamiltonian::field_range`, runs of rows). With
/// runs, blocks of 256, 512 and 1024 sites took 200.4, 191.2 and 188.8 instructions per
/// site and step on sc 128x128x8 and 267.5, 253.7 and 249.4 on a periodic 24^3 cube
/// (callgrind, v3, one thread); one-thread time side by side, 1024 against 512, 1.016-1.046
/// (median 1.025, four rounds). Without runs, 512 against 256 changed nothing (198.4 ->
/// 198.0).
const BLOCK: usize = 1024;

/// Sites per block of the fused step's passes, which the field kernel takes row by row
/// (its ring of rows holds no run of rows as one slice).
const FUSED_BLOCK: usize = 256;

/// Sites per unit of a small system's share of the threads (see [`Order::task_len`]).
const TASK_UNIT: usize = 256;

/// The stochastic Heun integrator. It owns only scratch buffers; the caller owns the spins.
#[derive(Debug, Clone)]
pub struct Heun {
    stream: NoiseStream,
    damping: Vec<f64>,
    /// The constants of each basis site (zero until the first step).
    basis_consts: Vec<SiteConst>,
    /// The constants of `BLOCK + period` consecutive sites from a row's first site, filled
    /// from `basis_consts` whenever those change (a row of a multi-site lattice can be long:
    /// refilled every step, a one-row system of `10^6` cells would pay a pass of its own).
    consts: Vec<SiteConst>,
    /// Sites after which the basis sites' pattern repeats: 1 for a one-site basis, else a
    /// row, `n1 nb` (each basis site's `n1` sites together, see `Supercell`).
    period: usize,
    /// Cells per row, `n1`.
    n1: usize,
    buffers: Buffers,
    /// Sites.
    len: usize,
    /// See [`LARGE`] and [`BAND_BYTES`].
    large: usize,
    band_bytes: usize,
}

/// The scratch arrays of one of the two ways a step goes.
#[derive(Debug, Clone)]
enum Buffers {
    /// Two passes over the whole system (see [`Order`]).
    TwoPass {
        predictor: Vec<Vec3>,
        /// The scaled thermal field of the step; the new spins after the corrector, before
        /// the swap with the caller's array.
        noise: Vec<Vec3>,
    },
    /// One fused pass over bands of rows for systems of more than [`LARGE`] sites (see
    /// the `fused` module): the new spins go to `next`, which is then swapped with the
    /// caller's array; each task keeps its predictor in its own ring of rows.
    Fused { bands: fused::Bands, next: Vec<Vec3>, rings: Vec<fused::Ring> },
}

/// Sites after which the basis sites' constants repeat (see [`Heun`]'s `period`).
fn const_period(h: &Hamiltonian) -> usize {
    if h.cell().basis_len() == 1 {
        1
    } else {
        h.cell().row_len()
    }
}

impl Heun {
    /// An integrator for the supercell and species of `h`, drawing its thermal noise from
    /// stream 0 of `seed`. Every later call must pass a Hamiltonian with the same
    /// supercell and species (the applied field may change).
    pub fn new(h: &Hamiltonian, seed: u64) -> Self {
        Self::with_order(h, seed, LARGE, BAND_BYTES, Some(ROWS_PER_REACH))
    }

    /// The integrator with `large` and `band_bytes` in place of [`LARGE`] and
    /// [`BAND_BYTES`] (tests reach the orders of large systems with small ones this way),
    /// fusing the passes of large systems when `fuse` gives the rows per task and row of
    /// reach it needs ([`ROWS_PER_REACH`]).
    fn with_order(h: &Hamiltonian, seed: u64, large: usize, band_bytes: usize, fuse: Option<usize>) -> Self {
        let n = h.len();
        let damping = h.basis_damping();
        let buffers = match fused_bands(h, large, band_bytes, fuse, rayon::current_num_threads()) {
            Some(bands) => {
                let rings = (0..bands.tasks(rayon::current_num_threads()))
                    .map(|_| fused::Ring::new(bands.ring_len()))
                    .collect();
                Buffers::Fused { bands, next: vec![[0.0; 3]; n], rings }
            }
            None => Buffers::TwoPass { predictor: vec![[0.0; 3]; n], noise: vec![[0.0; 3]; n] },
        };
        let n1 = h.cell().cells()[0];
        let period = const_period(h);
        Self {
            stream: NoiseStream::new(seed, STREAM_LLG_THERMAL),
            basis_consts: vec![SiteConst::default(); damping.len()],
            consts: vec![SiteConst::default(); BLOCK + period],
            period,
            n1,
            damping,
            buffers,
            len: n,
            large,
            band_bytes,
        }
    }

    /// Bytes of scratch memory that [`Heun::new`] allocates for `h` when called in a
    /// thread pool of `threads` threads: the predictor and noise arrays (48 bytes per
    /// site), or for the fused step of a large system the second spin array (24 bytes per
    /// site) and one ring of rows per thread (a band and `2 reach` rows over every plane).
    /// Touches no thread pool, so it can be called before the program sets up its own.
    pub fn scratch_bytes(h: &Hamiltonian, threads: usize) -> usize {
        let v = std::mem::size_of::<Vec3>();
        let consts = (BLOCK + const_period(h)) * std::mem::size_of::<SiteConst>();
        consts
            + match fused_bands(h, LARGE, BAND_BYTES, Some(ROWS_PER_REACH), threads) {
                Some(bands) => h.len() * v + bands.tasks(threads) * bands.ring_len() * 2 * v,
                None => h.len() * 2 * v,
            }
    }

    /// Bytes of scratch memory this integrator holds (what [`Heun::scratch_bytes`]
    /// predicts; checked by a unit test).
    #[cfg(test)]
    fn bytes(&self) -> usize {
        let v = std::mem::size_of::<Vec3>();
        self.consts.len() * std::mem::size_of::<SiteConst>()
            + match &self.buffers {
                Buffers::TwoPass { predictor, noise } => (predictor.len() + noise.len()) * v,
                Buffers::Fused { next, rings, .. } => {
                    (next.len() + rings.iter().map(|r| 2 * r.len()).sum::<usize>()) * v
                }
            }
    }

    /// Advances `spins` by one step `params.dt` at `params.temperature`, under the
    /// Hamiltonian's current applied field. `step_index` selects the noise (see the module
    /// documentation): pass `0, 1, 2, ...` over a run, and the same index again when a
    /// run resumes.
    ///
    /// The step writes the new spins to a second array (the noise buffer as the corrector
    /// consumes it, or the fused step's own) and swaps it with `spins` (the vector's buffer
    /// changes; its length does not).
    ///
    /// On [`StepError::NonFinite`] nothing is swapped and `spins` keep their values before
    /// the call, so the caller keeps the last good state without copying it every step.
    /// Other errors are returned before anything is touched. Vacant sites stay `[0, 0, 0]`.
    pub fn step(
        &mut self,
        h: &Hamiltonian,
        spins: &mut Vec<Vec3>,
        params: &HeunParams,
        step_index: u64,
    ) -> Result<(), StepError> {
        check_len(self.len, spins.len())?;
        check_len(self.len, h.len())?;
        let dt = params.dt;
        if !(dt.is_finite() && dt > 0.0) {
            return Err(StepError::BadParameter { name: "dt", value: dt, expected: "finite and > 0 ps" });
        }
        let temperature = params.temperature;
        if !(temperature.is_finite() && temperature >= 0.0) {
            return Err(StepError::BadParameter {
                name: "temperature",
                value: temperature,
                expected: "finite and >= 0 K",
            });
        }
        let mu = h.basis_mu_mev();
        let mut thermal = false;
        let nb = self.damping.len();
        let mut changed = false;
        for (b, &alpha) in self.damping.iter().enumerate() {
            let variance = 2.0 * alpha * K_B * temperature / (GAMMA_PER_PS * mu[b] * dt);
            let c =
                SiteConst { gamma_ll: GAMMA_PER_PS / (1.0 + alpha * alpha), alpha, sigma: variance.sqrt() };
            changed |= self.basis_consts[b] != c;
            self.basis_consts[b] = c;
            thermal |= variance > 0.0;
        }
        // Repeat the basis pattern so that a block starting at site `first` reads its
        // constants from `consts[first % period..]` in order, with no index arithmetic per
        // site (the first step always fills it: `gamma_ll` is never zero).
        if changed {
            for (j, c) in self.consts.iter_mut().enumerate() {
                *c = self.basis_consts[(j / self.n1) % nb];
            }
        }

        // One pair for every site when the basis sites share their damping (see
        // `SiteConsts`): `gamma_ll` depends on nothing else.
        let shared = self.damping.iter().all(|&alpha| alpha == self.damping[0]);
        let uniform = shared.then_some((self.basis_consts[0].gamma_ll, self.basis_consts[0].alpha));
        let ctx = StepContext {
            h,
            consts: &self.consts,
            uniform,
            period: self.period,
            occupation: h.cell().occupation(),
            stream: self.stream,
            dt,
            thermal: thermal.then(|| {
                let sigma = self.basis_consts[0].sigma;
                self.basis_consts.iter().all(|c| c.sigma == sigma).then_some(sigma)
            }),
            step_index,
        };

        let (predictor, noise) = match &mut self.buffers {
            Buffers::TwoPass { predictor, noise } => (predictor, noise),
            Buffers::Fused { bands, next, rings } => {
                let bad = fused::step(&ctx, bands, spins, next, rings);
                if let Some(site) = bad {
                    return Err(StepError::NonFinite { site, step: step_index });
                }
                std::mem::swap(spins, next);
                return Ok(());
            }
        };
        let order = Order::new(h, self.large, self.band_bytes);
        let task = order.task_len(spins.len());

        // Pass 1: field at S, noise, predictor.
        {
            let spins: &[Vec3] = spins;
            if spins.len() <= task {
                order.visit(0, spins.len(), |a, b| {
                    predictor_chunk(&ctx, spins, a, &mut predictor[a..b], &mut noise[a..b], BLOCK)
                });
            } else {
                predictor.par_chunks_mut(task).zip(noise.par_chunks_mut(task)).enumerate().for_each(
                    |(k, (pred, noise))| {
                        let start = k * task;
                        order.visit(start, pred.len(), |a, b| {
                            predictor_chunk(
                                &ctx,
                                spins,
                                a,
                                &mut pred[a - start..b - start],
                                &mut noise[a - start..b - start],
                                BLOCK,
                            )
                        })
                    },
                );
            }
        }

        // Pass 2: field at P, corrector, renormalisation, into the noise buffer.
        let predictor = &predictor[..];
        let old: &[Vec3] = spins;
        let correct = |start: usize, next: &mut [Vec3]| {
            let mut bad = None;
            order.visit(start, next.len(), |a, b| {
                let found = corrector_chunk(&ctx, predictor, old, a, &mut next[a - start..b - start]);
                bad = first_bad(bad, found);
            });
            bad
        };
        let bad = if old.len() <= task {
            correct(0, noise)
        } else {
            noise
                .par_chunks_mut(task)
                .enumerate()
                .map(|(k, next)| correct(k * task, next))
                .reduce(|| None, first_bad)
        };
        if let Some(site) = bad {
            return Err(StepError::NonFinite { site, step: step_index });
        }
        std::mem::swap(spins, noise);
        Ok(())
    }
}

/// The geometry of the fused step for `h`, when it takes one: with `fuse`, above `large`
/// sites, and when the planes have rows enough for `threads` tasks of at least `fuse`
/// rows per row of reach (see [`fused::Bands::new`]).
fn fused_bands(
    h: &Hamiltonian,
    large: usize,
    band_bytes: usize,
    fuse: Option<usize>,
    threads: usize,
) -> Option<fused::Bands> {
    match fuse {
        Some(rows_per_reach) if h.len() > large => {
            fused::Bands::new(h, FUSED_BAND_BYTES.min(band_bytes), rows_per_reach, threads)
        }
        _ => None,
    }
}

/// The order in which a pass visits its sites. Every site's result depends only on the
/// pass's inputs, so any order gives the same bits; the order only decides what the caches
/// hold.
///
/// Small systems go in chunks of [`CHUNK`] consecutive sites. When the arrays are larger
/// than the caches ([`LARGE`] sites), a neighbour one plane away along `a3` was last read
/// a whole plane earlier and has left the cache, so each spin would come from memory three
/// times per pass. Then each thread takes one contiguous share of the planes and walks it
/// in bands of rows along `a2`, all its planes for one band before the next band: the rows
/// above and below in `a3` are still cached when they are needed.
#[derive(Debug, Clone, Copy)]
struct Order {
    /// Sites per row along `a1`.
    row: usize,
    /// Rows per plane (`n2`).
    rows: usize,
    /// Rows per band.
    band: usize,
    threads: usize,
    /// Sites above which the planes are walked in bands ([`LARGE`]; lower in tests).
    large: usize,
}

/// Sites above which a step walks its planes in bands: 12.6 MB per array, so that the
/// spins, the predictor and the noise together (38 MB) outgrow a typical L3 cache.
const LARGE: usize = 1 << 19;

/// Bytes of predictor and noise per band of the fused step ([`Buffers::Fused`]).
const FUSED_BAND_BYTES: usize = 512 * 1024;

/// Rows per task of the fused step, at least, for each row that a bond spans along `a2`:
/// a task computes the predictor of `reach` rows beyond each end of its range again, and
/// holds a ring of rows over every plane, so with fewer rows per task the repeated work
/// passes a quarter and the rings a third of the memory they save. Systems whose planes
/// have fewer rows for the threads keep the two passes.
const ROWS_PER_REACH: usize = 8;

/// Bytes of one band of rows over three planes, for each array read with neighbours: what
/// measured best on a 1000 x 1000 x 10 system with 1 MiB of L2 per core (8 rows of 1000
/// sites; 128 KiB and 4 MiB were 5-10% slower).
const BAND_BYTES: usize = 768 * 1024;

impl Order {
    fn new(h: &Hamiltonian, large: usize, band_bytes: usize) -> Self {
        let [n1, n2, _] = h.cell().cells();
        let row = n1 * h.cell().basis_len();
        let band = (band_bytes / (3 * row * std::mem::size_of::<Vec3>())).clamp(1, n2);
        Order { row, rows: n2, band, threads: rayon::current_num_threads(), large }
    }

    /// Sites per parallel task: [`CHUNK`]; for systems of fewer than `CHUNK` sites per
    /// thread an equal share per thread in whole units of [`TASK_UNIT`] sites, at least two
    /// (as one task, a system of up to `CHUNK` sites took its steps on one thread whatever
    /// the pool held; below two units a task costs about what a parallel region does);
    /// an equal share of whole rows per thread for large systems.
    fn task_len(&self, n: usize) -> usize {
        if n <= self.large {
            n.div_ceil(self.threads).next_multiple_of(TASK_UNIT).clamp(2 * TASK_UNIT, CHUNK)
        } else {
            n.div_ceil(self.threads).div_ceil(self.row) * self.row
        }
    }

    /// Calls `f(a, b)` for pieces `a .. b` covering the sites `start .. start + len` once
    /// each: in order for a small task, in bands of rows over the task's planes otherwise.
    #[inline]
    fn visit(&self, start: usize, len: usize, mut f: impl FnMut(usize, usize)) {
        let end = start + len;
        if len <= CHUNK.min(self.large) || self.rows <= self.band {
            let mut a = start;
            while a < end {
                let b = (a + CHUNK).min(end);
                f(a, b);
                a = b;
            }
            return;
        }
        let plane = self.row * self.rows;
        let (z0, z1) = (start / plane, (end - 1) / plane);
        for y0 in (0..self.rows).step_by(self.band) {
            for z in z0..=z1 {
                // The band's rows are consecutive sites within plane z.
                let a = (z * plane + y0 * self.row).max(start);
                let b = (z * plane + (y0 + self.band).min(self.rows) * self.row).min(end);
                if a < b {
                    f(a, b);
                }
            }
        }
    }
}

/// What both passes of one step share.
#[derive(Clone, Copy)]
struct StepContext<'a> {
    h: &'a Hamiltonian,
    /// Per-site constants of `BLOCK + period` consecutive sites from a row's first site.
    consts: &'a [SiteConst],
    /// `(gamma_ll, alpha)` when every basis site has the same.
    uniform: Option<(f64, f64)>,
    /// Sites after which `consts` repeats (see [`Heun`]).
    period: usize,
    occupation: Option<&'a [bool]>,
    stream: NoiseStream,
    dt: f64,
    /// `None` at zero temperature; `Some(Some(sigma))` when every site has the thermal
    /// width `sigma` (T), `Some(None)` when the widths differ by basis site.
    thermal: Option<Option<f64>>,
    step_index: u64,
}

spindrift_isa::multiversion! {
    /// Pass 1 on the chunk of sites `start ..`, in blocks of `block_len` sites: field at S,
    /// noise, predictor. The field is written straight into the predictor's chunk, which
    /// only this chunk reads in this pass. Compiled per instruction-set level (same bits on
    /// each).
    fn predictor_chunk(
        ctx: &StepContext<'_>,
        spins: &[Vec3],
        start: usize,
        pred: &mut [Vec3],
        noise: &mut [Vec3],
        block_len: usize
    ) {
        let StepContext { h, consts, uniform, period, occupation, stream, dt, thermal, step_index } = *ctx;
        // Blocks keep the field and the noise in L1 (or near it) between being made and being
        // used. The site loops have no branches, so that they vectorise.
        let blocks = pred.chunks_mut(block_len).zip(noise.chunks_mut(block_len));
        for (block, (pred, noise)) in blocks.enumerate() {
            let first = start + block * block_len;
            let len = pred.len();
            let consts = &consts[first % period..][..len];
            let here = &spins[first..first + len];
            if let Some(sigma) = thermal {
                // One width for every site: the generator scales the radii itself.
                stream.fill_gaussian3_dense(step_index, first as u64, sigma.unwrap_or(1.0), noise);
                if sigma.is_none() {
                    for (th, c) in noise.iter_mut().zip(consts) {
                        *th = [c.sigma * th[0], c.sigma * th[1], c.sigma * th[2]];
                    }
                }
                // The field plus the thermal field, added in the field kernel's last pass
                // where it can (see `Hamiltonian::field_range_plus`).
                h.field_range_plus(spins, first, noise, pred);
            } else {
                h.field_range(spins, first, pred);
            }
            with_consts!(SiteConsts::of(uniform, consts), c => predict_block(c, here, pred, dt));
            if let Some(occupied) = occupation {
                for (p, &o) in pred.iter_mut().zip(&occupied[first..first + len]) {
                    if !o {
                        *p = [0.0; 3];
                    }
                }
            }
        }
    }
}

spindrift_isa::multiversion! {
    /// Pass 2 on the chunk of sites `start ..`: field at P, corrector, renormalisation.
    /// The field at P goes into a small block on the stack; each new spin goes into the
    /// slot of `next` whose noise it has just consumed, reading the pre-step spin from
    /// `spins`, which stays as it was, so a failure anywhere leaves the caller's spins
    /// intact without a third array (and the pass writes one array, not two). Returns the
    /// first site whose new spin is not finite. Compiled per instruction-set level (same
    /// bits on each).
    fn corrector_chunk(
        ctx: &StepContext<'_>,
        predictor: &[Vec3],
        spins: &[Vec3],
        start: usize,
        next: &mut [Vec3]
    ) -> Option<usize> {
        let StepContext { h, consts, uniform, period, occupation, dt, thermal, .. } = *ctx;
        let mut field_block = [[0.0; 3]; BLOCK];
        let mut scratch = CorrectorScratch::default();
        let mut bad = None;
        for (block, next) in next.chunks_mut(BLOCK).enumerate() {
            let first = start + block * BLOCK;
            let len = next.len();
            let consts = SiteConsts::of(uniform, &consts[first % period..][..len]);
            let fields = &mut field_block[..len];
            if thermal.is_some() {
                h.field_range_plus(predictor, first, next, fields);
            } else {
                h.field_range(predictor, first, fields);
            }
            let old = &spins[first..first + len];
            let pred = &predictor[first..first + len];
            bad = first_bad(bad, correct(consts, (old, pred, fields), dt, next, (occupation, first), &mut scratch));
        }
        bad
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use spindrift_hamiltonian::{add_shell, DmiKind, ShellCoupling, ShellRef, Species};
    use spindrift_lattice::{preset, BondList, Supercell};

    /// Simple cubic with exchange on the first `shells` shells and interfacial DMI on the
    /// first, 8 rows of 12 cells per plane, 5 planes (open along a3), periodic along a2
    /// when `periodic_y`, each site occupied with probability `occupancy`.
    fn system_with(shells: usize, periodic_y: bool, occupancy: f64) -> Hamiltonian {
        system_of("simple-cubic", [12, 8, 5], shells, [true, periodic_y, false], occupancy)
    }

    /// [`system_with`] of another lattice and other dimensions.
    pub(crate) fn system_of(
        lattice: &str,
        cells: [usize; 3],
        shells: usize,
        periodic: [bool; 3],
        occupancy: f64,
    ) -> Hamiltonian {
        stacked_system_of(lattice, None, cells, shells, periodic, occupancy)
    }

    /// [`system_of`] with the lattice constant `c` along `a3` (Å; `None`: 3 Å, as along
    /// `a1` and `a2`).
    pub(crate) fn stacked_system_of(
        lattice: &str,
        c: Option<f64>,
        cells: [usize; 3],
        shells: usize,
        periodic: [bool; 3],
        occupancy: f64,
    ) -> Hamiltonian {
        let mut crystal = preset(lattice, 3.0, c).unwrap();
        crystal.basis.iter_mut().for_each(|b| b.occupancy = occupancy);
        let nb = crystal.basis.len();
        let cell = Supercell::new(crystal, cells, periodic, 4).unwrap();
        let mut bonds = BondList::new(nb);
        for shell in 1..=shells {
            let spec = ShellCoupling {
                shell: ShellRef::Index(shell),
                j: 5.0 / shell as f64,
                dmi: (shell == 1).then_some((1.0, DmiKind::Interfacial { normal: [0.0, 0.0, 1.0] })),
                pair: None,
            };
            add_shell(&cell, &mut bonds, &spec).unwrap();
        }
        let species = vec![Species {
            name: "M".into(),
            moment: 2.0,
            damping: 0.1,
            anisotropy: 0.2,
            axis: [0.0, 0.0, 1.0],
        }];
        Hamiltonian::new(cell, species, bonds, [0.0, 0.0, 1.0]).unwrap()
    }

    fn system() -> Hamiltonian {
        system_with(1, true, 1.0)
    }

    /// bcc with its two basis sites of two species that differ in damping and moment, so
    /// that the step reads its constants per site (two shells, open along a3).
    fn two_species_system() -> Hamiltonian {
        let mut crystal = preset("bcc", 3.0, None).unwrap();
        crystal.basis[1].species = 1;
        let cell = Supercell::new(crystal, [12, 8, 5], [true, true, false], 4).unwrap();
        let mut bonds = BondList::new(2);
        for shell in 1..=2 {
            let spec =
                ShellCoupling { shell: ShellRef::Index(shell), j: 5.0 / shell as f64, dmi: None, pair: None };
            add_shell(&cell, &mut bonds, &spec).unwrap();
        }
        let a =
            Species { name: "A".into(), moment: 2.0, damping: 0.1, anisotropy: 0.2, axis: [0.0, 0.0, 1.0] };
        let b = Species { name: "B".into(), moment: 1.5, damping: 0.3, ..a.clone() };
        Hamiltonian::new(cell, vec![a, b], bonds, [0.0, 0.0, 1.0]).unwrap()
    }

    // Every site once, whatever the task's range and the band height.
    #[test]
    fn band_order_visits_every_site_once() {
        let h = system();
        let n = h.len();
        for band_bytes in [1, 3 * 12 * 24 * 3, 1 << 20] {
            let order = Order::new(&h, 0, band_bytes);
            for (start, len) in [(0, n), (5, n - 5), (12 * 8 + 7, 200), (n - 1, 1)] {
                let mut seen = vec![0u8; n];
                order.visit(start, len, |a, b| {
                    assert!(start <= a && a < b && b <= start + len);
                    seen[a..b].iter_mut().for_each(|x| *x += 1);
                });
                assert!(seen[start..start + len].iter().all(|&x| x == 1), "{band_bytes} {start} {len}");
                assert!(seen[..start].iter().chain(&seen[start + len..]).all(|&x| x == 0));
            }
        }
    }

    // The order of the walk changes no bit: steps at 300 K in chunk order, in bands of one
    // and of three rows, and fused over bands of one, three and six rows, on one, two and
    // three threads; with one shell and periodic rows, and with four shells (bonds two rows
    // apart), open rows and vacancies, and on other lattices: bcc (two sites, 2 shells),
    // fcc (four sites, periodic planes too), honeycomb (two sites in a plane, 3 shells,
    // open rows) and triangular (bonds across rows at an angle, vacancies); and bcc with two
    // species of their own damping (constants read per site rather than once).
    #[test]
    fn band_order_gives_the_same_bits() {
        let systems = [
            system(),
            system_with(4, false, 0.9),
            system_of("bcc", [12, 8, 5], 2, [true, true, false], 1.0),
            two_species_system(),
            system_of("fcc", [6, 8, 4], 2, [true; 3], 1.0),
            system_of("honeycomb", [10, 9, 3], 3, [true, false, false], 1.0),
            system_of("triangular", [11, 10, 2], 2, [true, true, false], 0.8),
        ];
        for h in systems {
            assert!(matches!(Heun::with_order(&h, 9, 0, 1, Some(1)).buffers, Buffers::Fused { .. }));
            let mut start = vec![[0.0; 3]; h.len()];
            crate::initial::random(&h, &mut start, 3).unwrap();
            let p = HeunParams { dt: 1e-3, temperature: 300.0 };
            let run = |heun: Heun, threads: usize| {
                let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
                let (mut heun, mut s) = (heun, start.clone());
                pool.install(|| (0..5).for_each(|n| heun.step(&h, &mut s, &p, n).unwrap()));
                s
            };
            let reference = run(Heun::new(&h, 9), 1);
            let [n1, _, n3] = h.cell().cells();
            let per_row = n3 * n1 * h.cell().basis_len() * 48;
            for threads in [1, 2, 3] {
                for (fuse, band_bytes) in
                    [(false, 1), (false, 3 * 12 * 24 * 3), (true, 1), (true, 3 * per_row), (true, 1 << 20)]
                {
                    let fuse = fuse.then_some(1);
                    let got = run(Heun::with_order(&h, 9, 0, band_bytes, fuse), threads);
                    let same = reference
                        .iter()
                        .zip(&got)
                        .all(|(a, b)| (0..3).all(|i| a[i].to_bits() == b[i].to_bits()));
                    assert!(same, "{threads} threads, fused {fuse:?}, bands of {band_bytes} bytes");
                }
            }
        }
    }

    // What `check` is told a run will hold is what the integrator holds: two arrays for a
    // small system, one spin array and the rings for a large one, and the per-site
    // constants of a block and a period (one site, or a row of a lattice of several sites
    // per cell).
    #[test]
    fn scratch_bytes_are_what_new_allocates() {
        let cases = [
            ("simple-cubic", [12, 8, 5], 48, 1),
            ("simple-cubic", [600, 600, 2], 24, 1),
            ("bcc", [12, 8, 5], 48, 24),
            ("bcc", [450, 450, 2], 24, 900),
        ];
        for (name, cells, per_site, period) in cases {
            let h = system_of(name, cells, 1, [true, true, false], 1.0);
            let bytes = Heun::new(&h, 1).bytes();
            assert_eq!(Heun::scratch_bytes(&h, rayon::current_num_threads()), bytes);
            let consts = (BLOCK + period) * std::mem::size_of::<SiteConst>();
            let rings = bytes - consts - per_site * h.len();
            assert!(rings < 2 * h.len(), "{name} {cells:?}: {rings} bytes of rings");
        }
    }

    // Planes with too few rows for the threads keep the two passes: 8 rows of reach 1
    // make one task of 8 rows, not two.
    #[test]
    fn few_rows_per_thread_keep_two_passes() {
        let h = system();
        assert!(fused_bands(&h, 0, BAND_BYTES, Some(ROWS_PER_REACH), 1).is_some());
        assert!(fused_bands(&h, 0, BAND_BYTES, Some(ROWS_PER_REACH), 2).is_none());
        assert!(fused_bands(&h, h.len(), BAND_BYTES, Some(ROWS_PER_REACH), 1).is_none());
    }

    // A failing step leaves every spin as it was, in both ways a step goes (the new spins
    // went to a second array, which is not swapped), and the fused step reports the same
    // first bad site as the two passes; on a diluted lattice too, whose vacant sites fail
    // their corrector in every step (their spins are zero) without failing the step.
    #[test]
    fn failing_step_leaves_the_spins() {
        for (name, h) in [("full", system()), ("diluted", system_with(1, true, 0.8))] {
            let mut start = vec![[0.0; 3]; h.len()];
            crate::initial::random(&h, &mut start, 3).unwrap();
            let p = HeunParams { dt: 1e-3, temperature: 300.0 };
            // A step that does not fail first.
            let mut fine = start.clone();
            Heun::new(&h, 9).step(&h, &mut fine, &p, 4).unwrap();
            let nan = (37..h.len()).find(|&i| h.cell().is_occupied(i)).unwrap();
            start[nan] = [f64::NAN, 0.0, 0.0];
            let same = |s: &[Vec3]| {
                start.iter().zip(s).all(|(a, b)| (0..3).all(|i| a[i].to_bits() == b[i].to_bits()))
            };
            let mut two_pass = start.clone();
            let expected = Heun::new(&h, 9).step(&h, &mut two_pass, &p, 4).unwrap_err();
            let StepError::NonFinite { site, step: 4 } = expected else { panic!("{name}: {expected:?}") };
            assert!(site <= nan && h.cell().is_occupied(site), "{name}: site {site}");
            assert!(same(&two_pass), "{name}: two passes");
            for threads in [1, 2] {
                let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
                // Chunks of fewer sites than the system, so that two threads share the passes.
                let mut heun = Heun::with_order(&h, 9, 0, 1, None);
                assert!(matches!(heun.buffers, Buffers::TwoPass { .. }));
                let mut s = start.clone();
                assert_eq!(pool.install(|| heun.step(&h, &mut s, &p, 4)), Err(expected.clone()));
                assert!(same(&s), "{name}: two passes, {threads} threads");
                let mut heun = Heun::with_order(&h, 9, 0, 1, Some(1));
                assert!(matches!(heun.buffers, Buffers::Fused { .. }));
                let mut s = start.clone();
                assert_eq!(pool.install(|| heun.step(&h, &mut s, &p, 4)), Err(expected.clone()));
                assert!(same(&s), "{name}: fused, {threads} threads");
            }
        }
    }
}
