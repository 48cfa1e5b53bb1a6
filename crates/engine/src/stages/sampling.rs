//! `metropolis` and `temperature-scan`: equilibrate, then measure, at one or several
//! temperatures, by Metropolis sweeps or stochastic LLG steps.
//!
//! Each temperature gives one `points/` row of averages with statistical errors (blocking
//! analysis; see `spindrift_observe::statistics`), sampled once per sweep (Metropolis) or
//! once every `observe_every` steps (LLG); `series/` rows are written every
//! `observe_every` sweeps or steps throughout. A scan visits its temperatures in the
//! configured order, each starting from the state the previous one left, and reports the
//! Curie temperature at the interpolated susceptibility peak.

use crate::error::EngineError;
use crate::protocol::{ScanMethod, Stage, StageKind};
use crate::record::{CurieEstimate, PointRow, StageSummary};
use crate::runner::{Cursor, Runner, StageEnd};
use spindrift_dynamics::{Heun, HeunParams, Metropolis};
use spindrift_observe::{susceptibility_peak, ObserveError, Samples, ScanPoint};

/// Sweeps between fresh evaluations of the Monte Carlo running energy. Each costs about
/// one field evaluation, a small part of a sweep; between them the running sum drifts by
/// rounding only, far below the statistical error of any average.
const ENERGY_REFRESH: u64 = 100;

struct Plan {
    temperatures: Vec<f64>,
    method: ScanMethod,
    equilibrate: u64,
    measure: u64,
    dt: f64,
    scan: bool,
}

pub(crate) fn run(
    r: &mut Runner<'_>,
    stage: &Stage,
    cursor: Cursor,
    seed: u64,
) -> Result<StageEnd, EngineError> {
    let plan = match &stage.kind {
        StageKind::Metropolis { equilibrate, measure } => Plan {
            temperatures: vec![stage.temperature],
            method: ScanMethod::Metropolis,
            equilibrate: *equilibrate,
            measure: *measure,
            dt: 0.0,
            scan: false,
        },
        StageKind::TemperatureScan { temperatures, method, equilibrate, measure, dt } => Plan {
            temperatures: temperatures.clone(),
            method: *method,
            equilibrate: *equilibrate,
            measure: *measure,
            dt: *dt,
            scan: true,
        },
        _ => unreachable!("dispatched on kind"),
    };
    let per_point = plan.equilibrate + plan.measure;
    let stage_index = r.stage_index;
    let mut mc = match plan.method {
        ScanMethod::Metropolis => {
            let mut mc = Metropolis::new(&r.h, seed).map_err(|e| r.step_error(e))?;
            if let Some(s) = cursor.scalar("sigma") {
                mc.set_sigma(s);
            }
            Some(mc)
        }
        ScanMethod::Llg => None,
    };
    let mut heun = match plan.method {
        ScanMethod::Llg => Some(Heun::new(&r.h, seed)),
        ScanMethod::Metropolis => None,
    };
    // Sample interval: every sweep, or every `observe_every` LLG steps.
    let sample_every = match plan.method {
        ScanMethod::Metropolis => 1,
        ScanMethod::Llg => stage.observe_every,
    };
    let mut point = cursor.counter("point") as usize;
    let mut step = cursor.counter("step");
    let mut samples = Samples::from_parts(
        cursor.array("sample_m").chunks_exact(3).map(|c| [c[0], c[1], c[2]]).collect(),
        cursor.array("sample_e"),
    )
    .map_err(|e| EngineError::Setup { stage: stage_index, message: e.to_string() })?;
    let mut chi = cursor.array("chi");
    let mut chi_err = cursor.array("chi_err");
    // Monte Carlo keeps the total energy (meV) as a running sum of accepted changes,
    // evaluated afresh every `ENERGY_REFRESH` sweeps (and at each point's start) so that
    // rounding cannot accumulate; a checkpoint carries the running value, so a resumed run
    // continues with the same bits.
    let mut energy = cursor.scalar("energy");
    // Monte Carlo takes the magnetisation of a sample from the sweep before it (the
    // fixed-point moment sum of `MomentTally`, exact, gathered by the sweep), not from a
    // pass over the spins; samples follow sweeps only, so it is never read before set.
    let mut moment = None;
    let mut accepted = cursor.counter("accepted");
    let mut attempted = cursor.counter("attempted");
    let unit = if plan.method == ScanMethod::Metropolis { "sweeps" } else { "steps" };
    r.monitor.stage_begin(
        stage_index,
        if plan.scan { "temperature-scan" } else { "metropolis" },
        per_point * plan.temperatures.len() as u64,
        unit,
    );
    while point < plan.temperatures.len() {
        let temperature = plan.temperatures[point];
        let global = point as u64 * per_point;
        loop {
            if !std::mem::take(&mut r.skip_observation) && step % stage.observe_every == 0 {
                r.observe(global + step, 0.0, temperature)?;
            }
            if step == per_point {
                break;
            }
            let stop = r.safe_point(|| {
                let mut c = Cursor::default();
                c.counters.insert("point".into(), point as u64);
                c.counters.insert("step".into(), step);
                c.counters.insert("accepted".into(), accepted);
                c.counters.insert("attempted".into(), attempted);
                if let Some(e) = energy {
                    c.scalars.insert("energy".into(), e);
                }
                if let Some(mc) = &mc {
                    c.scalars.insert("sigma".into(), mc.sigma());
                }
                c.arrays.insert(
                    "sample_m".into(),
                    samples.magnetization().iter().flat_map(|m| m.iter().copied()).collect(),
                );
                c.arrays.insert("sample_e".into(), samples.energy().to_vec());
                c.arrays.insert("chi".into(), chi.clone());
                c.arrays.insert("chi_err".into(), chi_err.clone());
                c
            })?;
            if let Some(reason) = stop {
                return Ok(StageEnd::Stopped(reason));
            }
            if let Some(mc) = mc.as_mut() {
                let total = match energy {
                    Some(e) if step % ENERGY_REFRESH != 0 => e,
                    _ => r.h.energy_total(&r.spins),
                };
                let s = mc
                    .sweep(&r.h, &mut r.spins, temperature, global + step, step < plan.equilibrate)
                    .map_err(|e| r.step_error(e))?;
                energy = Some(total + s.energy_change);
                moment = Some(s.moment);
                accepted += s.accepted;
                attempted += s.attempted;
            } else if let Some(heun) = heun.as_mut() {
                heun.step(&r.h, &mut r.spins, &HeunParams { dt: plan.dt, temperature }, global + step)
                    .map_err(|e| r.step_error(e))?;
            }
            step += 1;
            if step > plan.equilibrate && (step - plan.equilibrate) % sample_every == 0 {
                let (m, e) = match (&mc, moment, energy) {
                    // Per spin, as `Runner::measure` gives it, without a pass over the spins.
                    (Some(mc), Some(units), Some(total)) => {
                        (mc.tally().magnetization(units), r.per_spin(total))
                    }
                    _ => r.measure(energy)?,
                };
                samples.push(m, e);
            }
            if step == per_point {
                // The final observation of the point is written at the top of the loop.
                continue;
            }
        }
        let avg = samples.averages(r.h.spin_count(), temperature).map_err(|e| match e {
            // Samples are finite (a non-finite spin stops the stage first), so a non-finite
            // average is an overflow of their squares: energies beyond 1e154 meV per spin.
            ObserveError::NonFinite { .. } => EngineError::Overflow {
                stage: stage_index,
                message: format!(
                    "at {temperature} K the averages overflow ({e}), as energies far beyond any physical range do (check that couplings, moments and fields are in meV, muB and T)"
                ),
            },
            _ => EngineError::Setup { stage: stage_index, message: format!("at {temperature} K: {e}") },
        })?;
        r.point(&PointRow {
            temperature,
            field: r.h.field(),
            magnetization: avg.magnetization,
            magnetization_err: avg.magnetization_err,
            m_abs: avg.m_abs,
            m_abs_err: avg.m_abs_err,
            susceptibility: avg.susceptibility,
            susceptibility_err: avg.susceptibility_err,
            heat_capacity: avg.heat_capacity,
            heat_capacity_err: avg.heat_capacity_err,
            binder: avg.binder,
            binder_err: avg.binder_err,
            energy: avg.energy,
            energy_err: avg.energy_err,
            autocorrelation_time: avg.autocorrelation_time,
            samples: avg.samples,
        })?;
        if stage.snapshot_every > 0 {
            r.snapshot(global + step, 0.0)?;
        }
        chi.push(avg.susceptibility);
        chi_err.push(avg.susceptibility_err);
        samples.clear();
        point += 1;
        step = 0;
    }
    let mut curie = None;
    if plan.scan && plan.temperatures.len() >= 3 {
        let points: Vec<ScanPoint> = plan
            .temperatures
            .iter()
            .zip(chi.iter().zip(&chi_err))
            .map(|(&t, (&v, &e))| ScanPoint { temperature: t, value: v, error: e })
            .collect();
        match susceptibility_peak(&points, seed) {
            Ok(fit) => {
                curie = Some(CurieEstimate {
                    value: fit.value,
                    error: fit.error,
                    method: fit.method.to_string(),
                    note: String::new(),
                })
            }
            Err(e) => {
                // Kept in the summary too: a sweep's points run quietly, and an empty
                // Curie temperature in the merged table should say why.
                let note = format!("no Curie temperature from the susceptibility: {e}");
                r.monitor.note(&note);
                curie = Some(CurieEstimate { value: f64::NAN, error: f64::NAN, method: "none".into(), note });
            }
        }
    }
    let final_state = r.final_state(0.0)?;
    let mut extra = Vec::new();
    if attempted > 0 {
        extra.push(("acceptance".to_string(), accepted as f64 / attempted as f64));
    }
    Ok(StageEnd::Done(Box::new(StageSummary {
        index: stage_index,
        kind: if plan.scan { "temperature-scan".into() } else { "metropolis".into() },
        steps: per_point * plan.temperatures.len() as u64,
        final_state,
        curie_temperature: curie,
        extra,
        ..Default::default()
    })))
}
