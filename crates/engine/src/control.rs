//! Run control from outside the physics: stop requests, wall-clock limits, periodic
//! checkpoints, and a monitor for progress.
//!
//! The engine polls [`Control::poll`] at *safe points*: places where the whole state of
//! the run is the spins plus a few counters, so a checkpoint taken there resumes to the
//! same result bit for bit. Heun steps and Monte Carlo sweeps are safe points each; a
//! relaxation is one at every observation; a field loop between field values.

use std::sync::atomic::{AtomicI32, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Default interval between flushes of the output, wall clock.
pub const FLUSH_EVERY: Duration = Duration::from_secs(5);

/// Why a run stopped before its end.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StopReason {
    /// The `--max-wall` budget ran out.
    WallLimit,
    /// A signal arrived (its number: 2 for SIGINT, 15 for SIGTERM).
    Signal(i32),
}

/// What the engine should do at a safe point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Poll {
    /// Carry on.
    Continue,
    /// Write a checkpoint and carry on.
    Checkpoint,
    /// Make the rows written so far durable, and carry on.
    Flush,
    /// Write a checkpoint and stop.
    Stop(StopReason),
}

/// Receives progress from the engine; the CLI draws it.
pub trait Monitor {
    /// A stage begins; `total` units of `unit` (e.g. "steps", "sweeps", "points").
    fn stage_begin(&mut self, _index: usize, _kind: &str, _total: u64, _unit: &str) {}
    /// Progress within the stage: `done` units, simulated time (ps), `|m|`, mean charge.
    fn update(&mut self, _done: u64, _time: f64, _m_abs: f64, _charge: f64) {}
    /// The stage ended.
    fn stage_end(&mut self, _index: usize) {}
    /// A message for the user (e.g. a checkpoint was written).
    fn note(&mut self, _message: &str) {}
}

/// A monitor that shows nothing.
#[derive(Debug, Default)]
pub struct Silent;
impl Monitor for Silent {}

/// Stop flags and clocks of one run.
#[derive(Debug, Clone)]
pub struct Control {
    /// Set to a signal number by a signal handler to ask for a stop.
    pub stop: Arc<AtomicI32>,
    /// Stop with a checkpoint once this instant passes (`--max-wall`).
    pub deadline: Option<Instant>,
    /// Write a checkpoint this often (wall clock).
    pub checkpoint_every: Option<Duration>,
    /// Flush the output this often (wall clock), so that a killed run keeps its rows up
    /// to the last flush. Default [`FLUSH_EVERY`].
    pub flush_every: Duration,
    last_checkpoint: Instant,
    last_flush: Instant,
    polls: u64,
}

impl Default for Control {
    fn default() -> Self {
        Self::new(Arc::new(AtomicI32::new(0)), None, None)
    }
}

impl Control {
    /// Control with the given stop flag, deadline and checkpoint interval.
    pub fn new(stop: Arc<AtomicI32>, deadline: Option<Instant>, checkpoint_every: Option<Duration>) -> Self {
        let now = Instant::now();
        Self {
            stop,
            deadline,
            checkpoint_every,
            flush_every: FLUSH_EVERY,
            last_checkpoint: now,
            last_flush: now,
            polls: 0,
        }
    }

    /// Called at every safe point. Clock reads are thinned out: the flag is an atomic
    /// load, but the clock is looked at every 16th poll only.
    #[inline]
    pub fn poll(&mut self) -> Poll {
        let sig = self.stop.load(Ordering::Relaxed);
        if sig != 0 {
            return Poll::Stop(StopReason::Signal(sig));
        }
        self.polls += 1;
        if self.polls % 16 != 0 {
            return Poll::Continue;
        }
        let now = Instant::now();
        if self.deadline.is_some_and(|d| now >= d) {
            return Poll::Stop(StopReason::WallLimit);
        }
        if self.checkpoint_every.is_some_and(|e| now.duration_since(self.last_checkpoint) >= e) {
            self.last_checkpoint = now;
            self.last_flush = now;
            return Poll::Checkpoint;
        }
        if now.duration_since(self.last_flush) >= self.flush_every {
            self.last_flush = now;
            return Poll::Flush;
        }
        Poll::Continue
    }
}
