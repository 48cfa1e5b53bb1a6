//! Counter-based random numbers for Spindrift's thermal noise and Monte Carlo.
//!
//! Every random number is a pure function of `(seed, stream, step, site)`, so a run gives
//! bitwise the same noise whether one thread or many evaluate it, in whatever order or
//! chunking, and a resumed run draws exactly what an uninterrupted one would have drawn.
//!
//! # Algorithm
//!
//! The block function is Philox4x32-10 ([`philox4x32_10`]; J. K. Salmon, M. A. Moraes,
//! R. O. Dror, D. E. Shaw, "Parallel random numbers: as easy as 1, 2, 3", SC'11, 2011),
//! checked against the known-answer vectors of the authors' Random123 distribution.
//! A [`NoiseStream`] fixes the 64-bit key; each call encrypts one 128-bit counter into four
//! 32-bit words:
//!
//! | Philox input | words | content |
//! | --- | --- | --- |
//! | key | `[k0, k1]` | low and high halves of `mix(seed + salt(stream))` (see below) |
//! | counter | `[c0, c1]` | low and high halves of the site index |
//! | counter | `[c2, c3]` | low and high halves of the step index |
//!
//! `mix` is the SplitMix64 finaliser (G. L. Steele, D. Lea, C. H. Flood, "Fast splittable
//! pseudorandom number generators", OOPSLA 2014), a bijection of 64-bit words, so for one
//! stream every seed has its own key. The salt `salt(stream) = mix((stream + 1) *
//! 0x9e3779b97f4a7c15)` (SplitMix64's output number `stream` from state 0) moves different
//! streams to unrelated keys: two `(seed, stream)` pairs share a key only if their seeds
//! differ by exactly the difference of two pseudo-random 64-bit salts.
//!
//! # Stream ids
//!
//! Each consumer of randomness uses its own stream, so that, for example, changing the
//! initial state does not change the thermal noise:
//!
//! | id | constant | use |
//! | --- | --- | --- |
//! | 0 | [`STREAM_LLG_THERMAL`] | thermal field of the stochastic LLG equation; `step` is the time step, `site` the spin |
//! | 1 | [`STREAM_METROPOLIS`] | Metropolis trial moves and acceptance; `step` is the sweep, `site` the spin |
//! | 2 | [`STREAM_INITIAL_STATE`] | random initial spins and random dilution; `step` is 0 (dilution) or 1 (spins) by the caller's choice |
//!
//! Further ids are free for new consumers; document them here when they are taken.
//!
//! # Deviates
//!
//! * [`NoiseStream::gaussian3_dense`] gives three independent standard normal deviates per
//!   `(step, site)`, for the LLG thermal field. The deviates of a step form one sequence,
//!   `3 site + component`, and Philox block `b` (the counter's site words hold `b`) gives
//!   deviates `4 b .. 4 b + 3` as two Box-Muller pairs (G. E. P. Box, M. E. Muller, Ann.
//!   Math. Statist. 29, 610, 1958) on uniforms `u_i = (w_i + 1/2) / 2^32` in the open
//!   interval `(0, 1)`: `r0 (cos theta1, sin theta1)` and `r2 (cos theta3, sin theta3)`,
//!   with `r_i = sqrt(-2 ln u_i)`. Each angle is uniform on the circle: the word's top two
//!   bits choose the quarter of the circle around one of the four axes and the other 30
//!   bits the offset in it, which reaches each of the `2^32` angles `2 pi (j + 1/2) / 2^32`
//!   once (the same angles as `2 pi u`, in another order, so that the sine and cosine need
//!   polynomials on `|x| <= pi/4` only). Four sites share three blocks. A component of one
//!   site and one of the next may come from one pair; the two deviates of a Box-Muller pair
//!   are independent (Box and Muller 1958), and the tests check the flattened sequence for
//!   correlation.
//!
//!   **Accuracy:** the radius, cosine and sine are computed in single precision, so each
//!   deviate is within `3.5e-7` times its pair's radius of the exact transform of its words
//!   (`2.4e-6` at most); that moves its distribution function by at most `1e-6` and its
//!   variance, the temperature of a thermal field, by at most `1e-6` relative (see
//!   `transform.rs` for the kernels, their errors and the tests against the standard
//!   library).
//!
//!   **Tail cut-off:** the smallest uniform is `2^-33`, so the Box-Muller radius is at most
//!   `sqrt(66 ln 2) = 6.7637056` (6.7637057 as single precision rounds it), and no deviate
//!   exceeds that in magnitude (the sines and cosines never exceed 1). An exact standard
//!   normal exceeds it with probability `1.3e-11` per deviate.
//! * [`NoiseStream::fill_gaussian3_dense`] evaluates many consecutive sites at once, bit for
//!   bit equal to the per-site calls, with a scale applied to the radii: Philox on groups
//!   of 64 sites (48 blocks), then branch-free logarithm and sine/cosine kernels (fitted
//!   polynomials) that the compiler vectorises, the single-precision parts in loops of
//!   their own so that they run on sixteen lanes per AVX-512 vector. The kernels use only
//!   correctly rounded IEEE operations and Rust never contracts them into fused
//!   multiply-adds, so the numbers are also the same on every platform and for every
//!   `target-cpu`.
//! * [`NoiseStream::uniform4`] gives four uniforms `w_i / 2^32` on `[0, 1)`, resolution
//!   `2^-32` (random initial states).
//! * [`NoiseStream::trial`] and [`NoiseStream::fill_trial_at`] give the random numbers of
//!   one Monte Carlo trial move from one Philox call: a move choice in eighths, an
//!   isotropic perturbation and a 32-bit acceptance uniform (see `trial.rs` for the layout
//!   of the words and the precision).
//!
//! # Cost
//!
//! Measured on an AMD EPYC with one thread, filling 256-site blocks as the Heun step does:
//! `fill_gaussian3_dense` takes about 1.8 ns per site (three deviates) on x86-64-v4
//! (AVX-512), of which Philox is about 1.07 ns. The same kernels in double precision took
//! 2.38 ns in criterion runs of the same afternoon, and an earlier layout with one block
//! per site and a half-turn sine for the third deviate 2.7 ns on another day. The
//! baseline x86-64 level (SSE2) takes 6.8 ns, 3.7 times as long, with the same bits. The
//! bulk functions are compiled for every level of `spindrift_isa` and run on the widest
//! the CPU has, so the default portable build gets the faster figures. The loops are bound by the number of
//! vector instructions, so every polynomial term counts.
//!
//! All deviates are dimensionless; callers scale them (for example by the thermal field's
//! standard deviation in tesla).
//!
//! ```
//! use spindrift_noise::{NoiseStream, STREAM_LLG_THERMAL};
//!
//! let noise = NoiseStream::new(7, STREAM_LLG_THERMAL);
//! let mut b = vec![[0.0; 3]; 1000];
//! // A thread that owns sites 1000..2000 fills its own slice for time step 42.
//! noise.fill_gaussian3_dense(42, 1000, 1.0, &mut b);
//! assert_eq!(b[5], noise.gaussian3_dense(42, 1005));
//! ```
#![deny(missing_docs)]

mod philox;
mod transform;
mod trial;

pub use philox::philox4x32_10;
pub use trial::TrialDraw;

use transform::{
    box_muller_radius, cos_sin_turn32, gaussian4_from_words, pair_from_parts, uniform4_from_words,
};

/// Stream id of the stochastic LLG thermal field.
pub const STREAM_LLG_THERMAL: u32 = 0;
/// Stream id of Metropolis Monte Carlo (trial moves and acceptance).
pub const STREAM_METROPOLIS: u32 = 1;
/// Stream id of random initial states (random spins, random dilution).
pub const STREAM_INITIAL_STATE: u32 = 2;

/// Sites per block in the bulk functions. The block's words (256 bytes) stay in L1; 16 to
/// 128 measured the same within noise with the present kernels, 8 slower. The sites of a
/// call past the last whole block are drawn one at a time, each at about the cost of a
/// block ([`NoiseStream::fill_trial_at`]), so callers that choose their lists' lengths
/// prefer multiples of it.
pub const LANES: usize = 16;

/// Sites per group in [`NoiseStream::fill_gaussian3_dense`]: a multiple of four whose
/// blocks fill whole vectors of eight lanes.
const DENSE_SITES: usize = 64;
/// Philox blocks per dense group.
const DENSE_BLOCKS: usize = DENSE_SITES / 4 * 3;

/// SplitMix64's increment, `2^64` divided by the golden ratio.
const GOLDEN_GAMMA: u64 = 0x9e37_79b9_7f4a_7c15;

/// The SplitMix64 output function (Steele, Lea, Flood, OOPSLA 2014): a bijection of `u64`
/// with full avalanche.
#[inline]
fn mix64(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// One independent source of random numbers: a Philox key derived from a run's seed and a
/// stream id. It holds no state; every deviate is addressed by `(step, site)`.
///
/// Cheap to copy and to share between threads.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct NoiseStream {
    key: [u32; 2],
}

impl NoiseStream {
    /// The stream `stream` (see the crate documentation for the ids in use) of the run
    /// seeded with `seed`.
    pub fn new(seed: u64, stream: u32) -> Self {
        let salt = mix64(u64::from(stream).wrapping_add(1).wrapping_mul(GOLDEN_GAMMA));
        let k = mix64(seed.wrapping_add(salt));
        NoiseStream { key: [k as u32, (k >> 32) as u32] }
    }

    /// The four raw Philox words for `(step, site)`: `philox4x32_10` of the counter
    /// `[site lo, site hi, step lo, step hi]` under this stream's key. For consumers that
    /// need their own transform of the same random bits.
    #[inline]
    pub fn words(&self, step: u64, site: u64) -> [u32; 4] {
        philox4x32_10(counter(step, site), self.key)
    }

    /// Three independent standard normal deviates for `(step, site)` in the dense layout
    /// (see the crate documentation): deviates `3 site .. 3 site + 2` of the step's
    /// sequence, four per Philox block, so that four sites share three blocks. Magnitudes
    /// never exceed 6.7637057 (see the crate documentation for this cut-off and the
    /// accuracy).
    #[inline]
    pub fn gaussian3_dense(&self, step: u64, site: u64) -> [f64; 3] {
        self.dense_site(step, site, 1.0)
    }

    /// `scale * gaussian3_dense(step, site)`, the scale applied to each Box-Muller radius.
    #[inline(always)]
    fn dense_site(&self, step: u64, site: u64, scale: f64) -> [f64; 3] {
        // Deviate d lives in block d / 4 at position d % 4; the three of a site span one
        // block or two consecutive ones.
        let d = 3 * u128::from(site);
        let block = (d / 4) as u64;
        let at = (d % 4) as usize;
        let a = gaussian4_from_words(self.words(step, block), scale);
        if at <= 1 {
            [a[at], a[at + 1], a[at + 2]]
        } else {
            let b = gaussian4_from_words(self.words(step, block.wrapping_add(1)), scale);
            let ab = [a[0], a[1], a[2], a[3], b[0], b[1]];
            [ab[at], ab[at + 1], ab[at + 2]]
        }
    }

    /// `out[k] = scale * self.gaussian3_dense(step, first_site + k)` for every `k`, bit for
    /// bit (with `scale` multiplying the radius, as in the per-site call), for site indices
    /// without wrap-around. Whole groups of four sites, starting at a multiple of four,
    /// take three Philox blocks, six logarithms and six sine-cosine pairs. Allocates
    /// nothing.
    pub fn fill_gaussian3_dense(&self, step: u64, first_site: u64, scale: f64, out: &mut [[f64; 3]]) {
        fill_gaussian3_dense_kernel(*self, step, first_site, scale, out);
    }

    #[inline(always)]
    fn fill_gaussian3_dense_portable(&self, step: u64, first_site: u64, scale: f64, out: &mut [[f64; 3]]) {
        // Sites of the call wrap around 2^64: every site on its own (never in practice).
        if first_site.checked_add(out.len() as u64).is_none() {
            for (k, g) in out.iter_mut().enumerate() {
                *g = self.dense_site(step, first_site.wrapping_add(k as u64), scale);
            }
            return;
        }
        // Up to the next multiple of four, one by one.
        let head = ((4 - first_site % 4) % 4).min(out.len() as u64) as usize;
        let (head_out, rest) = out.split_at_mut(head);
        for (k, g) in head_out.iter_mut().enumerate() {
            *g = self.dense_site(step, first_site + k as u64, scale);
        }
        let mut site = first_site + head as u64;
        // A group's words and single-precision parts, made once per call: zeroing them per
        // group cost two calls of `memset` each time (the compiler does not see that the
        // loops overwrite them), and each call made the loop reload its constants into the
        // vector registers, which a call clobbers.
        let mut w = [[0u32; DENSE_BLOCKS]; 4];
        let mut r = [[0f32; DENSE_BLOCKS]; 2];
        let mut cs = [[0f32; DENSE_BLOCKS]; 4];
        // Groups of DENSE_SITES sites: 3/4 as many blocks, whose deviates are the group's
        // components in order.
        let mut groups = rest.chunks_exact_mut(DENSE_SITES);
        for group in &mut groups {
            self.words_lanes::<DENSE_BLOCKS>(step, site / 4 * 3, &mut w);
            // The single-precision parts in loops of their own, so that they run on twice as
            // many lanes per vector as the double-precision products after them.
            for j in 0..DENSE_BLOCKS {
                r[0][j] = box_muller_radius(w[0][j]);
                r[1][j] = box_muller_radius(w[2][j]);
            }
            for j in 0..DENSE_BLOCKS {
                (cs[0][j], cs[1][j]) = cos_sin_turn32(w[1][j]);
                (cs[2][j], cs[3][j]) = cos_sin_turn32(w[3][j]);
            }
            let flat = group.as_flattened_mut();
            for j in 0..DENSE_BLOCKS {
                let [a, b] = pair_from_parts(r[0][j], cs[0][j], cs[1][j], scale);
                let [c, d] = pair_from_parts(r[1][j], cs[2][j], cs[3][j], scale);
                flat[4 * j..4 * j + 4].copy_from_slice(&[a, b, c, d]);
            }
            site += DENSE_SITES as u64;
        }
        for (k, g) in groups.into_remainder().iter_mut().enumerate() {
            *g = self.dense_site(step, site + k as u64, scale);
        }
    }

    /// Four independent uniform deviates on `[0, 1)`, multiples of `2^-32`, for
    /// `(step, site)`, from one Philox call. A test `u < p` accepts with probability `p`
    /// rounded up to a multiple of `2^-32`, and never when `p <= 0`.
    #[inline]
    pub fn uniform4(&self, step: u64, site: u64) -> [f64; 4] {
        uniform4_from_words(self.words(step, site))
    }

    /// Philox words of the `L` sites listed in `sites` (at least `L` of them), word-major.
    #[inline(always)]
    fn words_lanes_at<const L: usize>(&self, step: u64, sites: &[u32]) -> [[u32; L]; 4] {
        let mut w = [[0u32; L]; 4];
        for j in 0..L {
            let v = self.words(step, u64::from(sites[j]));
            for i in 0..4 {
                w[i][j] = v[i];
            }
        }
        w
    }

    /// Philox words of `L` consecutive sites into `w`, as four word arrays (word-major), so
    /// that the transforms after it run as plain loops over lanes.
    #[inline(always)]
    fn words_lanes<const L: usize>(&self, step: u64, first_site: u64, w: &mut [[u32; L]; 4]) {
        // Whole independent Philox evaluations per lane: the compiler vectorises this loop
        // across lanes. Interleaving the rounds of all lanes by hand ran out of registers
        // and measured three times slower.
        let [lo, hi, s0, s1] = counter(step, first_site);
        if lo.checked_add(L as u32 - 1).is_some() {
            // No lane carries into the site's high word, so that word is one value for the
            // whole group, and the compiler sees it: besides the first round's product of
            // the step's low word (the same in every lane anyway), the word that round makes
            // from the high word, the step and the key, the second round's product of it and
            // the exclusive-ors around them are computed once per group instead of once per
            // lane. The same words (the bulk test covers groups with and without a carry).
            for j in 0..L {
                let v = philox4x32_10([lo + j as u32, hi, s0, s1], self.key);
                for i in 0..4 {
                    w[i][j] = v[i];
                }
            }
        } else {
            for j in 0..L {
                let v = self.words(step, first_site.wrapping_add(j as u64));
                for i in 0..4 {
                    w[i][j] = v[i];
                }
            }
        }
    }
}

/// The Philox counter of `(step, site)`: site in words 0 and 1, step in words 2 and 3.
#[inline(always)]
fn counter(step: u64, site: u64) -> [u32; 4] {
    [site as u32, (site >> 32) as u32, step as u32, (step >> 32) as u32]
}

spindrift_isa::multiversion! {
    /// [`NoiseStream::fill_gaussian3_dense`], compiled per instruction-set level.
    fn fill_gaussian3_dense_kernel(
        stream: NoiseStream,
        step: u64,
        first_site: u64,
        scale: f64,
        out: &mut [[f64; 3]]
    ) {
        stream.fill_gaussian3_dense_portable(step, first_site, scale, out)
    }
}

#[cfg(test)]
mod tests;
