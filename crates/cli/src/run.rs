//! `spindrift run`: a config's stages into a run folder, with checkpoints, resume and
//! exit codes for early stops.

use crate::args::RunArgs;
use crate::exit::{self, bad_input, numerical, output, Failure, Outcome};
use crate::progress::Progress;
use crate::signals;
use crate::system::{load_system, on_pool, set_threads};
use anyhow::anyhow;
use spindrift_config::{config_difference, parse_wall_duration, Loaded, Validated};
use spindrift_engine::{
    Control, EngineError, Outcome as RunEnd, RunHeader, Runner, StageSummary, StopReason,
};
use spindrift_io::layout::SITE_ORDER_VERSION;
use spindrift_io::{read_checkpoint, write_summary, RunFile, RunReader, RunSummary};
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicI32;
use std::sync::Arc;
use std::time::Instant;

/// Default run folder of a config: `runs/<file stem>`.
pub fn default_out(config: &Path, suffix: &str) -> PathBuf {
    let stem = config.file_stem().map_or("run".into(), |s| s.to_string_lossy().into_owned());
    PathBuf::from("runs").join(format!("{stem}{suffix}"))
}

/// The header of a run file: the system as the config resolved it.
pub fn header(loaded: &Loaded, v: &Validated) -> RunHeader {
    let h = &v.hamiltonian;
    let cell = h.cell();
    let n = h.len();
    RunHeader {
        title: v.title.clone(),
        seed: v.seed,
        config_toml: loaded.text.clone(),
        inputs: v.inputs.clone(),
        program_version: env!("CARGO_PKG_VERSION").to_string(),
        position: (0..n).map(|i| cell.position(i)).collect(),
        site: (0..n).map(|i| (i % cell.basis_len()) as u32).collect(),
        species: (0..n).map(|i| cell.species(i) as u32).collect(),
        moment: (0..n).map(|i| h.moment(i)).collect(),
        layer: (0..n).map(|i| cell.layer(i) as u32).collect(),
        species_names: v.species_names.clone(),
        layer_count: cell.layer_count(),
    }
}

pub fn run(args: &RunArgs) -> Outcome {
    // Before anything else, so that a signal while a large system is being built stops
    // the run at its first safe point (exit 130/143 with a checkpoint) instead of ending
    // the process by the signal's default action.
    let stop = signals::install().map_err(|e| output(anyhow!("cannot install signal handlers: {e}")))?;
    run_until(args, stop)
}

/// [`run`] with the process's stop flag already installed (a sweep installs it once for all
/// its points, so that a signal between two points, or while several run at once, is not
/// cleared by the next point's start). The run uses the thread pool it is called on.
pub fn run_until(args: &RunArgs, stop: Arc<AtomicI32>) -> Outcome {
    let (loaded, v) = load_system(&args.config, &args.set)?;
    if v.protocol.stages.is_empty() {
        return Err(bad_input(anyhow!(
            "{}: the config has no [[stage]]; nothing to run",
            args.config.display()
        )));
    }
    if !args.quiet {
        for w in &v.warnings {
            eprintln!("warning: {w}");
        }
    }
    let threads = set_threads(args.threads)?;
    let max_wall = args
        .max_wall
        .as_deref()
        .map(parse_wall_duration)
        .transpose()
        .map_err(|e| bad_input(anyhow!("--max-wall: {}", e.message_for("--max-wall"))))?;
    let started = Instant::now();
    let control = Control::new(stop, max_wall.map(|d| started + d), v.checkpoint_every);
    let mut progress = Progress::new(args.quiet);
    let spins = v.hamiltonian.spin_count();
    let curie = spindrift_hamiltonian::curie::curie_estimates(&v.hamiltonian);
    if !args.quiet && args.resume.is_none() {
        for w in crate::scan_range::scan_warnings(&v.protocol, &curie) {
            eprintln!("warning: {w}");
        }
    }
    let estimates = vec![
        ("curie_mean_field".to_string(), curie.mean_field),
        ("curie_rpa".to_string(), curie.rpa.unwrap_or(f64::NAN)),
        ("recommended_dt".to_string(), v.recommended_dt),
    ];

    let (dir, mut file, end) = if let Some(dir) = &args.resume {
        let checkpoint =
            read_checkpoint(dir).map_err(|e| bad_input(anyhow!("--resume {}: {e}", dir.display())))?;
        let stored = RunReader::open(dir)
            .and_then(|r| r.attributes())
            .map_err(|e| bad_input(anyhow!("--resume: {e}")))?;
        // Sites of a lattice with several basis sites were numbered otherwise before
        // format version 2: the run's arrays and the checkpoint's spins are in that order.
        if stored.format_version < SITE_ORDER_VERSION && v.hamiltonian.cell().basis_len() > 1 {
            return Err(bad_input(anyhow!(
                "--resume {}: the run was written by an earlier version of spindrift (format_version {}), which numbered the sites of a lattice with several basis sites otherwise; resume it with that version, or start a new run from its spins with [initial] state = \"file\"",
                dir.display(),
                stored.format_version
            )));
        }
        // The same keys and values, whatever the comments and layout (a note added to the
        // config file while the run waited does not change what it computes).
        if let Some(difference) = config_difference(&stored.config, &loaded.text) {
            return Err(bad_input(anyhow!(
                "--resume {}: the run was made from a different config (or other --set values): {difference}; resume with the same ones",
                dir.display()
            )));
        }
        // Files written before the bond tables' digests were recorded have none to compare.
        if !stored.inputs.is_empty() && stored.inputs != v.inputs {
            return Err(bad_input(anyhow!(
                "--resume {}: a bond table's couplings changed since the run began (recorded: {}; now: {}); resume with the tables it began with",
                dir.display(),
                stored.inputs.trim().replace('\n', "; "),
                v.inputs.trim().replace('\n', "; ")
            )));
        }
        let mut file = RunFile::reopen(dir, &checkpoint.rows).map_err(output)?;
        file.set_snapshot_compression(v.snapshot_compression);
        let end = on_pool(|| {
            let mut runner = Runner::resume(
                v.hamiltonian.clone(),
                &v.protocol,
                &mut file,
                &mut progress,
                control,
                checkpoint,
            )?;
            Ok(runner.run(None))
        })
        .map_err(engine_failure)?;
        (dir.clone(), file, end)
    } else {
        let dir = args.out.clone().unwrap_or_else(|| default_out(&args.config, ""));
        if dir.join("run.h5").exists() {
            return Err(bad_input(anyhow!(
                "{} already holds a run; continue it with --resume {} or choose another --out",
                dir.display(),
                dir.display()
            )));
        }
        std::fs::create_dir_all(&dir).map_err(|e| output(anyhow!("cannot create {}: {e}", dir.display())))?;
        let mut file = RunFile::create(&dir).map_err(output)?;
        file.set_snapshot_compression(v.snapshot_compression);
        // The header (positions and indices of every site) is written and dropped before
        // the run, so its ~44 bytes per spin are not held for the whole run.
        let head = header(&loaded, &v);
        spindrift_engine::Sink::header(&mut file, &head).map_err(output)?;
        drop(head);
        let end = on_pool(|| {
            let mut runner =
                Runner::new(v.hamiltonian.clone(), &v.protocol, &mut file, &mut progress, control)?;
            Ok(runner.run(None))
        })
        .map_err(engine_failure)?;
        (dir, file, end)
    };
    let wall = started.elapsed().as_secs_f64();
    let xdmf = file.write_xdmf();
    let closed = file.close();
    let (finished, code) = match end {
        Ok(RunEnd::Finished(s)) => (s, exit::OK),
        Ok(RunEnd::Stopped { reason, finished }) => {
            let code = match reason {
                StopReason::WallLimit => exit::WALL_LIMIT,
                StopReason::Signal(2) => exit::SIGINT,
                StopReason::Signal(_) => exit::SIGTERM,
            };
            if !args.quiet {
                eprintln!(
                    "spindrift: stopped ({}); checkpoint written. Continue with: spindrift run {} --resume {}{}",
                    match reason {
                        StopReason::WallLimit => "--max-wall reached".to_string(),
                        StopReason::Signal(s) => format!("signal {s}"),
                    },
                    args.config.display(),
                    dir.display(),
                    args.set.iter().map(|s| format!(" --set '{s}'")).collect::<String>()
                );
            }
            (finished, code)
        }
        Err(e) => return Err(engine_failure(e)),
    };
    xdmf.map_err(output)?;
    closed.map_err(output)?;
    write_summary(
        &dir,
        &RunSummary {
            spins,
            threads,
            instruction_set: spindrift_isa::level().name().to_string(),
            wall_seconds: wall,
            stages: finished.clone(),
            estimates,
        },
    )
    .map_err(output)?;
    if code == exit::OK {
        let cp = dir.join("checkpoint.h5");
        if cp.exists() {
            std::fs::remove_file(&cp).map_err(|e| output(anyhow!("cannot remove {}: {e}", cp.display())))?;
        }
        if !args.quiet {
            print_summary(&dir, &finished, wall);
        }
    }
    Ok(code)
}

fn engine_failure(e: EngineError) -> Failure {
    match e {
        // The sink's error is a message (HDF5 reports errno as text), so a full disk is
        // recognised by its words. (A disk too full for the reserve fails earlier, when
        // the run file is made, with its own message.)
        EngineError::Sink(ref s)
            if ["No space left on device", "Disk quota exceeded"].iter().any(|m| s.message.contains(m)) =>
        {
            output(anyhow!(
                "{e}. The disk is full: the run file was closed with the rows written before the failure and the last state in /final (the run's disk reserve made room for them); free space, then run again or --resume from a checkpoint if one was written"
            ))
        }
        EngineError::Sink(_) => output(e),
        EngineError::NonFinite { .. } | EngineError::Overflow { .. } => numerical(e),
        _ => bad_input(e),
    }
}

fn print_summary(dir: &Path, stages: &[StageSummary], wall: f64) {
    say!("run folder {}  ({wall:.1} s)", dir.display());
    for s in stages {
        let f = &s.final_state;
        let m = f.magnetization;
        say!(
            "  stage {} {:<16} {:>9} steps  {:.3e} spin-steps/s   m = [{:+.4}, {:+.4}, {:+.4}]  E = {:.4} meV/spin  Q = {:+.3}",
            s.index, s.kind, s.steps, s.spin_steps_per_second, m[0], m[1], m[2], f.energy, f.charge
        );
        if let Some(c) = s.curie_temperature.as_ref().filter(|c| !c.note.is_empty()) {
            say!("      {}", c.note);
        } else if let Some(c) = &s.curie_temperature {
            say!(
                "      Curie temperature {:.1} +- {:.1} K ({}; a model estimate)",
                c.value,
                c.error,
                c.method
            );
        }
        if let Some((d, a)) = s.coercive_field {
            say!("      coercive field {d:+.3} T (descending), {a:+.3} T (ascending)");
        }
        if let Some(r) = s.remanence {
            say!("      remanence {r:+.4}");
        }
        for (k, v) in &s.extra {
            say!("      {k} = {v}");
        }
    }
}
