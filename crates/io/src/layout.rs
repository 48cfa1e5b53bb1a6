//! File names, format markers and the unit strings of the run file.
//!
//! Every dataset of `run.h5` carries a string attribute `unit`. The unit strings are:
//!
//! | unit string       | meaning                                   | datasets |
//! | ----------------- | ----------------------------------------- | -------- |
//! | `angstrom`        | ångström                                  | `/lattice/position` |
//! | `bohr_magneton`   | Bohr magnetons                            | `/lattice/moment` |
//! | `ps`              | picoseconds                               | `series/time`, `snapshots/time` |
//! | `K`               | kelvin                                    | `series/temperature`, `points/temperature` |
//! | `T`               | tesla                                     | `series/field`, `points/field` |
//! | `meV/spin`        | meV per spin                              | `series/energy*`, `points/energy`, `points/energy_err` |
//! | `kB`              | Boltzmann constants per spin              | `points/heat_capacity`, `points/heat_capacity_err` |
//! | `1/meV`           | per meV, per spin                         | `points/susceptibility`, `points/susceptibility_err` |
//! | `1`               | dimensionless, counts and indices         | everything else: magnetisations, charges, Binder cumulant, spins, steps, sample counts, autocorrelation times (in samples), site/species/layer indices |
//!
//! Indices and counts carry `1` too, so that a reader may rely on every dataset having the
//! attribute.

/// Name of the run file inside a run folder.
pub const RUN_FILE: &str = "run.h5";
/// Name of the checkpoint file inside a run folder.
pub const CHECKPOINT_FILE: &str = "checkpoint.h5";
/// Name of the JSON summary inside a run folder.
pub const SUMMARY_FILE: &str = "summary.json";
/// Name of the XDMF sidecar inside a run folder.
pub const XDMF_FILE: &str = "run.xdmf";

/// Root `format` attribute of a run file.
pub const RUN_FORMAT: &str = "spindrift-run";
/// Root `format_version` attribute of a run file written by this program. Version 2
/// (2026-12-05) numbers the sites of a lattice with several basis sites basis-major within
/// each row of cells (see `spindrift_lattice::Supercell`); version 1 had the basis
/// innermost. The per-site arrays of the two differ in order only, and only for such
/// lattices ([`SITE_ORDER_VERSION`]).
pub const RUN_FORMAT_VERSION: u64 = 2;
/// Root `format` attribute of a checkpoint file.
pub const CHECKPOINT_FORMAT: &str = "spindrift-checkpoint";
/// Root `format_version` attribute of a checkpoint written by this program (2: the site
/// order of [`RUN_FORMAT_VERSION`] 2).
pub const CHECKPOINT_FORMAT_VERSION: u64 = 2;
/// The first `format_version` of run files and checkpoints whose per-site arrays follow
/// the present site order; earlier files of lattices with several basis sites per cell
/// hold them with the basis innermost
/// (`spindrift_lattice::Supercell::from_basis_innermost` reorders them).
pub const SITE_ORDER_VERSION: u64 = 2;

/// Unit string of lengths.
pub const UNIT_LENGTH: &str = "angstrom";
/// Unit string of magnetic moments.
pub const UNIT_MOMENT: &str = "bohr_magneton";
/// Unit string of times.
pub const UNIT_TIME: &str = "ps";
/// Unit string of temperatures.
pub const UNIT_TEMPERATURE: &str = "K";
/// Unit string of magnetic fields.
pub const UNIT_FIELD: &str = "T";
/// Unit string of energies per spin.
pub const UNIT_ENERGY: &str = "meV/spin";
/// Unit string of heat capacities per spin.
pub const UNIT_HEAT_CAPACITY: &str = "kB";
/// Unit string of susceptibilities per spin.
pub const UNIT_SUSCEPTIBILITY: &str = "1/meV";
/// Unit string of dimensionless values, counts and indices.
pub const UNIT_NONE: &str = "1";

/// Name of the group of stage `index` (`stage_000`, `stage_001`, ...).
pub fn stage_group_name(index: usize) -> String {
    format!("stage_{index:03}")
}

/// Parses a stage group name back to its index (`None` for any other name).
pub fn parse_stage_group_name(name: &str) -> Option<usize> {
    let digits = name.strip_prefix("stage_")?;
    if digits.len() < 3 || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    digits.parse().ok()
}
