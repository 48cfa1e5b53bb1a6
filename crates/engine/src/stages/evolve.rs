//! `evolve`: stochastic LLG for a duration, with optional linear temperature and field
//! ramps (evaluated at the start of each step).

use crate::error::EngineError;
use crate::protocol::Stage;
use crate::record::StageSummary;
use crate::runner::{Cursor, Runner, StageEnd};
use spindrift_dynamics::{Heun, HeunParams};
use spindrift_lattice::Vec3;

#[allow(clippy::too_many_arguments)]
pub(crate) fn run(
    r: &mut Runner<'_>,
    stage: &Stage,
    cursor: Cursor,
    seed: u64,
    duration: f64,
    dt: f64,
    temperature_ramp: Option<(f64, f64)>,
    field_ramp: Option<(Vec3, Vec3)>,
) -> Result<StageEnd, EngineError> {
    let total = (duration / dt).round().max(1.0) as u64;
    let mut heun = Heun::new(&r.h, seed);
    let mut step = cursor.counter("step");
    r.monitor.stage_begin(r.stage_index, "evolve", total, "steps");
    let at = |step: u64| {
        let f = step as f64 / total as f64;
        let temperature = temperature_ramp.map_or(stage.temperature, |(a, b)| a + (b - a) * f);
        let field = field_ramp
            .map(|(a, b)| [a[0] + (b[0] - a[0]) * f, a[1] + (b[1] - a[1]) * f, a[2] + (b[2] - a[2]) * f]);
        (temperature, field)
    };
    loop {
        let time = step as f64 * dt;
        let (temperature, field) = at(step);
        if let Some(b) = field {
            r.h.set_field(b);
        }
        if !std::mem::take(&mut r.skip_observation) {
            if step % stage.observe_every == 0 || step == total {
                r.observe(step, time, temperature)?;
            }
            if stage.snapshot_every > 0 && step % stage.snapshot_every == 0 {
                r.snapshot(step, time)?;
            }
        }
        if step == total {
            break;
        }
        let stop = r.safe_point(|| {
            let mut c = Cursor::default();
            c.counters.insert("step".into(), step);
            c
        })?;
        if let Some(reason) = stop {
            return Ok(StageEnd::Stopped(reason));
        }
        heun.step(&r.h, &mut r.spins, &HeunParams { dt, temperature }, step).map_err(|e| r.step_error(e))?;
        step += 1;
    }
    let final_state = r.final_state(total as f64 * dt)?;
    Ok(StageEnd::Done(Box::new(StageSummary {
        index: r.stage_index,
        kind: "evolve".into(),
        steps: total,
        final_state,
        ..Default::default()
    })))
}
