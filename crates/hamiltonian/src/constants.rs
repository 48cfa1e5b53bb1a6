//! Physical constants, CODATA 2018 (E. Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)),
//! in Spindrift's units (meV, T, K, ps).

/// Bohr magneton, meV/T.
pub const MU_B: f64 = 5.7883818060e-2;
/// Boltzmann constant, meV/K.
pub const K_B: f64 = 8.617333262e-2;
/// Electron gyromagnetic ratio, rad/(s T).
pub const GAMMA: f64 = 1.76085963023e11;
/// Electron gyromagnetic ratio, rad/(ps T).
pub const GAMMA_PER_PS: f64 = GAMMA * 1e-12;
/// Rydberg energy, meV.
pub const RYDBERG: f64 = 13.605693122994e3;

#[cfg(test)]
mod tests {
    use super::*;

    /// The values INTERFACE.md states, which are CODATA 2018: muB = 9.2740100783e-24 J/T,
    /// kB = 1.380649e-23 J/K (exact), e = 1.602176634e-19 C (exact).
    #[test]
    fn codata_2018() {
        let e = 1.602176634e-19;
        assert!((MU_B - 9.2740100783e-24 / e * 1e3).abs() < 1e-12);
        assert!((K_B - 1.380649e-23 / e * 1e3).abs() < 1e-11);
        assert_eq!(GAMMA, 1.76085963023e11);
        assert!((GAMMA_PER_PS - 0.176085963023).abs() < 1e-15);
    }
}
