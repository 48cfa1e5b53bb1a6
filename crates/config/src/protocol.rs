//! Validation, part two: `[initial]` and the `[[stage]]` list become a [`Protocol`].

use crate::error::ConfigError;
use crate::load::Loaded;
use crate::raw::{
    InitialState as RawInitial, RawStage, ScanMethod as RawMethod, ScanOrder, StageKind as RawKind,
};
use crate::units::Dimension;
use spindrift_engine::{Initial, InitialState, Protocol, ScanMethod, Stage, StageKind};
use spindrift_lattice::Vec3;

/// Defaults that depend on the system.
#[derive(Debug, Clone, Copy)]
pub struct SystemDefaults {
    /// Recommended time step, ps (the default `dt`).
    pub dt: f64,
    /// Applied field of `[field]`, T.
    pub field: Vec3,
}

/// Keys each stage kind accepts besides `kind`, `temperature`, `field`, `observe_every`,
/// `snapshot_every`.
fn allowed(kind: RawKind) -> &'static [&'static str] {
    match kind {
        RawKind::Relax => &["max_steps", "torque_tolerance"],
        RawKind::Evolve => &["duration", "dt", "temperature_ramp", "field_ramp"],
        RawKind::FieldLoop => {
            &["direction", "max", "points", "relax", "settle", "dt", "max_steps", "torque_tolerance"]
        }
        RawKind::Metropolis => &["equilibrate", "measure"],
        RawKind::TemperatureScan => {
            &["temperatures", "from", "to", "step", "method", "order", "equilibrate", "measure", "dt"]
        }
    }
}

fn present(s: &RawStage) -> Vec<&'static str> {
    let mut out = Vec::new();
    let mut p = |name: &'static str, here: bool| {
        if here {
            out.push(name)
        }
    };
    p("max_steps", s.max_steps.is_some());
    p("torque_tolerance", s.torque_tolerance.is_some());
    p("duration", s.duration.is_some());
    p("dt", s.dt.is_some());
    p("temperature_ramp", s.temperature_ramp.is_some());
    p("field_ramp", s.field_ramp.is_some());
    p("direction", s.direction.is_some());
    p("max", s.max.is_some());
    p("points", s.points.is_some());
    p("relax", s.relax.is_some());
    p("settle", s.settle.is_some());
    p("temperatures", s.temperatures.is_some());
    p("from", s.from.is_some());
    p("to", s.to.is_some());
    p("step", s.step.is_some());
    p("method", s.method.is_some());
    p("order", s.order.is_some());
    p("equilibrate", s.equilibrate.is_some());
    p("measure", s.measure.is_some());
    out
}

fn temperature_of(loaded: &Loaded, key: &str, q: &crate::Quantity) -> Result<f64, ConfigError> {
    let t = loaded.quantity(key, q, Dimension::Temperature)?;
    if !(t.is_finite() && t >= 0.0) {
        return Err(loaded.error_at(key, format!("must be a temperature >= 0 K, got {t}")));
    }
    Ok(t)
}

fn positive(loaded: &Loaded, key: &str, q: &crate::Quantity, dim: Dimension) -> Result<f64, ConfigError> {
    let x = loaded.quantity(key, q, dim)?;
    if !(x.is_finite() && x > 0.0) {
        return Err(loaded.error_at(key, format!("must be positive, got {x}")));
    }
    Ok(x)
}

fn direction(loaded: &Loaded, key: &str, v: [f64; 3]) -> Result<Vec3, ConfigError> {
    let l = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    if !(l.is_finite() && l > 0.0) {
        return Err(loaded.error_at(key, format!("must be a non-zero direction, got {v:?}")));
    }
    Ok([v[0] / l, v[1] / l, v[2] / l])
}

/// Time steps above this multiple of the recommended one are refused.
pub const DT_REFUSE_FACTOR: f64 = 10.0;
/// Time steps above this multiple of the recommended one are warned about.
pub const DT_WARN_FACTOR: f64 = 2.0;

fn time_step(
    loaded: &Loaded,
    key: &str,
    q: Option<&crate::Quantity>,
    d: &SystemDefaults,
    warnings: &mut Vec<String>,
) -> Result<f64, ConfigError> {
    let Some(q) = q else { return Ok(d.dt) };
    let dt = positive(loaded, key, q, Dimension::Time)?;
    if dt > DT_REFUSE_FACTOR * d.dt {
        return Err(loaded.error_at(
            key,
            format!("dt = {dt} ps is {:.0} times the recommended {} ps for these couplings; Heun would not follow the precession (use at most {} ps)", dt / d.dt, d.dt, DT_REFUSE_FACTOR * d.dt),
        ));
    }
    if dt > DT_WARN_FACTOR * d.dt {
        warnings.push(format!(
            "{key}: dt = {dt} ps is {:.1} times the recommended {} ps; check convergence",
            dt / d.dt,
            d.dt
        ));
    }
    Ok(dt)
}

/// The largest step, sweep or point count a stage key takes.
const MAX_COUNT: u64 = 1_000_000_000_000_000;

/// Builds the protocol; `warnings` collects what is allowed but doubtful.
pub fn build(
    loaded: &Loaded,
    defaults: &SystemDefaults,
    warnings: &mut Vec<String>,
) -> Result<Protocol, ConfigError> {
    let raw = &loaded.raw;
    let initial = initial(loaded, warnings)?;
    let mut stages = Vec::new();
    for (k, s) in raw.stage.iter().enumerate() {
        let key = format!("stage.{k}");
        for name in present(s) {
            if !allowed(s.kind).contains(&name) {
                return Err(loaded.error_at(
                    &format!("{key}.{name}"),
                    format!(
                        "`{name}` does not apply to {} `{}` stage (it takes: {})",
                        if s.kind.as_str().starts_with('e') { "an" } else { "a" },
                        s.kind.as_str(),
                        allowed(s.kind).join(", ")
                    ),
                ));
            }
        }
        // Counts beyond this (years of any machine's time) are typos or unit slips, and
        // products of them (steps per point times points) would overflow 64 bits.
        for (name, count) in [
            ("observe_every", s.observe_every),
            ("snapshot_every", s.snapshot_every),
            ("max_steps", s.max_steps),
            ("points", s.points),
            ("equilibrate", s.equilibrate),
            ("measure", s.measure),
        ] {
            if count.is_some_and(|c| c > MAX_COUNT) {
                return Err(loaded.error_at(&format!("{key}.{name}"), "must be at most 1e15"));
            }
        }
        let temperature = s
            .temperature
            .as_ref()
            .map(|q| temperature_of(loaded, &format!("{key}.temperature"), q))
            .transpose()?
            .unwrap_or(0.0);
        let field = s
            .field
            .as_ref()
            .map(|v| loaded.vector(&format!("{key}.field"), v, Dimension::Field))
            .transpose()?;
        let relax_limits = || -> Result<(u64, f64), ConfigError> {
            let max_steps = s.max_steps.unwrap_or(100_000);
            if max_steps == 0 {
                return Err(loaded.error_at(&format!("{key}.max_steps"), "must be at least 1"));
            }
            let tol = s
                .torque_tolerance
                .as_ref()
                .map(|q| positive(loaded, &format!("{key}.torque_tolerance"), q, Dimension::Field))
                .transpose()?
                .unwrap_or(1e-4);
            Ok((max_steps, tol))
        };
        let kind = match s.kind {
            RawKind::Relax => {
                if temperature != 0.0 {
                    return Err(loaded.error_at(
                        &format!("{key}.temperature"),
                        "a `relax` stage is at zero temperature; use `evolve` for finite temperature",
                    ));
                }
                let (max_steps, torque_tolerance) = relax_limits()?;
                StageKind::Relax { max_steps, torque_tolerance }
            }
            RawKind::Evolve => {
                let Some(duration) = &s.duration else {
                    return Err(loaded.error_at(&key, "an `evolve` stage needs `duration`"));
                };
                let duration = positive(loaded, &format!("{key}.duration"), duration, Dimension::Time)?;
                let dt = time_step(loaded, &format!("{key}.dt"), s.dt.as_ref(), defaults, warnings)?;
                if duration / dt > MAX_COUNT as f64 {
                    return Err(loaded.error_at(
                        &format!("{key}.duration"),
                        format!(
                            "{duration} ps at dt = {dt:.3e} ps is {:.1e} steps, more than 1e15 (the couplings' recommended dt is {:.3e} ps: are they in meV, and the moments in muB?)",
                            duration / dt,
                            defaults.dt
                        ),
                    ));
                }
                let temperature_ramp = s
                    .temperature_ramp
                    .as_ref()
                    .map(|[a, b]| {
                        Ok::<_, ConfigError>((
                            temperature_of(loaded, &format!("{key}.temperature_ramp.0"), a)?,
                            temperature_of(loaded, &format!("{key}.temperature_ramp.1"), b)?,
                        ))
                    })
                    .transpose()?;
                if temperature_ramp.is_some() && s.temperature.is_some() {
                    return Err(loaded.error_at(
                        &format!("{key}.temperature_ramp"),
                        "give `temperature` or `temperature_ramp`, not both",
                    ));
                }
                let field_ramp = s
                    .field_ramp
                    .as_ref()
                    .map(|r| {
                        Ok::<_, ConfigError>((
                            loaded.vector(&format!("{key}.field_ramp.from"), &r.from, Dimension::Field)?,
                            loaded.vector(&format!("{key}.field_ramp.to"), &r.to, Dimension::Field)?,
                        ))
                    })
                    .transpose()?;
                if field_ramp.is_some() && field.is_some() {
                    return Err(loaded
                        .error_at(&format!("{key}.field_ramp"), "give `field` or `field_ramp`, not both"));
                }
                StageKind::Evolve { duration, dt, temperature_ramp, field_ramp }
            }
            RawKind::FieldLoop => {
                let Some(dir) = s.direction else {
                    return Err(loaded.error_at(&key, "a `field-loop` stage needs `direction`"));
                };
                let direction = direction(loaded, &format!("{key}.direction"), dir)?;
                let Some(max) = &s.max else {
                    return Err(loaded.error_at(&key, "a `field-loop` stage needs `max` (the largest field)"));
                };
                let max = positive(loaded, &format!("{key}.max"), max, Dimension::Field)?;
                let points = s.points.unwrap_or(21);
                if points < 2 {
                    return Err(
                        loaded.error_at(&format!("{key}.points"), "needs at least 2 points per branch")
                    );
                }
                let settle = s
                    .settle
                    .as_ref()
                    .map(|q| positive(loaded, &format!("{key}.settle"), q, Dimension::Time))
                    .transpose()?;
                let relax = match (s.relax, settle) {
                    (Some(true), Some(_)) => {
                        return Err(loaded
                            .error_at(&format!("{key}.settle"), "give `relax = true` or `settle`, not both"))
                    }
                    (Some(false), None) => {
                        return Err(loaded
                            .error_at(&format!("{key}.relax"), "with `relax = false`, give a `settle` time"))
                    }
                    (_, Some(_)) => false,
                    (_, None) => true,
                };
                if relax && temperature != 0.0 {
                    return Err(loaded.error_at(&format!("{key}.temperature"), "relaxing at each field is a zero-temperature loop; give `settle` for a finite-temperature loop"));
                }
                let dt = time_step(loaded, &format!("{key}.dt"), s.dt.as_ref(), defaults, warnings)?;
                // As for an `evolve` stage's duration: the loop settles at `points` fields on
                // each of its two branches.
                let steps = settle.unwrap_or(0.0) / dt * (2 * points) as f64;
                if steps > MAX_COUNT as f64 {
                    return Err(loaded.error_at(
                        &format!("{key}.settle"),
                        format!("{steps:.1e} steps at dt = {dt:.3e} ps in all, more than 1e15"),
                    ));
                }
                let (max_steps, torque_tolerance) = relax_limits()?;
                StageKind::FieldLoop {
                    direction,
                    max,
                    points: points as usize,
                    relax,
                    settle: settle.unwrap_or(0.0),
                    dt,
                    max_steps,
                    torque_tolerance,
                }
            }
            RawKind::Metropolis => {
                if temperature <= 0.0 {
                    return Err(loaded.error_at(&key, "a `metropolis` stage needs a `temperature` above 0 K"));
                }
                StageKind::Metropolis {
                    equilibrate: s.equilibrate.unwrap_or(1000),
                    measure: measure(loaded, &key, s.measure)?,
                }
            }
            RawKind::TemperatureScan => {
                let mut temps =
                    match (&s.temperatures, &s.from, &s.to, &s.step) {
                        (Some(list), None, None, None) => {
                            let mut t = Vec::new();
                            for (i, q) in list.iter().enumerate() {
                                t.push(temperature_of(loaded, &format!("{key}.temperatures.{i}"), q)?);
                            }
                            t
                        }
                        (None, Some(a), Some(b), Some(st)) => {
                            let a = temperature_of(loaded, &format!("{key}.from"), a)?;
                            let b = temperature_of(loaded, &format!("{key}.to"), b)?;
                            let st = positive(loaded, &format!("{key}.step"), st, Dimension::Temperature)?;
                            crate::range_values(a, b, st, 100_000).map_err(|n| {
                                loaded.error_at(
                                    &format!("{key}.step"),
                                    format!("{n:.3e} temperatures is too many (at most 100000)"),
                                )
                            })?
                        }
                        (Some(_), _, _, _) => {
                            return Err(loaded.error_at(
                                &format!("{key}.temperatures"),
                                "give `temperatures` or `from`/`to`/`step`, not both",
                            ))
                        }
                        _ => return Err(loaded.error_at(
                            &key,
                            "a `temperature-scan` needs `temperatures = [..]` or all of `from`, `to`, `step`",
                        )),
                    };
                if temps.is_empty() {
                    return Err(
                        loaded.error_at(&format!("{key}.temperatures"), "needs at least one temperature")
                    );
                }
                if let Some(i) = temps.iter().position(|&t| t <= 0.0) {
                    return Err(loaded.error_at(
                        &format!("{key}.temperatures"),
                        format!("temperature {} is {} K; scans need T > 0", i, temps[i]),
                    ));
                }
                match s.order.unwrap_or(ScanOrder::Cooling) {
                    ScanOrder::Cooling => temps.sort_by(|a, b| b.total_cmp(a)),
                    ScanOrder::Heating => temps.sort_by(f64::total_cmp),
                }
                if s.temperature.is_some() {
                    return Err(loaded.error_at(
                        &format!("{key}.temperature"),
                        "a scan takes its temperatures from `temperatures` or `from`/`to`/`step`",
                    ));
                }
                let method = match s.method.unwrap_or(RawMethod::Metropolis) {
                    RawMethod::Metropolis => ScanMethod::Metropolis,
                    RawMethod::Llg => ScanMethod::Llg,
                };
                let dt = time_step(loaded, &format!("{key}.dt"), s.dt.as_ref(), defaults, warnings)?;
                let (equilibrate, measure) =
                    (s.equilibrate.unwrap_or(1000), measure(loaded, &key, s.measure)?);
                if (equilibrate + measure) as f64 * temps.len() as f64 > MAX_COUNT as f64 {
                    return Err(loaded.error_at(
                        &format!("{key}.measure"),
                        format!(
                            "{} temperatures of {equilibrate} + {measure} steps are more than 1e15 in all",
                            temps.len()
                        ),
                    ));
                }
                StageKind::TemperatureScan { temperatures: temps, method, equilibrate, measure, dt }
            }
        };
        let observe_default = match s.kind {
            RawKind::Relax | RawKind::Evolve => 100,
            _ => 10,
        };
        let observe_every = s.observe_every.unwrap_or(observe_default);
        if observe_every == 0 {
            return Err(loaded.error_at(&format!("{key}.observe_every"), "must be at least 1"));
        }
        // An LLG scan samples every `observe_every` steps of its `measure` steps (Monte
        // Carlo samples every sweep), so the pair must give the averages two samples;
        // caught here rather than after the first point's equilibration.
        if let StageKind::TemperatureScan { method: ScanMethod::Llg, measure, .. } = &kind {
            if measure / observe_every < 2 {
                return Err(loaded.error_at(
                    &format!("{key}.measure"),
                    format!(
                        "{measure} steps sampled every {observe_every} (`observe_every`) give {} samples; \
                         an LLG scan needs at least 2 per temperature for averages and errors",
                        measure / observe_every
                    ),
                ));
            }
        }
        stages.push(Stage {
            kind,
            temperature,
            field,
            observe_every,
            snapshot_every: s.snapshot_every.unwrap_or(0),
        });
    }
    Ok(Protocol { seed: raw.seed.unwrap_or(0), initial, field: defaults.field, stages })
}

fn measure(loaded: &Loaded, key: &str, m: Option<u64>) -> Result<u64, ConfigError> {
    let m = m.unwrap_or(5000);
    if m < 2 {
        return Err(
            loaded.error_at(&format!("{key}.measure"), "needs at least 2 samples for averages and errors")
        );
    }
    Ok(m)
}

/// The initial state. Keys of another state (a skyrmion's `radius` under `state = "uniform"`) are
/// left unused with a warning rather than refused, so that one config can be swept or `--set`
/// over its initial states.
fn initial(loaded: &Loaded, warnings: &mut Vec<String>) -> Result<Initial, ConfigError> {
    let Some(i) = &loaded.raw.initial else {
        return Ok(Initial::State(InitialState::Uniform { direction: [0.0, 0.0, 1.0] }));
    };
    let state = i.state.unwrap_or(RawInitial::Uniform);
    let used: Vec<(&str, bool)> = vec![
        ("direction", i.direction.is_some()),
        ("center", i.center.is_some()),
        ("radius", i.radius.is_some()),
        ("helicity", i.helicity.is_some()),
        ("wavevector", i.wavevector.is_some()),
        ("path", i.path.is_some()),
    ];
    let ok: &[&str] = match state {
        RawInitial::Uniform => &["direction"],
        RawInitial::Random => &[],
        RawInitial::Skyrmion => &["direction", "center", "radius", "helicity"],
        RawInitial::Helix => &["wavevector"],
        RawInitial::File => &["path"],
    };
    let state_name = format!("{state:?}").to_lowercase();
    for (name, here) in used {
        if here && !ok.contains(&name) {
            let takes = if ok.is_empty() { "no other key".to_string() } else { ok.join(", ") };
            warnings.push(format!(
                "initial.{name}: not used by the initial state `{state_name}` (it takes: {takes})"
            ));
        }
    }
    let dir = i
        .direction
        .map(|d| direction(loaded, "initial.direction", d))
        .transpose()?
        .unwrap_or([0.0, 0.0, 1.0]);
    Ok(Initial::State(match state {
        RawInitial::Uniform => InitialState::Uniform { direction: dir },
        RawInitial::Random => InitialState::Random,
        RawInitial::Skyrmion => {
            let Some(r) = &i.radius else {
                return Err(loaded.error_at("initial", "a skyrmion needs its `radius` (Å)"));
            };
            let center = i.center.unwrap_or([0.5, 0.5]);
            if let Some(c) = center.iter().find(|c| !c.is_finite()) {
                return Err(loaded.error_at("initial.center", format!("`{c}` is not a finite number")));
            }
            InitialState::Skyrmion {
                center,
                radius: positive(loaded, "initial.radius", r, Dimension::Length)?,
                background: dir,
                helicity_deg: i
                    .helicity
                    .as_ref()
                    .map(|q| loaded.quantity("initial.helicity", q, Dimension::Angle))
                    .transpose()?,
            }
        }
        RawInitial::Helix => {
            let Some(q) = i.wavevector else {
                return Err(loaded.error_at("initial", "a helix needs its `wavevector` (1/Å)"));
            };
            if !(q.iter().all(|x| x.is_finite()) && q.iter().any(|&x| x != 0.0)) {
                return Err(loaded.error_at(
                    "initial.wavevector",
                    format!("must be a finite non-zero wavevector (1/Å), got {q:?}"),
                ));
            }
            InitialState::Helix { wavevector: q, axis: [0.0, 0.0, 1.0] }
        }
        RawInitial::File => {
            let Some(p) = &i.path else {
                return Err(loaded.error_at("initial", "`state = \"file\"` needs `path`, a run folder"));
            };
            return Ok(Initial::FromRun(loaded.resolve_path(p)));
        }
    }))
}
