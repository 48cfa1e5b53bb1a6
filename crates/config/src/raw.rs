//! The config as written: serde structs that mirror the TOML of `INTERFACE.md` key for key.
//!
//! Nothing here is checked beyond its TOML type, the enumerations' allowed names, and (by
//! [`crate::load`]) the dimension of every unit. Which keys belong to which stage kind, which keys are
//! required together, and every physical range are the validator's business. Dimensional values are
//! [`Quantity`]s so that the validator converts them with [`Quantity::to`]; [`RawConfig::quantities`]
//! lists each with its key path and the dimension it must have.
//!
//! Keys are snake_case as in the TOML (`observe_every`, `bond_table`); enumeration values are
//! kebab-case (`"field-loop"`, `"simple-cubic"`, `"both-directions"`).

use serde::Deserialize;

use crate::units::{Dimension, QVec3, Quantity, WallDuration};

/// The whole config file.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawConfig {
    /// Free text describing the run.
    pub title: Option<String>,
    /// Seed of every random draw (dilution, initial state, noise, Monte Carlo).
    pub seed: Option<u64>,
    /// `[lattice]`: crystal and supercell. Required.
    pub lattice: RawLattice,
    /// `[[species]]`: magnetic species.
    #[serde(default)]
    pub species: Vec<RawSpecies>,
    /// `[[site]]`: basis sites, instead of a preset's own.
    #[serde(default)]
    pub site: Vec<RawSite>,
    /// `[[exchange]]`: isotropic exchange by shell or distance.
    #[serde(default)]
    pub exchange: Vec<RawExchange>,
    /// `[[dmi]]`: Dzyaloshinskii-Moriya interaction by shell or distance.
    #[serde(default)]
    pub dmi: Vec<RawDmi>,
    /// `[[bond]]`: explicit bonds between basis sites.
    #[serde(default)]
    pub bond: Vec<RawBond>,
    /// `[[bond_table]]`: pair couplings read from whitespace tables.
    #[serde(default)]
    pub bond_table: Vec<RawBondTable>,
    /// `[field]`: the applied field.
    pub field: Option<RawField>,
    /// `[initial]`: the initial spin state.
    pub initial: Option<RawInitial>,
    /// `[[stage]]`: the protocol, run in order.
    #[serde(default)]
    pub stage: Vec<RawStage>,
    /// `[run]`: settings of the run itself rather than of the physics.
    pub run: Option<RawRun>,
    /// `[output]`: output file settings.
    pub output: Option<RawOutput>,
}

/// `[lattice]`.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawLattice {
    /// A named lattice; exclusive with `vectors`.
    pub preset: Option<Preset>,
    /// Lattice constant (length, Å).
    pub a: Option<Quantity>,
    /// Second lattice constant (length, Å): the stacking distance of 2-D presets and the `c` of `hexagonal`.
    pub c: Option<Quantity>,
    /// Cartesian primitive vectors, one per row (lengths, Å); exclusive with `preset`.
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub vectors: Option<[QVec3; 3]>,
    /// Unit cells of the supercell along each primitive vector.
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub cells: Option<[usize; 3]>,
    /// Periodicity along each primitive vector (default all true).
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub periodic: Option<[bool; 3]>,
}

/// A lattice preset; the names are those of `spindrift_lattice::PRESETS`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Preset {
    /// `simple-cubic`.
    SimpleCubic,
    /// `bcc`.
    Bcc,
    /// `fcc`.
    Fcc,
    /// `square` (2-D, stacked by `c`).
    Square,
    /// `triangular` (2-D, stacked by `c`).
    Triangular,
    /// `honeycomb` (2-D, stacked by `c`).
    Honeycomb,
    /// `hexagonal` (3-D, constants `a` and `c`).
    Hexagonal,
}

impl Preset {
    /// The name as written in the config.
    pub fn as_str(self) -> &'static str {
        match self {
            Preset::SimpleCubic => "simple-cubic",
            Preset::Bcc => "bcc",
            Preset::Fcc => "fcc",
            Preset::Square => "square",
            Preset::Triangular => "triangular",
            Preset::Honeycomb => "honeycomb",
            Preset::Hexagonal => "hexagonal",
        }
    }
}

/// `[[species]]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSpecies {
    /// Name that sites, exchange pairs and bond tables refer to. Required.
    pub name: String,
    /// Magnetic moment (moment, μB).
    pub moment: Option<Quantity>,
    /// Gilbert damping α (dimensionless).
    pub damping: Option<f64>,
    /// Uniaxial anisotropy constant k per atom (energy, meV); `k > 0` is an easy axis.
    pub anisotropy: Option<Quantity>,
    /// Anisotropy axis (direction, normalised by the validator).
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub axis: Option<[f64; 3]>,
}

/// `[[site]]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSite {
    /// Name of a `[[species]]`. Required.
    pub species: String,
    /// Fractional coordinates in the primitive cell. Required.
    #[serde(deserialize_with = "crate::exact::array")]
    pub position: [f64; 3],
    /// Probability that the site is occupied (default 1; below 1 dilutes at random from the seed).
    pub occupancy: Option<f64>,
}

/// `[[exchange]]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawExchange {
    /// The n-th neighbour shell (1 is nearest); exclusive with `distance`.
    pub shell: Option<usize>,
    /// Bond length selecting the pairs (length, Å); exclusive with `shell`.
    pub distance: Option<Quantity>,
    /// Exchange constant J (energy, meV); `J > 0` is ferromagnetic. Required.
    pub j: Quantity,
    /// Restrict to pairs of these two species.
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub pair: Option<[String; 2]>,
}

/// `[[dmi]]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawDmi {
    /// The n-th neighbour shell; exclusive with `distance`.
    pub shell: Option<usize>,
    /// Bond length selecting the pairs (length, Å); exclusive with `shell`.
    pub distance: Option<Quantity>,
    /// DMI strength d (energy, meV). Required.
    pub d: Quantity,
    /// Interfacial or bulk form.
    pub kind: Option<DmiKind>,
    /// Interface normal n of interfacial DMI (direction).
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub normal: Option<[f64; 3]>,
    /// Restrict to pairs of these two species.
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub pair: Option<[String; 2]>,
}

/// The form of a `[[dmi]]` vector.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum DmiKind {
    /// `D_ij = d (n x r_ij/|r_ij|)`.
    Interfacial,
    /// `D_ij = d r_ij/|r_ij|`.
    Bulk,
}

/// `[[bond]]`: one explicit bond from basis site `from` in cell 0 to basis site `to` in cell `cell`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawBond {
    /// Basis site index of the first end. Required.
    pub from: usize,
    /// Basis site index of the second end. Required.
    pub to: usize,
    /// Cell offset of `to` (default `[0, 0, 0]`).
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub cell: Option<[i32; 3]>,
    /// Isotropic exchange J (energy, meV).
    pub j: Option<Quantity>,
    /// DMI vector D (energy, meV).
    pub dmi: Option<QVec3>,
    /// Full 3x3 exchange tensor, one row per line (energy, meV); replaces `j` and `dmi`.
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub tensor: Option<[QVec3; 3]>,
}

/// `[[bond_table]]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawBondTable {
    /// Table file, relative to the config file's folder. Required.
    pub path: String,
    /// Energy unit of the J and D columns (default meV); checked on loading.
    pub unit: Option<String>,
    /// Whether each pair is listed once or in both directions.
    pub pairs: Option<PairListing>,
    /// The sign of J that the file uses for ferromagnetic coupling.
    pub ferromagnetic: Option<FerroSign>,
}

/// How a bond table lists its pairs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PairListing {
    /// Each pair once.
    Unique,
    /// Each pair twice, once from each end.
    BothDirections,
}

/// The sign convention of a bond table's J.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FerroSign {
    /// `J > 0` is ferromagnetic, as in Spindrift.
    Positive,
    /// `J < 0` is ferromagnetic; the signs are flipped on reading.
    Negative,
}

/// `[field]`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawField {
    /// Applied field B (field, T).
    pub b: Option<QVec3>,
}

/// `[initial]`.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawInitial {
    /// The kind of initial state.
    pub state: Option<InitialState>,
    /// Direction of a uniform state or the background of a skyrmion (direction).
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub direction: Option<[f64; 3]>,
    /// Skyrmion centre in fractions of the supercell.
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub center: Option<[f64; 2]>,
    /// Skyrmion radius (length, Å).
    pub radius: Option<Quantity>,
    /// Skyrmion helicity (angle, degrees); by default the one the DMI favours.
    pub helicity: Option<Quantity>,
    /// Helix wavevector (1/Å; plain numbers only).
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub wavevector: Option<[f64; 3]>,
    /// Run folder to read spins from, relative to the config file's folder.
    pub path: Option<String>,
}

/// The kind of `[initial]` state.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum InitialState {
    /// All spins along `direction`.
    Uniform,
    /// Independent uniformly random directions.
    Random,
    /// One skyrmion in a uniform background.
    Skyrmion,
    /// A helix of wavevector `wavevector`.
    Helix,
    /// Spins read from a run folder.
    File,
}

/// `[[stage]]`: one struct for every kind; the validator checks which keys a kind accepts.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawStage {
    /// What the stage does. Required.
    pub kind: StageKind,
    /// Temperature (temperature, K); every kind.
    pub temperature: Option<Quantity>,
    /// Field replacing `[field]` during this stage (field, T); every kind.
    pub field: Option<QVec3>,
    /// Steps (or sweeps) between rows of `series/`; every kind.
    pub observe_every: Option<u64>,
    /// Steps (or sweeps) between spin snapshots; every kind.
    pub snapshot_every: Option<u64>,
    /// `relax`: step limit.
    pub max_steps: Option<u64>,
    /// `relax`: stop when `max_i |S_i x B_i|` falls below this (field, T).
    pub torque_tolerance: Option<Quantity>,
    /// `evolve`: simulated duration (time, ps).
    pub duration: Option<Quantity>,
    /// `evolve`, `field-loop`, `temperature-scan` with `llg`: time step (time, ps).
    pub dt: Option<Quantity>,
    /// `evolve`: temperature ramped linearly from the first to the second value (temperature, K).
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub temperature_ramp: Option<[Quantity; 2]>,
    /// `evolve`: field ramped linearly (field, T).
    pub field_ramp: Option<RawFieldRamp>,
    /// `field-loop`: field direction (direction).
    #[serde(default, deserialize_with = "crate::exact::option")]
    pub direction: Option<[f64; 3]>,
    /// `field-loop`: largest field magnitude (field, T).
    pub max: Option<Quantity>,
    /// `field-loop`: fields per branch.
    pub points: Option<u64>,
    /// `field-loop`: relax at each field.
    pub relax: Option<bool>,
    /// `field-loop`: evolve this long at each field, at `temperature` (time, ps).
    pub settle: Option<Quantity>,
    /// `temperature-scan`: explicit temperatures (temperature, K).
    pub temperatures: Option<Vec<Quantity>>,
    /// `temperature-scan`: first temperature of a range (temperature, K).
    pub from: Option<Quantity>,
    /// `temperature-scan`: last temperature of a range (temperature, K).
    pub to: Option<Quantity>,
    /// `temperature-scan`: spacing of a range (temperature, K).
    pub step: Option<Quantity>,
    /// `temperature-scan`: sampling method.
    pub method: Option<ScanMethod>,
    /// `temperature-scan`: direction of the scan.
    pub order: Option<ScanOrder>,
    /// `metropolis`, `temperature-scan`: sweeps (or steps) discarded before measuring.
    pub equilibrate: Option<u64>,
    /// `metropolis`, `temperature-scan`: sweeps (or steps) measured.
    pub measure: Option<u64>,
}

/// A stage's kind.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum StageKind {
    /// Zero-temperature energy minimisation.
    Relax,
    /// Stochastic LLG in time.
    Evolve,
    /// Hysteresis loop.
    FieldLoop,
    /// Metropolis Monte Carlo at one temperature.
    Metropolis,
    /// A series of temperatures, by Monte Carlo or LLG.
    TemperatureScan,
}

impl StageKind {
    /// The name as written in the config.
    pub fn as_str(self) -> &'static str {
        match self {
            StageKind::Relax => "relax",
            StageKind::Evolve => "evolve",
            StageKind::FieldLoop => "field-loop",
            StageKind::Metropolis => "metropolis",
            StageKind::TemperatureScan => "temperature-scan",
        }
    }
}

/// `field_ramp = { from = [..], to = [..] }`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawFieldRamp {
    /// Field at the start of the stage (field, T).
    pub from: QVec3,
    /// Field at the end of the stage (field, T).
    pub to: QVec3,
}

/// Sampling method of a temperature scan.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ScanMethod {
    /// Metropolis Monte Carlo sweeps.
    Metropolis,
    /// Stochastic LLG steps.
    Llg,
}

/// Order of a temperature scan.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ScanOrder {
    /// From high to low temperature.
    Cooling,
    /// From low to high temperature.
    Heating,
}

/// `[run]`.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRun {
    /// Wall-clock interval between checkpoints, such as `"30 min"` (plain numbers are seconds).
    pub checkpoint_every: Option<WallDuration>,
}

/// `[output]`.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawOutput {
    /// Compress spin snapshots in the run file.
    pub snapshot_compression: Option<bool>,
}

impl RawConfig {
    /// Every dimensional value in the config with its key path (array elements by index, as in
    /// `stage.1.field.2`) and the dimension its key needs, in file-structure order.
    pub fn quantities(&self) -> Vec<(String, Dimension, &Quantity)> {
        fn push<'a>(
            out: &mut Vec<(String, Dimension, &'a Quantity)>,
            key: String,
            dim: Dimension,
            q: Option<&'a Quantity>,
        ) {
            if let Some(q) = q {
                out.push((key, dim, q));
            }
        }
        let mut out = Vec::new();
        use Dimension::*;
        let l = &self.lattice;
        push(&mut out, "lattice.a".into(), Length, l.a.as_ref());
        push(&mut out, "lattice.c".into(), Length, l.c.as_ref());
        for (r, row) in l.vectors.iter().flatten().enumerate() {
            for (k, q) in row.0.iter().enumerate() {
                push(&mut out, format!("lattice.vectors.{r}.{k}"), Length, Some(q));
            }
        }
        for (i, s) in self.species.iter().enumerate() {
            push(&mut out, format!("species.{i}.moment"), Moment, s.moment.as_ref());
            push(&mut out, format!("species.{i}.anisotropy"), Energy, s.anisotropy.as_ref());
        }
        for (i, e) in self.exchange.iter().enumerate() {
            push(&mut out, format!("exchange.{i}.distance"), Length, e.distance.as_ref());
            push(&mut out, format!("exchange.{i}.j"), Energy, Some(&e.j));
        }
        for (i, d) in self.dmi.iter().enumerate() {
            push(&mut out, format!("dmi.{i}.distance"), Length, d.distance.as_ref());
            push(&mut out, format!("dmi.{i}.d"), Energy, Some(&d.d));
        }
        for (i, b) in self.bond.iter().enumerate() {
            push(&mut out, format!("bond.{i}.j"), Energy, b.j.as_ref());
            for (k, q) in b.dmi.iter().flat_map(|v| v.0.iter()).enumerate() {
                push(&mut out, format!("bond.{i}.dmi.{k}"), Energy, Some(q));
            }
            for (r, row) in b.tensor.iter().flatten().enumerate() {
                for (k, q) in row.0.iter().enumerate() {
                    push(&mut out, format!("bond.{i}.tensor.{r}.{k}"), Energy, Some(q));
                }
            }
        }
        if let Some(f) = &self.field {
            for (k, q) in f.b.iter().flat_map(|v| v.0.iter()).enumerate() {
                push(&mut out, format!("field.b.{k}"), Field, Some(q));
            }
        }
        if let Some(init) = &self.initial {
            push(&mut out, "initial.radius".into(), Length, init.radius.as_ref());
            push(&mut out, "initial.helicity".into(), Angle, init.helicity.as_ref());
        }
        for (i, s) in self.stage.iter().enumerate() {
            let key = |name: &str| format!("stage.{i}.{name}");
            push(&mut out, key("temperature"), Temperature, s.temperature.as_ref());
            for (k, q) in s.field.iter().flat_map(|v| v.0.iter()).enumerate() {
                push(&mut out, key(&format!("field.{k}")), Field, Some(q));
            }
            push(&mut out, key("torque_tolerance"), Field, s.torque_tolerance.as_ref());
            push(&mut out, key("duration"), Time, s.duration.as_ref());
            push(&mut out, key("dt"), Time, s.dt.as_ref());
            for (k, q) in s.temperature_ramp.iter().flatten().enumerate() {
                push(&mut out, key(&format!("temperature_ramp.{k}")), Temperature, Some(q));
            }
            if let Some(ramp) = &s.field_ramp {
                for (end, v) in [("from", &ramp.from), ("to", &ramp.to)] {
                    for (k, q) in v.0.iter().enumerate() {
                        push(&mut out, key(&format!("field_ramp.{end}.{k}")), Field, Some(q));
                    }
                }
            }
            push(&mut out, key("max"), Field, s.max.as_ref());
            push(&mut out, key("settle"), Time, s.settle.as_ref());
            for (k, q) in s.temperatures.iter().flatten().enumerate() {
                push(&mut out, key(&format!("temperatures.{k}")), Temperature, Some(q));
            }
            push(&mut out, key("from"), Temperature, s.from.as_ref());
            push(&mut out, key("to"), Temperature, s.to.as_ref());
            push(&mut out, key("step"), Temperature, s.step.as_ref());
        }
        out
    }
}
