//! The runner: steps a protocol's stages, observes on schedule, and stops and resumes at
//! safe points.
//!
//! Data flows one way: the runner owns the spins and the Hamiltonian, the stages step
//! them, observations become records handed to the [`Sink`], and nothing comes back.
//! Each stage keeps its progress in a [`Cursor`] of named counters, reals and arrays;
//! a checkpoint is the spins plus the cursor of the stage in progress, so a resumed run
//! continues exactly, the random numbers being keyed by stage seed and step index.

use crate::control::{Control, Monitor, Poll, StopReason};
use crate::error::EngineError;
use crate::protocol::{Initial, Protocol};
use crate::record::{Checkpoint, FinalState, RowCounts, RunHeader, SeriesRow, StageInfo, StageSummary};
use crate::seeds::stage_seed;
use crate::sink::Sink;
use crate::stages;
use spindrift_dynamics::StepError;
use spindrift_hamiltonian::Hamiltonian;
use spindrift_lattice::Vec3;
use spindrift_observe::{ChargeObserver, Magnetization, MagnetizationObserver, TopologicalCharge};
use std::collections::BTreeMap;
use std::time::Instant;

/// The initial spins a protocol asks for. [`Initial::FromRun`] must have been replaced
/// by a given state (the engine reads no files).
pub fn initial_spins(h: &Hamiltonian, protocol: &Protocol) -> Result<Vec<Vec3>, EngineError> {
    let init = match &protocol.initial {
        Initial::State(state) => state,
        Initial::FromRun(p) => {
            return Err(EngineError::Setup {
                stage: 0,
                message: format!("initial state file {} was not read", p.display()),
            })
        }
    };
    let mut spins = vec![[0.0; 3]; h.len()];
    init.apply(h, &mut spins, protocol.seed)
        .map_err(|e| EngineError::Setup { stage: 0, message: format!("initial state: {e}") })?;
    Ok(spins)
}

/// Progress of the stage in progress, by name.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Cursor {
    /// Named counters.
    pub counters: BTreeMap<String, u64>,
    /// Named reals.
    pub scalars: BTreeMap<String, f64>,
    /// Named arrays.
    pub arrays: BTreeMap<String, Vec<f64>>,
}

impl Cursor {
    /// A counter, 0 if absent.
    pub fn counter(&self, k: &str) -> u64 {
        self.counters.get(k).copied().unwrap_or(0)
    }
    /// A real, if present.
    pub fn scalar(&self, k: &str) -> Option<f64> {
        self.scalars.get(k).copied()
    }
    /// An array, empty if absent.
    pub fn array(&self, k: &str) -> Vec<f64> {
        self.arrays.get(k).cloned().unwrap_or_default()
    }
}

/// How a run ended without error.
#[derive(Debug, Clone, PartialEq)]
pub enum Outcome {
    /// Every stage finished.
    Finished(Vec<StageSummary>),
    /// Stopped early with a checkpoint written.
    Stopped {
        /// Why.
        reason: StopReason,
        /// Summaries of the stages finished so far.
        finished: Vec<StageSummary>,
    },
}

/// What a stage returns.
pub(crate) enum StageEnd {
    Done(Box<StageSummary>),
    Stopped(StopReason),
}

/// The state of a run in progress, shared with the stage implementations.
pub struct Runner<'a> {
    pub(crate) h: Hamiltonian,
    pub(crate) spins: Vec<Vec3>,
    pub(crate) protocol: &'a Protocol,
    sink: &'a mut dyn Sink,
    pub(crate) monitor: &'a mut dyn Monitor,
    control: Control,
    magnetization: MagnetizationObserver,
    charge: ChargeObserver,
    m_buf: Magnetization,
    q_buf: TopologicalCharge,
    rows: Vec<RowCounts>,
    finished: Vec<StageSummary>,
    /// Cursor restored from a checkpoint, for the stage it belongs to.
    resumed: Option<(usize, Cursor)>,
    /// Set when resuming at a point whose observation was already written.
    pub(crate) skip_observation: bool,
    pub(crate) stage_index: usize,
}

impl<'a> Runner<'a> {
    /// A runner for a fresh run. The initial state must not be
    /// [`Initial::FromRun`](crate::Initial::FromRun) (the caller reads the file and passes the spins).
    pub fn new(
        h: Hamiltonian,
        protocol: &'a Protocol,
        sink: &'a mut dyn Sink,
        monitor: &'a mut dyn Monitor,
        control: Control,
    ) -> Result<Self, EngineError> {
        let spins = initial_spins(&h, protocol)?;
        Ok(Self::with_spins(h, spins, protocol, sink, monitor, control))
    }

    /// A runner that continues from a checkpoint.
    pub fn resume(
        h: Hamiltonian,
        protocol: &'a Protocol,
        sink: &'a mut dyn Sink,
        monitor: &'a mut dyn Monitor,
        control: Control,
        checkpoint: Checkpoint,
    ) -> Result<Self, EngineError> {
        if checkpoint.spins.len() != h.len() {
            return Err(EngineError::Setup {
                stage: checkpoint.stage,
                message: format!(
                    "checkpoint has {} spins but the system has {}",
                    checkpoint.spins.len(),
                    h.len()
                ),
            });
        }
        let mut r = Self::with_spins(h, checkpoint.spins, protocol, sink, monitor, control);
        r.rows = checkpoint.rows;
        r.finished = checkpoint.finished;
        r.resumed = Some((
            checkpoint.stage,
            Cursor { counters: checkpoint.counters, scalars: checkpoint.scalars, arrays: checkpoint.arrays },
        ));
        Ok(r)
    }

    fn with_spins(
        h: Hamiltonian,
        spins: Vec<Vec3>,
        protocol: &'a Protocol,
        sink: &'a mut dyn Sink,
        monitor: &'a mut dyn Monitor,
        control: Control,
    ) -> Self {
        let magnetization = MagnetizationObserver::new(&h);
        let charge = ChargeObserver::new(h.cell());
        Self {
            magnetization,
            charge,
            m_buf: Magnetization::default(),
            q_buf: TopologicalCharge::default(),
            h,
            spins,
            protocol,
            sink,
            monitor,
            control,
            rows: Vec::new(),
            finished: Vec::new(),
            resumed: None,
            skip_observation: false,
            stage_index: 0,
        }
    }

    /// The spins as they are now.
    pub fn spins(&self) -> &[Vec3] {
        &self.spins
    }

    /// The Hamiltonian.
    pub fn hamiltonian(&self) -> &Hamiltonian {
        &self.h
    }

    /// Runs (or continues) every stage. `header` is written first on a fresh run.
    pub fn run(&mut self, header: Option<&RunHeader>) -> Result<Outcome, EngineError> {
        let first = match &self.resumed {
            Some((stage, _)) => *stage,
            None => {
                if let Some(h) = header {
                    self.sink.header(h)?;
                }
                0
            }
        };
        for index in first..self.protocol.stages.len() {
            self.stage_index = index;
            let stage = &self.protocol.stages[index];
            let cursor = match self.resumed.take() {
                Some((s, c)) if s == index => {
                    self.skip_observation = true;
                    c
                }
                _ => {
                    self.skip_observation = false;
                    let info = StageInfo {
                        index,
                        kind: stage.kind_name().to_string(),
                        layer_count: self.h.cell().layer_count(),
                        species_count: self.h.species().len(),
                    };
                    self.sink.begin_stage(&info)?;
                    if self.rows.len() <= index {
                        self.rows.resize(index + 1, RowCounts::default());
                    }
                    Cursor::default()
                }
            };
            self.h.set_field(stage.field.unwrap_or(self.protocol.field));
            let started = Instant::now();
            let end = stages::run_stage(self, stage, cursor, stage_seed(self.protocol.seed, index));
            match end {
                Ok(StageEnd::Done(summary)) => {
                    let mut summary = *summary;
                    summary.wall_seconds = started.elapsed().as_secs_f64();
                    summary.spin_steps_per_second = if summary.wall_seconds > 0.0 {
                        self.h.spin_count() as f64 * summary.steps as f64 / summary.wall_seconds
                    } else {
                        0.0
                    };
                    self.sink.end_stage(&summary)?;
                    self.monitor.stage_end(index);
                    self.finished.push(summary);
                }
                Ok(StageEnd::Stopped(reason)) => {
                    self.sink.flush()?;
                    return Ok(Outcome::Stopped { reason, finished: self.finished.clone() });
                }
                Err(e) => {
                    // Save the last good state (the integrators leave it in place on failure).
                    let _ = self.sink.final_spins(&self.spins);
                    let _ = self.sink.flush();
                    return Err(e);
                }
            }
        }
        self.sink.final_spins(&self.spins)?;
        self.sink.flush()?;
        Ok(Outcome::Finished(self.finished.clone()))
    }

    /// Measures magnetisation and charge into the observers' buffers and returns the
    /// energy by term per spin.
    fn observe_all(&mut self) -> Result<spindrift_hamiltonian::EnergyTerms, EngineError> {
        let stage = self.stage_index;
        self.magnetization
            .observe_into(&self.spins, &mut self.m_buf)
            .map_err(|e| EngineError::Setup { stage, message: e.to_string() })?;
        self.charge
            .observe_into(&self.spins, &mut self.q_buf)
            .map_err(|e| EngineError::Setup { stage, message: e.to_string() })?;
        let n = self.h.spin_count().max(1) as f64;
        Ok(self.h.energy_terms(&self.spins).scaled(1.0 / n))
    }

    /// Observes the spins: writes a series row and returns it.
    pub(crate) fn observe(
        &mut self,
        step: u64,
        time: f64,
        temperature: f64,
    ) -> Result<SeriesRow, EngineError> {
        let stage = self.stage_index;
        let energy = self.observe_all()?;
        let row = SeriesRow {
            step,
            time,
            temperature,
            field: self.h.field(),
            magnetization: self.m_buf.total,
            energy,
            charge: self.q_buf.mean,
            charge_by_layer: self.q_buf.by_layer.clone(),
            magnetization_by_species: self.m_buf.by_species.clone(),
            magnetization_by_layer: self.m_buf.by_layer.clone(),
        };
        self.sink.series(stage, &row)?;
        self.rows[stage].series += 1;
        let m = row.magnetization;
        self.monitor.update(step, time, (m[0] * m[0] + m[1] * m[1] + m[2] * m[2]).sqrt(), row.charge);
        Ok(row)
    }

    /// Magnetisation and energy per spin only (for samples). `total_energy` (meV) is the
    /// caller's running total when it keeps one (Monte Carlo sums its accepted changes);
    /// `None` evaluates it.
    pub(crate) fn measure(&mut self, total_energy: Option<f64>) -> Result<(Vec3, f64), EngineError> {
        let stage = self.stage_index;
        self.magnetization
            .observe_into(&self.spins, &mut self.m_buf)
            .map_err(|e| EngineError::Setup { stage, message: e.to_string() })?;
        // The total alone, by the faster row kernel: samples need no split by term.
        let total = total_energy.unwrap_or_else(|| self.h.energy_total(&self.spins));
        Ok((self.m_buf.total, self.per_spin(total)))
    }

    /// A total energy (meV) per spin, as samples record it.
    pub(crate) fn per_spin(&self, total: f64) -> f64 {
        total / self.h.spin_count().max(1) as f64
    }

    /// Writes a snapshot of the spins.
    pub(crate) fn snapshot(&mut self, step: u64, time: f64) -> Result<(), EngineError> {
        let stage = self.stage_index;
        self.sink.snapshot(stage, step, time, &self.spins)?;
        self.rows[stage].snapshots += 1;
        Ok(())
    }

    /// Writes a loop or scan point.
    pub(crate) fn point(&mut self, row: &crate::record::PointRow) -> Result<(), EngineError> {
        let stage = self.stage_index;
        self.sink.point(stage, row)?;
        self.rows[stage].points += 1;
        Ok(())
    }

    /// A safe point: checkpoints when asked to and reports whether to stop. `cursor`
    /// builds the stage's progress only when a checkpoint is written.
    pub(crate) fn safe_point(
        &mut self,
        cursor: impl FnOnce() -> Cursor,
    ) -> Result<Option<StopReason>, EngineError> {
        match self.control.poll() {
            Poll::Continue => Ok(None),
            Poll::Flush => {
                self.sink.flush()?;
                Ok(None)
            }
            Poll::Checkpoint => {
                self.checkpoint(cursor())?;
                self.monitor.note("checkpoint written");
                Ok(None)
            }
            Poll::Stop(reason) => {
                self.checkpoint(cursor())?;
                Ok(Some(reason))
            }
        }
    }

    fn checkpoint(&mut self, cursor: Cursor) -> Result<(), EngineError> {
        self.sink.flush()?;
        let cp = Checkpoint {
            stage: self.stage_index,
            spins: self.spins.clone(),
            scalars: cursor.scalars,
            counters: cursor.counters,
            arrays: cursor.arrays,
            rows: self.rows.clone(),
            finished: self.finished.clone(),
        };
        self.sink.checkpoint(&cp)?;
        Ok(())
    }

    /// The end-of-stage state for a summary.
    pub(crate) fn final_state(&mut self, time: f64) -> Result<FinalState, EngineError> {
        let terms = self.observe_all()?;
        Ok(FinalState {
            time,
            magnetization: self.m_buf.total,
            energy: terms.total(),
            energy_terms: terms,
            charge: self.q_buf.mean,
        })
    }

    /// Maps an integrator error to the engine's.
    pub(crate) fn step_error(&self, e: StepError) -> EngineError {
        match e {
            StepError::NonFinite { site, step } => {
                EngineError::NonFinite { stage: self.stage_index, step, site }
            }
            other => EngineError::Setup { stage: self.stage_index, message: other.to_string() },
        }
    }
}
