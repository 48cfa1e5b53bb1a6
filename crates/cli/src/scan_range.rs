//! Warnings for temperature scans whose range misses the ordering temperature that the
//! mean-field and RPA estimates point to, before hours go into a scan without a peak.

use spindrift_engine::{Protocol, StageKind};
use spindrift_hamiltonian::curie::CurieEstimates;

/// A scan that ends below this fraction of the RPA estimate most likely ends below the
/// model's Tc. RPA is close to Monte Carlo where both are known: for the simple-cubic
/// Heisenberg model `kB Tc = 2 J / W = 1.319 J` with Watson's integral W = 1.516386
/// (G. N. Watson, Q. J. Math. 10, 266 (1939)) against 1.4429 J (Chen, Ferrenberg and
/// Landau, PRB 48, 3249 (1993)), 9% apart; half is a wide margin for films and anisotropy.
const BELOW_RPA: f64 = 0.5;

/// One warning per temperature scan that ends below half the RPA estimate, or starts above
/// the mean-field one: classical mean field overestimates a ferromagnet's Tc (common
/// practice), so no susceptibility peak is expected above it. Both estimates are for
/// ferromagnetic order; with none that is positive (an antiferromagnet) nothing is said.
pub fn scan_warnings(protocol: &Protocol, curie: &CurieEstimates) -> Vec<String> {
    let mut out = Vec::new();
    let mean_field = curie.mean_field;
    if !(mean_field.is_finite() && mean_field > 0.0) {
        return out;
    }
    for (k, stage) in protocol.stages.iter().enumerate() {
        let StageKind::TemperatureScan { temperatures, .. } = &stage.kind else { continue };
        let lo = temperatures.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = temperatures.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        match curie.rpa {
            Some(rpa) if rpa.is_finite() && rpa > 0.0 && hi < BELOW_RPA * rpa => out.push(format!(
                "stage.{k}: the scan ends at {hi} K, below half the RPA estimate of Tc ({rpa:.1} K): the susceptibility peak is likely above the range"
            )),
            _ if lo > mean_field => out.push(format!(
                "stage.{k}: the scan starts at {lo} K, above the mean-field estimate of Tc ({mean_field:.1} K), which overestimates it: no susceptibility peak is expected in the range"
            )),
            _ => {}
        }
    }
    out
}
