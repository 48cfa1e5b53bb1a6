//! Shared test helpers: temporary folders, a scripted small run, and the HDF5 command-line
//! tools of The HDF Group (`h5ls`, `h5dump`, `h5diff` from Debian's `hdf5-tools`) as the
//! independent reader.
#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::atomic::{AtomicU64, Ordering};

use spindrift_engine::{
    Checkpoint, CurieEstimate, FinalState, PointRow, RowCounts, RunHeader, SeriesRow, Sink, StageInfo,
    StageSummary,
};
use spindrift_hamiltonian::EnergyTerms;

/// A folder under the system temp dir, removed on drop unless `SPINDRIFT_KEEP_TEST_DIRS` is set.
pub struct TempDir(pub PathBuf);

impl TempDir {
    pub fn new(tag: &str) -> TempDir {
        static COUNTER: AtomicU64 = AtomicU64::new(0);
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let p = std::env::temp_dir().join(format!("spindrift-io-{tag}-{}-{n}", std::process::id()));
        let _ = std::fs::remove_dir_all(&p);
        std::fs::create_dir_all(&p).expect("creating a temp dir");
        TempDir(p)
    }
    pub fn path(&self) -> &Path {
        &self.0
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        if std::env::var_os("SPINDRIFT_KEEP_TEST_DIRS").is_none() {
            let _ = std::fs::remove_dir_all(&self.0);
        }
    }
}

/// Sites of the scripted lattice: 3 x 2 cells, 2 layers, 2 species.
pub const SITES: usize = 12;
pub const LAYERS: usize = 2;
pub const SPECIES: usize = 2;

/// One call to a sink.
#[derive(Debug, Clone)]
pub enum Event {
    Header(Box<RunHeader>),
    Begin(StageInfo),
    Series(usize, SeriesRow),
    Point(usize, PointRow),
    Snapshot(usize, u64, f64, Vec<[f64; 3]>),
    End(Box<StageSummary>),
    Final(Vec<[f64; 3]>),
    Flush,
}

pub fn header() -> RunHeader {
    let mut position = Vec::new();
    let mut site = Vec::new();
    let mut species = Vec::new();
    let mut moment = Vec::new();
    let mut layer = Vec::new();
    for l in 0..LAYERS {
        for y in 0..2 {
            for x in 0..3 {
                position.push([2.5 * x as f64, 2.5 * y as f64, 3.1 * l as f64]);
                site.push(l as u32);
                species.push(((x + y) % SPECIES) as u32);
                moment.push(if (x + y) % 2 == 0 { 2.5 } else { 1.25 });
                layer.push(l as u32);
            }
        }
    }
    RunHeader {
        title: "scripted test run of an invented material".into(),
        seed: 0xDEAD_BEEF_1234_5678,
        config_toml: "title = \"t\"\nseed = 7\n[lattice]\npreset = \"square\"\n".into(),
        inputs: "bond_table.0: 2 pairs, fnv1a64 0123456789abcdef\n".into(),
        program_version: "0.1.0".into(),
        position,
        site,
        species,
        moment,
        layer,
        species_names: vec!["Fa".into(), "Ib".into()],
        layer_count: LAYERS,
    }
}

/// Deterministic, non-trivial values (distinct bits in every field).
fn v(stage: usize, i: usize, k: usize) -> f64 {
    ((stage * 1000 + i * 17 + k) as f64 * 0.7310585786).sin() * (1.0 + k as f64 * 0.125)
}

pub fn spins(stage: usize, i: usize) -> Vec<[f64; 3]> {
    (0..SITES)
        .map(|s| {
            let a = v(stage, i, s);
            let b = v(stage, i, s + 50);
            let (sa, ca) = a.sin_cos();
            let (sb, cb) = b.sin_cos();
            [sa * cb, sa * sb, ca]
        })
        .collect()
}

pub fn series_row(stage: usize, i: usize) -> SeriesRow {
    SeriesRow {
        step: (i as u64) * 100,
        time: i as f64 * 0.1,
        temperature: 10.0 + stage as f64,
        field: [0.0, v(stage, i, 1), 2.0],
        magnetization: [v(stage, i, 2), v(stage, i, 3), v(stage, i, 4)],
        energy: EnergyTerms {
            exchange: v(stage, i, 5),
            dmi: v(stage, i, 6),
            anisotropy: v(stage, i, 7),
            zeeman: v(stage, i, 8),
        },
        charge: v(stage, i, 9),
        charge_by_layer: (0..LAYERS).map(|l| v(stage, i, 10 + l)).collect(),
        magnetization_by_species: (0..SPECIES)
            .map(|s| [v(stage, i, 20 + s), v(stage, i, 21 + s), v(stage, i, 22 + s)])
            .collect(),
        magnetization_by_layer: (0..LAYERS)
            .map(|l| [v(stage, i, 30 + l), v(stage, i, 31 + l), v(stage, i, 32 + l)])
            .collect(),
    }
}

pub fn point_row(stage: usize, i: usize) -> PointRow {
    PointRow {
        temperature: 50.0 * (i + 1) as f64,
        field: [0.0, 0.0, v(stage, i, 40)],
        magnetization: [v(stage, i, 41), v(stage, i, 42), v(stage, i, 43)],
        magnetization_err: [v(stage, i, 44).abs(), v(stage, i, 45).abs(), v(stage, i, 46).abs()],
        m_abs: v(stage, i, 47).abs(),
        m_abs_err: v(stage, i, 48).abs(),
        susceptibility: v(stage, i, 49).abs(),
        susceptibility_err: v(stage, i, 50).abs(),
        heat_capacity: v(stage, i, 51).abs(),
        heat_capacity_err: v(stage, i, 52).abs(),
        binder: v(stage, i, 53),
        binder_err: v(stage, i, 54).abs(),
        energy: v(stage, i, 55),
        energy_err: v(stage, i, 56).abs(),
        autocorrelation_time: 1.0 + v(stage, i, 57).abs(),
        samples: 1000 + i as u64,
    }
}

pub fn summary(stage: usize, kind: &str) -> StageSummary {
    StageSummary {
        index: stage,
        kind: kind.into(),
        steps: 1000 * (stage as u64 + 1),
        wall_seconds: 0.5 + stage as f64,
        spin_steps_per_second: 1.0e7,
        final_state: FinalState {
            time: 0.7,
            magnetization: [0.0, 0.1, 0.9],
            energy: -3.0,
            energy_terms: EnergyTerms { exchange: -2.0, dmi: -0.5, anisotropy: -0.25, zeeman: -0.25 },
            charge: -1.0,
        },
        curie_temperature: (kind == "temperature-scan").then(|| CurieEstimate {
            value: 412.5,
            error: 3.25,
            method: "binder-crossing".into(),
            note: String::new(),
        }),
        coercive_field: (kind == "field-loop").then_some((-0.75, 0.8)),
        remanence: (kind == "field-loop").then_some(0.97),
        extra: if kind == "relax" {
            vec![("torque".into(), 1.0e-6), ("converged".into(), 1.0)]
        } else {
            vec![]
        },
    }
}

/// The scripted run: stage 0 `evolve` (7 rows, 3 snapshots), stage 1 `temperature-scan`
/// (5 rows, 4 points, 2 snapshots), stage 2 `relax` (3 rows, 1 snapshot), final spins.
/// Flushes are sprinkled in as an engine would.
pub fn script() -> Vec<Event> {
    let mut e = vec![Event::Header(Box::new(header()))];
    let stages: [(&str, usize, usize, usize); 3] =
        [("evolve", 7, 0, 3), ("temperature-scan", 5, 4, 2), ("relax", 3, 0, 1)];
    for (s, &(kind, rows, points, snaps)) in stages.iter().enumerate() {
        e.push(Event::Begin(StageInfo {
            index: s,
            kind: kind.into(),
            layer_count: LAYERS,
            species_count: SPECIES,
        }));
        for i in 0..rows {
            e.push(Event::Series(s, series_row(s, i)));
            if i < points {
                e.push(Event::Point(s, point_row(s, i)));
            }
            if i < snaps {
                e.push(Event::Snapshot(s, i as u64 * 100, i as f64 * 0.1, spins(s, i)));
            }
            if i % 3 == 2 {
                e.push(Event::Flush);
            }
        }
        e.push(Event::End(Box::new(summary(s, kind))));
    }
    e.push(Event::Final(spins(9, 0)));
    e.push(Event::Flush);
    e
}

pub fn apply(sink: &mut dyn Sink, events: &[Event]) {
    for ev in events {
        let r = match ev {
            Event::Header(h) => sink.header(h),
            Event::Begin(info) => sink.begin_stage(info),
            Event::Series(s, row) => sink.series(*s, row),
            Event::Point(s, row) => sink.point(*s, row),
            Event::Snapshot(s, step, time, sp) => sink.snapshot(*s, *step, *time, sp),
            Event::End(sum) => sink.end_stage(sum),
            Event::Final(sp) => sink.final_spins(sp),
            Event::Flush => sink.flush(),
        };
        r.unwrap_or_else(|e| panic!("sink call {ev:?} failed: {e}"));
    }
}

/// Row counts after the first `upto` events, counted from the script itself (not from the
/// writer under test).
pub fn counts(events: &[Event], upto: usize) -> Vec<RowCounts> {
    let mut rows: Vec<RowCounts> = Vec::new();
    for ev in &events[..upto] {
        match ev {
            Event::Begin(info) => rows.resize(info.index + 1, RowCounts::default()),
            Event::Series(s, _) => rows[*s].series += 1,
            Event::Point(s, _) => rows[*s].points += 1,
            Event::Snapshot(s, ..) => rows[*s].snapshots += 1,
            _ => {}
        }
    }
    rows
}

/// Summaries of the stages ended within the first `upto` events.
pub fn finished(events: &[Event], upto: usize) -> Vec<StageSummary> {
    events[..upto]
        .iter()
        .filter_map(|e| if let Event::End(s) = e { Some((**s).clone()) } else { None })
        .collect()
}

pub fn checkpoint_for(events: &[Event], upto: usize) -> Checkpoint {
    let rows = counts(events, upto);
    let mut scalars = BTreeMap::new();
    scalars.insert("time".to_string(), 0.30000000000000004);
    let mut counters = BTreeMap::new();
    counters.insert("step".to_string(), upto as u64);
    Checkpoint {
        stage: rows.len().saturating_sub(1),
        spins: spins(7, upto),
        scalars,
        counters,
        arrays: BTreeMap::new(),
        rows,
        finished: finished(events, upto),
    }
}

/// Path of an HDF5 command-line tool, failing with install instructions when it is missing.
pub fn tool(name: &str) -> PathBuf {
    let path = std::env::var_os("PATH").unwrap_or_default();
    for dir in std::env::split_paths(&path) {
        let p = dir.join(name);
        if p.is_file() {
            return p;
        }
    }
    panic!(
        "`{name}` is not on PATH: these tests use the HDF5 command-line tools as an independent \
         reader. Install them with `apt-get install hdf5-tools` (Debian/Ubuntu)."
    );
}

/// Runs a tool, returning stdout; panics with stderr on failure.
pub fn run_tool(name: &str, args: &[&str]) -> String {
    let out = Command::new(tool(name)).args(args).output().unwrap_or_else(|e| panic!("running {name}: {e}"));
    assert!(
        out.status.success(),
        "{name} {args:?} failed ({}):\n{}\n{}",
        out.status,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// A dataset as `h5ls -r -v` describes it.
#[derive(Debug, Clone, PartialEq)]
pub struct ListedDataset {
    /// Current dimensions.
    pub dims: Vec<usize>,
    /// Maximum dimensions (`None` = unlimited).
    pub max_dims: Vec<Option<usize>>,
    /// Chunk dimensions, for chunked datasets.
    pub chunks: Option<Vec<usize>>,
    /// Filter lines (e.g. `shuffle-2 OPT {8}`, `deflate-1 OPT {4}`).
    pub filters: Vec<String>,
    /// Attribute names.
    pub attrs: Vec<String>,
    /// Element type as h5ls names it (e.g. `native double`).
    pub type_name: String,
}

fn parse_dims(text: &str) -> Vec<usize> {
    text.split(',').map(str::trim).filter(|p| !p.is_empty()).map(|p| p.parse().expect("dimension")).collect()
}

/// Parses `h5ls -r -v FILE` into datasets by absolute path.
pub fn h5ls_datasets(file: &Path) -> BTreeMap<String, ListedDataset> {
    let out = run_tool("h5ls", &["-r", "-v", file.to_str().expect("utf-8 path")]);
    let mut map = BTreeMap::new();
    let mut current: Option<(String, ListedDataset)> = None;
    for line in out.lines() {
        if line.starts_with('/') {
            if let Some((k, d)) = current.take() {
                map.insert(k, d);
            }
            // "/stage_000/series/field Dataset {3/Inf, 3/3}"
            let Some(pos) = line.find(" Dataset {") else { continue };
            let name = line[..pos].trim().to_string();
            let dims_text = &line[pos + " Dataset {".len()..line.rfind('}').expect("closing brace")];
            let mut dims = Vec::new();
            let mut max_dims = Vec::new();
            for part in dims_text.split(',').map(str::trim).filter(|p| !p.is_empty()) {
                let mut it = part.split('/');
                let d: usize = it.next().unwrap().parse().expect("dimension");
                dims.push(d);
                max_dims.push(match it.next() {
                    None => Some(d),
                    Some("Inf") => None,
                    Some(m) => Some(m.parse().expect("max dimension")),
                });
            }
            let d = ListedDataset {
                dims,
                max_dims,
                chunks: None,
                filters: vec![],
                attrs: vec![],
                type_name: String::new(),
            };
            current = Some((name, d));
            continue;
        }
        let Some((_, d)) = current.as_mut() else { continue };
        let t = line.trim();
        if let Some(rest) = t.strip_prefix("Attribute: ") {
            d.attrs.push(rest.split_whitespace().next().unwrap_or("").to_string());
        } else if let Some(rest) = t.strip_prefix("Chunks:") {
            let rest = rest.trim();
            let inner = &rest[rest.find('{').expect("{") + 1..rest.find('}').expect("}")];
            d.chunks = Some(parse_dims(inner));
        } else if t.starts_with("Filter-") {
            d.filters.push(t.split_once(':').map(|x| x.1.trim().to_string()).unwrap_or_default());
        } else if let Some(rest) = t.strip_prefix("Type:") {
            // The first Type line after a dataset's attributes is the dataset's own type;
            // attribute types are indented deeper.
            if line.starts_with("    Type:") {
                d.type_name = rest.trim().to_string();
            }
        }
    }
    if let Some((k, d)) = current.take() {
        map.insert(k, d);
    }
    map
}

/// Reads a string attribute (scalar or 1-D) with `h5dump -a`; returns its values.
pub fn h5dump_str_attr(file: &Path, attr_path: &str) -> Vec<String> {
    let out = run_tool("h5dump", &["-a", attr_path, file.to_str().expect("utf-8 path")]);
    let start = out.find("DATA {").expect("DATA block") + "DATA {".len();
    let end = out[start..].find('}').expect("end of DATA") + start;
    let data = &out[start..end];
    // Values are the quoted strings; h5dump prefixes rows with "(i):".
    data.split('"').skip(1).step_by(2).map(str::to_string).collect()
}

/// Reads a dataset's values with `h5dump` (numbers only, in row-major order).
pub fn h5dump_values(file: &Path, dataset: &str) -> Vec<f64> {
    let out = run_tool(
        "h5dump",
        &["-d", dataset, "-m", "%.17g", "-y", "-w", "0", file.to_str().expect("utf-8 path")],
    );
    let start = out.find("DATA {").expect("DATA block") + "DATA {".len();
    let end = out[start..].find('}').expect("end of DATA") + start;
    out[start..end]
        .split(|c: char| c == ',' || c.is_whitespace())
        .filter(|t| !t.is_empty())
        .map(|t| t.parse::<f64>().unwrap_or_else(|_| panic!("h5dump value {t:?}")))
        .collect()
}
