//! Reading a run folder back, for `spindrift inspect`, `spindrift plot` and for starting a
//! run from the spins of an earlier one.
//!
//! HDF5 file locking is off (see the crate docs), so a run can be inspected while another
//! process is still writing it; what the reader shows is then the state of the last flush.

use std::path::{Path, PathBuf};

use hdf5::{Dataset, File, Group};

use crate::error::{Hdf5Context, IoError};
use crate::h5util::{
    check_format, check_hdf5_file, file_options, has_attr, open_dataset, open_group, read_attr,
    read_str_array_attr, read_str_attr, UNIT_ATTR,
};
use crate::layout::{parse_stage_group_name, stage_group_name, RUN_FILE, RUN_FORMAT, RUN_FORMAT_VERSION};

/// The root attributes of a run file.
#[derive(Debug, Clone, PartialEq)]
pub struct RunAttributes {
    /// Always `spindrift-run`.
    pub format: String,
    /// Version of the file layout.
    pub format_version: u64,
    /// Version of the program that wrote the file.
    pub program_version: String,
    /// The resolved configuration, TOML text.
    pub config: String,
    /// What the configuration read from other files (bond tables, a line each with a digest
    /// of the couplings); empty when none, or in files written before it was recorded.
    pub inputs: String,
    /// Base seed.
    pub seed: u64,
    /// Title from the config.
    pub title: String,
}

/// A stage group of the run file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct StageEntry {
    /// Stage index.
    pub index: usize,
    /// Stage kind (`relax`, `evolve`, ...).
    pub kind: String,
}

/// A dataset of the run file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DatasetEntry {
    /// Absolute path in the file, e.g. `/stage_000/series/time`.
    pub path: String,
    /// Current shape.
    pub shape: Vec<usize>,
    /// The `unit` attribute (`None` only for files not written by this program).
    pub unit: Option<String>,
}

/// The `/lattice` group.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LatticeData {
    /// Position of every site, Å.
    pub position: Vec<[f64; 3]>,
    /// Basis-site index of every site.
    pub site: Vec<u32>,
    /// Species index of every site.
    pub species: Vec<u32>,
    /// Moment of every site, μB.
    pub moment: Vec<f64>,
    /// Layer index of every site.
    pub layer: Vec<u32>,
    /// Species names, by species index.
    pub species_names: Vec<String>,
}

/// One snapshot of all spins.
#[derive(Debug, Clone, PartialEq)]
pub struct Snapshot {
    /// Stage index.
    pub stage: usize,
    /// Index of the snapshot within its stage.
    pub index: u64,
    /// Step within the stage.
    pub step: u64,
    /// Time within the stage, ps.
    pub time: f64,
    /// The spins (unit vectors; zero on vacant sites).
    pub spins: Vec<[f64; 3]>,
}

/// A run file open for reading.
#[derive(Debug)]
pub struct RunReader {
    path: PathBuf,
    file: File,
}

fn to_vec3(flat: &[f64]) -> Vec<[f64; 3]> {
    flat.chunks_exact(3).map(|c| [c[0], c[1], c[2]]).collect()
}

impl RunReader {
    /// Opens `DIR/run.h5`, checking that it is a Spindrift run file of a readable version.
    pub fn open(dir: &Path) -> Result<RunReader, IoError> {
        let path = dir.join(RUN_FILE);
        check_hdf5_file(&path, RUN_FORMAT)?;
        let file = file_options().open(&path).ctx(&path, || "opening the run file")?;
        check_format(&file, &path, RUN_FORMAT, RUN_FORMAT_VERSION)?;
        Ok(RunReader { path, file })
    }

    /// Path of `run.h5`.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The root attributes.
    pub fn attributes(&self) -> Result<RunAttributes, IoError> {
        let f = &self.file;
        let p = &self.path;
        let s = |name: &str| read_str_attr(f, name).ctx(p, || format!("reading root attribute {name}"));
        Ok(RunAttributes {
            format: s("format")?,
            format_version: read_attr(f, "format_version")
                .ctx(p, || "reading root attribute format_version")?,
            program_version: s("program_version")?,
            config: s("config")?,
            inputs: if has_attr(f, "inputs") { s("inputs")? } else { String::new() },
            seed: read_attr(f, "seed").ctx(p, || "reading root attribute seed")?,
            title: s("title")?,
        })
    }

    /// The stages in the file, by index.
    pub fn stages(&self) -> Result<Vec<StageEntry>, IoError> {
        let names = self.file.member_names().ctx(&self.path, || "listing the root group")?;
        let mut out = Vec::new();
        for name in names {
            let Some(index) = parse_stage_group_name(&name) else { continue };
            let g = open_group(&self.file, &name, &self.path)?;
            let kind =
                read_str_attr(&g, "kind").ctx(&self.path, || format!("reading attribute kind of /{name}"))?;
            out.push(StageEntry { index, kind });
        }
        out.sort_by_key(|s| s.index);
        Ok(out)
    }

    /// Every dataset under `group` (e.g. `/` or `/stage_000`), recursively, sorted by path.
    pub fn datasets_under(&self, group: &str) -> Result<Vec<DatasetEntry>, IoError> {
        let g = self.file.group(group).ctx(&self.path, || format!("opening group {group}"))?;
        let mut out = Vec::new();
        self.collect(&g, &mut out)?;
        out.sort_by(|a, b| a.path.cmp(&b.path));
        Ok(out)
    }

    /// Every dataset of stage `stage`, recursively (`series/`, `points/`, `snapshots/`).
    pub fn datasets(&self, stage: usize) -> Result<Vec<DatasetEntry>, IoError> {
        self.datasets_under(&format!("/{}", stage_group_name(stage)))
    }

    fn collect(&self, g: &Group, out: &mut Vec<DatasetEntry>) -> Result<(), IoError> {
        for ds in g.datasets().ctx(&self.path, || format!("listing {}", g.name()))? {
            let unit = if has_attr(&ds, UNIT_ATTR) { read_str_attr(&ds, UNIT_ATTR).ok() } else { None };
            out.push(DatasetEntry { path: ds.name(), shape: ds.shape(), unit });
        }
        for sub in g.groups().ctx(&self.path, || format!("listing {}", g.name()))? {
            self.collect(&sub, out)?;
        }
        Ok(())
    }

    fn dataset(&self, path: &str) -> Result<Dataset, IoError> {
        let trimmed = path.trim_start_matches('/');
        if trimmed.is_empty() || !self.file.link_exists(trimmed) {
            return Err(IoError::invalid(&self.path, format!("no dataset {path}")));
        }
        // link_exists is false (not an error) when a parent group is missing as well.
        self.file.dataset(trimmed).ctx(&self.path, || format!("opening dataset {path}"))
    }

    /// The shape of a dataset.
    pub fn shape(&self, path: &str) -> Result<Vec<usize>, IoError> {
        Ok(self.dataset(path)?.shape())
    }

    /// The `unit` attribute of a dataset, if it has one.
    pub fn unit(&self, path: &str) -> Result<Option<String>, IoError> {
        let ds = self.dataset(path)?;
        if !has_attr(&ds, UNIT_ATTR) {
            return Ok(None);
        }
        read_str_attr(&ds, UNIT_ATTR).map(Some).ctx(&self.path, || format!("reading unit of {path}"))
    }

    /// Reads a 1-D dataset as reals (integer datasets are converted).
    pub fn read_1d(&self, path: &str) -> Result<Vec<f64>, IoError> {
        let ds = self.dataset(path)?;
        if ds.ndim() != 1 {
            return Err(IoError::invalid(&self.path, format!("{path} has shape {:?}, not 1-D", ds.shape())));
        }
        ds.read_raw::<f64>().ctx(&self.path, || format!("reading {path}"))
    }

    /// Reads a 2-D dataset as rows of reals (integer datasets are converted).
    pub fn read_2d(&self, path: &str) -> Result<Vec<Vec<f64>>, IoError> {
        let ds = self.dataset(path)?;
        let shape = ds.shape();
        if shape.len() != 2 {
            return Err(IoError::invalid(&self.path, format!("{path} has shape {shape:?}, not 2-D")));
        }
        let flat = ds.read_raw::<f64>().ctx(&self.path, || format!("reading {path}"))?;
        if shape[1] == 0 {
            return Ok(vec![Vec::new(); shape[0]]);
        }
        Ok(flat.chunks_exact(shape[1]).map(<[f64]>::to_vec).collect())
    }

    /// Reads any dataset as reals in row-major order, with its shape.
    pub fn read_flat(&self, path: &str) -> Result<(Vec<usize>, Vec<f64>), IoError> {
        let ds = self.dataset(path)?;
        let data = ds.read_raw::<f64>().ctx(&self.path, || format!("reading {path}"))?;
        Ok((ds.shape(), data))
    }

    /// The lattice.
    pub fn lattice(&self) -> Result<LatticeData, IoError> {
        let p = &self.path;
        let g = open_group(&self.file, "lattice", p)?;
        let read_u32 = |name: &str| -> Result<Vec<u32>, IoError> {
            open_dataset(&g, name, p)?.read_raw::<u32>().ctx(p, || format!("reading /lattice/{name}"))
        };
        let pos = open_dataset(&g, "position", p)?;
        if pos.ndim() != 2 || pos.shape()[1] != 3 {
            return Err(IoError::invalid(
                p,
                format!("/lattice/position has shape {:?}, not (N, 3)", pos.shape()),
            ));
        }
        Ok(LatticeData {
            position: to_vec3(&pos.read_raw::<f64>().ctx(p, || "reading /lattice/position")?),
            site: read_u32("site")?,
            species: read_u32("species")?,
            moment: open_dataset(&g, "moment", p)?.read_raw::<f64>().ctx(p, || "reading /lattice/moment")?,
            layer: read_u32("layer")?,
            species_names: read_str_array_attr(&g, "species_names")
                .ctx(p, || "reading /lattice attribute species_names")?,
        })
    }

    /// Number of snapshots of each stage, indexed by stage (for [`crate::write_xdmf`]).
    pub fn snapshot_counts(&self) -> Result<Vec<u64>, IoError> {
        let stages = self.stages()?;
        let n = stages.last().map_or(0, |s| s.index + 1);
        let mut counts = vec![0; n];
        for s in &stages {
            let path = format!("/{}/snapshots/step", stage_group_name(s.index));
            counts[s.index] = self.shape(&path)?.first().copied().unwrap_or(0) as u64;
        }
        Ok(counts)
    }

    /// Snapshot `index` of stage `stage`.
    pub fn snapshot(&self, stage: usize, index: u64) -> Result<Snapshot, IoError> {
        let base = format!("/{}/snapshots", stage_group_name(stage));
        let spins_ds = self.dataset(&format!("{base}/spins"))?;
        let shape = spins_ds.shape();
        if shape.len() != 3 || shape[2] != 3 {
            return Err(IoError::invalid(
                &self.path,
                format!("{base}/spins has shape {shape:?}, not (k, N, 3)"),
            ));
        }
        if index >= shape[0] as u64 {
            return Err(IoError::invalid(
                &self.path,
                format!("{base} has {} snapshots, asked for number {index}", shape[0]),
            ));
        }
        let k = index as usize;
        let flat = spins_ds
            .read_slice::<f64, _, ndarray::Ix3>(ndarray::s![k..k + 1, .., ..])
            .ctx(&self.path, || format!("reading snapshot {index} of {base}/spins"))?;
        let flat: Vec<f64> = flat.iter().copied().collect();
        let step_ds = self.dataset(&format!("{base}/step"))?;
        let time_ds = self.dataset(&format!("{base}/time"))?;
        let step = step_ds
            .read_slice_1d::<u64, _>(k..k + 1)
            .ctx(&self.path, || format!("reading {base}/step"))?
            .first()
            .copied()
            .unwrap_or(0);
        let time = time_ds
            .read_slice_1d::<f64, _>(k..k + 1)
            .ctx(&self.path, || format!("reading {base}/time"))?
            .first()
            .copied()
            .unwrap_or(0.0);
        Ok(Snapshot { stage, index, step, time, spins: to_vec3(&flat) })
    }

    /// The last snapshot of the last stage that has one (`None` if there is none).
    pub fn last_snapshot(&self) -> Result<Option<Snapshot>, IoError> {
        let counts = self.snapshot_counts()?;
        match counts.iter().rposition(|&c| c > 0) {
            Some(stage) => self.snapshot(stage, counts[stage] - 1).map(Some),
            None => Ok(None),
        }
    }

    /// `/final/spins` (`None` if the run did not finish).
    pub fn final_spins(&self) -> Result<Option<Vec<[f64; 3]>>, IoError> {
        if !self.file.link_exists("final") {
            return Ok(None);
        }
        let g = open_group(&self.file, "final", &self.path)?;
        let ds = open_dataset(&g, "spins", &self.path)?;
        Ok(Some(to_vec3(&ds.read_raw::<f64>().ctx(&self.path, || "reading /final/spins")?)))
    }
}
