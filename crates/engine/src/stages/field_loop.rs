//! `field-loop`: a hysteresis loop along a direction, from `+max` to `-max` (the
//! descending branch, `points` fields) and back (the ascending branch). At each field the
//! spins are relaxed (zero temperature) or evolved for `settle` at the stage temperature;
//! the state is then recorded as a `points/` row and a `series/` row.
//!
//! From the projection `m_par = m.direction` against the signed field `B_par`, the
//! summary reports the coercive field of each branch (where `m_par` changes sign, by
//! linear interpolation between neighbouring fields) and the remanence (`m_par` at
//! `B_par = 0` on the descending branch, interpolated).

use crate::error::EngineError;
use crate::protocol::{Stage, StageKind};
use crate::record::{PointRow, StageSummary};
use crate::runner::{Cursor, Runner, StageEnd};
use spindrift_dynamics::{Heun, HeunParams, Relaxer};
use spindrift_lattice::dot;

/// The signed fields of both branches, T.
pub(crate) fn loop_fields(max: f64, points: usize) -> Vec<f64> {
    let down = (0..points).map(|k| max - 2.0 * max * k as f64 / (points - 1) as f64);
    let up = (0..points).map(|k| -max + 2.0 * max * k as f64 / (points - 1) as f64);
    down.chain(up).collect()
}

/// Zero crossings and remanence of a loop: `(descending, ascending)` coercive fields
/// (NaN where a branch does not cross) and the remanence.
pub(crate) fn loop_features(fields: &[f64], m: &[f64], points: usize) -> ((f64, f64), f64) {
    let crossing = |range: std::ops::Range<usize>| -> f64 {
        for k in range.start + 1..range.end.min(m.len()) {
            let (m0, m1) = (m[k - 1], m[k]);
            if (m0 > 0.0 && m1 <= 0.0) || (m0 < 0.0 && m1 >= 0.0) {
                let w = m0 / (m0 - m1);
                return fields[k - 1] + w * (fields[k] - fields[k - 1]);
            }
        }
        f64::NAN
    };
    let descending = crossing(0..points);
    let ascending = crossing(points..2 * points);
    let mut remanence = f64::NAN;
    for k in 1..points.min(m.len()) {
        let (b0, b1) = (fields[k - 1], fields[k]);
        if b0 >= 0.0 && b1 <= 0.0 {
            let w = if b0 == b1 { 0.0 } else { b0 / (b0 - b1) };
            remanence = m[k - 1] + w * (m[k] - m[k - 1]);
            break;
        }
    }
    ((descending, ascending), remanence)
}

pub(crate) fn run(
    r: &mut Runner<'_>,
    stage: &Stage,
    cursor: Cursor,
    seed: u64,
) -> Result<StageEnd, EngineError> {
    let StageKind::FieldLoop { direction, max, points, relax, settle, dt, max_steps, torque_tolerance } =
        stage.kind
    else {
        unreachable!("dispatched on kind")
    };
    let fields = loop_fields(max, points);
    let along = |b: f64| [b * direction[0], b * direction[1], b * direction[2]];
    let mut m_par = cursor.array("m_parallel");
    let mut k = cursor.counter("point") as usize;
    let mut steps = cursor.counter("steps");
    let settle_steps = (settle / dt).round() as u64;
    let mut relaxer = if relax { Some(Relaxer::new(&r.h)) } else { None };
    let mut heun = if relax { None } else { Some(Heun::new(&r.h, seed)) };
    r.monitor.stage_begin(r.stage_index, "field-loop", fields.len() as u64, "fields");
    // Resuming lands between two fields, whose observations are all written.
    r.skip_observation = false;
    while k < fields.len() {
        r.h.set_field(along(fields[k]));
        if let Some(relaxer) = relaxer.as_mut() {
            // The relaxer has taken `steps` iterations in this stage (a resumed stage's
            // relaxer starts afresh): the count's parity chooses its step lengths.
            relaxer.reset_at(steps);
            let start = relaxer.iterations();
            loop {
                let torque =
                    relaxer.iterate(&r.h, &mut r.spins, torque_tolerance).map_err(|e| r.step_error(e))?;
                if torque < torque_tolerance || relaxer.iterations() - start >= max_steps {
                    break;
                }
            }
            steps += relaxer.iterations() - start;
        } else if let Some(heun) = heun.as_mut() {
            let params = HeunParams { dt, temperature: stage.temperature };
            for s in 0..settle_steps {
                heun.step(&r.h, &mut r.spins, &params, k as u64 * settle_steps + s)
                    .map_err(|e| r.step_error(e))?;
            }
            steps += settle_steps;
        }
        let row = r.observe(k as u64, 0.0, stage.temperature)?;
        let m = row.magnetization;
        r.point(&PointRow {
            temperature: stage.temperature,
            field: row.field,
            magnetization: m,
            m_abs: dot(m, m).sqrt(),
            energy: row.energy.total(),
            samples: 1,
            ..Default::default()
        })?;
        if stage.snapshot_every > 0 && k as u64 % stage.snapshot_every == 0 {
            r.snapshot(k as u64, 0.0)?;
        }
        m_par.push(dot(m, direction));
        k += 1;
        let stop = r.safe_point(|| {
            let mut c = Cursor::default();
            c.counters.insert("point".into(), k as u64);
            c.counters.insert("steps".into(), steps);
            c.arrays.insert("m_parallel".into(), m_par.clone());
            c
        })?;
        if let Some(reason) = stop {
            return Ok(StageEnd::Stopped(reason));
        }
    }
    // The final state is taken at the loop's last field, also when a resumed stage had no
    // field left to apply (the runner set the stage's own field before calling).
    if let Some(&b) = fields.last() {
        r.h.set_field(along(b));
    }
    let (coercive, remanence) = loop_features(&fields, &m_par, points);
    let final_state = r.final_state(0.0)?;
    Ok(StageEnd::Done(Box::new(StageSummary {
        index: r.stage_index,
        kind: "field-loop".into(),
        steps,
        final_state,
        coercive_field: Some(coercive),
        remanence: Some(remanence),
        ..Default::default()
    })))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn features_of_a_square_loop() {
        let fields = loop_fields(2.0, 5); // 2 1 0 -1 -2 | -2 -1 0 1 2
        let m = [1.0, 1.0, 0.8, -1.0, -1.0, -1.0, -1.0, -0.8, 1.0, 1.0];
        let ((d, a), rem) = loop_features(&fields, &m, 5);
        assert!((d - (0.0 - 0.8 / 1.8)).abs() < 1e-12, "{d}");
        assert!((a - (0.0 + 0.8 / 1.8)).abs() < 1e-12, "{a}");
        assert!((rem - 0.8).abs() < 1e-12);
    }
}
