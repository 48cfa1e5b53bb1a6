//! Reading a config into a validated system, with what only the command line knows:
//! the machine's memory and files named by the config.

use crate::exit::{bad_input, Failure};
use anyhow::anyhow;
use spindrift_config::{load, validate, Loaded, Validated};
use spindrift_engine::{Initial, InitialState};
use spindrift_io::layout::SITE_ORDER_VERSION;
use std::path::Path;

/// Memory the system can still give, bytes (`MemAvailable` of `/proc/meminfo`).
pub fn available_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024)
}

/// Loads, validates and resolves a config; every failure is bad input (exit 2).
pub fn load_system(config: &Path, sets: &[String]) -> Result<(Loaded, Validated), Failure> {
    let loaded = load(config, sets).map_err(bad_input)?;
    let mut v = validate(&loaded, available_memory()).map_err(bad_input)?;
    if let Initial::FromRun(dir) = &v.protocol.initial {
        let (spins, version) = read_final_spins(dir)
            .map_err(|e| bad_input(loaded.error_at("initial.path", format!("{e:#}"))))?;
        if spins.len() != v.hamiltonian.len() {
            return Err(bad_input(loaded.error_at(
                "initial.path",
                format!(
                    "run {} has {} sites but this system has {}",
                    dir.display(),
                    spins.len(),
                    v.hamiltonian.len()
                ),
            )));
        }
        // A run written before the present site order holds the spins of a lattice with
        // several basis sites in the old one (the same order for one basis site).
        let spins = if version < SITE_ORDER_VERSION {
            v.hamiltonian.cell().from_basis_innermost(&spins).expect("one spin per site, checked above")
        } else {
            spins
        };
        v.protocol.initial = Initial::State(InitialState::Given(spins));
    }
    Ok((loaded, v))
}

/// The latest state a run folder holds: its final spins, else (a run stopped before its
/// end) the checkpoint's spins, else its last snapshot; with the run file's
/// `format_version`, which tells their site order.
fn read_final_spins(dir: &Path) -> anyhow::Result<(Vec<[f64; 3]>, u64)> {
    let reader = spindrift_io::RunReader::open(dir)?;
    let version = reader.attributes()?.format_version;
    if let Some(s) = reader.final_spins()? {
        return Ok((s, version));
    }
    if dir.join("checkpoint.h5").exists() {
        return Ok((spindrift_io::read_checkpoint(dir)?.spins, version));
    }
    match reader.last_snapshot()? {
        Some(s) => Ok((s.spins, version)),
        None => Err(anyhow!("{} holds neither final spins nor a snapshot", dir.display())),
    }
}

/// Runs `f` on a worker thread of the global pool. The parallel loops of a run then start
/// from a worker, instead of handing each loop from the main thread to the pool and
/// waiting for it to come back (a futex wake-up and wait per loop, several per Monte Carlo
/// sweep).
pub fn on_pool<R: Send>(f: impl FnOnce() -> R + Send) -> R {
    rayon::scope(|_| f())
}

/// Sets the number of worker threads for the whole process.
pub fn set_threads(threads: Option<usize>) -> Result<usize, Failure> {
    if let Some(n) = threads {
        if n == 0 {
            return Err(bad_input(anyhow!("--threads must be at least 1")));
        }
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build_global()
            .map_err(|e| bad_input(anyhow!("--threads: {e}")))?;
    }
    Ok(rayon::current_num_threads())
}
