//! Seeds of stages and points, derived from the run's seed so that a stage's random
//! numbers do not depend on what ran before it (nor on a resume).

/// Seed of stage `index` (SplitMix64 finalisation of the pair; common practice).
pub fn stage_seed(seed: u64, index: usize) -> u64 {
    mix(seed ^ mix(0x5EED_0000 + index as u64))
}

/// Seed of point `index` of a sweep (the `spindrift sweep` point number). It has 63
/// bits, so that it can be written back into a config (TOML integers are signed).
pub fn point_seed(seed: u64, index: usize) -> u64 {
    mix(seed ^ mix(0xB01D_0000_0000 + index as u64)) >> 1
}

fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn seeds_differ_by_stage_and_point() {
        let s: Vec<u64> = (0..100).map(|k| stage_seed(7, k)).collect();
        let mut u = s.clone();
        u.sort_unstable();
        u.dedup();
        assert_eq!(u.len(), s.len());
        assert_ne!(stage_seed(7, 0), stage_seed(8, 0));
        assert_ne!(point_seed(7, 1), stage_seed(7, 1));
    }
}
