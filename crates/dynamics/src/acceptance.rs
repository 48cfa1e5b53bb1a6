//! The Metropolis acceptance probability `exp(-dE / kB T)` without a library call, so that
//! the acceptance loop has no branches and vectorises, with the same bits on every
//! instruction-set level.
//!
//! `exp x` for `-700 <= x <= 0`: `x = k ln 2 + r` with `k = round(x / ln 2)` and
//! `|r| <= ln 2 / 2` (Cody-Waite reduction, `ln 2` split in two so that `k ln2_hi` is
//! exact), then `exp r` by its Taylor series through `r^13` (first omitted term below
//! `1e-17` relative), evaluated by Estrin's scheme, and `2^k` put into the exponent bits.
//! Only IEEE additions, multiplications and bit operations are used; Rust never contracts
//! them into fused multiply-adds. Checked against the standard library to two units of
//! `2^-52` in the tests.
//!
//! The acceptance test is `u < p` with `u` a multiple of `2^-32` in `[0, 1)`, so every `p`
//! in `(0, 2^-32]` gives the same decision (accept only when `u = 0`): arguments below
//! `-700` are clamped to `-700`, whose exponential is such a `p`, and the decisions are those
//! of the exact exponential. `-inf` (a rise in energy at `T = 0`) and NaN give `0`.

/// `ln 2` in two parts: the high part has 21 trailing zero bits, so `k * LN2_HI` is exact
/// for `|k| < 2^11`; the sum is `ln 2` to about `1e-26`. The values of the freely
/// distributable fdlibm (Sun Microsystems, 1993), `e_exp.c`, given by their bits.
const LN2_HI: f64 = f64::from_bits(0x3fe6_2e42_fee0_0000);
const LN2_LO: f64 = f64::from_bits(0x3dea_39ef_3579_3c76);

/// `1.5 * 2^52`: adding and subtracting it rounds a number of magnitude below `2^51` to the
/// nearest integer (ties to even) in the current rounding mode, without a library call.
const ROUND_MAGIC: f64 = 6_755_399_441_055_744.0;

/// Smallest argument evaluated; `exp(-700) = 9.86e-305` is still a normal number.
const X_MIN: f64 = -700.0;

/// Taylor coefficients `1/n!` of `exp r` for `n = 0 .. 13`.
const EXP_C: [f64; 14] = [
    1.0,
    1.0,
    1.0 / 2.0,
    1.0 / 6.0,
    1.0 / 24.0,
    1.0 / 120.0,
    1.0 / 720.0,
    1.0 / 5_040.0,
    1.0 / 40_320.0,
    1.0 / 362_880.0,
    1.0 / 3_628_800.0,
    1.0 / 39_916_800.0,
    1.0 / 479_001_600.0,
    1.0 / 6_227_020_800.0,
];

/// `exp x` for `X_MIN <= x <= 0`, to a few units in the last place.
#[inline(always)]
fn exp_reduced(x: f64) -> f64 {
    let shifted = x * std::f64::consts::LOG2_E + ROUND_MAGIC;
    let kf = shifted - ROUND_MAGIC;
    let r = (x - kf * LN2_HI) - kf * LN2_LO;
    let r2 = r * r;
    let r4 = r2 * r2;
    let r8 = r4 * r4;
    let c = &EXP_C;
    let a0 = c[0] + r * c[1];
    let a1 = c[2] + r * c[3];
    let a2 = c[4] + r * c[5];
    let a3 = c[6] + r * c[7];
    let a4 = c[8] + r * c[9];
    let a5 = c[10] + r * c[11];
    let a6 = c[12] + r * c[13];
    let low = (a0 + r2 * a1) + r4 * (a2 + r2 * a3);
    let high = (a4 + r2 * a5) + r4 * a6;
    let p = low + r8 * high;
    // 2^k for -1010 <= k <= 0, a normal number. The low bits of `shifted` hold `k` plus
    // those of the magic number, so `k` comes out by integer arithmetic, which vectorises
    // on every level (a float-to-integer conversion of 64-bit lanes would not).
    let k = shifted.to_bits().wrapping_sub(ROUND_MAGIC.to_bits());
    p * f64::from_bits(k.wrapping_add(1023) << 52)
}

/// The Boltzmann factor `exp x` for `x = -dE / kB T` in the acceptance test `u < p` of a
/// move with `dE > 0` (see the module documentation for the clamping): `exp x` for
/// `-700 <= x <= 0`, `exp(-700)` below, `1` above `0`, and `0` for `-inf` and NaN.
#[inline(always)]
pub(crate) fn boltzmann_factor(x: f64) -> f64 {
    let p = exp_reduced(x.clamp(X_MIN, 0.0));
    // `x >= -f64::MAX` is false for -inf and NaN.
    if x >= -f64::MAX {
        p
    } else {
        0.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Relative tolerance against the platform's libm through std (common practice): two
    /// units of 2^-52. Dropping the `r^13` term breaks it.
    const TOL: f64 = 2.0 * f64::EPSILON;

    #[test]
    fn exponential_matches_std_to_4e_16_relative() {
        let mut worst = 0.0f64;
        // Dense near 0, where most acceptance tests happen, and across the whole range,
        // including the reduction's switch points k ln 2 / 2.
        let dense = (0..200_000).map(|k| -f64::from(k) * 1e-5);
        let wide = (0..200_000).map(|k| X_MIN * f64::from(k) / 200_000.0);
        let ln2 = std::f64::consts::LN_2;
        let switches = (0..2020).flat_map(|k| {
            let x = -(f64::from(k) + 0.5) * ln2;
            [x, f64::from_bits(x.to_bits() + 1), f64::from_bits(x.to_bits() - 1)]
        });
        for x in dense.chain(wide).chain(switches).filter(|&x| x >= X_MIN) {
            let rel = ((boltzmann_factor(x) - x.exp()) / x.exp()).abs();
            worst = worst.max(rel);
        }
        assert!(worst < TOL, "worst relative error of exp: {worst:e}");
        assert_eq!(boltzmann_factor(0.0), 1.0);
        assert_eq!(boltzmann_factor(-0.0), 1.0);
    }

    #[test]
    fn ends_of_the_range() {
        assert_eq!(boltzmann_factor(f64::NEG_INFINITY), 0.0);
        assert_eq!(boltzmann_factor(f64::NAN), 0.0);
        assert_eq!(boltzmann_factor(5.0), 1.0);
        assert_eq!(boltzmann_factor(f64::INFINITY), 1.0);
        // Below the clamp the factor is positive and at most 2^-32, so `u < p` holds
        // exactly for u = 0, as it would with the exact exponential.
        for x in [-700.5, -1e4, -f64::MAX] {
            let p = boltzmann_factor(x);
            assert!(p > 0.0 && p <= 2f64.powi(-32), "{x}: {p}");
        }
    }
}
