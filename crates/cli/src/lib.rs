//! The `spindrift` command line: flag definitions and glue between the libraries.
//!
//! `check` validates a config and prints the system; `run` runs its protocol into a run
//! folder; `plot` and `inspect` read a run folder back; `sweep` and `merge` handle
//! families of runs. Exit codes are in [`exit`]. Only this crate knows the terminal.

/// `println!` that ends the process quietly when stdout is closed (e.g. piped to `head`),
/// instead of panicking.
macro_rules! say {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        if writeln!(std::io::stdout(), $($t)*).is_err() {
            std::process::exit(0);
        }
    }};
}

pub mod args;
mod check;
pub mod exit;
mod inspect;
mod plot;
mod point_threads;
mod progress;
mod run;
mod scan_range;
mod signals;
mod sweep;
mod system;

use args::{Args, Command};
use clap::Parser;
use exit::Failure;

/// Runs the command line and returns the process exit code.
pub fn run() -> u8 {
    let args = match Args::try_parse() {
        Ok(a) => a,
        Err(e) => {
            let code = if e.use_stderr() { exit::BAD_INPUT } else { exit::OK };
            let _ = e.print();
            return code;
        }
    };
    // Every command writes files (merged tables, plots, run files): a write past a per-file
    // size limit must fail with an error it reports, not end the process.
    if let Err(e) = signals::catch_file_size_signal() {
        eprintln!("spindrift: error: cannot install a signal handler: {e}");
        return exit::OUTPUT;
    }
    let result = match args.command {
        Command::Check(a) => check::check(&a),
        Command::Run(a) => run::run(&a),
        Command::Sweep(a) => sweep::sweep(&a),
        Command::Merge(a) => sweep::merge(&a),
        Command::Plot(a) => plot::plot(&a),
        Command::Inspect(a) => inspect::inspect(&a),
    };
    match result {
        Ok(code) => code,
        Err(Failure { code, error }) => {
            eprintln!("spindrift: error: {error:#}");
            code
        }
    }
}
