//! Protocols and stages of a Spindrift run.
//!
//! The engine steps spins through the stages of a protocol and hands what it observes to
//! a [`Sink`]. It defines the records ([`record`]) and the sink trait, and knows nothing
//! of files: `spindrift-io` stores records as HDF5 and JSON.
#![deny(missing_docs)]

pub mod control;
mod error;
pub mod protocol;
pub mod record;
mod runner;
pub mod seeds;
mod sink;
mod stages;

pub use control::{Control, Monitor, Poll, Silent, StopReason};
pub use error::EngineError;
pub use protocol::{Initial, InitialState, Protocol, ScanMethod, Stage, StageKind};
pub use record::{
    Checkpoint, CurieEstimate, FinalState, PointRow, RowCounts, RunHeader, SeriesRow, StageInfo, StageSummary,
};
pub use runner::{initial_spins, Cursor, Outcome, Runner};
pub use sink::{MemorySink, Sink, SinkError};
