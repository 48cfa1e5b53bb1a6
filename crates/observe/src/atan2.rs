//! The two-argument arctangent from IEEE-754 operations only, for the solid angles of the
//! topological charge.
//!
//! The C library's `atan2` is a call per triangle (3% of a whole 300 K Heun run with the
//! charge observed every 100 steps) and glibc picks its implementation by CPU, so the last
//! bit could differ between the nodes a run is resumed on. This one uses additions,
//! multiplications, two divisions and comparisons, all correctly rounded, so every machine
//! gives the same bits; it inlines into the observer's loop.
//!
//! # Method
//!
//! With `t = min(|x|, |y|) / max(|x|, |y|)` in `[0, 1]`, `atan t` for `t <= tan(pi/8)`
//! comes from `atan u = u + u z P(z)`, `z = u^2`, and above it from
//! `atan t = pi/4 + atan((t - 1)/(t + 1))`, whose argument lies in `[-tan(pi/8), 0]`. `P`
//! is the degree-9 minimax fit of `(atan(u)/u - 1)/z` on `z <= tan^2(pi/8)` (Remez exchange
//! in 60-digit arithmetic, `crates/noise/tools/fit_polynomials.py`; maximum error
//! `8.1e-16`, below `1.4e-16` in `atan u`). The octant is then restored:
//! `pi/2 - a` when `|y| > |x|`, `pi - a` when `x < 0` (or `x = -0`), and the sign of `y`,
//! zeros included, as C99 Annex F specifies: `atan2(+-0, -0) = +-pi`,
//! `atan2(+-0, +0) = +-0`. The result is within a few units in the last place of the
//! correctly rounded value for finite arguments (the test compares with the C library).

use std::f64::consts::{FRAC_PI_2, FRAC_PI_4, PI};

/// `tan(pi/8) = sqrt(2) - 1`.
const TAN_PI_8: f64 = 0.414_213_562_373_095_03;

/// `(atan(u)/u - 1)/z` as a polynomial in `z = u^2`, lowest power first (see the module
/// documentation).
const ATAN_P: [f64; 10] = [
    -0.33333333333333254,
    0.19999999999904064,
    -0.1428571426697285,
    0.11111109688830824,
    -0.09090854121389062,
    0.07691081448591146,
    -0.06649873322582686,
    0.057378267674523774,
    -0.04487975200312122,
    0.02281057078179523,
];

/// `atan(y / x)` in the quadrant of `(x, y)`, in `[-pi, pi]` (rad), for finite arguments.
#[inline(always)]
pub fn atan2(y: f64, x: f64) -> f64 {
    let (ax, ay) = (x.abs(), y.abs());
    let swap = ay > ax;
    let (num, den) = if swap { (ax, ay) } else { (ay, ax) };
    // Both zero: the angle is that of the zeros' signs, restored below from t = 0.
    let t = if den > 0.0 { num / den } else { 0.0 };
    let big = t > TAN_PI_8;
    let u = if big { (t - 1.0) / (t + 1.0) } else { t };
    let z = u * u;
    let mut p = ATAN_P[ATAN_P.len() - 1];
    for &c in ATAN_P[..ATAN_P.len() - 1].iter().rev() {
        p = c + z * p;
    }
    let mut a = u + u * (z * p);
    if big {
        a += FRAC_PI_4;
    }
    if swap {
        a = FRAC_PI_2 - a;
    }
    if x.is_sign_negative() {
        a = PI - a;
    }
    a.copysign(y)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Units in the last place between `a` and `b` (same sign, finite).
    fn ulps(a: f64, b: f64) -> u64 {
        (a.to_bits() as i64 - b.to_bits() as i64).unsigned_abs()
    }

    // Against the C library's atan2 (glibc documents it within 1 ulp of the exact value):
    // a deterministic spread of directions and magnitudes, both signs, the octant
    // boundaries and the reduction point tan(pi/8); at most 4 ulp apart.
    #[test]
    fn matches_the_c_library_to_a_few_ulp() {
        let mut worst = 0u64;
        let mut x = 0x9e37_79b9_7f4a_7c15u64;
        let mut next = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            (x >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut cases: Vec<(f64, f64)> = Vec::new();
        for _ in 0..200_000 {
            let angle = (2.0 * next() - 1.0) * PI;
            let r = 10f64.powf(12.0 * next() - 6.0);
            cases.push((r * angle.sin(), r * angle.cos()));
        }
        for k in -8..=8 {
            let angle = k as f64 * FRAC_PI_4 / 2.0;
            cases.push((angle.sin(), angle.cos()));
        }
        for s in [1.0, -1.0] {
            for t in [TAN_PI_8, TAN_PI_8 * (1.0 + 1e-15), TAN_PI_8 * (1.0 - 1e-15), 1.0, 1e-300, 0.5] {
                cases.extend([(s * t, 1.0), (1.0, s * t), (s * t, -1.0), (-1.0, s * t)]);
            }
        }
        for (y, x) in cases {
            let (ours, libm) = (atan2(y, x), y.atan2(x));
            assert_eq!(ours.is_sign_negative(), libm.is_sign_negative(), "atan2({y}, {x})");
            let d = ulps(ours, libm);
            assert!(d <= 4, "atan2({y}, {x}) = {ours}, C library {libm}, {d} ulp");
            worst = worst.max(d);
        }
        assert!(worst <= 4);
    }

    // The signed zeros and axes of C99 Annex F (F.9.1.4).
    #[test]
    fn signed_zeros_and_axes_follow_c99() {
        assert_eq!(atan2(0.0, 0.0).to_bits(), 0.0f64.to_bits());
        assert_eq!(atan2(-0.0, 0.0).to_bits(), (-0.0f64).to_bits());
        assert_eq!(atan2(0.0, -0.0), PI);
        assert_eq!(atan2(-0.0, -0.0), -PI);
        assert_eq!(atan2(0.0, -1.0), PI);
        assert_eq!(atan2(-0.0, -1.0), -PI);
        assert_eq!(atan2(1.0, 0.0), FRAC_PI_2);
        assert_eq!(atan2(-1.0, 0.0), -FRAC_PI_2);
        assert_eq!(atan2(1.0, -0.0), FRAC_PI_2);
        assert!(atan2(f64::NAN, 1.0).is_nan());
    }
}
