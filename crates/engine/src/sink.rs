//! The sink trait: where the engine sends what it observes.
//!
//! The engine defines this trait and never knows how records are stored; `spindrift-io`
//! implements it with HDF5 files, and tests implement it in memory ([`MemorySink`]).

use crate::record::{Checkpoint, PointRow, RunHeader, SeriesRow, StageInfo, StageSummary};
use spindrift_lattice::Vec3;

/// A failure to store records (the message names the file or dataset).
#[derive(Debug, Clone, thiserror::Error)]
#[error("{message}")]
pub struct SinkError {
    /// What failed, for the user.
    pub message: String,
}

impl SinkError {
    /// A sink error with this message.
    pub fn new(message: impl Into<String>) -> Self {
        Self { message: message.into() }
    }
}

/// Receiver of a run's records. Calls arrive in order: `header`, then per stage
/// `begin_stage`, rows and snapshots, `end_stage`; `final_spins` at the end; `checkpoint`
/// and `flush` at any time between records.
pub trait Sink {
    /// The system, once, before the first stage.
    fn header(&mut self, header: &RunHeader) -> Result<(), SinkError>;
    /// A stage begins.
    fn begin_stage(&mut self, info: &StageInfo) -> Result<(), SinkError>;
    /// One time-series row of stage `stage`.
    fn series(&mut self, stage: usize, row: &SeriesRow) -> Result<(), SinkError>;
    /// One loop or scan point of stage `stage`.
    fn point(&mut self, stage: usize, row: &PointRow) -> Result<(), SinkError>;
    /// A snapshot of all spins (unit vectors, zero on vacant sites).
    fn snapshot(&mut self, stage: usize, step: u64, time: f64, spins: &[Vec3]) -> Result<(), SinkError>;
    /// A stage ended.
    fn end_stage(&mut self, summary: &StageSummary) -> Result<(), SinkError>;
    /// The final spins of the run.
    fn final_spins(&mut self, spins: &[Vec3]) -> Result<(), SinkError>;
    /// Store a checkpoint (atomically: a crash must never leave a broken one).
    fn checkpoint(&mut self, checkpoint: &Checkpoint) -> Result<(), SinkError>;
    /// Make everything written so far durable.
    fn flush(&mut self) -> Result<(), SinkError>;
}

/// A sink that keeps everything in memory, for tests and for callers that post-process.
#[derive(Debug, Clone, Default)]
pub struct MemorySink {
    /// The header, once written.
    pub header: Option<RunHeader>,
    /// Stages begun.
    pub stages: Vec<StageInfo>,
    /// Series rows, by stage.
    pub series: Vec<Vec<SeriesRow>>,
    /// Points, by stage.
    pub points: Vec<Vec<PointRow>>,
    /// Snapshots `(step, time, spins)`, by stage.
    pub snapshots: Vec<Vec<(u64, f64, Vec<Vec3>)>>,
    /// Stage summaries.
    pub summaries: Vec<StageSummary>,
    /// Final spins.
    pub final_spins: Option<Vec<Vec3>>,
    /// The last checkpoint.
    pub checkpoint: Option<Checkpoint>,
}

impl Sink for MemorySink {
    fn header(&mut self, header: &RunHeader) -> Result<(), SinkError> {
        self.header = Some(header.clone());
        Ok(())
    }
    fn begin_stage(&mut self, info: &StageInfo) -> Result<(), SinkError> {
        self.stages.push(info.clone());
        let n = info.index + 1;
        self.series.resize(n, Vec::new());
        self.points.resize(n, Vec::new());
        self.snapshots.resize(n, Vec::new());
        Ok(())
    }
    fn series(&mut self, stage: usize, row: &SeriesRow) -> Result<(), SinkError> {
        self.series[stage].push(row.clone());
        Ok(())
    }
    fn point(&mut self, stage: usize, row: &PointRow) -> Result<(), SinkError> {
        self.points[stage].push(row.clone());
        Ok(())
    }
    fn snapshot(&mut self, stage: usize, step: u64, time: f64, spins: &[Vec3]) -> Result<(), SinkError> {
        self.snapshots[stage].push((step, time, spins.to_vec()));
        Ok(())
    }
    fn end_stage(&mut self, summary: &StageSummary) -> Result<(), SinkError> {
        self.summaries.push(summary.clone());
        Ok(())
    }
    fn final_spins(&mut self, spins: &[Vec3]) -> Result<(), SinkError> {
        self.final_spins = Some(spins.to_vec());
        Ok(())
    }
    fn checkpoint(&mut self, checkpoint: &Checkpoint) -> Result<(), SinkError> {
        self.checkpoint = Some(checkpoint.clone());
        Ok(())
    }
    fn flush(&mut self) -> Result<(), SinkError> {
        Ok(())
    }
}
