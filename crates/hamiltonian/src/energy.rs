//! Energies split by term.

/// Energy by Hamiltonian term. Used both for totals (meV) and per-spin values (meV per
/// spin); each use says which.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct EnergyTerms {
    /// Isotropic and tensor exchange.
    pub exchange: f64,
    /// Dzyaloshinskii-Moriya interaction.
    pub dmi: f64,
    /// Uniaxial anisotropy.
    pub anisotropy: f64,
    /// Zeeman energy in the applied field.
    pub zeeman: f64,
}

impl EnergyTerms {
    /// Sum of the terms.
    pub fn total(&self) -> f64 {
        self.exchange + self.dmi + self.anisotropy + self.zeeman
    }

    /// Every term multiplied by `s` (e.g. `1/N` for per-spin values).
    pub fn scaled(&self, s: f64) -> Self {
        Self {
            exchange: self.exchange * s,
            dmi: self.dmi * s,
            anisotropy: self.anisotropy * s,
            zeeman: self.zeeman * s,
        }
    }

    /// Term-wise sum.
    pub fn add(&self, o: &Self) -> Self {
        Self {
            exchange: self.exchange + o.exchange,
            dmi: self.dmi + o.dmi,
            anisotropy: self.anisotropy + o.anisotropy,
            zeeman: self.zeeman + o.zeeman,
        }
    }
}
