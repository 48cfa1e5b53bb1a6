//! From 32-bit words to uniform and normal deviates, with branch-free kernels.
//!
//! The logarithm and the sine/cosine here replace the C library's so that the bulk loop has
//! no calls and vectorises, and so that results are the same on every platform and every
//! instruction-set level: the kernels use only IEEE-754 additions, subtractions,
//! multiplications, one division, one square root and integer operations on the bits, all
//! correctly rounded, and Rust never fuses them into multiply-adds.
//!
//! # Kernels
//!
//! * Radius `r = sqrt(y)`, `y = -2 ln u`, `u = (w + 1/2) 2^-32`: `v = w + 1/2` is split as
//!   `v = 2^e m` with `m` in `[sqrt(1/2), sqrt(2))` by integer arithmetic on its bits; with
//!   `s = (m - 1)/(m + 1)` (`|s| <= 0.1716`) and `z = s^2`,
//!   `-2 ln m = -4 atanh(s) = -4 s (1 + z P(z))`, where `P` is a cubic fitted to
//!   `(atanh(s)/s - 1)/z` on `z <= 0.0294` (maximum error `5.7e-10`; the factor `z` makes
//!   that at most `1.7e-11` relative in `y`). Then `y = s Q(z) - 2 (e - 32) ln 2` with
//!   `Q = -4 (1 + z P)`. `m - 1` is exact (Sterbenz), so `y` keeps its relative accuracy
//!   for `u` next to 1.
//! * Angle of a pair: bit 31 of the word negates the cosine, bit 30 swaps cosine and
//!   sine, and bits 0 to 29 give `x = (2 k + 1 - 2^30) pi / 2^32` in `(-pi/4, pi/4)`. The
//!   four cases are the quarters of the circle centred on the `+x`, `-x`, `+y` and `-y`
//!   axes, so the words map one to one onto the `2^32` angles `2 pi (j + 1/2) / 2^32`: a
//!   uniform angle, as for `2 pi u`, in another order. `cos x = 1 + z C(z)` (quartic `C`,
//!   error below `2.3e-13`) and `sin x = x + x z S(z)` (cubic `S`, below `2e-11`
//!   relative), `z = x^2`.
//!
//! The polynomials are minimax fits (Remez exchange in 60-digit arithmetic, rounded to
//! double) made by `tools/fit_polynomials.py` in this crate, and evaluated by Horner's rule,
//! which takes the fewest operations: the bulk loop is bound by the number of vector
//! instructions, not by their latency.
//!
//! # Accuracy, and why not more
//!
//! Against exact arithmetic on the same words, `r` is within `1e-11` relative and the
//! sines and cosines within `2e-11` absolute, so each deviate (at most 6.77 in magnitude) is
//! within `1.5e-10` of the exact Box-Muller transform. That error moves the distribution
//! function of a deviate by at most `0.4 x 1.5e-10 = 6e-11` (0.4 being the largest normal
//! density). The uniforms themselves are discrete, cell centres on a grid of `2^-32`, so
//! their distribution function is already off an exact uniform's by up to
//! `2^-33 = 1.2e-10`, twice as much. Full double accuracy would cost about twelve more
//! polynomial terms per site, a quarter more time, and change nothing a thermal field can
//! see. The tests check each kernel against the standard library at these tolerances.

use std::f64::consts::{LN_2, PI};

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

/// `Q(z) = -4 (1 + z P(z))`, lowest power first, with `P` the cubic fit of
/// `(atanh(s)/s - 1)/z` on `[0, (3 - 2 sqrt 2)^2]` (maximum error `5.7e-10`); the factor
/// -4 is a power of two times -1, so the products are exact.
const RADIUS_Q: [f64; 5] = [
    -4.0,
    -4.0 * 0.3333333327653325,
    -4.0 * 0.2000006135808178,
    -4.0 * 0.1427537067766987,
    -4.0 * 0.11666133880412484,
];

/// `-2 ln(v 2^SCALE)` for a positive, finite, normal `v`, within `2e-11` relative. The
/// scale is folded into the exponent, so it costs nothing.
#[inline(always)]
fn minus_two_ln_scaled<const SCALE: i32>(v: f64) -> f64 {
    // Adding the offset moves mantissas at or above sqrt(1/2) into the next binade, so the
    // exponent field read afterwards is already rounded the way the reduction needs.
    let ix = v.to_bits().wrapping_add(0x3ff0_0000_0000_0000 - SQRT_HALF_BITS);
    let e = two_pow_52_plus(ix >> 52) - (TWO_POW_52 + f64::from(1023 - SCALE));
    let m = f64::from_bits((ix & 0x000f_ffff_ffff_ffff) + SQRT_HALF_BITS);
    let f = m - 1.0;
    let s = f / (2.0 + f);
    // A single rounded e * ln 2 suffices: its error, below 3e-15, is far inside the
    // polynomial's.
    s * horner(&RADIUS_Q, s * s) + e * (-2.0 * LN_2)
}

/// Natural logarithm of a positive, finite, normal `v` (for the tests).
#[cfg(test)]
pub(crate) fn ln_positive(v: f64) -> f64 {
    -0.5 * minus_two_ln_scaled::<0>(v)
}

/// `-2 ln u` with `u = (w + 1/2) 2^-32`, in `[2.3e-10, 45.75]`: the squared Box-Muller
/// radius.
#[inline(always)]
pub(crate) fn box_muller_radius_sq(w: u32) -> f64 {
    let w = u64::from(w);
    // (2^52 + w) - (2^52 - 1/2) = w + 1/2, exactly.
    let v = two_pow_52_plus(w) - (TWO_POW_52 - 0.5);
    minus_two_ln_scaled::<-32>(v)
}

/// `sqrt(-2 ln u)` with `u = (w + 1/2) 2^-32`: the Box-Muller radius.
#[inline(always)]
pub(crate) fn box_muller_radius(w: u32) -> f64 {
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
/// `c[0] + c[1] z + c[2] z^2 + ...` by Horner's rule.
#[inline(always)]
fn horner(c: &[f64], z: f64) -> f64 {
    let mut p = c[c.len() - 1];
    for k in (0..c.len() - 1).rev() {
        p = c[k] + z * p;
    }
    p
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

/// Four standard normal deviates from one Philox block, each multiplied by `scale`: two
/// full Box-Muller pairs `scale r0 (cos theta1, sin theta1)` and `scale r2 (cos theta3,
/// sin theta3)`, the scale applied to the radius (one product per pair instead of two).
/// With `scale = 1` the products are exact, so scaled and unscaled calls agree bit for bit
/// up to the factor.
#[inline(always)]
pub(crate) fn gaussian4_from_words(w: [u32; 4], scale: f64) -> [f64; 4] {
    let r0 = scale * box_muller_radius(w[0]);
    let (c1, s1) = cos_sin_turn(w[1]);
    let r2 = scale * box_muller_radius(w[2]);
    let (c3, s3) = cos_sin_turn(w[3]);
    [r0 * c1, r0 * s1, r2 * c3, r2 * s3]
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

    // Tolerances below are the fitting errors of the module documentation plus a margin for
    // rounding (a few units of 2^-52), checked against the platform's libm through std
    // (common practice). Dropping a polynomial term breaks each of them by orders of
    // magnitude.

    /// `-2 ln u` and `ln v`: the cubic's 1.7e-11 relative.
    const LN_TOL: f64 = 2e-11;

    #[test]
    fn radius_and_logarithm_match_std_to_2e_11_relative() {
        let mut worst = 0.0f64;
        for w in sample_words() {
            let u = open_unit(w);
            let y = -2.0 * u.ln();
            worst = worst.max(((box_muller_radius_sq(w) - y) / y).abs());
            worst = worst.max(((ln_positive(u) - u.ln()) / u.ln()).abs());
            // The square root halves the relative error.
            let r = box_muller_radius(w);
            assert!((r - y.sqrt()).abs() <= 0.5 * LN_TOL * y.sqrt(), "w = {w}");
        }
        // Other positive values, across many binades and around the split point.
        for k in 1..20_000 {
            let u = 1e-300 * 1.0371f64.powi(k);
            if u.is_finite() && u != 1.0 {
                worst = worst.max(((ln_positive(u) - u.ln()) / u.ln()).abs());
            }
        }
        let split = std::f64::consts::FRAC_1_SQRT_2.to_bits();
        let around_split = [split - 1, split, split + 1].map(f64::from_bits);
        for u in around_split.into_iter().chain([0.999_999_999_9, 1.000_000_000_1]) {
            worst = worst.max(((ln_positive(u) - u.ln()) / u.ln()).abs());
        }
        assert!(worst < LN_TOL, "worst relative error of -2 ln: {worst:e}");
    }

    // Cosine to 2.5e-13 absolute (the quartic's 2.3e-13), sine to 2e-11 relative (the
    // cubic's 2.8e-11 times z x / sin x, at most 1.93e-11 at pi/4).
    #[test]
    fn reduced_sine_and_cosine_match_std() {
        let (mut worst_c, mut worst_s) = (0.0f64, 0.0f64);
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
        }
        assert!(worst_c < 2.5e-13, "worst absolute error of cos: {worst_c:e}");
        assert!(worst_s < 2e-11, "worst relative error of sin: {worst_s:e}");
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
    // kernels' 2e-11 plus the rounding of the reference angle.
    #[test]
    fn turn_sine_and_cosine_match_std_in_every_quarter() {
        let mut worst = 0.0f64;
        for w in sample_words() {
            let theta = documented_angle(w);
            let (c, s) = cos_sin_turn(w);
            worst = worst.max((c - theta.cos()).abs()).max((s - theta.sin()).abs());
            assert!((c * c + s * s - 1.0).abs() < 3e-11);
        }
        assert!(worst < 2e-11, "worst absolute error of the turn sine/cosine: {worst:e}");
    }

    // The four deviates of a block against Box-Muller written with std (G. E. P. Box and
    // M. E. Muller, Ann. Math. Statist. 29, 610 (1958)) on the same words and angles: within
    // the documented 1.5e-10.
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
            for i in 0..4 {
                worst = worst.max((g4[i] - reference[i]).abs());
            }
        }
        assert!(worst < 1.5e-10, "worst absolute deviation from std Box-Muller: {worst:e}");
    }

    // The tail cut-off stated in the crate documentation: the smallest uniform is 2^-33, so
    // the radius never exceeds sqrt(66 ln 2) = 6.7637. At that word the mantissa is exactly
    // 1, so the only error is the rounding of 33 * 2 ln 2.
    #[test]
    fn largest_radius_is_the_documented_cut_off() {
        let r = box_muller_radius(0);
        assert!((r - (66.0 * std::f64::consts::LN_2).sqrt()).abs() < 1e-14);
        assert!((r - 6.763_705_635).abs() < 1e-9);
        assert!(box_muller_radius(u32::MAX) > 0.0);
        assert!(box_muller_radius(u32::MAX) < 2e-5);
        for w in 1..1000 {
            assert!(box_muller_radius(w) < r);
        }
    }
}
