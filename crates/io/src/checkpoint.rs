//! `checkpoint.h5`: everything needed to continue a run, replaced atomically.
//!
//! The file is written under a temporary name in the same folder, synced, and renamed over
//! the old one; a rename within one file system is atomic, so a reader (or a resumed run)
//! sees either the old checkpoint or the new one, never a half-written file.
//!
//! Layout (all reals as IEEE doubles, stored bit for bit):
//!
//! ```text
//! /                    attributes format = "spindrift-checkpoint", format_version, stage
//! /spins               (N,3)
//! /scalars/names, values           named reals
//! /counters/names, values          named unsigned counters
//! /arrays/names, offsets, values   named real arrays, concatenated; array i is
//!                                  values[offsets[i]..offsets[i+1]]
//! /rows                (stages,3)  series, points, snapshots per stage
//! /finished/NNN        one group per finished stage summary (attributes, plus the
//!                      datasets extra_names and extra_values)
//! ```
//!
//! Names are stored as data, not as HDF5 link names, so any string is a valid key.

use std::collections::BTreeMap;
use std::path::Path;

use hdf5::types::VarLenUnicode;
use hdf5::{File, Group, H5Type, Location};
use spindrift_engine::{Checkpoint, CurieEstimate, FinalState, RowCounts, StageSummary};
use spindrift_hamiltonian::EnergyTerms;

use crate::error::{Hdf5Context, IoError};
use crate::h5util::{
    check_format, check_hdf5_file, file_options, has_attr, open_dataset, open_group, read_attr,
    read_str_attr, set_attr, set_str_attr, write_fixed,
};
use crate::layout::{CHECKPOINT_FILE, CHECKPOINT_FORMAT, CHECKPOINT_FORMAT_VERSION, UNIT_NONE};
use crate::run_file::sync_file;

/// Writes `DIR/checkpoint.h5` atomically (temporary file, sync, rename, sync of the folder).
pub fn write_checkpoint(dir: &Path, checkpoint: &Checkpoint) -> Result<(), IoError> {
    let path = dir.join(CHECKPOINT_FILE);
    let tmp = dir.join(format!("{CHECKPOINT_FILE}.tmp"));
    let result = write_file(&tmp, checkpoint).and_then(|()| sync_file(&tmp));
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(e);
    }
    std::fs::rename(&tmp, &path).map_err(|e| IoError::os(&path, "replacing the checkpoint", e))?;
    sync_dir(dir)
}

/// Reads `DIR/checkpoint.h5` back exactly as it was written.
pub fn read_checkpoint(dir: &Path) -> Result<Checkpoint, IoError> {
    let path = dir.join(CHECKPOINT_FILE);
    check_hdf5_file(&path, CHECKPOINT_FORMAT)?;
    let file = file_options().open(&path).ctx(&path, || "opening the checkpoint")?;
    check_format(&file, &path, CHECKPOINT_FORMAT, CHECKPOINT_FORMAT_VERSION)?;
    read_file(&file, &path)
}

/// Makes a rename durable: the new directory entry is on disk only once the folder is synced.
pub(crate) fn sync_dir(dir: &Path) -> Result<(), IoError> {
    std::fs::File::open(dir).and_then(|d| d.sync_all()).map_err(|e| IoError::os(dir, "syncing the folder", e))
}

fn vlu_vec(path: &Path, names: impl Iterator<Item = String>) -> Result<Vec<VarLenUnicode>, IoError> {
    names
        .map(|n| n.parse::<VarLenUnicode>().map_err(|e| IoError::invalid(path, format!("name {n:?}: {e}"))))
        .collect()
}

fn set_attr_array<T: H5Type>(loc: &Location, name: &str, values: &[T]) -> hdf5::Result<()> {
    loc.new_attr::<T>().shape(values.len()).create(name)?.write_raw(values)
}

fn write_file(path: &Path, c: &Checkpoint) -> Result<(), IoError> {
    let file = file_options().create(path).ctx(path, || "creating the checkpoint")?;
    write_contents(&file, path, c)?;
    file.close().ctx(path, || "closing the checkpoint")
}

fn write_contents(file: &File, path: &Path, c: &Checkpoint) -> Result<(), IoError> {
    let w = |what: &str| format!("writing {what}");
    set_str_attr(file, "format", CHECKPOINT_FORMAT).ctx(path, || w("attribute format"))?;
    set_attr(file, "format_version", &CHECKPOINT_FORMAT_VERSION)
        .ctx(path, || w("attribute format_version"))?;
    set_attr(file, "stage", &(c.stage as u64)).ctx(path, || w("attribute stage"))?;
    write_fixed(file, "spins", c.spins.as_flattened(), &[c.spins.len(), 3], UNIT_NONE)
        .ctx(path, || w("/spins"))?;

    let g = file.create_group("scalars").ctx(path, || w("/scalars"))?;
    write_names(&g, path, c.scalars.keys().cloned())?;
    let values: Vec<f64> = c.scalars.values().copied().collect();
    write_fixed(&g, "values", &values, &[values.len()], UNIT_NONE).ctx(path, || w("/scalars/values"))?;

    let g = file.create_group("counters").ctx(path, || w("/counters"))?;
    write_names(&g, path, c.counters.keys().cloned())?;
    let values: Vec<u64> = c.counters.values().copied().collect();
    write_fixed(&g, "values", &values, &[values.len()], UNIT_NONE).ctx(path, || w("/counters/values"))?;

    let g = file.create_group("arrays").ctx(path, || w("/arrays"))?;
    write_names(&g, path, c.arrays.keys().cloned())?;
    let mut offsets = vec![0u64];
    let mut values = Vec::new();
    for a in c.arrays.values() {
        values.extend_from_slice(a);
        offsets.push(values.len() as u64);
    }
    write_fixed(&g, "offsets", &offsets, &[offsets.len()], UNIT_NONE).ctx(path, || w("/arrays/offsets"))?;
    write_fixed(&g, "values", &values, &[values.len()], UNIT_NONE).ctx(path, || w("/arrays/values"))?;

    let rows: Vec<u64> = c.rows.iter().flat_map(|r| [r.series, r.points, r.snapshots]).collect();
    write_fixed(file, "rows", &rows, &[c.rows.len(), 3], UNIT_NONE).ctx(path, || w("/rows"))?;

    let g = file.create_group("finished").ctx(path, || w("/finished"))?;
    for (i, s) in c.finished.iter().enumerate() {
        write_summary(&g, &format!("{i:03}"), s, path)?;
    }
    Ok(())
}

fn write_names(g: &Group, path: &Path, names: impl Iterator<Item = String>) -> Result<(), IoError> {
    let names = vlu_vec(path, names)?;
    write_fixed(g, "names", &names, &[names.len()], UNIT_NONE)
        .ctx(path, || format!("writing {}/names", g.name()))?;
    Ok(())
}

fn write_summary(parent: &Group, name: &str, s: &StageSummary, path: &Path) -> Result<(), IoError> {
    let gname = format!("/finished/{name}");
    let g = parent.create_group(name).ctx(path, || format!("creating {gname}"))?;
    let w = |what: &str| format!("writing {gname} attribute {what}");
    let f = &s.final_state;
    let t = &f.energy_terms;
    set_attr(&g, "index", &(s.index as u64)).ctx(path, || w("index"))?;
    set_str_attr(&g, "kind", &s.kind).ctx(path, || w("kind"))?;
    set_attr(&g, "steps", &s.steps).ctx(path, || w("steps"))?;
    set_attr(&g, "wall_seconds", &s.wall_seconds).ctx(path, || w("wall_seconds"))?;
    set_attr(&g, "spin_steps_per_second", &s.spin_steps_per_second)
        .ctx(path, || w("spin_steps_per_second"))?;
    set_attr(&g, "final_time", &f.time).ctx(path, || w("final_time"))?;
    set_attr_array(&g, "final_magnetization", &f.magnetization).ctx(path, || w("final_magnetization"))?;
    set_attr(&g, "final_energy", &f.energy).ctx(path, || w("final_energy"))?;
    set_attr_array(&g, "final_energy_terms", &[t.exchange, t.dmi, t.anisotropy, t.zeeman])
        .ctx(path, || w("final_energy_terms"))?;
    set_attr(&g, "final_charge", &f.charge).ctx(path, || w("final_charge"))?;
    if let Some(c) = &s.curie_temperature {
        set_attr(&g, "curie_value", &c.value).ctx(path, || w("curie_value"))?;
        set_attr(&g, "curie_error", &c.error).ctx(path, || w("curie_error"))?;
        set_str_attr(&g, "curie_method", &c.method).ctx(path, || w("curie_method"))?;
        set_str_attr(&g, "curie_note", &c.note).ctx(path, || w("curie_note"))?;
    }
    if let Some((down, up)) = s.coercive_field {
        set_attr_array(&g, "coercive_field", &[down, up]).ctx(path, || w("coercive_field"))?;
    }
    if let Some(r) = s.remanence {
        set_attr(&g, "remanence", &r).ctx(path, || w("remanence"))?;
    }
    let names = vlu_vec(path, s.extra.iter().map(|(k, _)| k.clone()))?;
    let values: Vec<f64> = s.extra.iter().map(|&(_, v)| v).collect();
    write_fixed(&g, "extra_names", &names, &[names.len()], UNIT_NONE)
        .ctx(path, || format!("writing {gname}/extra_names"))?;
    write_fixed(&g, "extra_values", &values, &[values.len()], UNIT_NONE)
        .ctx(path, || format!("writing {gname}/extra_values"))?;
    Ok(())
}

fn read_vec<T: H5Type>(g: &Group, name: &str, path: &Path) -> Result<Vec<T>, IoError> {
    let ds = open_dataset(g, name, path)?;
    ds.read_raw::<T>().ctx(path, || format!("reading {}/{name}", g.name()))
}

fn read_names(g: &Group, path: &Path) -> Result<Vec<String>, IoError> {
    Ok(read_vec::<VarLenUnicode>(g, "names", path)?.iter().map(|s| s.as_str().to_owned()).collect())
}

fn zip_map<T: Copy>(
    names: Vec<String>,
    values: Vec<T>,
    g: &Group,
    path: &Path,
) -> Result<BTreeMap<String, T>, IoError> {
    if names.len() != values.len() {
        return Err(IoError::invalid(
            path,
            format!("{}: {} names but {} values", g.name(), names.len(), values.len()),
        ));
    }
    Ok(names.into_iter().zip(values).collect())
}

fn to_vec3(flat: &[f64]) -> Vec<[f64; 3]> {
    flat.chunks_exact(3).map(|c| [c[0], c[1], c[2]]).collect()
}

fn read_file(file: &File, path: &Path) -> Result<Checkpoint, IoError> {
    let stage: u64 = read_attr(file, "stage").ctx(path, || "reading attribute stage")?;
    let spins_ds = open_dataset(file, "spins", path)?;
    if spins_ds.ndim() != 2 || spins_ds.shape()[1] != 3 {
        return Err(IoError::invalid(
            path,
            format!("/spins has shape {:?}, expected (N, 3)", spins_ds.shape()),
        ));
    }
    let spins = to_vec3(&spins_ds.read_raw::<f64>().ctx(path, || "reading /spins")?);

    let g = open_group(file, "scalars", path)?;
    let scalars = zip_map(read_names(&g, path)?, read_vec::<f64>(&g, "values", path)?, &g, path)?;
    let g = open_group(file, "counters", path)?;
    let counters = zip_map(read_names(&g, path)?, read_vec::<u64>(&g, "values", path)?, &g, path)?;

    let g = open_group(file, "arrays", path)?;
    let names = read_names(&g, path)?;
    let offsets = read_vec::<u64>(&g, "offsets", path)?;
    let values = read_vec::<f64>(&g, "values", path)?;
    let bad_offsets = offsets.len() != names.len() + 1
        || offsets.windows(2).any(|w| w[0] > w[1])
        || offsets.last().copied() != Some(values.len() as u64);
    if bad_offsets {
        return Err(IoError::invalid(path, "/arrays/offsets do not match /arrays/names and /arrays/values"));
    }
    let arrays = names
        .into_iter()
        .zip(offsets.windows(2))
        .map(|(n, w)| (n, values[w[0] as usize..w[1] as usize].to_vec()))
        .collect();

    let rows_ds = open_dataset(file, "rows", path)?;
    let flat = rows_ds.read_raw::<u64>().ctx(path, || "reading /rows")?;
    if rows_ds.ndim() != 2 || rows_ds.shape()[1] != 3 {
        return Err(IoError::invalid(
            path,
            format!("/rows has shape {:?}, expected (stages, 3)", rows_ds.shape()),
        ));
    }
    let rows =
        flat.chunks_exact(3).map(|r| RowCounts { series: r[0], points: r[1], snapshots: r[2] }).collect();

    let g = open_group(file, "finished", path)?;
    let mut names = g.member_names().ctx(path, || "listing /finished")?;
    names.sort();
    let finished = names.iter().map(|n| read_summary(&g, n, path)).collect::<Result<_, _>>()?;

    Ok(Checkpoint { stage: stage as usize, spins, scalars, counters, arrays, rows, finished })
}

fn read_summary(parent: &Group, name: &str, path: &Path) -> Result<StageSummary, IoError> {
    let g = open_group(parent, name, path)?;
    let gname = format!("/finished/{name}");
    let r = |what: &str| format!("reading {gname} attribute {what}");
    let f64_attr = |what: &str| read_attr::<f64>(&g, what).ctx(path, || r(what));
    let f64_array = |what: &str, n: usize| -> Result<Vec<f64>, IoError> {
        let v = g.attr(what).and_then(|a| a.read_raw::<f64>()).ctx(path, || r(what))?;
        if v.len() != n {
            return Err(IoError::invalid(
                path,
                format!("{gname} attribute {what} has {} values, expected {n}", v.len()),
            ));
        }
        Ok(v)
    };
    let m = f64_array("final_magnetization", 3)?;
    let t = f64_array("final_energy_terms", 4)?;
    let final_state = FinalState {
        time: f64_attr("final_time")?,
        magnetization: [m[0], m[1], m[2]],
        energy: f64_attr("final_energy")?,
        energy_terms: EnergyTerms { exchange: t[0], dmi: t[1], anisotropy: t[2], zeeman: t[3] },
        charge: f64_attr("final_charge")?,
    };
    let curie_temperature = if has_attr(&g, "curie_value") {
        Some(CurieEstimate {
            value: f64_attr("curie_value")?,
            error: f64_attr("curie_error")?,
            method: read_str_attr(&g, "curie_method").ctx(path, || r("curie_method"))?,
            note: if has_attr(&g, "curie_note") {
                read_str_attr(&g, "curie_note").ctx(path, || r("curie_note"))?
            } else {
                String::new()
            },
        })
    } else {
        None
    };
    let coercive_field = if has_attr(&g, "coercive_field") {
        f64_array("coercive_field", 2).map(|v| Some((v[0], v[1])))?
    } else {
        None
    };
    let remanence = if has_attr(&g, "remanence") { Some(f64_attr("remanence")?) } else { None };
    let extra_names: Vec<String> =
        read_vec::<VarLenUnicode>(&g, "extra_names", path)?.iter().map(|s| s.as_str().to_owned()).collect();
    let extra_values = read_vec::<f64>(&g, "extra_values", path)?;
    if extra_names.len() != extra_values.len() {
        return Err(IoError::invalid(
            path,
            format!("{gname}: extra_names and extra_values differ in length"),
        ));
    }
    Ok(StageSummary {
        index: read_attr::<u64>(&g, "index").ctx(path, || r("index"))? as usize,
        kind: read_str_attr(&g, "kind").ctx(path, || r("kind"))?,
        steps: read_attr::<u64>(&g, "steps").ctx(path, || r("steps"))?,
        wall_seconds: f64_attr("wall_seconds")?,
        spin_steps_per_second: f64_attr("spin_steps_per_second")?,
        final_state,
        curie_temperature,
        coercive_field,
        remanence,
        extra: extra_names.into_iter().zip(extra_values).collect(),
    })
}
