//! `summary.json` parsed back by serde_json (a general-purpose JSON parser) has exactly the
//! keys of `shared/INTERFACE.md`, with the optional ones only where they apply and
//! non-finite numbers as `null` (RFC 8259, section 6: JSON has no NaN or infinity).

mod common;

use std::collections::BTreeSet;

use common::*;
use serde_json::Value;
use spindrift_io::{read_summary, write_summary, RunSummary};

fn keys(v: &Value) -> BTreeSet<String> {
    v.as_object().expect("an object").keys().cloned().collect()
}

fn set(names: &[&str]) -> BTreeSet<String> {
    names.iter().map(|s| s.to_string()).collect()
}

#[test]
fn summary_json_has_the_interface_keys() {
    let tmp = TempDir::new("summary");
    let mut relax = summary(3, "relax");
    relax.extra.push(("steps".into(), 5.0)); // would shadow a standard key
    let mut scan = summary(1, "temperature-scan");
    scan.final_state.energy = f64::NAN;
    scan.final_state.energy_terms.zeeman = f64::NEG_INFINITY;
    let run = RunSummary {
        spins: 9216,
        threads: 2,
        instruction_set: "x86-64-v3".into(),
        wall_seconds: 12.5,
        stages: vec![summary(0, "evolve"), scan, summary(2, "field-loop"), relax],
        estimates: vec![("curie_mean_field".into(), 600.5), ("curie_rpa".into(), f64::NAN)],
    };
    write_summary(tmp.path(), &run).unwrap();
    let text = std::fs::read_to_string(tmp.path().join("summary.json")).unwrap();
    let v: Value = serde_json::from_str(&text).expect("valid JSON");
    assert_eq!(read_summary(tmp.path()).unwrap(), v);

    assert_eq!(
        keys(&v),
        set(&["spins", "threads", "instruction_set", "wall_seconds", "stages", "estimates"])
    );
    assert_eq!(v["estimates"]["curie_mean_field"], 600.5);
    assert!(v["estimates"]["curie_rpa"].is_null());
    assert_eq!(v["spins"], 9216);
    assert_eq!(v["threads"], 2);
    assert_eq!(v["instruction_set"], "x86-64-v3");
    assert_eq!(v["wall_seconds"], 12.5);
    let stages = v["stages"].as_array().unwrap();
    assert_eq!(stages.len(), 4);

    let base = ["index", "kind", "steps", "spin_steps_per_second", "wall_seconds", "final"];
    let with = |more: &[&str]| {
        let mut s = set(&base);
        s.extend(more.iter().map(|m| m.to_string()));
        s
    };
    assert_eq!(keys(&stages[0]), with(&[]));
    assert_eq!(keys(&stages[1]), with(&["curie_temperature"]));
    assert_eq!(keys(&stages[2]), with(&["coercive_field", "remanence"]));
    assert_eq!(keys(&stages[3]), with(&["torque", "converged", "extra_steps"]));

    for s in stages {
        assert_eq!(keys(&s["final"]), set(&["time", "magnetization", "energy", "energy_terms", "charge"]));
        assert_eq!(keys(&s["final"]["energy_terms"]), set(&["exchange", "dmi", "anisotropy", "zeeman"]));
        assert_eq!(s["final"]["magnetization"].as_array().unwrap().len(), 3);
    }
    assert_eq!(stages[0]["kind"], "evolve");
    assert_eq!(stages[0]["index"], 0);
    assert_eq!(stages[0]["steps"], 1000);
    assert_eq!(stages[0]["final"]["energy_terms"]["dmi"], -0.5);
    assert_eq!(keys(&stages[1]["curie_temperature"]), set(&["value", "error", "method"]));
    assert_eq!(stages[1]["curie_temperature"]["value"], 412.5);
    assert_eq!(stages[1]["curie_temperature"]["method"], "binder-crossing");
    assert!(stages[1]["final"]["energy"].is_null(), "NaN becomes null");
    assert!(stages[1]["final"]["energy_terms"]["zeeman"].is_null(), "-inf becomes null");
    assert_eq!(keys(&stages[2]["coercive_field"]), set(&["descending", "ascending"]));
    assert_eq!(stages[2]["coercive_field"]["descending"], -0.75);
    assert_eq!(stages[2]["remanence"], 0.97);
    assert_eq!(stages[3]["steps"], 4000, "the standard key keeps its value");
    assert_eq!(stages[3]["extra_steps"], 5.0);
    assert_eq!(stages[3]["torque"], 1.0e-6);

    let names: Vec<String> = std::fs::read_dir(tmp.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, vec!["summary.json".to_string()], "no temporary file left behind");
}
