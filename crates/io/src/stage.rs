//! The datasets of one stage group: `series/`, `points/` and `snapshots/`.
//!
//! `series/` and `snapshots/` are created when the stage begins, so every stage has them
//! (possibly with zero rows); `points/` is created with the first point, so only loops,
//! scans and Monte Carlo stages have it.

use std::path::Path;

use hdf5::Group;
use spindrift_engine::{PointRow, RowCounts, SeriesRow};

use crate::column::{Column, Elem};
use crate::error::{Hdf5Context, IoError};
use crate::h5util::{open_group, read_str_attr, set_str_attr};
use crate::layout::{
    stage_group_name, UNIT_ENERGY, UNIT_FIELD, UNIT_HEAT_CAPACITY, UNIT_NONE, UNIT_SUSCEPTIBILITY,
    UNIT_TEMPERATURE, UNIT_TIME,
};

/// Deflate level of snapshots: level 4 gets most of the gain of 9 at a fraction of the time.
const SNAPSHOT_DEFLATE: u8 = 4;

/// The `series/` group.
#[derive(Debug)]
struct SeriesTable {
    step: Column,
    time: Column,
    temperature: Column,
    field: Column,
    magnetization: Column,
    energy: Column,
    energy_exchange: Column,
    energy_dmi: Column,
    energy_anisotropy: Column,
    energy_zeeman: Column,
    charge: Column,
    charge_by_layer: Column,
    magnetization_by_species: Column,
    magnetization_by_layer: Column,
}

/// Names, units, element types and trailing shapes of the series columns, in file order.
/// `L` and `S` stand for the layer and species counts.
fn series_specs(layers: usize, species: usize) -> [(&'static str, &'static str, Elem, Vec<usize>); 14] {
    use Elem::{F64, U64};
    [
        ("step", UNIT_NONE, U64, vec![]),
        ("time", UNIT_TIME, F64, vec![]),
        ("temperature", UNIT_TEMPERATURE, F64, vec![]),
        ("field", UNIT_FIELD, F64, vec![3]),
        ("magnetization", UNIT_NONE, F64, vec![3]),
        ("energy", UNIT_ENERGY, F64, vec![]),
        ("energy_exchange", UNIT_ENERGY, F64, vec![]),
        ("energy_dmi", UNIT_ENERGY, F64, vec![]),
        ("energy_anisotropy", UNIT_ENERGY, F64, vec![]),
        ("energy_zeeman", UNIT_ENERGY, F64, vec![]),
        ("charge", UNIT_NONE, F64, vec![]),
        ("charge_by_layer", UNIT_NONE, F64, vec![layers]),
        ("magnetization_by_species", UNIT_NONE, F64, vec![species, 3]),
        ("magnetization_by_layer", UNIT_NONE, F64, vec![layers, 3]),
    ]
}

impl SeriesTable {
    fn from_columns(c: Vec<Column>) -> Self {
        let mut it = c.into_iter();
        let mut next = || it.next().expect("series_specs has 14 entries");
        SeriesTable {
            step: next(),
            time: next(),
            temperature: next(),
            field: next(),
            magnetization: next(),
            energy: next(),
            energy_exchange: next(),
            energy_dmi: next(),
            energy_anisotropy: next(),
            energy_zeeman: next(),
            charge: next(),
            charge_by_layer: next(),
            magnetization_by_species: next(),
            magnetization_by_layer: next(),
        }
    }

    fn columns(&mut self) -> [&mut Column; 14] {
        [
            &mut self.step,
            &mut self.time,
            &mut self.temperature,
            &mut self.field,
            &mut self.magnetization,
            &mut self.energy,
            &mut self.energy_exchange,
            &mut self.energy_dmi,
            &mut self.energy_anisotropy,
            &mut self.energy_zeeman,
            &mut self.charge,
            &mut self.charge_by_layer,
            &mut self.magnetization_by_species,
            &mut self.magnetization_by_layer,
        ]
    }

    fn push(&mut self, row: &SeriesRow) {
        let e = &row.energy;
        self.step.push_u64(row.step);
        self.time.push_f64(&[row.time]);
        self.temperature.push_f64(&[row.temperature]);
        self.field.push_f64(&row.field);
        self.magnetization.push_f64(&row.magnetization);
        self.energy.push_f64(&[e.total()]);
        self.energy_exchange.push_f64(&[e.exchange]);
        self.energy_dmi.push_f64(&[e.dmi]);
        self.energy_anisotropy.push_f64(&[e.anisotropy]);
        self.energy_zeeman.push_f64(&[e.zeeman]);
        self.charge.push_f64(&[row.charge]);
        self.charge_by_layer.push_f64(&row.charge_by_layer);
        self.magnetization_by_species.push_f64(row.magnetization_by_species.as_flattened());
        self.magnetization_by_layer.push_f64(row.magnetization_by_layer.as_flattened());
    }
}

/// The `points/` group.
#[derive(Debug)]
struct PointsTable {
    temperature: Column,
    field: Column,
    magnetization: Column,
    magnetization_err: Column,
    m_abs: Column,
    m_abs_err: Column,
    susceptibility: Column,
    susceptibility_err: Column,
    heat_capacity: Column,
    heat_capacity_err: Column,
    binder: Column,
    binder_err: Column,
    energy: Column,
    energy_err: Column,
    autocorrelation_time: Column,
    samples: Column,
}

fn points_specs() -> [(&'static str, &'static str, Elem, Vec<usize>); 16] {
    use Elem::{F64, U64};
    [
        ("temperature", UNIT_TEMPERATURE, F64, vec![]),
        ("field", UNIT_FIELD, F64, vec![3]),
        ("magnetization", UNIT_NONE, F64, vec![3]),
        ("magnetization_err", UNIT_NONE, F64, vec![3]),
        ("m_abs", UNIT_NONE, F64, vec![]),
        ("m_abs_err", UNIT_NONE, F64, vec![]),
        ("susceptibility", UNIT_SUSCEPTIBILITY, F64, vec![]),
        ("susceptibility_err", UNIT_SUSCEPTIBILITY, F64, vec![]),
        ("heat_capacity", UNIT_HEAT_CAPACITY, F64, vec![]),
        ("heat_capacity_err", UNIT_HEAT_CAPACITY, F64, vec![]),
        ("binder", UNIT_NONE, F64, vec![]),
        ("binder_err", UNIT_NONE, F64, vec![]),
        ("energy", UNIT_ENERGY, F64, vec![]),
        ("energy_err", UNIT_ENERGY, F64, vec![]),
        ("autocorrelation_time", UNIT_NONE, F64, vec![]),
        ("samples", UNIT_NONE, U64, vec![]),
    ]
}

impl PointsTable {
    fn from_columns(c: Vec<Column>) -> Self {
        let mut it = c.into_iter();
        let mut next = || it.next().expect("points_specs has 16 entries");
        PointsTable {
            temperature: next(),
            field: next(),
            magnetization: next(),
            magnetization_err: next(),
            m_abs: next(),
            m_abs_err: next(),
            susceptibility: next(),
            susceptibility_err: next(),
            heat_capacity: next(),
            heat_capacity_err: next(),
            binder: next(),
            binder_err: next(),
            energy: next(),
            energy_err: next(),
            autocorrelation_time: next(),
            samples: next(),
        }
    }

    fn columns(&mut self) -> [&mut Column; 16] {
        [
            &mut self.temperature,
            &mut self.field,
            &mut self.magnetization,
            &mut self.magnetization_err,
            &mut self.m_abs,
            &mut self.m_abs_err,
            &mut self.susceptibility,
            &mut self.susceptibility_err,
            &mut self.heat_capacity,
            &mut self.heat_capacity_err,
            &mut self.binder,
            &mut self.binder_err,
            &mut self.energy,
            &mut self.energy_err,
            &mut self.autocorrelation_time,
            &mut self.samples,
        ]
    }

    fn push(&mut self, p: &PointRow) {
        self.temperature.push_f64(&[p.temperature]);
        self.field.push_f64(&p.field);
        self.magnetization.push_f64(&p.magnetization);
        self.magnetization_err.push_f64(&p.magnetization_err);
        self.m_abs.push_f64(&[p.m_abs]);
        self.m_abs_err.push_f64(&[p.m_abs_err]);
        self.susceptibility.push_f64(&[p.susceptibility]);
        self.susceptibility_err.push_f64(&[p.susceptibility_err]);
        self.heat_capacity.push_f64(&[p.heat_capacity]);
        self.heat_capacity_err.push_f64(&[p.heat_capacity_err]);
        self.binder.push_f64(&[p.binder]);
        self.binder_err.push_f64(&[p.binder_err]);
        self.energy.push_f64(&[p.energy]);
        self.energy_err.push_f64(&[p.energy_err]);
        self.autocorrelation_time.push_f64(&[p.autocorrelation_time]);
        self.samples.push_u64(p.samples);
    }
}

/// The `snapshots/` group; snapshots are written as they arrive (one is already a block).
#[derive(Debug)]
struct SnapshotTable {
    step: Column,
    time: Column,
    spins: Column,
}

impl SnapshotTable {
    fn columns(&mut self) -> [&mut Column; 3] {
        [&mut self.step, &mut self.time, &mut self.spins]
    }
}

fn create_columns(
    group: &Group,
    specs: &[(&'static str, &'static str, Elem, Vec<usize>)],
    file: &Path,
) -> Result<Vec<Column>, IoError> {
    specs
        .iter()
        .map(|(name, unit, elem, tail)| Column::create(group, name, unit, *elem, tail, None, None, file))
        .collect()
}

fn open_columns(
    group: &Group,
    specs: &[(&'static str, &'static str, Elem, Vec<usize>)],
    file: &Path,
) -> Result<Vec<Column>, IoError> {
    specs.iter().map(|(name, _, elem, _)| Column::open(group, name, *elem, file)).collect()
}

/// Writer of one `stage_NNN` group.
#[derive(Debug)]
pub(crate) struct StageWriter {
    kind: String,
    group: Group,
    layers: usize,
    species: usize,
    sites: usize,
    series: SeriesTable,
    points: Option<PointsTable>,
    snapshots: SnapshotTable,
}

impl StageWriter {
    /// Creates the group of stage `index` under `root`.
    pub(crate) fn create(
        root: &Group,
        index: usize,
        kind: &str,
        layers: usize,
        species: usize,
        sites: usize,
        compress: bool,
        file: &Path,
    ) -> Result<Self, IoError> {
        let name = stage_group_name(index);
        if layers == 0 || species == 0 {
            return Err(IoError::invalid(
                file,
                format!(
                    "stage {index} declares {layers} layers and {species} species; both must be at least 1"
                ),
            ));
        }
        let group = root.create_group(&name).ctx(file, || format!("creating group /{name}"))?;
        set_str_attr(&group, "kind", kind).ctx(file, || format!("writing attribute kind of /{name}"))?;
        let sg = group.create_group("series").ctx(file, || format!("creating group /{name}/series"))?;
        let series = SeriesTable::from_columns(create_columns(&sg, &series_specs(layers, species), file)?);
        let snapshots = Self::create_snapshots(&group, sites, compress, file)?;
        Ok(StageWriter {
            kind: kind.to_owned(),
            group,
            layers,
            species,
            sites,
            series,
            points: None,
            snapshots,
        })
    }

    fn create_snapshots(
        group: &Group,
        sites: usize,
        compress: bool,
        file: &Path,
    ) -> Result<SnapshotTable, IoError> {
        let g = group
            .create_group("snapshots")
            .ctx(file, || format!("creating group {}/snapshots", group.name()))?;
        Ok(SnapshotTable {
            step: Column::create(&g, "step", UNIT_NONE, Elem::U64, &[], None, None, file)?,
            time: Column::create(&g, "time", UNIT_TIME, Elem::F64, &[], None, None, file)?,
            // One snapshot per chunk, so reading one snapshot decompresses only that one.
            spins: Column::create(
                &g,
                "spins",
                UNIT_NONE,
                Elem::F64,
                &[sites, 3],
                Some(1),
                compress.then_some(SNAPSHOT_DEFLATE),
                file,
            )?,
        })
    }

    /// Opens the existing group of a stage written by an earlier process.
    pub(crate) fn open(group: Group, sites: usize, file: &Path) -> Result<Self, IoError> {
        let gname = group.name();
        let kind =
            read_str_attr(&group, "kind").ctx(file, || format!("reading attribute kind of {gname}"))?;
        let sg = open_group(&group, "series", file)?;
        let series = SeriesTable::from_columns(open_columns(&sg, &series_specs(0, 0), file)?);
        let layers = series.charge_by_layer.tail().first().copied().unwrap_or(0);
        let species = series.magnetization_by_species.tail().first().copied().unwrap_or(0);
        let points = if group.link_exists("points") {
            let pg = open_group(&group, "points", file)?;
            Some(PointsTable::from_columns(open_columns(&pg, &points_specs(), file)?))
        } else {
            None
        };
        let ng = open_group(&group, "snapshots", file)?;
        let snapshots = SnapshotTable {
            step: Column::open(&ng, "step", Elem::U64, file)?,
            time: Column::open(&ng, "time", Elem::F64, file)?,
            spins: Column::open(&ng, "spins", Elem::F64, file)?,
        };
        if snapshots.spins.tail() != [sites, 3] {
            return Err(IoError::invalid(
                file,
                format!(
                    "{gname}/snapshots/spins has shape {:?} per snapshot, expected [{sites}, 3]",
                    snapshots.spins.tail()
                ),
            ));
        }
        Ok(StageWriter { kind, group, layers, species, sites, series, points, snapshots })
    }

    /// Cuts every dataset back to the checkpoint's row counts; with no points the
    /// `points/` group is removed, as it did not exist yet at that moment.
    pub(crate) fn truncate(&mut self, rows: &RowCounts, file: &Path) -> Result<(), IoError> {
        for c in self.series.columns() {
            c.truncate(rows.series, file)?;
        }
        for c in self.snapshots.columns() {
            c.truncate(rows.snapshots, file)?;
        }
        if rows.points == 0 {
            if self.points.take().is_some() {
                let name = self.group.name();
                self.group.unlink("points").ctx(file, || format!("removing {name}/points"))?;
            }
        } else if let Some(p) = &mut self.points {
            for c in p.columns() {
                c.truncate(rows.points, file)?;
            }
        } else {
            return Err(IoError::invalid(
                file,
                format!("{} has no points but the checkpoint expects {}", self.group.name(), rows.points),
            ));
        }
        Ok(())
    }

    /// Stage kind.
    pub(crate) fn kind(&self) -> &str {
        &self.kind
    }

    /// Layer and species counts.
    pub(crate) fn dims(&self) -> (usize, usize) {
        (self.layers, self.species)
    }

    /// Snapshots written.
    pub(crate) fn snapshot_count(&self) -> u64 {
        self.snapshots.step.rows()
    }

    /// Rows of each table (written and pending).
    pub(crate) fn row_counts(&self) -> RowCounts {
        RowCounts {
            series: self.series.step.rows(),
            points: self.points.as_ref().map_or(0, |p| p.temperature.rows()),
            snapshots: self.snapshots.step.rows(),
        }
    }

    /// Buffers a series row, writing a block when `block_rows` are pending.
    pub(crate) fn series(&mut self, row: &SeriesRow, block_rows: usize, file: &Path) -> Result<(), IoError> {
        let (l, s) = (self.layers, self.species);
        if row.charge_by_layer.len() != l || row.magnetization_by_layer.len() != l {
            return Err(IoError::invalid(
                file,
                format!(
                    "{}/series: row has {} layer charges and {} layer magnetisations, the stage has {l} layers",
                    self.group.name(),
                    row.charge_by_layer.len(),
                    row.magnetization_by_layer.len()
                ),
            ));
        }
        if row.magnetization_by_species.len() != s {
            return Err(IoError::invalid(
                file,
                format!(
                    "{}/series: row has {} species magnetisations, the stage has {s} species",
                    self.group.name(),
                    row.magnetization_by_species.len()
                ),
            ));
        }
        self.series.push(row);
        if self.series.step.pending() >= block_rows {
            self.write_series(file)?;
        }
        Ok(())
    }

    /// Buffers a point, creating `points/` with the first one.
    pub(crate) fn point(&mut self, row: &PointRow, block_rows: usize, file: &Path) -> Result<(), IoError> {
        let points = match &mut self.points {
            Some(p) => p,
            None => {
                let name = self.group.name();
                let pg = self
                    .group
                    .create_group("points")
                    .ctx(file, || format!("creating group {name}/points"))?;
                self.points.insert(PointsTable::from_columns(create_columns(&pg, &points_specs(), file)?))
            }
        };
        points.push(row);
        if points.temperature.pending() >= block_rows {
            for c in points.columns() {
                c.write_pending(file)?;
            }
        }
        Ok(())
    }

    /// Writes one snapshot at once.
    pub(crate) fn snapshot(
        &mut self,
        step: u64,
        time: f64,
        spins: &[[f64; 3]],
        file: &Path,
    ) -> Result<(), IoError> {
        if spins.len() != self.sites {
            return Err(IoError::invalid(
                file,
                format!(
                    "{}/snapshots: {} spins given, the lattice has {}",
                    self.group.name(),
                    spins.len(),
                    self.sites
                ),
            ));
        }
        self.snapshots.step.push_u64(step);
        self.snapshots.time.push_f64(&[time]);
        self.snapshots.spins.push_f64(spins.as_flattened());
        for c in self.snapshots.columns() {
            c.write_pending(file)?;
        }
        Ok(())
    }

    fn write_series(&mut self, file: &Path) -> Result<(), IoError> {
        for c in self.series.columns() {
            c.write_pending(file)?;
        }
        Ok(())
    }

    /// Writes everything pending.
    pub(crate) fn write_pending(&mut self, file: &Path) -> Result<(), IoError> {
        self.write_series(file)?;
        if let Some(p) = &mut self.points {
            for c in p.columns() {
                c.write_pending(file)?;
            }
        }
        for c in self.snapshots.columns() {
            c.write_pending(file)?;
        }
        Ok(())
    }
}
