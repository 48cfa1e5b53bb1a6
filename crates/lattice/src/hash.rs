//! A stateless hash from `(seed, index)` to a uniform number, for set-up draws such as
//! random dilution that must not depend on iteration order or thread count.

/// Uniform number in `[0, 1)` from `(seed, stream, index)`, by SplitMix64 finalisation
/// (S. Vigna, "SplitMix64", common practice for seeding and hashing 64-bit keys).
pub fn unit_hash(seed: u64, stream: u64, index: u64) -> f64 {
    let mut z = seed
        .wrapping_add(stream.wrapping_mul(0xD1B5_4A32_D192_ED03))
        .wrapping_add(index.wrapping_mul(0x9E37_79B9_7F4A_7C15));
    for _ in 0..2 {
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
    }
    (z >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}
