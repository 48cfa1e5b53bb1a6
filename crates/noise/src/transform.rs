//! From 32-bit words to uniform and normal deviates, with branch-free kernels.
//!
//! The logarithm and the sine/cosine here replace the C library's so that the bulk loop has
//! no calls and vectorises, and so that results are the same on every platform and every
//! instruction-set level: the kernels use only IEEE-754 additions, subtractions,
//! multiplications, one division, one square root, conversions between the two precisions
//! and integer operations on the bits, all correctly rounded, and Rust never fuses them
//! into multiply-adds.
//!
//! The Gaussian deviates of the thermal noise are computed in single precision (radius,
//! cosine and sine), then converted exactly and multiplied in double precision; the Monte
//! Carlo trial directions use the double-precision sine and cosine.
//!
//! # Kernels
//!
//! * Radius `r = sqrt(y)`, `y = -2 ln u`, `u = (w + 1/2) 2^-32`: `v = w + 1/2` (exact in
//!   double precision) is split as `v = 2^e m` with `m` in `[sqrt(1/2), sqrt(2))` by
//!   integer arithmetic on its bits, and `f = m - 1`, exact (Sterbenz), is rounded once to
//!   single precision, so `y` keeps its relative accuracy for `u` next to 1. With
//!   `s = f/(2 + f)` (`|s| <= 0.1716`) and `z = s^2`,
//!   `-2 ln m = -4 atanh(s) = -4 s (1 + z P(z))`, where `P` is a quadratic fitted to
//!   `(atanh(s)/s - 1)/z` on `z <= 0.0294` (maximum error `9.3e-8`; the factor `z` makes
//!   that at most `2.7e-9` relative in `y`). Then `y = s Q(z) - 2 (e - 32) ln 2` with
//!   `Q = -4 (1 + z P)`, all in single precision.
//! * Angle of a pair: bit 31 of the word negates the cosine, bit 30 swaps cosine and
//!   sine, and bits 0 to 29 give `x = (2 k + 1 - 2^30) pi / 2^32` in `(-pi/4, pi/4)`. The
//!   four cases are the quarters of the circle centred on the `+x`, `-x`, `+y` and `-y`
//!   axes, so the words map one to one onto the `2^32` angles `2 pi (j + 1/2) / 2^32`: a
//!   uniform angle, as for `2 pi u`, in another order. In double precision
//!   `cos x = 1 + z C(z)` (quartic `C`, error below `2.3e-13`) and `sin x = x + x z S(z)`
//!   (cubic `S`, below `2e-11` relative), `z = x^2`; in single precision `x` is rounded
//!   (below `5e-8` absolute), `C` is a cubic (`3.1e-10`) and `S` a quadratic (`2e-8`).
//!
//! The polynomials are minimax fits (Remez exchange in 60-digit arithmetic, rounded to
//! the precision they run in) made by `tools/fit_polynomials.py` in this crate, and
//! evaluated by Horner's rule, which takes the fewest operations: the bulk loop is bound
//! by the number of vector instructions, not by their latency.
//!
//! # Accuracy, and why not more
//!
//! Against exact arithmetic on the same words, the single-precision radius is within
//! `1.6e-7` relative and its sine and cosine within `1.7e-7` absolute (measured over
//! millions of words, rounding included; the tests hold them to `1.8e-7` and `1.7e-7`), so
//! each Gaussian deviate is within `3.5e-7` times its pair's radius of the exact
//! Box-Muller transform: `3.5e-7` at the typical radius 1, `2.4e-6` at the largest, 6.76.
//! That moves a deviate's distribution function by at most `0.4 x 2.4e-6 = 1e-6` (0.4
//! being the largest normal density) and its variance, which is what sets the temperature
//! of a thermal field, by at most `1e-6` relative (0.3 mK at 300 K): far below the
//! statistical error of any finite-temperature average, and below what the statistical
//! tests of the crate can resolve. Double precision throughout,
//! as before (`1.5e-10`), took a third more time per site of the thermal noise (2.38 ns
//! against 1.81 ns per site in criterion's 256-site blocks, AMD EPYC, AVX-512): single
//! precision runs twice as many lanes per vector, and needs one polynomial term less in
//! each kernel. The tests check each kernel against the standard library at these
//! tolerances.

use std::f64::consts::{LN_2, PI};
use std::ops::{Add, Mul};

/// 2^-32.
const TWO_POW_M32: f64 = 1.0 / 4_294_967_296.0;
/// 2^52: a double whose mantissa field holds an integer `k < 2^52` above this exponent is
/// exactly `2^52 + k`, which turns integers into doubles with one bit operation and one
/// exact subtraction on every instruction-set level.
pub(crate) const TWO_POW_52: f64 = 4_503_599_627_370_496.0;

/// `2^52 + k` exactly, for `k < 2^52`.
#[inline(always)]
pub(crate) fn two_pow_52_plus(k: u64) -> f64 {
    f64::from_bits(TWO_POW_52.to_bits() | k)
}

/// The word as an exact `f64`. Going through `i32` lets the baseline x86-64 target (SSE2)
/// convert two lanes per instruction; SSE2 has no unsigned conversion.
#[inline(always)]
fn word_to_f64(w: u32) -> f64 {
    f64::from((w ^ 0x8000_0000) as i32) + 2_147_483_648.0
}

/// `(w + 1/2) 2^-32`, exactly: a uniform deviate on the open interval `(0, 1)`, in
/// `[2^-33, 1 - 2^-33]`. The radius computes its logarithm directly from `w`; the tests
/// use this as the reference argument.
#[cfg(test)]
pub(crate) fn open_unit(w: u32) -> f64 {
    (word_to_f64(w) + 0.5) * TWO_POW_M32
}

/// `w 2^-32`, exactly: a uniform deviate on `[0, 1)` with resolution `2^-32`.
#[inline(always)]
pub(crate) fn half_open_unit(w: u32) -> f64 {
    word_to_f64(w) * TWO_POW_M32
}

/// Bits of `sqrt(1/2)`: mantissas are reduced to `[sqrt(1/2), sqrt(2))` so that
/// `|s| = |m - 1|/(m + 1)` stays below `3 - 2 sqrt(2) = 0.1716`.
const SQRT_HALF_BITS: u64 = 0x3fe6_a09e_667f_3bcd;

/// `Q(z) = -4 (1 + z P(z))`, lowest power first, single precision, with `P` the quadratic
/// fit of `(atanh(s)/s - 1)/z` on `[0, (3 - 2 sqrt 2)^2]` (maximum error `9.3e-8`, so at
/// most `2.7e-9` relative in `-2 ln m`, far below the rounding of single precision).
const RADIUS_Q: [f32; 4] = [-4.0, -1.333_333_7, -0.799_774_35, -0.591_640_95];

/// `-2 ln 2`, rounded to single precision.
const MINUS_TWO_LN_2: f32 = (-2.0 * LN_2) as f32;

/// `-2 ln(v 2^SCALE)` for a positive, finite, normal `v`: the range reduction in double
/// precision, where it is exact, the polynomial in single precision (see the module
/// documentation for the error).
#[inline(always)]
fn minus_two_ln_scaled<const SCALE: i32>(v: f64) -> f32 {
    // Adding the offset moves mantissas at or above sqrt(1/2) into the next binade, so the
    // exponent field read afterwards is already rounded the way the reduction needs.
    let ix = v.to_bits().wrapping_add(0x3ff0_0000_0000_0000 - SQRT_HALF_BITS);
    // A small integer, exact in either precision.
    let e = (two_pow_52_plus(ix >> 52) - (TWO_POW_52 + f64::from(1023 - SCALE))) as f32;
    let m = f64::from_bits((ix & 0x000f_ffff_ffff_ffff) + SQRT_HALF_BITS);
    // m - 1 is exact (Sterbenz), so one rounding to single precision keeps its relative
    // accuracy however close m is to 1.
    let f = (m - 1.0) as f32;
    let s = f / (2.0 + f);
    s * horner(&RADIUS_Q, s * s) + e * MINUS_TWO_LN_2
}

/// Natural logarithm of a positive, finite, normal `v` (for the tests).
#[cfg(test)]
pub(crate) fn ln_positive(v: f64) -> f32 {
    -0.5 * minus_two_ln_scaled::<0>(v)
}

/// `-2 ln u` with `u = (w + 1/2) 2^-32`, in `[2.3e-10, 45.75]`: the squared Box-Muller
/// radius, in single precision.
#[inline(always)]
pub(crate) fn box_muller_radius_sq(w: u32) -> f32 {
    let w = u64::from(w);
    // (2^52 + w) - (2^52 - 1/2) = w + 1/2, exactly.
    let v = two_pow_52_plus(w) - (TWO_POW_52 - 0.5);
    minus_two_ln_scaled::<-32>(v)
}

/// `sqrt(-2 ln u)` with `u = (w + 1/2) 2^-32`: the Box-Muller radius, in single precision.
#[inline(always)]
pub(crate) fn box_muller_radius(w: u32) -> f32 {
    box_muller_radius_sq(w).sqrt()
}

/// `(sin x - x)/x^3` as a cubic in `x^2`, fitted on `|x| <= pi/4` (maximum error
/// `2.8e-11`).
const SIN_C: [f64; 4] =
    [-0.16666666663860844, 0.008333331876330856, -0.0001984008743594969, 2.725000151422491e-06];
/// `(cos x - 1)/x^2` as a quartic in `x^2`, fitted on `|x| <= pi/4` (maximum error
/// `3.6e-13`).
const COS_C: [f64; 5] = [
    -0.4999999999996395,
    0.04166666663742781,
    -0.0013888885093971412,
    2.47998628572598e-05,
    -2.7237194487682744e-07,
];
/// `c[0] + c[1] z + c[2] z^2 + ...` by Horner's rule, in the precision of `T` (`f64` or
/// `f32`).
#[inline(always)]
fn horner<T: Copy + Add<Output = T> + Mul<Output = T>>(c: &[T], z: T) -> T {
    let mut p = c[c.len() - 1];
    for k in (0..c.len() - 1).rev() {
        p = c[k] + z * p;
    }
    p
}

/// `(sin x - x)/x^3` as a quadratic in `x^2`, fitted on `|x| <= pi/4` (maximum error
/// `2.0e-8`, at most `1e-8` in `sin x`), single precision.
const SIN_C32: [f32; 3] = [-0.166_666_64, 0.008_332_749, -0.000_195_880_09];
/// `(cos x - 1)/x^2` as a cubic in `x^2`, fitted on `|x| <= pi/4` (maximum error
/// `3.1e-10`), single precision.
const COS_C32: [f32; 4] = [-0.5, 0.041_666_65, -0.001_388_759, 2.446_388_7e-5];

/// `(cos x, sin x)` for `|x| <= pi/4`, in single precision.
#[inline(always)]
pub(crate) fn cos_sin_reduced32(x: f32) -> (f32, f32) {
    let z = x * x;
    (1.0 + z * horner(&COS_C32, z), x + x * (z * horner(&SIN_C32, z)))
}

/// `pi 2^-32`, rounded to single precision.
const PI_TWO_POW_M32: f32 = (PI * TWO_POW_M32) as f32;

/// [`cos_sin_turn`] in single precision: the same map from words to angles, with the
/// angle's offset rounded to single precision (an absolute error below `5e-8`).
#[inline(always)]
pub(crate) fn cos_sin_turn32(w: u32) -> (f32, f32) {
    // The odd integer 2 k + 1 - 2^30 from the low 30 bits k (|.| < 2^30, so i32 holds it),
    // rounded once to single precision.
    let odd = ((((w << 1) & 0x7fff_fffe) | 1) as i32 - (1 << 30)) as f32;
    let (c, s) = cos_sin_reduced32(odd * PI_TWO_POW_M32);
    // Masks and a select instead of branches keep the bulk loop free of jumps.
    let c = f32::from_bits(c.to_bits() ^ (w & 0x8000_0000));
    if w & 0x4000_0000 != 0 {
        (s, c)
    } else {
        (c, s)
    }
}

/// `(cos x, sin x)` for `|x| <= pi/4`.
#[inline(always)]
pub(crate) fn cos_sin_reduced(x: f64) -> (f64, f64) {
    let z = x * x;
    (1.0 + z * horner(&COS_C, z), x + x * (z * horner(&SIN_C, z)))
}

/// `(cos theta, sin theta)` of a uniform angle on the circle chosen by the word: see the
/// module documentation for the map, one to one onto the angles `2 pi (j + 1/2) / 2^32`.
#[inline(always)]
pub(crate) fn cos_sin_turn(w: u32) -> (f64, f64) {
    let w = u64::from(w);
    // The odd integer 2 k + 1 - 2^30 from the low 30 bits k; exact in f64.
    let odd = two_pow_52_plus(((w << 1) & 0x7fff_fffe) | 1) - (TWO_POW_52 + 1_073_741_824.0);
    let (c, s) = cos_sin_reduced(odd * (PI * TWO_POW_M32));
    // Masks and a select instead of branches keep the bulk loop free of jumps.
    let c = f64::from_bits(c.to_bits() ^ ((w & 0x8000_0000) << 32));
    if w & 0x4000_0000 != 0 {
        (s, c)
    } else {
        (c, s)
    }
}

/// The two deviates of a pair from its parts, `scale r (cos theta, sin theta)` in double
/// precision (the parts convert exactly; the scale multiplies the radius, one product per
/// pair instead of two).
#[inline(always)]
pub(crate) fn pair_from_parts(r: f32, c: f32, s: f32, scale: f64) -> [f64; 2] {
    let r = scale * f64::from(r);
    [r * f64::from(c), r * f64::from(s)]
}

/// Four standard normal deviates from one Philox block, each multiplied by `scale`: two
/// full Box-Muller pairs `scale r0 (cos theta1, sin theta1)` and `scale r2 (cos theta3,
/// sin theta3)`. With `scale = 1` the products are exact, so scaled and unscaled calls
/// agree bit for bit up to the factor.
#[inline(always)]
pub(crate) fn gaussian4_from_words(w: [u32; 4], scale: f64) -> [f64; 4] {
    let (c1, s1) = cos_sin_turn32(w[1]);
    let (c3, s3) = cos_sin_turn32(w[3]);
    let [a, b] = pair_from_parts(box_muller_radius(w[0]), c1, s1, scale);
    let [c, d] = pair_from_parts(box_muller_radius(w[2]), c3, s3, scale);
    [a, b, c, d]
}

/// Four uniform deviates on `[0, 1)` from one Philox block.
#[inline(always)]
pub(crate) fn uniform4_from_words(w: [u32; 4]) -> [f64; 4] {
    [half_open_unit(w[0]), half_open_unit(w[1]), half_open_unit(w[2]), half_open_unit(w[3])]
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Words spread over the whole range, plus the ends, where reductions change branch.
    fn sample_words() -> impl Iterator<Item = u32> {
        (0u32..=200_000).map(|k| k.wrapping_mul(21_475)).chain([
            0,
            1,
            2,
            0x1fff_ffff,
            0x2000_0000,
            0x3fff_ffff,
            0x4000_0000,
            0x7fff_ffff,
            0x8000_0000,
            0xbfff_ffff,
            0xc000_0000,
            u32::MAX - 1,
            u32::MAX,
        ])
    }

    #[test]
    fn unit_conversions_are_exact_and_in_range() {
        for w in sample_words() {
            let u = open_unit(w);
            assert!(u > 0.0 && u < 1.0);
            assert_eq!(u, (f64::from(w) + 0.5) / 4_294_967_296.0);
            let h = half_open_unit(w);
            assert!((0.0..1.0).contains(&h));
            assert_eq!(h, f64::from(w) / 4_294_967_296.0);
        }
        assert_eq!(half_open_unit(0), 0.0);
    }

    // Tolerances below are the errors of the module documentation plus a margin, checked
    // against the platform's libm through std in double precision (common practice).
    // Dropping a polynomial term breaks each of them by orders of magnitude.

    /// `-2 ln u` and `ln v` in single precision: the polynomial's `2.7e-9` and a few
    /// roundings of `2^-24`, relative (measured worst 2.4e-7).
    const LN_TOL: f64 = 3e-7;

    #[test]
    fn radius_and_logarithm_match_std_to_single_precision() {
        let mut worst = 0.0f64;
        let near_one = (u32::MAX - 100_000..=u32::MAX).chain(0..100_000);
        for w in sample_words().chain(near_one) {
            let u = open_unit(w);
            let y = -2.0 * u.ln();
            worst = worst.max(((f64::from(box_muller_radius_sq(w)) - y) / y).abs());
            worst = worst.max(((f64::from(ln_positive(u)) - u.ln()) / u.ln()).abs());
            // The square root halves the relative error and adds half a unit of 2^-24.
            let r = f64::from(box_muller_radius(w));
            assert!((r - y.sqrt()).abs() <= (0.5 * LN_TOL + 3e-8) * y.sqrt(), "w = {w}");
        }
        // Other positive values, across many binades and around the split point.
        for k in 1..20_000 {
            let u = 1e-300 * 1.0371f64.powi(k);
            if u.is_finite() && u != 1.0 {
                worst = worst.max(((f64::from(ln_positive(u)) - u.ln()) / u.ln()).abs());
            }
        }
        let split = std::f64::consts::FRAC_1_SQRT_2.to_bits();
        let around_split = [split - 1, split, split + 1].map(f64::from_bits);
        for u in around_split.into_iter().chain([0.999_999_999_9, 1.000_000_000_1]) {
            worst = worst.max(((f64::from(ln_positive(u)) - u.ln()) / u.ln()).abs());
        }
        assert!(worst < LN_TOL, "worst relative error of -2 ln: {worst:e}");
    }

    // Double precision, for the Monte Carlo trials: cosine to 2.5e-13 absolute (the
    // quartic's 2.3e-13), sine to 2e-11 relative (the cubic's 2.8e-11 times z x / sin x,
    // at most 1.93e-11 at pi/4). Single precision, for the thermal noise: both within
    // 1.2e-7 absolute of std at the same (single-precision) argument, the fits' 1e-8 and a
    // few roundings of 2^-24.
    #[test]
    fn reduced_sine_and_cosine_match_std() {
        let (mut worst_c, mut worst_s, mut worst32) = (0.0f64, 0.0f64, 0.0f64);
        for k in -100_000i32..=100_000 {
            let x = f64::from(k) * (PI / 4.0 / 100_000.0);
            let (c, s) = cos_sin_reduced(x);
            assert!(c <= 1.0);
            worst_c = worst_c.max((c - x.cos()).abs());
            if x != 0.0 {
                worst_s = worst_s.max(((s - x.sin()) / x.sin()).abs());
            } else {
                assert_eq!(s, 0.0);
            }
            let x32 = x as f32;
            let (c, s) = cos_sin_reduced32(x32);
            let x = f64::from(x32);
            worst32 = worst32.max((f64::from(c) - x.cos()).abs()).max((f64::from(s) - x.sin()).abs());
        }
        assert!(worst_c < 2.5e-13, "worst absolute error of cos: {worst_c:e}");
        assert!(worst_s < 2e-11, "worst relative error of sin: {worst_s:e}");
        assert!(worst32 < 1.2e-7, "worst absolute error of the single-precision pair: {worst32:e}");
    }

    /// The angle of `cos_sin_turn(w)` as the module documentation defines it: offset `x`
    /// from the centre of the quarter chosen by bits 30 and 31.
    fn documented_angle(w: u32) -> f64 {
        let x = f64::from(2 * (w & 0x3fff_ffff) as i32 + 1 - (1 << 30)) * (PI / 4_294_967_296.0);
        match (w >> 30 & 1 == 1, w >> 31 == 1) {
            (false, false) => x,
            (false, true) => PI - x,
            (true, false) => PI / 2.0 - x,
            (true, true) => x - PI / 2.0,
        }
    }

    /// Index `j` of the documented angle on the grid `2 pi (j + 1/2) / 2^32`, modulo 2^32,
    /// from the exact integer form of the angle in units of `2 pi / 2^33`: `x` is
    /// `2 k + 1 - 2^30` of them and a quarter turn `2^31`.
    fn grid_index(w: u32) -> i64 {
        let odd = i64::from(2 * (w & 0x3fff_ffff)) + 1 - (1 << 30);
        let q = 1i64 << 31;
        let units = match (w >> 30 & 1 == 1, w >> 31 == 1) {
            (false, false) => odd,
            (false, true) => 2 * q - odd,
            (true, false) => q - odd,
            (true, true) => odd - q,
        };
        // Always an odd number of units, i.e. the centre of a grid cell.
        assert_eq!(units.rem_euclid(2), 1);
        ((units - 1) / 2).rem_euclid(1 << 32)
    }

    // The map from words to angles is one to one onto the grid 2 pi (j + 1/2) / 2^32, as a
    // uniform angle needs. Each of the four quarters (bits 30 and 31) maps its 2^30 words
    // with unit steps onto a run of 2^30 consecutive grid cells; the four runs must tile
    // the circle.
    #[test]
    fn turn_angles_are_a_permutation_of_the_uniform_grid() {
        let full = 1i64 << 32;
        let mut starts = Vec::new();
        for quarter in 0u32..4 {
            let base = quarter << 30;
            let step = (grid_index(base + 1) - grid_index(base)).rem_euclid(full);
            assert!(step == 1 || step == full - 1, "quarter {quarter}: step {step}");
            for k in (0..(1u32 << 30) - 1).step_by(9_973).chain([(1 << 30) - 2]) {
                assert_eq!((grid_index(base + k + 1) - grid_index(base + k)).rem_euclid(full), step);
            }
            let last = grid_index(base + (1 << 30) - 1);
            starts.push(if step == 1 { grid_index(base) } else { last });
        }
        starts.sort_unstable();
        let first = starts[0];
        let expect: Vec<i64> = (0..4).map(|i| first + i * (1 << 30)).collect();
        assert_eq!(starts, expect, "the four quarters must tile the 2^32 cells");
    }

    // The pair's cosine and sine against std at the documented angle, in every quarter: the
    // kernels' error plus the rounding of the reference angle.
    #[test]
    fn turn_sine_and_cosine_match_std_in_every_quarter() {
        let (mut worst, mut worst32) = (0.0f64, 0.0f64);
        for w in sample_words() {
            let theta = documented_angle(w);
            let (c, s) = cos_sin_turn(w);
            worst = worst.max((c - theta.cos()).abs()).max((s - theta.sin()).abs());
            assert!((c * c + s * s - 1.0).abs() < 3e-11);
            let (c, s) = cos_sin_turn32(w);
            worst32 = worst32.max((f64::from(c) - theta.cos()).abs()).max((f64::from(s) - theta.sin()).abs());
        }
        assert!(worst < 2e-11, "worst absolute error of the turn sine/cosine: {worst:e}");
        // Single precision: the pair's 1.2e-7 and the rounding of the angle (below 5e-8).
        assert!(worst32 < 1.7e-7, "worst absolute error of the single-precision pair: {worst32:e}");
    }

    // The four deviates of a block against Box-Muller written with std (G. E. P. Box and
    // M. E. Muller, Ann. Math. Statist. 29, 610 (1958)) on the same words and angles:
    // within the documented 3.5e-7 of the pair's radius (the radius' 1.5e-7 relative and
    // the angle's 1.7e-7 absolute).
    #[test]
    fn gaussian_transform_matches_box_muller_with_std_functions() {
        let mut worst = 0.0f64;
        for w0 in sample_words().step_by(7) {
            let w = [w0, w0.rotate_left(11) ^ 0x5555_5555, !w0, w0.wrapping_mul(0x9e37_79b9)];
            let r1 = (-2.0 * open_unit(w[0]).ln()).sqrt();
            let r2 = (-2.0 * open_unit(w[2]).ln()).sqrt();
            let t1 = documented_angle(w[1]);
            let g4 = gaussian4_from_words(w, 1.0);
            let t3 = documented_angle(w[3]);
            let reference = [r1 * t1.cos(), r1 * t1.sin(), r2 * t3.cos(), r2 * t3.sin()];
            let radius = [r1, r1, r2, r2];
            for i in 0..4 {
                worst = worst.max((g4[i] - reference[i]).abs() / radius[i]);
            }
        }
        assert!(worst < 3.5e-7, "worst deviation from std Box-Muller, relative to the radius: {worst:e}");
    }

    // The tail cut-off stated in the crate documentation: the smallest uniform is 2^-33, so
    // the radius never exceeds sqrt(66 ln 2) = 6.7637. At that word the mantissa is exactly
    // 1, so the only error is the rounding of 33 * 2 ln 2.
    #[test]
    fn largest_radius_is_the_documented_cut_off() {
        let r = box_muller_radius(0);
        // Single precision: within a few units of 2^-24 relative.
        assert!((f64::from(r) - (66.0 * std::f64::consts::LN_2).sqrt()).abs() < 1e-6);
        assert!(f64::from(r) <= 6.763_706);
        assert!(box_muller_radius(u32::MAX) > 0.0);
        assert!(box_muller_radius(u32::MAX) < 2e-5);
        for w in 1..1000 {
            assert!(box_muller_radius(w) < r);
        }
    }
}
