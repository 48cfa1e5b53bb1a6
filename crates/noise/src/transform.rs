//! From 32-bit words to uniform and normal deviates, with branch-free kernels.
//!
//! The logarithm and the sine/cosine here replace the C library's so that the bulk loop has
//! no calls and vectorises, and so that results are the same on every platform: the
//! kernels use only IEEE-754 additions, multiplications, one division, one square root and
//! bit operations, all correctly rounded, and Rust never fuses them into multiply-adds.
//!
//! * `ln v` for positive `v`: split `v = 2^e m` with `m` in `[sqrt(1/2), sqrt(2))` by
//!   integer arithmetic on the bits, then `ln m = 2 atanh(s) = 2 (s + s^3/3 + s^5/5 + ...)`
//!   with `s = (m - 1)/(m + 1)`, `|s| <= 0.1716`. The Taylor series is kept through `s^19`,
//!   whose first omitted term is below `2.5e-17` relative.
//! * `cos` and `sin` of the angle `2 pi (w + 1/2) / 2^32`: the word's top two bits (after
//!   a shift of one eighth of a turn) give the quadrant exactly, the other 30 bits an angle
//!   `x` with `|x| < pi/4`; Taylor series through `x^17` (sine) and `x^16` (cosine), first
//!   omitted terms below `1e-19` and `3e-18`.
//! * `sin` of the angle `pi ((w + 1/2) / 2^32 - 1/2)` in `(-pi/2, pi/2)`: one Taylor series
//!   through `x^23`, first omitted term below `6e-21`; without the `x^23` term the sum
//!   would exceed 1 near the ends.
//!
//! Polynomials use the exact Taylor coefficients `1/n` and `1/n!` (no fitted constants),
//! evaluated by Estrin's scheme. All three kernels are checked against the standard library
//! to a relative `4.4e-16` (two units of `2^-52`) in the tests.

use std::f64::consts::PI;

/// 2^-32.
const TWO_POW_M32: f64 = 1.0 / 4_294_967_296.0;

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
/// `ln 2` split so that `e * LN2_HI` is exact for `|e| < 2^11`: the high part has 21
/// trailing zero bits, and `LN2_HI + LN2_LO` is `ln 2` to about `1e-26`. These are the
/// values of the freely distributable fdlibm (Sun Microsystems, 1993), `e_log.c`
/// (`6.93147180369123816490e-01` and `1.90821492927058770002e-10`), given by their bits.
const LN2_HI: f64 = f64::from_bits(0x3fe6_2e42_fee0_0000);
const LN2_LO: f64 = f64::from_bits(0x3dea_39ef_3579_3c76);

/// `ln(v 2^SCALE)` for a positive, finite, normal `v`, accurate to a few units in the last
/// place. The scale is folded into the exponent, so it costs nothing.
#[inline(always)]
fn ln_scaled<const SCALE: i32>(v: f64) -> f64 {
    // Adding the offset moves mantissas at or above sqrt(1/2) into the next binade, so the
    // exponent field read afterwards is already rounded the way the reduction needs.
    let ix = v.to_bits().wrapping_add(0x3ff0_0000_0000_0000 - SQRT_HALF_BITS);
    let e = f64::from((ix >> 52) as i32 - 1023 + SCALE);
    let m = f64::from_bits((ix & 0x000f_ffff_ffff_ffff) + SQRT_HALF_BITS);
    // m - 1 is exact (Sterbenz), which keeps full relative accuracy for v near 1.
    let f = m - 1.0;
    let s = f / (2.0 + f);
    let z = s * s;
    let z2 = z * z;
    let z4 = z2 * z2;
    // 1/3 + z/5 + ... + z^8/19.
    let a0 = 1.0 / 3.0 + z * (1.0 / 5.0);
    let a1 = 1.0 / 7.0 + z * (1.0 / 9.0);
    let a2 = 1.0 / 11.0 + z * (1.0 / 13.0);
    let a3 = 1.0 / 15.0 + z * (1.0 / 17.0);
    let p = (a0 + z2 * a1) + z4 * ((a2 + z2 * a3) + z4 * (1.0 / 19.0));
    let two_s = 2.0 * s;
    let ln_m = two_s + two_s * (z * p);
    e * LN2_HI + (ln_m + e * LN2_LO)
}

/// Natural logarithm of a positive, finite, normal `v` (for the tests).
#[cfg(test)]
pub(crate) fn ln_positive(v: f64) -> f64 {
    ln_scaled::<0>(v)
}

/// `ln((w + 1/2) 2^-32)`, the logarithm of [`open_unit`]`(w)`, in `[-22.87, -1.2e-10]`.
#[inline(always)]
pub(crate) fn ln_open_unit(w: u32) -> f64 {
    // w + 1/2 is exact; taking the 2^-32 through the exponent saves a multiplication.
    ln_scaled::<-32>(word_to_f64(w) + 0.5)
}

/// `sqrt(-2 ln u)` with `u = (w + 1/2) 2^-32`: the Box-Muller radius.
#[inline(always)]
pub(crate) fn box_muller_radius(w: u32) -> f64 {
    (-2.0 * ln_open_unit(w)).sqrt()
}

/// Taylor coefficients of `(sin x - x)/x^3` in powers of `x^2`, lowest first: `+-1/n!`
/// for odd `n` from 3 to 23.
const SIN_C: [f64; 11] = [
    -1.0 / 6.0,
    1.0 / 120.0,
    -1.0 / 5_040.0,
    1.0 / 362_880.0,
    -1.0 / 39_916_800.0,
    1.0 / 6_227_020_800.0,
    -1.0 / 1_307_674_368_000.0,
    1.0 / 355_687_428_096_000.0,
    -1.0 / 121_645_100_408_832_000.0,
    1.0 / 51_090_942_171_709_440_000.0,
    -1.0 / 25_852_016_738_884_976_640_000.0,
];
/// Taylor coefficients of `(cos x - 1)/x^2` in powers of `x^2`, lowest first: `+-1/n!`
/// for even `n` from 2 to 16.
const COS_C: [f64; 8] = [
    -1.0 / 2.0,
    1.0 / 24.0,
    -1.0 / 720.0,
    1.0 / 40_320.0,
    -1.0 / 3_628_800.0,
    1.0 / 479_001_600.0,
    -1.0 / 87_178_291_200.0,
    1.0 / 20_922_789_888_000.0,
];

/// `c[0] + c[1] z + ... + c[7] z^7` by Estrin's scheme, given `z2 = z^2` and `z4 = z^4`:
/// the same terms as Horner's rule with a dependency chain half as long.
#[inline(always)]
fn estrin8(c: &[f64], z: f64, z2: f64, z4: f64) -> f64 {
    let a0 = c[0] + z * c[1];
    let a1 = c[2] + z * c[3];
    let a2 = c[4] + z * c[5];
    let a3 = c[6] + z * c[7];
    (a0 + z2 * a1) + z4 * (a2 + z2 * a3)
}

/// `(cos x, sin x)` for `|x| <= pi/4`.
#[inline(always)]
pub(crate) fn cos_sin_reduced(x: f64) -> (f64, f64) {
    let z = x * x;
    let z2 = z * z;
    let z4 = z2 * z2;
    let ps = estrin8(&SIN_C[..8], z, z2, z4);
    let pc = estrin8(&COS_C, z, z2, z4);
    (1.0 + z * pc, x + x * (z * ps))
}

/// `(cos theta, sin theta)` for the angle `theta = 2 pi (w + 1/2) / 2^32`, uniform on the
/// circle and never exactly on an axis.
#[inline(always)]
pub(crate) fn cos_sin_turn(w: u32) -> (f64, f64) {
    // Shift by an eighth of a turn so that the top two bits name the quadrant whose centre
    // is nearest; the remaining 30 bits are a signed offset from that centre.
    let v = w.wrapping_add(1 << 29);
    let q = v >> 30;
    let offset = (v & 0x3fff_ffff) as i32 - (1 << 29);
    // (offset + 1/2) turns / 2^32, as 2 pi (...): the odd integer is exact in f64.
    let x = f64::from(2 * offset + 1) * (PI * TWO_POW_M32);
    let (c, s) = cos_sin_reduced(x);
    // Rotate by q quarter turns: swap on odd q, negate by flipping sign bits. Bit masks
    // instead of branches keep the bulk loop free of jumps.
    let swap = 0u64.wrapping_sub(u64::from(q & 1));
    let (cb, sb) = (c.to_bits(), s.to_bits());
    let cos_bits = (cb & !swap) | (sb & swap);
    let sin_bits = (sb & !swap) | (cb & swap);
    let cos_sign = u64::from((q + 1) & 2) << 62;
    let sin_sign = u64::from(q & 2) << 62;
    (f64::from_bits(cos_bits ^ cos_sign), f64::from_bits(sin_bits ^ sin_sign))
}

/// `sin x` for `|x| < pi/2`.
#[inline(always)]
pub(crate) fn sin_half_turn_reduced(x: f64) -> f64 {
    let z = x * x;
    let z2 = z * z;
    let z4 = z2 * z2;
    let z8 = z4 * z4;
    let p = estrin8(&SIN_C[..8], z, z2, z4) + z8 * ((SIN_C[8] + z * SIN_C[9]) + z2 * SIN_C[10]);
    x + x * (z * p)
}

/// `sin x` for `x = pi ((w + 1/2) / 2^32 - 1/2)`, uniform on `(-pi/2, pi/2)`. Its sine has
/// the arcsine law on `(-1, 1)`, the law of the cosine of a uniform angle on the circle,
/// at the cost of one polynomial instead of two.
#[inline(always)]
pub(crate) fn sin_half_turn(w: u32) -> f64 {
    // 2 (w - 2^31) + 1 is an odd integer below 2^32 in magnitude, exact in f64.
    let x = (2.0 * f64::from((w ^ 0x8000_0000) as i32) + 1.0) * (PI * TWO_POW_M32 * 0.5);
    sin_half_turn_reduced(x)
}

/// Three standard normal deviates from one Philox block, by Box-Muller: a full pair
/// `r1 (cos theta, sin theta)` from words 0 and 1, and `r2 sin phi` from words 2 and 3,
/// with `phi` uniform on a half turn (the sign of `sin phi` covers the other half).
#[inline(always)]
pub(crate) fn gaussian3_from_words(w: [u32; 4]) -> [f64; 3] {
    let r1 = box_muller_radius(w[0]);
    let (c1, s1) = cos_sin_turn(w[1]);
    let r2 = box_muller_radius(w[2]);
    let s2 = sin_half_turn(w[3]);
    [r1 * c1, r1 * s1, r2 * s2]
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
            0x7fff_ffff,
            0x8000_0000,
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

    /// Relative tolerance of the kernels against the platform's libm through std (common
    /// practice): two units of 2^-52, i.e. 4.4e-16, tighter than the 1e-15 the crate
    /// promises. Dropping the last Taylor term of the logarithm or the cosine breaks it.
    const TOL: f64 = 2.0 * f64::EPSILON;

    #[test]
    fn logarithm_matches_std_to_4e_16_relative() {
        let mut worst = 0.0f64;
        for w in sample_words() {
            let u = open_unit(w);
            worst = worst.max(((ln_open_unit(w) - u.ln()) / u.ln()).abs());
            worst = worst.max(((ln_positive(u) - u.ln()) / u.ln()).abs());
        }
        // Other positive values, across many binades and around the split point.
        for k in 1..20_000 {
            let u = 1e-300 * 1.0371f64.powi(k);
            if u.is_finite() && u != 1.0 {
                let rel = ((ln_positive(u) - u.ln()) / u.ln()).abs();
                worst = worst.max(rel);
            }
        }
        let split = std::f64::consts::FRAC_1_SQRT_2.to_bits();
        let around_split = [split - 1, split, split + 1].map(f64::from_bits);
        for u in around_split.into_iter().chain([0.999_999_999_9, 1.000_000_000_1]) {
            worst = worst.max(((ln_positive(u) - u.ln()) / u.ln()).abs());
        }
        assert!(worst < TOL, "worst relative error of ln: {worst:e}");
    }

    #[test]
    fn reduced_sine_and_cosine_match_std_to_4e_16_relative() {
        let mut worst = 0.0f64;
        for k in -100_000i32..=100_000 {
            let x = f64::from(k) * (PI / 4.0 / 100_000.0);
            let (c, s) = cos_sin_reduced(x);
            worst = worst.max(((c - x.cos()) / x.cos()).abs());
            if x != 0.0 {
                worst = worst.max(((s - x.sin()) / x.sin()).abs());
            } else {
                assert_eq!(s, 0.0);
            }
        }
        assert!(worst < TOL, "worst relative error of sin/cos: {worst:e}");
    }

    #[test]
    fn half_turn_sine_matches_std_to_4e_16_relative() {
        let mut worst = 0.0f64;
        for k in -100_000i32..=100_000 {
            let x = f64::from(k) * (PI / 2.0 / 100_001.0);
            if x != 0.0 {
                worst = worst.max(((sin_half_turn_reduced(x) - x.sin()) / x.sin()).abs());
            }
        }
        for w in sample_words() {
            let x = PI * (open_unit(w) - 0.5);
            let s = sin_half_turn(w);
            // Near the ends sin x rounds to exactly +-1, never beyond.
            assert!(s.abs() <= 1.0);
            // The std reference's angle is rounded twice, hence absolute.
            assert!((s - x.sin()).abs() < 1e-15, "w = {w}");
        }
        assert!(worst < TOL, "worst relative error of the half-turn sine: {worst:e}");
    }

    // The full-turn version must land in the right quadrant with the right signs. The std
    // reference is evaluated at the rounded angle 2 pi t, which itself carries an absolute
    // error up to about 4e-16, so the comparison is absolute.
    #[test]
    fn turn_sine_and_cosine_match_std_in_every_quadrant() {
        let mut worst = 0.0f64;
        for w in sample_words() {
            let theta = 2.0 * PI * open_unit(w);
            let (c, s) = cos_sin_turn(w);
            worst = worst.max((c - theta.cos()).abs()).max((s - theta.sin()).abs());
            assert!((c * c + s * s - 1.0).abs() < 1e-15);
        }
        assert!(worst < 1e-15, "worst absolute error of the turn sine/cosine: {worst:e}");
    }

    // The three deviates against Box-Muller written with std (G. E. P. Box and M. E. Muller,
    // Ann. Math. Statist. 29, 610 (1958)): same words, same pairing.
    #[test]
    fn gaussian_transform_matches_box_muller_with_std_functions() {
        let mut worst = 0.0f64;
        for w0 in sample_words().step_by(7) {
            let w = [w0, w0.rotate_left(11) ^ 0x5555_5555, !w0, w0.wrapping_mul(0x9e37_79b9)];
            let g = gaussian3_from_words(w);
            let r1 = (-2.0 * open_unit(w[0]).ln()).sqrt();
            let r2 = (-2.0 * open_unit(w[2]).ln()).sqrt();
            let t1 = 2.0 * PI * open_unit(w[1]);
            let t2 = PI * (open_unit(w[3]) - 0.5);
            let reference = [r1 * t1.cos(), r1 * t1.sin(), r2 * t2.sin()];
            for i in 0..3 {
                worst = worst.max((g[i] - reference[i]).abs());
            }
        }
        assert!(worst < 5e-15, "worst absolute deviation from std Box-Muller: {worst:e}");
    }

    // The split of ln 2 must be exact in its high part and sum to ln 2. Reference:
    // ln 2 = 0.693147180559945309417232121458 (textbook value), whose excess over the f64
    // constant LN_2 is 2.3190468138462996e-17 (computed with Python's decimal module).
    #[test]
    fn ln2_split_is_consistent() {
        assert_eq!(LN2_HI.to_bits() & 0x1f_ffff, 0);
        assert_eq!(LN2_HI + LN2_LO, std::f64::consts::LN_2);
        // LN_2 - LN2_HI is exact (Sterbenz), so this is ln 2 - LN2_HI to about 1e-33.
        let remainder = (std::f64::consts::LN_2 - LN2_HI) + 2.319_046_813_846_299_6e-17;
        assert!((LN2_LO - remainder).abs() < 1e-25);
    }

    // The tail cut-off stated in the crate documentation: the smallest uniform is 2^-33, so
    // the radius never exceeds sqrt(66 ln 2) = 6.7637.
    #[test]
    fn largest_radius_is_the_documented_cut_off() {
        let r = box_muller_radius(0);
        assert!((r - (66.0 * std::f64::consts::LN_2).sqrt()).abs() < 1e-14);
        assert!((r - 6.763_705_635).abs() < 1e-9);
        assert!(box_muller_radius(u32::MAX) > 0.0);
        assert!(box_muller_radius(u32::MAX) < 2e-5);
    }
}
