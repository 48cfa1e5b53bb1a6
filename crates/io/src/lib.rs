//! Storage of Spindrift runs: the only crate that knows HDF5 and JSON files.
//!
//! A run folder holds
//! - `run.h5`, written by [`RunFile`], which implements the engine's
//!   [`Sink`](spindrift_engine::Sink): header and lattice, per-stage series, points and
//!   snapshots, final spins (layout and units in [`layout`] and [`run_file`]);
//! - `checkpoint.h5`, written atomically by [`write_checkpoint`] and read by
//!   [`read_checkpoint`], from which [`RunFile::reopen`] continues a run;
//! - `summary.json`, written atomically by [`write_summary`] from a [`RunSummary`];
//! - `run.xdmf`, an XDMF 3 sidecar for visualisation tools, from [`write_xdmf`].
//!
//! [`RunReader`] and [`read_summary`] read a folder back for `inspect` and `plot`.
//! Every failure is an [`IoError`] naming the file and what was being done.
//!
//! # One writer per run folder
//!
//! HDF5's file locking is turned off for every file this crate opens: HDF5 takes its lock on
//! a descriptor without close-on-exec, so a process spawned by any thread while a file is
//! open inherits the lock and holds it past the file's close, making later opens fail. With
//! it off, `inspect` can also read a run that is still being written. The flip side is that
//! nothing here stops two processes from writing the same folder; callers must not.
//!
//! Units follow the project: lengths Å, energies meV (per spin in the tables), moments μB,
//! fields T, temperatures K, times ps.
#![deny(missing_docs)]

mod checkpoint;
mod column;
mod error;
mod h5util;
pub mod layout;
mod reader;
mod reserve;
pub mod run_file;
mod stage;
mod summary;
mod table;
mod xdmf;

pub use checkpoint::{read_checkpoint, write_checkpoint};
pub use error::IoError;
pub use reader::{DatasetEntry, LatticeData, RunAttributes, RunReader, Snapshot, StageEntry};
pub use reserve::reserve_bytes;
pub use run_file::{RunFile, DEFAULT_BLOCK_ROWS};
pub use summary::{read_summary, summary_json, write_summary, RunSummary};
pub use table::write_table;
pub use xdmf::{write_xdmf, xdmf_text};

// The CLI may hand the writer to a worker thread or keep a reader across threads.
const _: fn() = || {
    fn send<T: Send>() {}
    send::<RunFile>();
    send::<RunReader>();
};
