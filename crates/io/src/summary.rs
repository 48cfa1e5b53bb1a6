//! `summary.json`: a small machine-readable account of a finished (or stopped) run.
//!
//! ```json
//! {"spins": 9216, "threads": 2, "instruction_set": "x86-64-v3", "wall_seconds": 12.5,
//!  "stages": [{"index": 0, "kind": "evolve", "steps": 200000, "spin_steps_per_second": 1.5e8,
//!              "wall_seconds": 12.2,
//!              "final": {"time": 200.0, "magnetization": [0, 0, 0.93], "energy": -40.1,
//!                        "energy_terms": {"exchange": -35.9, "dmi": -1.2, "anisotropy": -0.2, "zeeman": -2.8},
//!                        "charge": -1.0},
//!              "curie_temperature": {"value": 412.0, "error": 3.0, "method": "binder-crossing"},
//!              "coercive_field": {"descending": -0.8, "ascending": 0.8}, "remanence": 0.97,
//!              "torque": 1e-6}]}
//! ```
//!
//! Units as everywhere: time ps, energies meV per spin, fields T, temperatures K, wall time s.
//! `curie_temperature` appears only for scans of three or more temperatures (its `value` and `error` null, `method`
//! `"none"` and a `note` saying why when the scan found none), `coercive_field` and
//! `remanence` only for field loops; each entry of [`StageSummary::extra`] becomes a key of its
//! stage (one that would shadow a standard key is written as `extra_<name>` instead).
//! Non-finite numbers, which JSON cannot hold, are written as `null`.

use std::io::Write;
use std::path::Path;

use serde_json::{json, Map, Value};
use spindrift_engine::StageSummary;

use crate::checkpoint::sync_dir;
use crate::error::IoError;
use crate::layout::SUMMARY_FILE;

/// What `summary.json` reports about a run.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RunSummary {
    /// Number of spins (sites of the supercell).
    pub spins: usize,
    /// Worker threads used.
    pub threads: usize,
    /// Instruction-set level of the hot loops (`spindrift_isa::Level::name`, e.g.
    /// `x86-64-v4`); the results do not depend on it, the speed does.
    pub instruction_set: String,
    /// Wall-clock time of the whole run, s.
    pub wall_seconds: f64,
    /// Summaries of the finished stages, in order.
    pub stages: Vec<StageSummary>,
    /// Named estimates of the system made before the run (e.g. `curie_mean_field`,
    /// `curie_rpa`, K), written as the object `estimates`.
    pub estimates: Vec<(String, f64)>,
}

/// Keys of a stage object that [`StageSummary::extra`] entries must not overwrite.
const STAGE_KEYS: [&str; 9] = [
    "index",
    "kind",
    "steps",
    "spin_steps_per_second",
    "wall_seconds",
    "final",
    "curie_temperature",
    "coercive_field",
    "remanence",
];

fn num(x: f64) -> Value {
    // serde_json maps non-finite floats to null as well; saying so here keeps the rule visible.
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

fn vec3(v: &[f64; 3]) -> Value {
    Value::Array(v.iter().map(|&x| num(x)).collect())
}

fn stage_json(s: &StageSummary) -> Value {
    let f = &s.final_state;
    let t = &f.energy_terms;
    let mut m = Map::new();
    m.insert("index".into(), json!(s.index));
    m.insert("kind".into(), json!(s.kind));
    m.insert("steps".into(), json!(s.steps));
    m.insert("spin_steps_per_second".into(), num(s.spin_steps_per_second));
    m.insert("wall_seconds".into(), num(s.wall_seconds));
    m.insert(
        "final".into(),
        json!({
            "time": num(f.time),
            "magnetization": vec3(&f.magnetization),
            "energy": num(f.energy),
            "energy_terms": {
                "exchange": num(t.exchange),
                "dmi": num(t.dmi),
                "anisotropy": num(t.anisotropy),
                "zeeman": num(t.zeeman),
            },
            "charge": num(f.charge),
        }),
    );
    if let Some(c) = &s.curie_temperature {
        let mut curie = json!({"value": num(c.value), "error": num(c.error), "method": c.method});
        if !c.note.is_empty() {
            curie["note"] = json!(c.note);
        }
        m.insert("curie_temperature".into(), curie);
    }
    if let Some((down, up)) = s.coercive_field {
        m.insert("coercive_field".into(), json!({"descending": num(down), "ascending": num(up)}));
    }
    if let Some(r) = s.remanence {
        m.insert("remanence".into(), num(r));
    }
    for (name, value) in &s.extra {
        let key = if STAGE_KEYS.contains(&name.as_str()) { format!("extra_{name}") } else { name.clone() };
        m.insert(key, num(*value));
    }
    Value::Object(m)
}

/// The JSON value written to `summary.json`.
pub fn summary_json(summary: &RunSummary) -> Value {
    json!({
        "spins": summary.spins,
        "threads": summary.threads,
        "instruction_set": summary.instruction_set,
        "wall_seconds": num(summary.wall_seconds),
        "stages": summary.stages.iter().map(stage_json).collect::<Vec<_>>(),
        "estimates": summary.estimates.iter().map(|(k, v)| (k.clone(), num(*v))).collect::<Map<_, _>>(),
    })
}

/// Writes `DIR/summary.json` atomically (temporary file, sync, rename).
pub fn write_summary(dir: &Path, summary: &RunSummary) -> Result<(), IoError> {
    let path = dir.join(SUMMARY_FILE);
    let mut text = serde_json::to_string_pretty(&summary_json(summary)).map_err(|e| IoError::Json {
        path: path.clone(),
        what: "encoding the summary".into(),
        source: e,
    })?;
    text.push('\n');
    write_atomic(dir, &path, text.as_bytes())
}

/// Reads `DIR/summary.json` as a JSON value.
pub fn read_summary(dir: &Path) -> Result<Value, IoError> {
    let path = dir.join(SUMMARY_FILE);
    let text = std::fs::read_to_string(&path).map_err(|e| IoError::os(&path, "reading", e))?;
    serde_json::from_str(&text).map_err(|e| IoError::Json { path, what: "parsing".into(), source: e })
}

/// Writes `bytes` to `path` through a temporary file in `dir` and a rename.
pub(crate) fn write_atomic(dir: &Path, path: &Path, bytes: &[u8]) -> Result<(), IoError> {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let tmp = dir.join(format!("{name}.tmp"));
    let result = std::fs::File::create(&tmp)
        .and_then(|mut f| {
            f.write_all(bytes)?;
            f.sync_all()
        })
        .map_err(|e| IoError::os(&tmp, "writing", e));
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(e);
    }
    std::fs::rename(&tmp, path).map_err(|e| IoError::os(path, "replacing", e))?;
    sync_dir(dir)
}
