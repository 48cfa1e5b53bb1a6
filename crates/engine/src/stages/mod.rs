//! The stage kinds, one file each. Every stage follows the same pattern: restore its
//! progress from a [`Cursor`], then loop "observe, safe point, advance" until done.

mod evolve;
mod field_loop;
mod relax;
mod sampling;

use crate::error::EngineError;
use crate::protocol::{Stage, StageKind};
use crate::runner::{Cursor, Runner, StageEnd};

pub(crate) fn run_stage(
    r: &mut Runner<'_>,
    stage: &Stage,
    cursor: Cursor,
    seed: u64,
) -> Result<StageEnd, EngineError> {
    match &stage.kind {
        StageKind::Evolve { duration, dt, temperature_ramp, field_ramp } => {
            evolve::run(r, stage, cursor, seed, *duration, *dt, *temperature_ramp, *field_ramp)
        }
        StageKind::Relax { max_steps, torque_tolerance } => {
            relax::run(r, stage, cursor, *max_steps, *torque_tolerance)
        }
        StageKind::FieldLoop { .. } => field_loop::run(r, stage, cursor, seed),
        StageKind::Metropolis { .. } | StageKind::TemperatureScan { .. } => {
            sampling::run(r, stage, cursor, seed)
        }
    }
}
