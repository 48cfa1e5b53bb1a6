//! Run-time choice of vector instructions for the hot loops.
//!
//! The default build targets the baseline x86-64 (SSE2), so that one binary runs on every
//! node of a cluster. The hot loops (field evaluation, noise, integrator stages, Monte
//! Carlo trials) are written once as plain Rust and compiled three times by
//! [`multiversion!`]: for the baseline, for x86-64-v3 (AVX2) and for x86-64-v4 (AVX-512).
//! At run time the widest level the CPU supports is used ([`level`]).
//!
//! # Same bits on every level
//!
//! The three copies compute bitwise the same numbers. The levels differ only in how many
//! lanes an instruction handles; every operation is still one correctly rounded IEEE-754
//! addition, multiplication, division or square root, because Rust never contracts
//! `a * b + c` into a fused multiply-add on its own (the `fma` feature is enabled only because
//! x86-64-v3 includes it; no code here calls `mul_add`). The end-to-end test
//! `results_are_identical_on_every_instruction_set_level` (crates/cli) compares the
//! baseline and the best level of the machine it runs on, bit for bit.
//!
//! # Choosing by hand
//!
//! The environment variable `SPINDRIFT_ISA` caps the level: `baseline`, `v3` or `v4`
//! (a level the CPU lacks is never used). It is read once, at the first call of [`level`].
#![deny(missing_docs)]

use std::sync::OnceLock;

/// An instruction-set level of x86-64 (the psABI levels; on other architectures only
/// [`Level::Baseline`] exists).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Level {
    /// What the target was compiled for (SSE2 on x86-64).
    Baseline,
    /// x86-64-v3: AVX2, FMA, BMI1/2 (Intel Haswell, AMD Zen and later).
    V3,
    /// x86-64-v4: AVX-512 F/BW/CD/DQ/VL (Intel Skylake-SP, AMD Zen 4 and later).
    V4,
}

impl Level {
    /// The name used by `SPINDRIFT_ISA` and in run metadata.
    pub fn name(self) -> &'static str {
        match self {
            Level::Baseline => "baseline",
            Level::V3 => "x86-64-v3",
            Level::V4 => "x86-64-v4",
        }
    }

    /// Parses a `SPINDRIFT_ISA` value (`baseline`, `v3`, `v4`, or the full names).
    pub fn parse(s: &str) -> Option<Level> {
        match s.trim().to_ascii_lowercase().as_str() {
            "baseline" | "sse2" | "x86-64" => Some(Level::Baseline),
            "v3" | "x86-64-v3" | "avx2" => Some(Level::V3),
            "v4" | "x86-64-v4" | "avx512" => Some(Level::V4),
            _ => None,
        }
    }
}

/// The widest level this CPU supports.
pub fn supported() -> Level {
    #[cfg(target_arch = "x86_64")]
    {
        let v3 = std::arch::is_x86_feature_detected!("avx2")
            && std::arch::is_x86_feature_detected!("fma")
            && std::arch::is_x86_feature_detected!("bmi1")
            && std::arch::is_x86_feature_detected!("bmi2")
            && std::arch::is_x86_feature_detected!("lzcnt")
            && std::arch::is_x86_feature_detected!("movbe")
            && std::arch::is_x86_feature_detected!("popcnt");
        let v4 = v3
            && std::arch::is_x86_feature_detected!("avx512f")
            && std::arch::is_x86_feature_detected!("avx512bw")
            && std::arch::is_x86_feature_detected!("avx512cd")
            && std::arch::is_x86_feature_detected!("avx512dq")
            && std::arch::is_x86_feature_detected!("avx512vl");
        if v4 {
            Level::V4
        } else if v3 {
            Level::V3
        } else {
            Level::Baseline
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        Level::Baseline
    }
}

/// The level the hot loops use: [`supported`], capped by `SPINDRIFT_ISA` when that is set
/// to a level name. Detected once per process.
pub fn level() -> Level {
    static LEVEL: OnceLock<Level> = OnceLock::new();
    *LEVEL.get_or_init(|| {
        let best = supported();
        match std::env::var("SPINDRIFT_ISA").ok().as_deref().and_then(Level::parse) {
            Some(cap) => cap.min(best),
            None => best,
        }
    })
}

/// Defines a function whose body is compiled for every [`Level`] and run on the one
/// [`level`] picks. The body must be safe code; the function may take any arguments whose
/// types are nameable without `Self` or generic parameters of an enclosing item.
///
/// ```
/// spindrift_isa::multiversion! {
///     /// Sum of squares.
///     pub fn sum_sq(x: &[f64]) -> f64 {
///         x.iter().map(|v| v * v).sum()
///     }
/// }
/// assert_eq!(sum_sq(&[1.0, 2.0]), 5.0);
/// ```
///
/// Everything the body calls should be `#[inline]` so that it is compiled into each copy;
/// a call that is not inlined runs at the baseline level.
#[macro_export]
macro_rules! multiversion {
    (
        $(#[$meta:meta])*
        $vis:vis fn $name:ident ( $($arg:ident : $ty:ty),* $(,)? ) $(-> $ret:ty)? $body:block
    ) => {
        $(#[$meta])*
        $vis fn $name($($arg: $ty),*) $(-> $ret)? {
            #[inline(always)]
            fn portable($($arg: $ty),*) $(-> $ret)? $body

            #[cfg(target_arch = "x86_64")]
            #[target_feature(enable = "avx2,fma,bmi1,bmi2,lzcnt,movbe,popcnt")]
            fn v3($($arg: $ty),*) $(-> $ret)? {
                portable($($arg),*)
            }

            #[cfg(target_arch = "x86_64")]
            #[target_feature(
                enable = "avx2,fma,bmi1,bmi2,lzcnt,movbe,popcnt,avx512f,avx512bw,avx512cd,avx512dq,avx512vl"
            )]
            fn v4($($arg: $ty),*) $(-> $ret)? {
                portable($($arg),*)
            }

            match $crate::level() {
                #[cfg(target_arch = "x86_64")]
                // SAFETY: `level` returns V4 only when the CPU reports every feature that
                // `v4` is compiled with (see `spindrift_isa::supported`).
                $crate::Level::V4 => {
                    #[allow(unsafe_code)]
                    unsafe {
                        v4($($arg),*)
                    }
                }
                #[cfg(target_arch = "x86_64")]
                // SAFETY: as above, for the features of `v3`.
                $crate::Level::V3 => {
                    #[allow(unsafe_code)]
                    unsafe {
                        v3($($arg),*)
                    }
                }
                _ => portable($($arg),*),
            }
        }
    };
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_parse_back() {
        for l in [Level::Baseline, Level::V3, Level::V4] {
            assert_eq!(Level::parse(l.name()), Some(l));
        }
        assert_eq!(Level::parse("V4"), Some(Level::V4));
        assert_eq!(Level::parse("avx9"), None);
    }

    #[test]
    fn level_never_exceeds_the_cpu() {
        assert!(level() <= supported());
    }

    multiversion! {
        /// A loop the compiler vectorises differently per level.
        fn scaled_sum(x: &[f64], a: f64) -> f64 {
            let mut s = [0.0; 4];
            for c in x.chunks_exact(4) {
                for k in 0..4 {
                    s[k] += a * c[k];
                }
            }
            (s[0] + s[1]) + (s[2] + s[3])
        }
    }

    #[test]
    fn multiversioned_function_runs() {
        let x: Vec<f64> = (0..1000).map(|k| (k as f64).sqrt()).collect();
        let expect = {
            let mut s = [0.0; 4];
            for c in x.chunks_exact(4) {
                for k in 0..4 {
                    s[k] += 0.1 * c[k];
                }
            }
            (s[0] + s[1]) + (s[2] + s[3])
        };
        assert_eq!(scaled_sum(&x, 0.1).to_bits(), expect.to_bits());
    }
}
