//! The second stage of reading a config: everything resolved and checked, ready to run.

use crate::error::ConfigError;
use crate::load::Loaded;
use crate::protocol::{self, SystemDefaults};
use crate::system::{self, CouplingReport};
use spindrift_dynamics::Heun;
use spindrift_dynamics::InitialState;
use spindrift_engine::{Initial, Protocol};
use spindrift_hamiltonian::timestep::recommended_dt;
use spindrift_hamiltonian::Hamiltonian;
use std::time::Duration;

/// A config turned into a system and a protocol.
#[derive(Debug, Clone)]
pub struct Validated {
    /// Title (empty if none).
    pub title: String,
    /// Base seed.
    pub seed: u64,
    /// The spin system.
    pub hamiltonian: Hamiltonian,
    /// What to do with it.
    pub protocol: Protocol,
    /// Species names.
    pub species_names: Vec<String>,
    /// What each coupling entry found.
    pub couplings: Vec<CouplingReport>,
    /// Recommended time step, ps.
    pub recommended_dt: f64,
    /// Estimated peak memory of a run, bytes.
    pub memory_estimate_bytes: u64,
    /// Wall-clock checkpoint interval (`[run] checkpoint_every`).
    pub checkpoint_every: Option<Duration>,
    /// Whether snapshots are compressed (`[output] snapshot_compression`, default true).
    pub snapshot_compression: bool,
    /// Doubtful but allowed settings.
    pub warnings: Vec<String>,
    /// What the config read from other files, one line per bond table (its key, pairs and a
    /// digest of the couplings as read); empty without tables. A run records it, and a
    /// resume refuses tables whose couplings changed since.
    pub inputs: String,
}

/// Validates a loaded config. `memory_limit` (bytes) refuses systems that would not fit.
pub fn validate(loaded: &Loaded, memory_limit: Option<u64>) -> Result<Validated, ConfigError> {
    let sys = system::build(loaded, memory_limit)?;
    let h = sys.hamiltonian;
    let dt = recommended_dt(&h);
    let mut warnings = sys.warnings;
    let protocol = protocol::build(loaded, &SystemDefaults { dt, field: h.field() }, &mut warnings)?;
    if let Some(w) = skyrmion_fit(&h, &protocol) {
        warnings.push(w);
    }
    if let Some(w) = skyrmion_centre(&h, &protocol) {
        warnings.push(w);
    }
    let bonds: u64 = (0..h.cell().basis_len()).map(|b| h.bonds().from_basis(b).len() as u64).sum();
    // The rings of the fused step (one per thread; 1.4 MiB each for 1000 x 1000 x 10) for
    // as many threads as the machine runs by default: `--threads` is not known here, and
    // the rings are small next to the spins.
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get());
    let memory_estimate_bytes = h.len() as u64 * system::BYTES_PER_SPIN_HELD
        + Heun::scratch_bytes(&h, threads) as u64
        + bonds * 160
        + 4096;
    if let Some(limit) = memory_limit.filter(|&limit| memory_estimate_bytes > limit) {
        return Err(system::too_large(
            loaded,
            h.cell().cells(),
            h.cell().basis_len(),
            Some(memory_estimate_bytes),
            limit,
        ));
    }
    Ok(Validated {
        title: loaded.raw.title.clone().unwrap_or_default(),
        seed: loaded.raw.seed.unwrap_or(0),
        hamiltonian: h,
        protocol,
        species_names: sys.species_names,
        couplings: sys.couplings,
        recommended_dt: dt,
        memory_estimate_bytes,
        checkpoint_every: loaded.raw.run.as_ref().and_then(|r| r.checkpoint_every.as_ref()).map(|d| d.0),
        snapshot_compression: loaded.raw.output.as_ref().and_then(|o| o.snapshot_compression).unwrap_or(true),
        warnings,
        inputs: sys.inputs.iter().map(|l| format!("{l}\n")).collect(),
    })
}

/// A warning when an initial skyrmion's centre lies off the box along an open in-plane
/// axis (a fraction outside 0 to 1): its core is then outside the film, and what is drawn
/// is at most the edge of a skyrmion. Along a periodic axis the centre wraps (minimum
/// images), so any fraction is fine there.
fn skyrmion_centre(h: &Hamiltonian, protocol: &Protocol) -> Option<String> {
    let Initial::State(InitialState::Skyrmion { center, .. }) = &protocol.initial else { return None };
    let periodic = h.cell().periodic();
    let off: Vec<String> = (0..2)
        .filter(|&k| !periodic[k] && !(0.0..=1.0).contains(&center[k]))
        .map(|k| format!("{} along the open a{}", center[k], k + 1))
        .collect();
    (!off.is_empty()).then(|| {
        format!(
            "initial.center: {} lies outside the box (centres are fractions 0 to 1 of its edges); the skyrmion's core is not in the film",
            off.join(" and ")
        )
    })
}

/// A warning when an initial skyrmion is wider than the box in the plane: its edge then
/// meets the box's faces (or its own periodic images), and a radius beyond both sides
/// leaves the whole film reversed, which a mistyped unit or radius easily gives.
fn skyrmion_fit(h: &Hamiltonian, protocol: &Protocol) -> Option<String> {
    let Initial::State(InitialState::Skyrmion { radius, .. }) = &protocol.initial else { return None };
    let cell = h.cell();
    let (v, n) = (cell.crystal().vectors, cell.cells());
    let side = |k: usize| n[k] as f64 * spindrift_lattice::norm(v[k]);
    (2.0 * radius > side(0).min(side(1))).then(|| {
        format!(
            "initial.radius: a skyrmion of radius {radius} Å does not fit in the box ({:.1} x {:.1} Å in the plane); it is cut by the box's edges",
            side(0),
            side(1)
        )
    })
}
