//! The validated protocol: what a run does, stage by stage.
//!
//! Every value here is resolved: canonical units (ps, K, T, Å), defaults applied, and
//! checked by the config crate. Field docs give units and defaults.

pub use spindrift_dynamics::InitialState;
use spindrift_lattice::Vec3;

/// Where the initial spins come from.
#[derive(Debug, Clone, PartialEq)]
pub enum Initial {
    /// A state the integrators' crate builds (uniform, random, skyrmion, helix, given).
    State(InitialState),
    /// The final spins of the run in this folder; the caller reads them and replaces this
    /// with `Initial::State(InitialState::Given(..))` before the run (the engine reads no
    /// files).
    FromRun(std::path::PathBuf),
}

/// What a stage does, with the keys that belong to its kind.
#[derive(Debug, Clone, PartialEq)]
pub enum StageKind {
    /// Zero-temperature energy minimisation.
    Relax {
        /// Iteration limit. Default 100 000.
        max_steps: u64,
        /// Convergence threshold on `max_i |S_i x B_i|`, T. Default 1e-4.
        torque_tolerance: f64,
    },
    /// Stochastic LLG dynamics.
    Evolve {
        /// Simulated time, ps.
        duration: f64,
        /// Time step, ps.
        dt: f64,
        /// Linear temperature ramp `(from, to)` over the stage, K.
        temperature_ramp: Option<(f64, f64)>,
        /// Linear field ramp `(from, to)` over the stage, T.
        field_ramp: Option<(Vec3, Vec3)>,
    },
    /// Hysteresis loop along `direction` from `+max` to `-max` and back.
    FieldLoop {
        /// Unit direction of the swept field.
        direction: Vec3,
        /// Largest field, T.
        max: f64,
        /// Field values per branch (>= 2).
        points: usize,
        /// At each field: relax (`true`) or evolve for `settle`.
        relax: bool,
        /// Settling time per field when not relaxing, ps.
        settle: f64,
        /// Time step for settling, ps.
        dt: f64,
        /// Relaxation limits at each field.
        max_steps: u64,
        /// Relaxation tolerance at each field, T.
        torque_tolerance: f64,
    },
    /// Metropolis Monte Carlo at one temperature.
    Metropolis {
        /// Equilibration sweeps.
        equilibrate: u64,
        /// Measurement sweeps.
        measure: u64,
    },
    /// A series of temperatures, each equilibrated and measured.
    TemperatureScan {
        /// Temperatures in the order visited, K.
        temperatures: Vec<f64>,
        /// Sampler.
        method: ScanMethod,
        /// Equilibration per point: sweeps (Metropolis) or steps (LLG).
        equilibrate: u64,
        /// Measurement per point: sweeps or steps.
        measure: u64,
        /// LLG time step, ps (LLG method only).
        dt: f64,
    },
}

/// Sampler of a temperature scan.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ScanMethod {
    /// Metropolis Monte Carlo.
    Metropolis,
    /// Stochastic LLG (thermostat by Langevin noise).
    Llg,
}

/// One stage.
#[derive(Debug, Clone, PartialEq)]
pub struct Stage {
    /// Kind and kind-specific keys.
    pub kind: StageKind,
    /// Temperature, K. Default 0.
    pub temperature: f64,
    /// Applied field for this stage, T; `None` keeps the run's `[field]`.
    pub field: Option<Vec3>,
    /// Observation interval in steps (or sweeps). Default 100 (1 for relax/sweeps: see docs).
    pub observe_every: u64,
    /// Snapshot interval in steps; 0 = none besides the final state.
    pub snapshot_every: u64,
}

impl Stage {
    /// The kind's name as in configs.
    pub fn kind_name(&self) -> &'static str {
        match self.kind {
            StageKind::Relax { .. } => "relax",
            StageKind::Evolve { .. } => "evolve",
            StageKind::FieldLoop { .. } => "field-loop",
            StageKind::Metropolis { .. } => "metropolis",
            StageKind::TemperatureScan { .. } => "temperature-scan",
        }
    }
}

/// A whole protocol.
#[derive(Debug, Clone, PartialEq)]
pub struct Protocol {
    /// Base seed.
    pub seed: u64,
    /// Initial state.
    pub initial: Initial,
    /// Applied field outside stages that override it, T.
    pub field: Vec3,
    /// Stages in order.
    pub stages: Vec<Stage>,
}
