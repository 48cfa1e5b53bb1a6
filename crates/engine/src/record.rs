//! What a run reports: the rows, snapshots and summaries that a [`crate::Sink`] stores.
//!
//! Units: time ps, temperature K, field T, energy meV per spin, moments μB, positions Å.

use spindrift_hamiltonian::EnergyTerms;
use spindrift_lattice::Vec3;

/// Static description of the simulated system, written once at the start of a run.
#[derive(Debug, Clone, Default)]
pub struct RunHeader {
    /// Free-text title from the config.
    pub title: String,
    /// Base seed of the run.
    pub seed: u64,
    /// The resolved configuration, as TOML text.
    pub config_toml: String,
    /// What the configuration read from other files (a line per bond table: its key, pairs
    /// and a digest of the couplings as read); empty when it read none.
    pub inputs: String,
    /// Program version (semver).
    pub program_version: String,
    /// Cartesian position of every site, Å.
    pub position: Vec<Vec3>,
    /// Basis-site index of every site.
    pub site: Vec<u32>,
    /// Species index of every site.
    pub species: Vec<u32>,
    /// Moment of every site, μB (0 on a vacant site).
    pub moment: Vec<f64>,
    /// Layer index of every site along the stacking axis.
    pub layer: Vec<u32>,
    /// Species names, indexed by species.
    pub species_names: Vec<String>,
    /// Number of layers.
    pub layer_count: usize,
}

/// Identification of a stage when it begins.
#[derive(Debug, Clone, PartialEq)]
pub struct StageInfo {
    /// Stage index, from 0.
    pub index: usize,
    /// Stage kind as in the config (`relax`, `evolve`, `field-loop`, `metropolis`, `temperature-scan`).
    pub kind: String,
    /// Number of layers (columns of `charge_by_layer`).
    pub layer_count: usize,
    /// Number of species.
    pub species_count: usize,
}

/// One row of a stage's time series.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SeriesRow {
    /// Step count within the stage (Heun steps, relaxation iterations or Monte Carlo sweeps).
    pub step: u64,
    /// Simulated time since the stage began, ps (0 for stages without time).
    pub time: f64,
    /// Temperature, K.
    pub temperature: f64,
    /// Applied field, T.
    pub field: Vec3,
    /// Moment-weighted magnetisation, `|m| <= 1`.
    pub magnetization: Vec3,
    /// Energy by term, meV per spin.
    pub energy: EnergyTerms,
    /// Topological charge, mean over layers.
    pub charge: f64,
    /// Topological charge of each layer.
    pub charge_by_layer: Vec<f64>,
    /// Magnetisation of each species.
    pub magnetization_by_species: Vec<Vec3>,
    /// Magnetisation of each layer.
    pub magnetization_by_layer: Vec<Vec3>,
}

/// One row of a loop or scan: the averages at one field or temperature.
/// Each `_err` is a one-standard-error estimate (0 where the value is not statistical).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PointRow {
    /// Temperature, K.
    pub temperature: f64,
    /// Applied field, T.
    pub field: Vec3,
    /// Mean magnetisation vector.
    pub magnetization: Vec3,
    /// Its error.
    pub magnetization_err: Vec3,
    /// Mean of `|m|`.
    pub m_abs: f64,
    /// Its error.
    pub m_abs_err: f64,
    /// Susceptibility per spin `N (<|m|^2> - <|m|>^2) / (kB T)`, 1/meV (see `spindrift_observe::statistics`).
    pub susceptibility: f64,
    /// Its error.
    pub susceptibility_err: f64,
    /// Heat capacity per spin `(<E^2> - <E>^2) / (N kB T^2)`, in units of kB.
    pub heat_capacity: f64,
    /// Its error.
    pub heat_capacity_err: f64,
    /// Binder cumulant `1 - <m^4> / (3 <m^2>^2)`.
    pub binder: f64,
    /// Its error.
    pub binder_err: f64,
    /// Mean energy, meV per spin.
    pub energy: f64,
    /// Its error.
    pub energy_err: f64,
    /// Integrated autocorrelation time of `|m|`, in samples (sweeps or observations).
    pub autocorrelation_time: f64,
    /// Number of samples averaged.
    pub samples: u64,
}

/// The state at the end of a stage.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FinalState {
    /// Simulated time within the stage, ps.
    pub time: f64,
    /// Magnetisation.
    pub magnetization: Vec3,
    /// Energy, meV per spin.
    pub energy: f64,
    /// Energy by term, meV per spin.
    pub energy_terms: EnergyTerms,
    /// Topological charge, mean over layers.
    pub charge: f64,
}

/// A Curie-temperature estimate.
#[derive(Debug, Clone, PartialEq)]
pub struct CurieEstimate {
    /// Tc, K.
    pub value: f64,
    /// One-standard-error estimate, K.
    pub error: f64,
    /// How it was found (e.g. `susceptibility-peak`, `binder-crossing`), or `none`.
    pub method: String,
    /// Why there is no value (`value` and `error` NaN, `method` `none`): a scan whose
    /// susceptibility peaks at its edge, for one; empty when a value was found.
    pub note: String,
}

/// Summary of one finished stage.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct StageSummary {
    /// Stage index.
    pub index: usize,
    /// Stage kind.
    pub kind: String,
    /// Steps (Heun steps, relaxation iterations or sweeps) done.
    pub steps: u64,
    /// Wall-clock time of the stage, s.
    pub wall_seconds: f64,
    /// Throughput: spins times steps per wall second.
    pub spin_steps_per_second: f64,
    /// The state at the end.
    pub final_state: FinalState,
    /// For temperature scans.
    pub curie_temperature: Option<CurieEstimate>,
    /// For field loops: coercive field of the descending and ascending branch, T
    /// (signed field along the loop direction where `m` along it crosses zero).
    pub coercive_field: Option<(f64, f64)>,
    /// For field loops: `m` along the loop direction at zero field on the descending branch.
    pub remanence: Option<f64>,
    /// Further named scalars (e.g. relax: `torque` in T, `converged` as 0/1).
    pub extra: Vec<(String, f64)>,
}

/// Counts of what a stage has written, so a resumed run can cut its files back to the
/// state of the checkpoint.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct RowCounts {
    /// Rows of `series/`.
    pub series: u64,
    /// Rows of `points/`.
    pub points: u64,
    /// Entries of `snapshots/`.
    pub snapshots: u64,
}

/// Everything needed to continue a run exactly where it stopped.
///
/// The engine fills the maps with its own named values; storage treats them as opaque.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Checkpoint {
    /// Index of the stage in progress.
    pub stage: usize,
    /// Spins of every site.
    pub spins: Vec<Vec3>,
    /// Named real values (time, adaptive step widths, ...).
    pub scalars: std::collections::BTreeMap<String, f64>,
    /// Named counters (step, point index, ...).
    pub counters: std::collections::BTreeMap<String, u64>,
    /// Named real arrays (samples collected so far, ...).
    pub arrays: std::collections::BTreeMap<String, Vec<f64>>,
    /// What each stage begun so far has written, indexed by stage.
    pub rows: Vec<RowCounts>,
    /// Summaries of the stages already finished.
    pub finished: Vec<StageSummary>,
}
