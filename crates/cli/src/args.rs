//! Command-line flags.

use clap::{Args as ClapArgs, Parser, Subcommand};
use std::path::PathBuf;

/// Atomistic spin dynamics and Monte Carlo for magnetic materials.
#[derive(Debug, Parser)]
#[command(name = "spindrift", version, about, long_about = None)]
pub struct Args {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Validate a config and print the system, its energy and Curie-temperature estimates.
    Check(CheckArgs),
    /// Run a config's stages into a run folder.
    Run(RunArgs),
    /// Run a config for every combination of swept values, one run folder each.
    Sweep(SweepArgs),
    /// Collect the results of a sweep into one table.
    Merge(MergeArgs),
    /// Draw the figures of a run (or a merged sweep) folder as PNG files.
    Plot(PlotArgs),
    /// Describe what a run folder holds.
    Inspect(InspectArgs),
}

/// `spindrift check`.
#[derive(Debug, ClapArgs)]
pub struct CheckArgs {
    /// The config file (TOML).
    pub config: PathBuf,
    /// Override a config value: `--set stage.0.temperature=50` (dotted path, array index by number).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
    /// Print one JSON object instead of text.
    #[arg(long)]
    pub json: bool,
}

/// `spindrift run`.
#[derive(Debug, ClapArgs)]
pub struct RunArgs {
    /// The config file (TOML).
    pub config: PathBuf,
    /// Run folder to create (default: `runs/<config name>`).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Override a config value (see `check --help`).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
    /// Worker threads (default: all cores). Results do not depend on it.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Continue the stopped run in this folder from its checkpoint.
    #[arg(long, value_name = "DIR", conflicts_with = "out")]
    pub resume: Option<PathBuf>,
    /// Stop with a checkpoint after this wall-clock time (`90 s`, `30 min`, `11.5 h`).
    #[arg(long, value_name = "DURATION")]
    pub max_wall: Option<String>,
    /// Print nothing but errors.
    #[arg(long, short)]
    pub quiet: bool,
}

/// `spindrift sweep`.
#[derive(Debug, ClapArgs)]
pub struct SweepArgs {
    /// The config file (TOML).
    pub config: PathBuf,
    /// A key and its values: `--vary stage.0.temperature=100,200,300` or `from:to:step`;
    /// arrays in brackets (`--vary lattice.cells=[8,8,2],[8,8,4]`). Several `--vary` give
    /// every combination.
    #[arg(long, value_name = "KEY=V1,V2,...", required = true)]
    pub vary: Vec<String>,
    /// Sweep folder (default: `runs/<config name>-sweep`).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Run only the points with `index mod N == I` (`--shard 0/4`).
    #[arg(long, value_name = "I/N")]
    pub shard: Option<String>,
    /// Worker threads per run.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Stop with a checkpoint after this wall-clock time for the whole sweep (`11.5 h`);
    /// running the sweep again resumes.
    #[arg(long, value_name = "DURATION")]
    pub max_wall: Option<String>,
    /// Override a config value for every point.
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
}

/// `spindrift merge`.
#[derive(Debug, ClapArgs)]
pub struct MergeArgs {
    /// Sweep folders to merge (each gets its own merged.csv and merged.h5).
    #[arg(required = true)]
    pub dirs: Vec<PathBuf>,
}

/// `spindrift plot`.
#[derive(Debug, ClapArgs)]
pub struct PlotArgs {
    /// A run folder (or a merged sweep folder).
    pub run_dir: PathBuf,
    /// Where to write the PNG files (default: `RUN_DIR/plots`).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

/// `spindrift inspect`.
#[derive(Debug, ClapArgs)]
pub struct InspectArgs {
    /// A run folder.
    pub run_dir: PathBuf,
    /// Print one JSON object instead of text.
    #[arg(long)]
    pub json: bool,
}
