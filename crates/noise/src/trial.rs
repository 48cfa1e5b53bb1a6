//! The random numbers of one Monte Carlo trial move, from one Philox block.
//!
//! A single-spin Metropolis trial needs a choice among a few moves, a random perturbation
//! for the move, and a uniform for the acceptance test. [`NoiseStream::trial`] draws all
//! of them from the four words `w0..w3` of one Philox call:
//!
//! | words | bits | deviate |
//! | --- | --- | --- |
//! | `w0` | 31..29 | `pick = k / 8`, `k` in `0..8`: uniform on `{0, 1/8, ..., 7/8}` |
//! | `w0` | 28..0 | the radius `r = 3 (j + 1/2) 2^-29`, uniform on `(0, 3)` |
//! | `w1` | all | the polar coordinate `z = 2 (w1 + 1/2) 2^-32 - 1` of the direction |
//! | `w2` | all | the azimuth `phi` of the direction, as for the Box-Muller angle (see the crate documentation) |
//! | `w3` | all | `accept = w3 2^-32`, uniform on `[0, 1)`, resolution `2^-32` |
//!
//! The perturbation is `kick = r n` with `n = (sqrt(1 - z^2) cos phi, sqrt(1 - z^2) sin phi,
//! z)`. With `z` uniform on `(-1, 1)` and `phi` uniform on the circle, `n` is uniform on the
//! unit sphere (Archimedes' hat-box theorem; e.g. G. Marsaglia, Ann. Math. Statist. 43, 645
//! (1972), quoted from memory), so `kick` is isotropic whatever the law of `r`. That is
//! what a symmetric trial move needs: a move `S' = (S + sigma kick) / |S + sigma kick|`
//! has a density that depends only on the angle between `S` and `S'`. `r` is uniform on
//! `(0, 3)`, so that `<|kick|^2> = 3` as for three standard normal deviates (a spread of
//! step lengths, like theirs), but without a logarithm or a square root: a radius with
//! the Gaussian vector's law (or that of a two-dimensional one, one logarithm) measured
//! 4-8% slower per sweep.
//!
//! # Precision
//!
//! * `pick` has three bits: it serves probabilities that are multiples of `1/8` exactly.
//! * `r` uses 29 bits, cell centres of a grid of `3 2^-29` (exact: an integer times a
//!   power of two times 3 rounds once); `z` and `phi` are on grids of
//!   `2^-31` and `2 pi 2^-32`, with the sine and cosine of the Box-Muller kernels (`2e-11`
//!   absolute). The direction is therefore isotropic up to these grids, a relative
//!   `5e-10`, far below any statistical error of a Monte Carlo average.
//! * `accept` keeps all 32 bits: a test `accept < p` passes with probability `p` rounded up
//!   to a multiple of `2^-32`, as with [`NoiseStream::uniform4`].
//!
//! The bulk function [`NoiseStream::fill_trial_at`] gives the same bits as the per-site
//! calls and is compiled per instruction-set level, like the other bulk functions.

use crate::transform::{cos_sin_turn, half_open_unit, two_pow_52_plus, TWO_POW_52};
use crate::{NoiseStream, LANES};

/// The random numbers of one trial move (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TrialDraw {
    /// Isotropic perturbation `r n` (dimensionless), `<|kick|^2> = 3`, `|kick| < 3`.
    pub kick: [f64; 3],
    /// Uniform on `{0, 1/8, ..., 7/8}`, to choose the move.
    pub pick: f64,
    /// Uniform on `[0, 1)` in steps of `2^-32`, for the acceptance test.
    pub accept: f64,
}

/// 2^-32.
const TWO_POW_M32: f64 = 1.0 / 4_294_967_296.0;

/// The trial numbers of one Philox block, as `(kick, pick, accept)`.
#[inline(always)]
fn trial_from_words(w: [u32; 4]) -> ([f64; 3], f64, f64) {
    let pick = f64::from(w[0] >> 29) * 0.125;
    // j + 1/2 exactly, then one rounding.
    let j = u64::from(w[0] & 0x1fff_ffff);
    let r = (two_pow_52_plus(j) - (TWO_POW_52 - 0.5)) * (3.0 / 536_870_912.0);
    // z = (2 w1 + 1 - 2^32) 2^-32: the odd integer is exact, so are 1 - z and 1 + z.
    let odd = two_pow_52_plus((u64::from(w[1]) << 1) | 1) - (TWO_POW_52 + 4_294_967_296.0);
    let z = odd * TWO_POW_M32;
    let rho = ((1.0 - z) * (1.0 + z)).sqrt();
    let (c, s) = cos_sin_turn(w[2]);
    let rr = r * rho;
    ([rr * c, rr * s, r * z], pick, half_open_unit(w[3]))
}

impl NoiseStream {
    /// The random numbers of the trial move for `(step, site)`, from one Philox call (see
    /// the module documentation of `trial.rs` for the layout and precision).
    #[inline]
    pub fn trial(&self, step: u64, site: u64) -> TrialDraw {
        let (kick, pick, accept) = trial_from_words(self.words(step, site));
        TrialDraw { kick, pick, accept }
    }

    /// `([kick[0][k], kick[1][k], kick[2][k]], pick[k], accept[k])` are the fields of
    /// `self.trial(step, sites[k])` for every `k`, bit for bit: the bulk evaluation for a
    /// list of scattered sites, as arrays of numbers (the kick as three arrays of
    /// components) so that their consumers vectorise. Panics if the lengths differ.
    /// Allocates nothing.
    pub fn fill_trial_at(
        &self,
        step: u64,
        sites: &[u32],
        kick: [&mut [f64]; 3],
        pick: &mut [f64],
        accept: &mut [f64],
    ) {
        fill_trial_at_kernel(*self, step, sites, kick, pick, accept);
    }

    /// [`NoiseStream::fill_trial_at`] compiled for the instruction set of its caller (not
    /// dispatched): for callers inside their own [`spindrift_isa::multiversion!`] kernels,
    /// such as the Monte Carlo sweep, which draws 64 trials at a time and would otherwise
    /// pass through the level dispatch for each group (0.9% of a sweep's perf samples).
    #[inline(always)]
    pub fn fill_trial_at_in(
        &self,
        step: u64,
        sites: &[u32],
        kick: [&mut [f64]; 3],
        pick: &mut [f64],
        accept: &mut [f64],
    ) {
        let n = sites.len();
        let [kx, ky, kz] = kick;
        assert!(
            kx.len() == n && ky.len() == n && kz.len() == n && pick.len() == n && accept.len() == n,
            "one output per site"
        );
        let whole = n - n % LANES;
        for b in (0..whole).step_by(LANES) {
            let w = self.words_lanes_at::<LANES>(step, &sites[b..b + LANES]);
            let (kx, ky, kz) = (&mut kx[b..b + LANES], &mut ky[b..b + LANES], &mut kz[b..b + LANES]);
            let (pick, accept) = (&mut pick[b..b + LANES], &mut accept[b..b + LANES]);
            for j in 0..LANES {
                let (kick, p, a) = trial_from_words([w[0][j], w[1][j], w[2][j], w[3][j]]);
                [kx[j], ky[j], kz[j]] = kick;
                (pick[j], accept[j]) = (p, a);
            }
        }
        for k in whole..n {
            let (kick, p, a) = trial_from_words(self.words(step, u64::from(sites[k])));
            [kx[k], ky[k], kz[k]] = kick;
            (pick[k], accept[k]) = (p, a);
        }
    }
}

spindrift_isa::multiversion! {
    /// [`NoiseStream::fill_trial_at`], compiled per instruction-set level.
    fn fill_trial_at_kernel(
        stream: NoiseStream,
        step: u64,
        sites: &[u32],
        kick: [&mut [f64]; 3],
        pick: &mut [f64],
        accept: &mut [f64],
    ) {
        stream.fill_trial_at_in(step, sites, kick, pick, accept)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::STREAM_METROPOLIS;

    const N: usize = 1_000_000;

    fn draws(seed: u64, step: u64) -> (Vec<[f64; 3]>, Vec<f64>, Vec<f64>) {
        let sites: Vec<u32> = (0..N as u32).collect();
        let mut kick = [vec![0.0; N], vec![0.0; N], vec![0.0; N]];
        let (mut pick, mut accept) = (vec![0.0; N], vec![0.0; N]);
        NoiseStream::new(seed, STREAM_METROPOLIS).fill_trial_at(
            step,
            &sites,
            kick.each_mut().map(Vec::as_mut_slice),
            &mut pick,
            &mut accept,
        );
        let kick = (0..N).map(|k| [kick[0][k], kick[1][k], kick[2][k]]).collect();
        (kick, pick, accept)
    }

    fn mean(x: impl Iterator<Item = f64>) -> f64 {
        let (mut s, mut n) = (0.0, 0.0);
        for v in x {
            s += v;
            n += 1.0;
        }
        s / n
    }

    // The bulk function must give exactly the per-site draws (the Monte Carlo sweep relies
    // on it for its addressing), for lists shorter and longer than a block and with a
    // remainder. Common practice for a bulk/scalar pair.
    #[test]
    fn bulk_trial_draws_equal_per_site_calls_bitwise() {
        let stream = NoiseStream::new(11, STREAM_METROPOLIS);
        for len in [0usize, 1, 15, 16, 17, 100] {
            let sites: Vec<u32> =
                (0..len as u32).map(|k| k.wrapping_mul(2_654_435_761) % 1_000_003).collect();
            let mut kick = [vec![0.0; len], vec![0.0; len], vec![0.0; len]];
            let (mut pick, mut accept) = (vec![0.0; len], vec![0.0; len]);
            stream.fill_trial_at(42, &sites, kick.each_mut().map(Vec::as_mut_slice), &mut pick, &mut accept);
            for k in 0..len {
                let one = stream.trial(42, u64::from(sites[k]));
                assert_eq!(
                    [kick[0][k], kick[1][k], kick[2][k]].map(f64::to_bits),
                    one.kick.map(f64::to_bits)
                );
                assert_eq!(pick[k].to_bits(), one.pick.to_bits());
                assert_eq!(accept[k].to_bits(), one.accept.to_bits());
            }
        }
    }

    // The documented word layout, against the raw Philox words: pick from the top three
    // bits of w0, accept = w3 / 2^32, and the polar coordinate of the direction
    // z = 2 (w1 + 1/2) / 2^32 - 1, read back as kick_z / |kick|.
    #[test]
    fn draws_follow_the_documented_word_layout() {
        let stream = NoiseStream::new(5, STREAM_METROPOLIS);
        for site in 0..1000u64 {
            let w = stream.words(9, site);
            let d = stream.trial(9, site);
            assert_eq!(d.pick, f64::from(w[0] >> 29) / 8.0);
            assert_eq!(d.accept, f64::from(w[3]) / 4_294_967_296.0);
            let z = 2.0 * (f64::from(w[1]) + 0.5) / 4_294_967_296.0 - 1.0;
            let norm = (d.kick[0] * d.kick[0] + d.kick[1] * d.kick[1] + d.kick[2] * d.kick[2]).sqrt();
            assert!((d.kick[2] / norm - z).abs() < 1e-10, "site {site}");
            // r = 3 (j + 1/2) / 2^29 from the low 29 bits of w0; |n| is 1 within the
            // sine and cosine kernels' 2e-11.
            let r = 3.0 * (f64::from(w[0] & 0x1fff_ffff) + 0.5) / 536_870_912.0;
            assert!((norm - r).abs() < 1e-10 * r, "site {site}");
        }
    }

    // Statistics with tolerances of five standard errors (fixed seeds, so deterministic):
    // `pick` takes each eighth with probability 1/8 (chi-square, 7 degrees of freedom);
    // `accept` has the moments of a uniform on [0, 1) (mean 1/2, variance 1/12); the kick
    // has mean zero, covariance the identity (<|kick|^2> = 3, as for three standard normal
    // deviates) and |kick| / 3 uniform on (0, 1) (mean 1/2, variance 1/12); its
    // direction is uniform on the sphere: every Cartesian component of kick / |kick| is
    // uniform on (-1, 1) (Archimedes' hat-box theorem, common practice), checked by a
    // 20-bin chi-square; and the parts of a draw are uncorrelated.
    #[test]
    fn trial_draw_statistics() {
        let (kick, pick, accept) = draws(3, 17);
        let n = N as f64;
        let mut counts = [0usize; 8];
        for &p in &pick {
            let k = p * 8.0;
            assert_eq!(k, k.floor());
            counts[k as usize] += 1;
        }
        let expect = n / 8.0;
        let chi2: f64 = counts.iter().map(|&c| (c as f64 - expect).powi(2) / expect).sum();
        assert!(chi2 < 7.0 + 5.0 * 14f64.sqrt(), "pick chi2 = {chi2}");

        assert!(accept.iter().all(|&u| (0.0..1.0).contains(&u)));
        let m = mean(accept.iter().copied());
        assert!((m - 0.5).abs() < 5.0 * (1.0 / 12.0 / n).sqrt(), "accept mean {m}");
        let v = mean(accept.iter().map(|&u| (u - 0.5) * (u - 0.5)));
        // Variance of (u - 1/2)^2 is 1/80 - 1/144.
        assert!(
            (v - 1.0 / 12.0).abs() < 5.0 * ((1.0 / 80.0 - 1.0 / 144.0) / n).sqrt(),
            "accept variance {v}"
        );

        for i in 0..3 {
            let m = mean(kick.iter().map(|g| g[i]));
            assert!(m.abs() < 5.0 / n.sqrt(), "kick mean {i}: {m}");
            for j in 0..3 {
                let c = mean(kick.iter().map(|g| g[i] * g[j]));
                // For this law <r^4> = 81 / 5, so <g_i^4> = <r^4> <n_i^4> = 81 / 25 (3 for
                // a normal deviate) and <g_i^2 g_j^2> = <r^4> <n_i^2 n_j^2> = 81 / 75.
                let (target, sd) = if i == j {
                    (1.0, (81.0 / 25.0 - 1.0f64).sqrt())
                } else {
                    (0.0, (81.0 / 75.0f64).sqrt())
                };
                assert!((c - target).abs() < 5.0 * sd / n.sqrt(), "kick covariance {i}{j}: {c}");
            }
        }
        let r2: Vec<f64> =
            kick.iter().map(|g| (g[0] * g[0] + g[1] * g[1] + g[2] * g[2]).sqrt() / 3.0).collect();
        assert!(r2.iter().all(|&x| x > 0.0 && x < 1.0));
        let m1 = mean(r2.iter().copied());
        let m2 = mean(r2.iter().map(|x| (x - 0.5) * (x - 0.5)));
        // Uniform law on (0, 1): the mean has variance 1/12, (x - 1/2)^2 has 1/80 - 1/144.
        assert!((m1 - 0.5).abs() < 5.0 * (1.0 / 12.0 / n).sqrt(), "<|kick|> / 3 = {m1}");
        assert!((m2 - 1.0 / 12.0).abs() < 5.0 * ((1.0 / 80.0 - 1.0 / 144.0) / n).sqrt(), "variance {m2}");

        for i in 0..3 {
            let mut bins = [0usize; 20];
            for g in &kick {
                let c = g[i] / (g[0] * g[0] + g[1] * g[1] + g[2] * g[2]).sqrt();
                bins[(((c + 1.0) * 10.0) as usize).min(19)] += 1;
            }
            let expect = n / 20.0;
            let chi2: f64 = bins.iter().map(|&c| (c as f64 - expect).powi(2) / expect).sum();
            assert!(chi2 < 19.0 + 5.0 * 38f64.sqrt(), "direction component {i}: chi2 = {chi2}");
        }

        let bound = 5.0 / n.sqrt();
        let parts: [Vec<f64>; 4] =
            [pick.clone(), accept.clone(), r2.clone(), kick.iter().map(|g| g[2]).collect()];
        for a in 0..4 {
            for b in a + 1..4 {
                let (ma, mb) = (mean(parts[a].iter().copied()), mean(parts[b].iter().copied()));
                let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
                for (x, y) in parts[a].iter().zip(&parts[b]) {
                    sab += (x - ma) * (y - mb);
                    saa += (x - ma) * (x - ma);
                    sbb += (y - mb) * (y - mb);
                }
                let r = sab / (saa * sbb).sqrt();
                assert!(r.abs() < bound, "parts {a} and {b}: r = {r}");
            }
        }
    }
}
