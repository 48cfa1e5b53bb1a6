//! `relax`: zero-temperature minimisation by the Barzilai-Borwein projected descent of
//! `spindrift_dynamics::Relaxer`, observed every `observe_every` iterations. The
//! relaxer's memory is part of the checkpoint, so a stopped relaxation resumes exactly.

use crate::error::EngineError;
use crate::protocol::Stage;
use crate::record::StageSummary;
use crate::runner::{Cursor, Runner, StageEnd};
use spindrift_dynamics::{Relaxer, RelaxerState};
use spindrift_lattice::Vec3;

fn flatten(v: &[Vec3]) -> Vec<f64> {
    v.iter().flat_map(|x| x.iter().copied()).collect()
}

fn unflatten(v: &[f64]) -> Vec<Vec3> {
    v.chunks_exact(3).map(|c| [c[0], c[1], c[2]]).collect()
}

pub(crate) fn run(
    r: &mut Runner<'_>,
    stage: &Stage,
    cursor: Cursor,
    max_steps: u64,
    tolerance: f64,
) -> Result<StageEnd, EngineError> {
    let mut relaxer = Relaxer::new(&r.h);
    if cursor.counters.contains_key("iteration") {
        let state = RelaxerState {
            iteration: cursor.counter("iteration"),
            has_previous: cursor.counter("has_previous") == 1,
            difference: unflatten(&cursor.array("difference")),
            previous_torque: unflatten(&cursor.array("previous_torque")),
        };
        relaxer.restore(&state).map_err(|e| r.step_error(e))?;
    }
    r.monitor.stage_begin(r.stage_index, "relax", max_steps, "iterations");
    let mut torque;
    let mut last_observed = None;
    loop {
        let it = relaxer.iterations();
        // A resumed stage's first observation, if `it` has one, was written before the
        // stop: it still counts as observed, or a relaxation that converges at once would
        // write that row again below.
        let written = std::mem::take(&mut r.skip_observation);
        if it % stage.observe_every == 0 {
            if !written {
                r.observe(it, 0.0, 0.0)?;
            }
            last_observed = Some(it);
        }
        let stop = r.safe_point(|| {
            let s = relaxer.state();
            let mut c = Cursor::default();
            c.counters.insert("iteration".into(), s.iteration);
            c.counters.insert("has_previous".into(), s.has_previous as u64);
            c.arrays.insert("difference".into(), flatten(&s.difference));
            c.arrays.insert("previous_torque".into(), flatten(&s.previous_torque));
            c
        })?;
        if let Some(reason) = stop {
            return Ok(StageEnd::Stopped(reason));
        }
        torque = relaxer.iterate(&r.h, &mut r.spins, tolerance).map_err(|e| r.step_error(e))?;
        if torque < tolerance || relaxer.iterations() >= max_steps {
            // `iterate` moved the spins unless it reported convergence, so re-measure at
            // the limit.
            if torque >= tolerance {
                torque = relaxer.iterate(&r.h, &mut r.spins, f64::INFINITY).map_err(|e| r.step_error(e))?;
            }
            break;
        }
    }
    let steps = relaxer.iterations();
    if last_observed != Some(steps) {
        r.observe(steps, 0.0, 0.0)?;
    }
    if stage.snapshot_every > 0 {
        r.snapshot(steps, 0.0)?;
    }
    let converged = torque < tolerance;
    if !converged {
        r.monitor.note(&format!(
            "relax: not converged after {steps} iterations (torque {torque:.3e} T > {tolerance:.1e} T)"
        ));
    }
    let final_state = r.final_state(0.0)?;
    Ok(StageEnd::Done(Box::new(StageSummary {
        index: r.stage_index,
        kind: "relax".into(),
        steps,
        final_state,
        extra: vec![("torque".into(), torque), ("converged".into(), converged as u64 as f64)],
        ..Default::default()
    })))
}
