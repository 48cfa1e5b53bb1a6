//! `run.h5`: the HDF5 file of a run, written through the engine's [`Sink`] trait.
//!
//! Layout (see the crate docs and `shared/INTERFACE.md`):
//!
//! ```text
//! /                  attributes format, format_version, program_version, config, seed, title
//! /lattice/          position (N,3), site, species, moment, layer (N); attributes species_names, layer_count
//! /stage_NNN/        attribute kind
//!     series/        step, time, temperature, field (n,3), magnetization (n,3), energy,
//!                    energy_exchange, energy_dmi, energy_anisotropy, energy_zeeman, charge,
//!                    charge_by_layer (n,L), magnetization_by_species (n,S,3), magnetization_by_layer (n,L,3)
//!     points/        temperature, field (n,3), magnetization (n,3), magnetization_err (n,3), m_abs,
//!                    susceptibility, heat_capacity, binder, energy (each with _err),
//!                    autocorrelation_time, samples
//!     snapshots/     step (k), time (k), spins (k,N,3)
//! /final/spins       (N,3)
//! ```
//!
//! # Durability
//!
//! Series rows and points are buffered and written in blocks; snapshots are written when
//! they arrive. [`Sink::flush`] writes what is pending and asks HDF5 to flush its caches, so
//! a process killed afterwards (even by SIGKILL) leaves a file that opens with every row up
//! to that flush. HDF5 1.10 has no journal: a kill *during* a flush, or a power cut before
//! the operating system wrote its buffers, can still damage the file. That is why the
//! checkpoint is a separate file replaced atomically, and why resuming cuts this file back
//! to the checkpoint's row counts. A full disk is met by the reserve of `reserve.rs`: once
//! the header is written the run holds disk space back, and gives it up at the first failed
//! write, so that the last state and the flush on closing still fit.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use hdf5::File;
use spindrift_engine::{
    Checkpoint, PointRow, RowCounts, RunHeader, SeriesRow, Sink, SinkError, StageInfo, StageSummary,
};

use crate::checkpoint::write_checkpoint;
use crate::error::{Hdf5Context, IoError};
use crate::h5util::{
    check_format, check_hdf5_file, file_options, set_attr, set_str_array_attr, set_str_attr, write_fixed,
};
use crate::layout::{
    parse_stage_group_name, stage_group_name, RUN_FILE, RUN_FORMAT, RUN_FORMAT_VERSION, UNIT_LENGTH,
    UNIT_MOMENT, UNIT_NONE,
};
use crate::reserve::{file_size_limit, reserve_bytes, Reserve};
use crate::stage::StageWriter;
use crate::xdmf::write_xdmf;

/// Rows buffered per table before they are written as one block, unless a flush comes first.
pub const DEFAULT_BLOCK_ROWS: usize = 256;

/// The HDF5 run file of a run folder, open for writing.
///
/// Implements [`Sink`]: the engine sends it the header, stage rows, snapshots and
/// checkpoints. Dropping it writes pending rows (ignoring errors); call [`RunFile::close`]
/// to see them.
#[derive(Debug)]
pub struct RunFile {
    dir: PathBuf,
    path: PathBuf,
    file: Option<File>,
    /// Number of sites, known once the header is written (or read back on reopen).
    sites: Option<usize>,
    stages: BTreeMap<usize, StageWriter>,
    block_rows: usize,
    compress_snapshots: bool,
    /// Disk space held until the first failed write or the close (see `reserve.rs`).
    reserve: Option<Reserve>,
    /// Under a per-file size limit, the size (bytes) beyond which no row or snapshot is
    /// written, so that the last state and the closing metadata still fit under the limit.
    size_cap: Option<u64>,
}

impl RunFile {
    /// Creates `DIR/run.h5` (creating `DIR` if needed), replacing any file of that name, and
    /// writes the root `format` and `format_version` attributes.
    pub fn create(dir: &Path) -> Result<RunFile, IoError> {
        std::fs::create_dir_all(dir).map_err(|e| IoError::os(dir, "creating the output folder", e))?;
        let path = dir.join(RUN_FILE);
        let file = file_options().create(&path).ctx(&path, || "creating the run file")?;
        set_str_attr(&file, "format", RUN_FORMAT).ctx(&path, || "writing attribute format")?;
        set_attr(&file, "format_version", &RUN_FORMAT_VERSION)
            .ctx(&path, || "writing attribute format_version")?;
        file.flush().ctx(&path, || "flushing")?;
        Ok(RunFile {
            dir: dir.to_path_buf(),
            path,
            file: Some(file),
            sites: None,
            stages: BTreeMap::new(),
            block_rows: DEFAULT_BLOCK_ROWS,
            compress_snapshots: true,
            reserve: None,
            size_cap: None,
        })
    }

    /// Opens the `DIR/run.h5` of an interrupted run to continue it from a checkpoint.
    ///
    /// `rows[i]` is what stage `i` had written when the checkpoint was taken
    /// ([`Checkpoint::rows`]): every dataset of stage `i` is cut back to those counts, the
    /// groups of later stages and `/final` are deleted, and writing continues from there.
    /// The engine may call [`Sink::begin_stage`] again for a stage that exists: it is then
    /// continued, not recreated. [`Sink::header`] may be called again too: it rewrites the
    /// root attributes and `/lattice`.
    pub fn reopen(dir: &Path, rows: &[RowCounts]) -> Result<RunFile, IoError> {
        let path = dir.join(RUN_FILE);
        check_hdf5_file(&path, RUN_FORMAT)?;
        let file = file_options().open_rw(&path).ctx(&path, || "opening the run file for writing")?;
        check_format(&file, &path, RUN_FORMAT, RUN_FORMAT_VERSION)?;
        let sites = if file.link_exists("lattice") {
            let ds = file.dataset("lattice/position").ctx(&path, || "opening /lattice/position")?;
            Some(ds.shape().first().copied().unwrap_or(0))
        } else {
            None
        };
        let mut stages = BTreeMap::new();
        let names = file.member_names().ctx(&path, || "listing the root group")?;
        for name in names {
            let Some(index) = parse_stage_group_name(&name) else { continue };
            if index >= rows.len() {
                file.unlink(&name).ctx(&path, || format!("removing /{name}, begun after the checkpoint"))?;
                continue;
            }
            let sites =
                sites.ok_or_else(|| IoError::invalid(&path, "stage groups exist but /lattice does not"))?;
            let group = file.group(&name).ctx(&path, || format!("opening /{name}"))?;
            let mut stage = StageWriter::open(group, sites, &path)?;
            stage.truncate(&rows[index], &path)?;
            stages.insert(index, stage);
        }
        // A stage counted with no rows may not have reached the file before the kill; the
        // engine begins it again. One with rows must be there.
        if let Some(missing) =
            (0..rows.len()).find(|&i| !stages.contains_key(&i) && rows[i] != RowCounts::default())
        {
            return Err(IoError::invalid(
                &path,
                format!(
                    "the checkpoint has begun stage {missing} but the run file has no /{}",
                    stage_group_name(missing)
                ),
            ));
        }
        if file.link_exists("final") {
            file.unlink("final").ctx(&path, || "removing /final, written after the checkpoint")?;
        }
        file.flush().ctx(&path, || "flushing")?;
        let size_cap = sites.map(|n| size_cap(&path, n)).transpose()?.flatten();
        let reserve = sites.map(|n| Reserve::create(dir, reserve_bytes(n))).transpose()?;
        Ok(RunFile {
            dir: dir.to_path_buf(),
            path,
            file: Some(file),
            sites,
            stages,
            block_rows: DEFAULT_BLOCK_ROWS,
            compress_snapshots: true,
            reserve,
            size_cap,
        })
    }

    /// Whether snapshots of stages begun from now on are deflate-compressed (default
    /// true; compression saves space on smooth textures and costs time on large ones).
    pub fn set_snapshot_compression(&mut self, on: bool) {
        self.compress_snapshots = on;
    }

    /// Sets how many rows each table buffers before writing a block (at least 1; default
    /// [`DEFAULT_BLOCK_ROWS`]).
    pub fn set_block_rows(&mut self, rows: usize) {
        self.block_rows = rows.max(1);
    }

    /// Path of `run.h5`.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The run folder.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// What each stage begun so far has written (including rows not yet flushed), indexed by
    /// stage; stages never begun count zero.
    pub fn row_counts(&self) -> Vec<RowCounts> {
        let n = self.stages.keys().next_back().map_or(0, |&i| i + 1);
        (0..n).map(|i| self.stages.get(&i).map(StageWriter::row_counts).unwrap_or_default()).collect()
    }

    /// Snapshots written per stage, indexed by stage (for [`write_xdmf`]).
    pub fn snapshot_counts(&self) -> Vec<u64> {
        let n = self.stages.keys().next_back().map_or(0, |&i| i + 1);
        (0..n).map(|i| self.stages.get(&i).map_or(0, StageWriter::snapshot_count)).collect()
    }

    /// Whether `/final/spins` has been written.
    pub fn has_final(&self) -> bool {
        self.file.as_ref().is_some_and(|f| f.link_exists("final"))
    }

    /// Flushes and writes `DIR/run.xdmf` describing every snapshot and the final state.
    pub fn write_xdmf(&mut self) -> Result<(), IoError> {
        self.flush_file()?;
        let sites = self
            .sites
            .ok_or_else(|| IoError::invalid(&self.path, "no header written: nothing to describe"))?;
        write_xdmf(&self.dir, sites, &self.snapshot_counts(), self.has_final())
    }

    /// Writes pending rows, closes the file and syncs it to disk.
    pub fn close(mut self) -> Result<(), IoError> {
        self.reserve = None; // deletes the file, giving its blocks to the last writes
        self.flush_file()?;
        self.stages.clear();
        if let Some(file) = self.file.take() {
            file.close().ctx(&self.path, || "closing the run file")?;
        }
        sync_file(&self.path)
    }

    fn file(&self) -> Result<&File, IoError> {
        self.file.as_ref().ok_or_else(|| IoError::invalid(&self.path, "the run file is closed"))
    }

    fn stage_mut(&mut self, stage: usize) -> Result<&mut StageWriter, IoError> {
        let path = &self.path;
        self.stages
            .get_mut(&stage)
            .ok_or_else(|| IoError::invalid(path, format!("stage {stage} was never begun")))
    }

    fn write_header(&mut self, h: &RunHeader) -> Result<(), IoError> {
        let path = self.path.clone();
        let n = h.position.len();
        if n == 0 {
            return Err(IoError::invalid(&path, "the lattice has no sites"));
        }
        for (name, len) in [
            ("site", h.site.len()),
            ("species", h.species.len()),
            ("moment", h.moment.len()),
            ("layer", h.layer.len()),
        ] {
            if len != n {
                return Err(IoError::invalid(
                    &path,
                    format!("header: {name} has {len} entries for {n} sites"),
                ));
            }
        }
        if let Some(old) = self.sites {
            if old != n {
                return Err(IoError::invalid(&path, format!("header: {n} sites, the run file has {old}")));
            }
        }
        let file = self.file()?;
        let attr = |what: &str| format!("writing root attribute {what}");
        set_str_attr(file, "program_version", &h.program_version).ctx(&path, || attr("program_version"))?;
        set_str_attr(file, "config", &h.config_toml).ctx(&path, || attr("config"))?;
        set_str_attr(file, "inputs", &h.inputs).ctx(&path, || attr("inputs"))?;
        set_attr(file, "seed", &h.seed).ctx(&path, || attr("seed"))?;
        set_str_attr(file, "title", &h.title).ctx(&path, || attr("title"))?;
        if file.link_exists("lattice") {
            file.unlink("lattice").ctx(&path, || "replacing /lattice")?;
        }
        let g = file.create_group("lattice").ctx(&path, || "creating /lattice")?;
        let ds = |name: &str| format!("writing /lattice/{name}");
        write_fixed(&g, "position", h.position.as_flattened(), &[n, 3], UNIT_LENGTH)
            .ctx(&path, || ds("position"))?;
        write_fixed(&g, "site", &h.site, &[n], UNIT_NONE).ctx(&path, || ds("site"))?;
        write_fixed(&g, "species", &h.species, &[n], UNIT_NONE).ctx(&path, || ds("species"))?;
        write_fixed(&g, "moment", &h.moment, &[n], UNIT_MOMENT).ctx(&path, || ds("moment"))?;
        write_fixed(&g, "layer", &h.layer, &[n], UNIT_NONE).ctx(&path, || ds("layer"))?;
        set_str_array_attr(&g, "species_names", &h.species_names)
            .ctx(&path, || "writing /lattice attribute species_names")?;
        set_attr(&g, "layer_count", &(h.layer_count as u64))
            .ctx(&path, || "writing /lattice attribute layer_count")?;
        self.sites = Some(n);
        if self.reserve.is_none() {
            self.size_cap = size_cap(&path, n)?;
            self.reserve = Some(Reserve::create(&self.dir, reserve_bytes(n))?);
        }
        Ok(())
    }

    fn begin(&mut self, info: &StageInfo) -> Result<(), IoError> {
        let path = self.path.clone();
        let sites = self.sites.ok_or_else(|| IoError::invalid(&path, "a stage began before the header"))?;
        if let Some(existing) = self.stages.get(&info.index) {
            if existing.kind() != info.kind || existing.dims() != (info.layer_count, info.species_count) {
                return Err(IoError::invalid(
                    &path,
                    format!(
                        "stage {} exists as {:?} with (layers, species) {:?}; cannot continue it as {:?} with {:?}",
                        info.index,
                        existing.kind(),
                        existing.dims(),
                        info.kind,
                        (info.layer_count, info.species_count)
                    ),
                ));
            }
            return Ok(());
        }
        let file = self.file()?;
        let stage = StageWriter::create(
            file,
            info.index,
            &info.kind,
            info.layer_count,
            info.species_count,
            sites,
            self.compress_snapshots,
            &path,
        )?;
        self.stages.insert(info.index, stage);
        Ok(())
    }

    fn write_final(&mut self, spins: &[[f64; 3]]) -> Result<(), IoError> {
        let path = self.path.clone();
        let sites = self.sites.ok_or_else(|| IoError::invalid(&path, "final spins before the header"))?;
        if spins.len() != sites {
            return Err(IoError::invalid(
                &path,
                format!("final: {} spins given, the lattice has {sites}", spins.len()),
            ));
        }
        let file = self.file()?;
        if file.link_exists("final") {
            file.unlink("final").ctx(&path, || "replacing /final")?;
        }
        let g = file.create_group("final").ctx(&path, || "creating /final")?;
        write_fixed(&g, "spins", spins.as_flattened(), &[sites, 3], UNIT_NONE)
            .ctx(&path, || "writing /final/spins")?;
        Ok(())
    }

    /// Passes `r` on; a failed write first gives the disk reserve back, so that the writes
    /// a failing run still makes (its last state, the pending rows, the metadata on closing)
    /// find room if the disk is full.
    fn guard<T>(&mut self, r: Result<T, IoError>) -> Result<T, SinkError> {
        if r.is_err() {
            self.reserve = None; // deletes the file (`Reserve`'s drop)
        }
        Ok(r?)
    }

    /// Fails once the file has grown to its cap under a per-file size limit, before the
    /// next row or snapshot is written; the guard then treats it as a failed write.
    fn room(&self) -> Result<(), IoError> {
        let (Some(cap), Some(file)) = (self.size_cap, &self.file) else { return Ok(()) };
        let size = file.size();
        if size < cap {
            return Ok(());
        }
        let kept = reserve_bytes(self.sites.unwrap_or(0));
        Err(IoError::invalid(
            &self.path,
            format!(
                "the file has reached {size} bytes: the per-file size limit (ulimit -f) of {} bytes less {kept} kept for the last state; raise the limit or write fewer snapshots",
                cap + kept
            ),
        ))
    }

    fn flush_file(&mut self) -> Result<(), IoError> {
        let path = self.path.clone();
        for stage in self.stages.values_mut() {
            stage.write_pending(&path)?;
        }
        self.file()?.flush().ctx(&path, || "flushing the run file")
    }
}

/// Under a per-file size limit, the size the run file may grow to before its last writes
/// (the limit less the reserve's bytes); an error when the limit leaves no room at all.
fn size_cap(path: &Path, sites: usize) -> Result<Option<u64>, IoError> {
    let Some(limit) = file_size_limit() else { return Ok(None) };
    let kept = reserve_bytes(sites);
    if limit <= kept {
        return Err(IoError::invalid(
            path,
            format!("the per-file size limit (ulimit -f) of {limit} bytes leaves no room beyond the {kept} bytes kept for a run's last state of {sites} spins"),
        ));
    }
    Ok(Some(limit - kept))
}

/// Asks the operating system to put the file's data on disk.
pub(crate) fn sync_file(path: &Path) -> Result<(), IoError> {
    std::fs::File::open(path).and_then(|f| f.sync_all()).map_err(|e| IoError::os(path, "syncing to disk", e))
}

impl Sink for RunFile {
    fn header(&mut self, header: &RunHeader) -> Result<(), SinkError> {
        let r = self.write_header(header);
        self.guard(r)
    }

    fn begin_stage(&mut self, info: &StageInfo) -> Result<(), SinkError> {
        let r = self.begin(info);
        self.guard(r)
    }

    fn series(&mut self, stage: usize, row: &SeriesRow) -> Result<(), SinkError> {
        let (path, block) = (self.path.clone(), self.block_rows);
        let r = self.room().and_then(|()| self.stage_mut(stage)).and_then(|s| s.series(row, block, &path));
        self.guard(r)
    }

    fn point(&mut self, stage: usize, row: &PointRow) -> Result<(), SinkError> {
        let (path, block) = (self.path.clone(), self.block_rows);
        let r = self.room().and_then(|()| self.stage_mut(stage)).and_then(|s| s.point(row, block, &path));
        self.guard(r)
    }

    fn snapshot(&mut self, stage: usize, step: u64, time: f64, spins: &[[f64; 3]]) -> Result<(), SinkError> {
        let path = self.path.clone();
        let r = self
            .room()
            .and_then(|()| self.stage_mut(stage))
            .and_then(|s| s.snapshot(step, time, spins, &path));
        self.guard(r)
    }

    fn end_stage(&mut self, summary: &StageSummary) -> Result<(), SinkError> {
        let path = self.path.clone();
        let r = self.stage_mut(summary.index).and_then(|s| s.write_pending(&path));
        self.guard(r)
    }

    fn final_spins(&mut self, spins: &[[f64; 3]]) -> Result<(), SinkError> {
        let r = self.write_final(spins);
        self.guard(r)
    }

    /// Flushes the run file and syncs it to disk first, so the checkpoint never counts rows
    /// the run file might not hold; then replaces `checkpoint.h5` atomically.
    /// The checkpoint's row counts must equal what this file holds ([`RunFile::row_counts`]),
    /// since a resumed run cuts the file back to them; a mismatch is reported, not stored.
    fn checkpoint(&mut self, checkpoint: &Checkpoint) -> Result<(), SinkError> {
        let held = self.row_counts();
        let counted = &checkpoint.rows;
        let n = held.len().max(counted.len());
        let at = |v: &[RowCounts], i: usize| v.get(i).copied().unwrap_or_default();
        if let Some(i) = (0..n).find(|&i| at(&held, i) != at(counted, i)) {
            return Err(IoError::invalid(
                &self.path,
                format!(
                    "checkpoint row counts of stage {i} are {:?} but the run file holds {:?}",
                    at(counted, i),
                    at(&held, i)
                ),
            )
            .into());
        }
        let r = self
            .flush_file()
            .and_then(|()| sync_file(&self.path))
            .and_then(|()| write_checkpoint(&self.dir, checkpoint));
        self.guard(r)
    }

    fn flush(&mut self) -> Result<(), SinkError> {
        let r = self.flush_file();
        self.guard(r)
    }
}

impl Drop for RunFile {
    fn drop(&mut self) {
        self.reserve = None;
        if self.file.is_some() {
            // Errors cannot be reported from drop; `close` is the way to see them.
            let _ = self.flush_file();
        }
    }
}
