//! `spindrift check`: validate a config and describe the system.

use crate::args::CheckArgs;
use crate::exit::{bad_input, Outcome, OK};
use crate::scan_range::scan_warnings;
use crate::system::load_system;
use serde_json::json;
use spindrift_config::system::human_bytes;
use spindrift_config::{Loaded, Validated};
use spindrift_engine::{initial_spins, StageKind};
use spindrift_hamiltonian::curie::curie_estimates;
use spindrift_lattice::shells::shell_distances;

pub fn check(args: &CheckArgs) -> Outcome {
    let (loaded, v) = load_system(&args.config, &args.set)?;
    let report = Report::new(&loaded, &v).map_err(bad_input)?;
    if args.json {
        say!("{}", serde_json::to_string_pretty(&report.json()).map_err(bad_input)?);
    } else {
        report.print();
    }
    Ok(OK)
}

struct Report<'a> {
    loaded: &'a Loaded,
    v: &'a Validated,
    energy: spindrift_hamiltonian::EnergyTerms,
    curie: spindrift_hamiltonian::curie::CurieEstimates,
    shells: Vec<f64>,
    /// The config's warnings, then those on scans against the Curie estimates.
    warnings: Vec<String>,
}

impl<'a> Report<'a> {
    fn new(loaded: &'a Loaded, v: &'a Validated) -> anyhow::Result<Self> {
        let h = &v.hamiltonian;
        let spins = initial_spins(h, &v.protocol)?;
        let energy = h.energy_terms(&spins).scaled(1.0 / h.spin_count().max(1) as f64);
        let curie = curie_estimates(h);
        let shells = shell_distances(h.cell(), 4, &|_, _| true);
        let mut warnings = v.warnings.clone();
        warnings.extend(scan_warnings(&v.protocol, &curie));
        Ok(Self { loaded, v, energy, curie, shells, warnings })
    }

    fn lattice_name(&self) -> String {
        match &self.loaded.raw.lattice.preset {
            Some(p) => p.as_str().to_string(),
            None => "custom vectors".to_string(),
        }
    }

    fn json(&self) -> serde_json::Value {
        let h = &self.v.hamiltonian;
        let cell = h.cell();
        let nb = cell.basis_len();
        let couplings: Vec<_> = self
            .v
            .couplings
            .iter()
            .map(|c| json!({"key": c.key, "distance": c.distance, "pairs_per_cell": c.pairs, "neighbours_per_site": 2.0 * c.pairs as f64 / nb as f64}))
            .collect();
        let stages: Vec<_> = self
            .v
            .protocol
            .stages
            .iter()
            .map(|s| json!({"kind": s.kind_name(), "temperature": s.temperature}))
            .collect();
        json!({
            "config": self.loaded.file.display().to_string(),
            "title": self.v.title,
            "spins": h.spin_count(),
            "sites": h.len(),
            "sites_per_cell": nb,
            "cells": cell.cells(),
            "periodic": cell.periodic(),
            "layers": cell.layer_count(),
            "lattice": self.lattice_name(),
            "species": self.v.species_names,
            "shell_distances": self.shells,
            "couplings": couplings,
            "bonds_per_cell": h.bonds().directed_len() / 2,
            "memory_estimate_bytes": self.v.memory_estimate_bytes,
            "disk_reserve_bytes": spindrift_io::reserve_bytes(self.v.hamiltonian.len()),
            "energy_initial": {
                "total": self.energy.total(),
                "exchange": self.energy.exchange,
                "dmi": self.energy.dmi,
                "anisotropy": self.energy.anisotropy,
                "zeeman": self.energy.zeeman,
            },
            "curie_mean_field": finite(self.curie.mean_field),
            "curie_rpa": self.curie.rpa.and_then(finite),
            "curie_note": self.curie.note,
            "recommended_dt": self.v.recommended_dt,
            "stages": stages,
            "warnings": self.warnings,
        })
    }

    fn print(&self) {
        let h = &self.v.hamiltonian;
        let cell = h.cell();
        let nb = cell.basis_len();
        let [n1, n2, n3] = cell.cells();
        say!("{}", self.loaded.file.display());
        if !self.v.title.is_empty() {
            say!("  {}", self.v.title);
        }
        say!();
        say!("system");
        say!(
            "  lattice      {} ({} site{} per cell), {n1} x {n2} x {n3} cells, periodic {:?}",
            self.lattice_name(),
            nb,
            if nb == 1 { "" } else { "s" },
            cell.periodic()
        );
        let vacancies = h.len() - h.spin_count();
        print!("  spins        {}", h.spin_count());
        if vacancies > 0 {
            print!(" ({vacancies} vacant sites of {})", h.len());
        }
        say!(" in {} layer{}", cell.layer_count(), if cell.layer_count() == 1 { "" } else { "s" });
        for s in h.species() {
            say!(
                "  species {:<4} moment {} muB, damping {}, anisotropy {} meV along [{:.3}, {:.3}, {:.3}]",
                s.name,
                s.moment,
                s.damping,
                s.anisotropy,
                s.axis[0],
                s.axis[1],
                s.axis[2]
            );
        }
        let shells: Vec<String> = self.shells.iter().map(|d| format!("{d:.4}")).collect();
        say!("  shells       {} Å", shells.join(", "));
        say!();
        say!("couplings");
        for c in &self.v.couplings {
            if c.distance > 0.0 {
                say!(
                    "  {:<14} {:.4} Å, {} pair{} per cell ({:.1} neighbours per site)",
                    c.key,
                    c.distance,
                    c.pairs,
                    if c.pairs == 1 { "" } else { "s" },
                    2.0 * c.pairs as f64 / nb as f64
                );
            } else {
                say!("  {:<14} {} pairs per cell", c.key, c.pairs);
            }
        }
        say!(
            "  bonds        {} pairs per cell, {} directed bonds stored",
            h.bonds().directed_len() / 2,
            h.bonds().directed_len()
        );
        say!();
        say!("initial state energy (meV per spin)");
        let e = &self.energy;
        say!(
            "  total {:.6}   exchange {:.6}   dmi {:.6}   anisotropy {:.6}   zeeman {:.6}",
            e.total(),
            e.exchange,
            e.dmi,
            e.anisotropy,
            e.zeeman
        );
        say!();
        say!("Curie temperature estimates (classical spins, ferromagnetic order; model values)");
        say!("  mean field   {}", kelvin(self.curie.mean_field));
        say!("  RPA          {}", self.curie.rpa.map_or("not available".to_string(), kelvin));
        if let Some(n) = &self.curie.note {
            say!("  note         {n}");
        }
        say!(
            "  Monte Carlo (a temperature-scan stage) gives the model's own Tc; mean field overestimates it."
        );
        say!();
        say!("run");
        say!("  recommended dt  {} fs", num(self.v.recommended_dt * 1e3));
        say!("  memory          about {}", human_bytes(self.v.memory_estimate_bytes));
        say!(
            "  disk reserve    {} held in the run folder while it runs (room for the last writes if the disk fills)",
            human_bytes(spindrift_io::reserve_bytes(self.v.hamiltonian.len()))
        );
        for (k, s) in self.v.protocol.stages.iter().enumerate() {
            let what = match &s.kind {
                StageKind::Evolve { duration, dt, .. } => {
                    format!(
                        "{} ps in steps of {} fs ({} steps)",
                        num(*duration),
                        num(dt * 1e3),
                        num((duration / dt).round())
                    )
                }
                StageKind::Relax { torque_tolerance, max_steps } => {
                    format!("to torque < {} T (at most {max_steps} iterations)", num(*torque_tolerance))
                }
                StageKind::FieldLoop { max, points, relax, .. } => {
                    format!(
                        "+-{} T, {points} fields per branch, {}",
                        num(*max),
                        if *relax { "relaxed" } else { "settled" }
                    )
                }
                StageKind::Metropolis { equilibrate, measure } => format!("{equilibrate} + {measure} sweeps"),
                StageKind::TemperatureScan { temperatures, equilibrate, measure, .. } => format!(
                    "{} temperatures {}..{} K, {equilibrate} + {measure} each",
                    temperatures.len(),
                    num(temperatures.first().copied().unwrap_or(0.0)),
                    num(temperatures.last().copied().unwrap_or(0.0))
                ),
            };
            if matches!(s.kind, StageKind::TemperatureScan { .. }) {
                // A scan's temperatures are its own; `temperature` does not apply to it.
                say!("  stage {k}  {:<17} {what}", s.kind_name());
            } else {
                say!("  stage {k}  {:<17} at {} K: {what}", s.kind_name(), num(s.temperature));
            }
        }
        if self.v.protocol.stages.is_empty() {
            say!("  no [[stage]]: `spindrift run` has nothing to do");
        }
        for w in &self.warnings {
            say!("warning: {w}");
        }
    }
}

/// A number as written in a config: `0.05`, `300`, and `1e-7` or `1e300` rather than the
/// hundreds of digits Rust's `Display` gives such values.
fn num(x: f64) -> String {
    if x == 0.0 || (1e-4..1e15).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

fn kelvin(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.1} K")
    } else {
        "not available".into()
    }
}
