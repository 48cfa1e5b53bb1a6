//! Helpers shared by the end-to-end and physics tests: build systems from config text,
//! run them in memory or through the real binary.
#![allow(dead_code)]

use spindrift_config::{load_str, validate, Validated};
use spindrift_engine::{Control, MemorySink, Outcome, Runner, Silent};
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// A validated system from config text (paths relative to the repository's `tests/`).
pub fn system(toml: &str) -> Validated {
    let file = repo().join("tests/configs/inline.toml");
    let loaded = load_str(toml, &file, &[]).unwrap_or_else(|e| panic!("config: {e}"));
    validate(&loaded, None).unwrap_or_else(|e| panic!("config: {e}"))
}

/// Runs a config in memory and returns what the sink received.
pub fn run_memory(toml: &str) -> MemorySink {
    let v = system(toml);
    let mut sink = MemorySink::default();
    let mut monitor = Silent;
    let mut runner =
        Runner::new(v.hamiltonian.clone(), &v.protocol, &mut sink, &mut monitor, Control::default())
            .expect("runner");
    match runner.run(None).expect("run") {
        Outcome::Finished(_) => {}
        other => panic!("run did not finish: {other:?}"),
    }
    drop(runner);
    sink
}

/// The repository root.
pub fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..").canonicalize().expect("repo root")
}

/// The spindrift binary built for this test run.
pub fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_spindrift"));
    c.current_dir(repo());
    c
}

/// Runs the binary with arguments and returns its output.
pub fn spindrift(args: &[&str]) -> Output {
    bin().args(args).output().expect("spawn spindrift")
}

/// A fresh, empty temporary folder for one test.
pub fn temp_dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("spindrift-test-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

/// Writes a config file into `dir` and returns its path.
pub fn write_config(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).expect("write config");
    p
}
