//! The run file as an independent reader sees it: the HDF5 command-line tools of The HDF
//! Group (`h5ls`, `h5dump`, Debian package `hdf5-tools`) list every dataset of
//! `shared/INTERFACE.md`'s "Output" section with the right shape and `unit` attribute, and
//! print back the values written. Comparing with the format's own tools is common practice.

mod common;

use std::collections::BTreeMap;

use common::*;
use spindrift_engine::{Sink, StageInfo};
use spindrift_io::{IoError, RunFile, RunReader};

/// (path, shape, unit) of every dataset the scripted run must produce.
fn expected_datasets() -> BTreeMap<String, (Vec<usize>, &'static str)> {
    let n = SITES;
    let (l, s) = (LAYERS, SPECIES);
    let mut m = BTreeMap::new();
    let mut put = |p: &str, shape: Vec<usize>, unit: &'static str| {
        m.insert(p.to_string(), (shape, unit));
    };
    put("/lattice/position", vec![n, 3], "angstrom");
    put("/lattice/site", vec![n], "1");
    put("/lattice/species", vec![n], "1");
    put("/lattice/moment", vec![n], "bohr_magneton");
    put("/lattice/layer", vec![n], "1");
    put("/final/spins", vec![n, 3], "1");
    // (rows, points, snapshots) per stage, as in common::script.
    for (stage, rows, points, snaps) in [(0usize, 7usize, 0usize, 3usize), (1, 5, 4, 2), (2, 3, 0, 1)] {
        let g = format!("/stage_{stage:03}");
        for (name, tail, unit) in [
            ("step", vec![], "1"),
            ("time", vec![], "ps"),
            ("temperature", vec![], "K"),
            ("field", vec![3], "T"),
            ("magnetization", vec![3], "1"),
            ("energy", vec![], "meV/spin"),
            ("energy_exchange", vec![], "meV/spin"),
            ("energy_dmi", vec![], "meV/spin"),
            ("energy_anisotropy", vec![], "meV/spin"),
            ("energy_zeeman", vec![], "meV/spin"),
            ("charge", vec![], "1"),
            ("charge_by_layer", vec![l], "1"),
            ("magnetization_by_species", vec![s, 3], "1"),
            ("magnetization_by_layer", vec![l, 3], "1"),
        ] {
            let mut shape = vec![rows];
            shape.extend(tail);
            put(&format!("{g}/series/{name}"), shape, unit);
        }
        if points > 0 {
            for (name, tail, unit) in [
                ("temperature", vec![], "K"),
                ("field", vec![3], "T"),
                ("magnetization", vec![3], "1"),
                ("magnetization_err", vec![3], "1"),
                ("m_abs", vec![], "1"),
                ("m_abs_err", vec![], "1"),
                ("susceptibility", vec![], "1/meV"),
                ("susceptibility_err", vec![], "1/meV"),
                ("heat_capacity", vec![], "kB"),
                ("heat_capacity_err", vec![], "kB"),
                ("binder", vec![], "1"),
                ("binder_err", vec![], "1"),
                ("energy", vec![], "meV/spin"),
                ("energy_err", vec![], "meV/spin"),
                ("autocorrelation_time", vec![], "1"),
                ("samples", vec![], "1"),
            ] {
                let mut shape = vec![points];
                shape.extend(tail);
                put(&format!("{g}/points/{name}"), shape, unit);
            }
        }
        put(&format!("{g}/snapshots/step"), vec![snaps], "1");
        put(&format!("{g}/snapshots/time"), vec![snaps], "ps");
        put(&format!("{g}/snapshots/spins"), vec![snaps, n, 3], "1");
    }
    m
}

fn write_script(dir: &std::path::Path, block_rows: usize) {
    let mut f = RunFile::create(dir).expect("create");
    f.set_block_rows(block_rows);
    apply(&mut f, &script());
    f.close().expect("close");
}

#[test]
fn h5ls_lists_the_interface_layout_with_shapes_and_units() {
    let tmp = TempDir::new("layout");
    write_script(tmp.path(), 2);
    let file = tmp.path().join("run.h5");
    let listed = h5ls_datasets(&file);
    let expected = expected_datasets();

    let listed_names: Vec<&String> = listed.keys().collect();
    let expected_names: Vec<&String> = expected.keys().collect();
    assert_eq!(listed_names, expected_names, "dataset set differs");

    for (path, (shape, unit)) in &expected {
        let d = &listed[path];
        assert_eq!(&d.dims, shape, "{path}: shape");
        assert!(d.attrs.iter().any(|a| a == "unit"), "{path}: no unit attribute");
        let units = h5dump_str_attr(&file, &format!("{path}/unit"));
        assert_eq!(units, vec![unit.to_string()], "{path}: unit");
        let appendable = path.starts_with("/stage_");
        if appendable {
            assert_eq!(d.max_dims[0], None, "{path}: first axis must be unlimited");
            assert!(d.max_dims[1..].iter().all(Option::is_some), "{path}: only the first axis grows");
            assert!(d.chunks.is_some(), "{path}: must be chunked");
        }
        if path.ends_with("/snapshots/spins") {
            assert_eq!(d.chunks.as_deref(), Some(&[1, SITES, 3][..]), "{path}: one snapshot per chunk");
            assert!(
                d.filters.iter().any(|f| f.starts_with("deflate")),
                "{path}: deflate filter, got {:?}",
                d.filters
            );
        }
        let int_like =
            ["step", "samples", "site", "species", "layer"].iter().any(|s| path.ends_with(&format!("/{s}")));
        if !int_like {
            assert_eq!(d.type_name, "native double", "{path}: type");
        }
    }

    // Root and group attributes.
    let attr = |p: &str| h5dump_str_attr(&file, p);
    assert_eq!(attr("/format"), vec!["spindrift-run"]);
    assert_eq!(attr("/program_version"), vec!["0.1.0"]);
    assert_eq!(attr("/title"), vec![header().title]);
    assert_eq!(attr("/lattice/species_names"), vec!["Fa", "Ib"]);
    assert_eq!(attr("/stage_000/kind"), vec!["evolve"]);
    assert_eq!(attr("/stage_001/kind"), vec!["temperature-scan"]);
    assert_eq!(attr("/stage_002/kind"), vec!["relax"]);
    // The config text contains quotes and newlines, which h5dump escapes; compare through
    // the reader and check here only that h5dump finds it.
    assert!(run_tool("h5dump", &["-a", "/config", file.to_str().unwrap()]).contains("preset"));
    let seed = run_tool("h5dump", &["-a", "/seed", file.to_str().unwrap()]);
    assert!(seed.contains(&format!("(0): {}", header().seed)), "seed attribute: {seed}");
    let version = run_tool("h5dump", &["-a", "/format_version", file.to_str().unwrap()]);
    assert!(version.contains("(0): 2"), "format_version attribute: {version}");
}

#[test]
fn h5dump_prints_back_the_values_written() {
    let tmp = TempDir::new("values");
    write_script(tmp.path(), 4);
    let file = tmp.path().join("run.h5");
    // %.17g prints every double so that it parses back to the same bits (IEEE 754-2008, 5.12.2).
    let field: Vec<f64> = (0..7).flat_map(|i| series_row(0, i).field).collect();
    assert_eq!(h5dump_values(&file, "/stage_000/series/field"), field);
    let energy: Vec<f64> = (0..5).map(|i| series_row(1, i).energy.total()).collect();
    assert_eq!(h5dump_values(&file, "/stage_001/series/energy"), energy);
    let by_species: Vec<f64> =
        (0..5).flat_map(|i| series_row(1, i).magnetization_by_species.into_iter().flatten()).collect();
    assert_eq!(h5dump_values(&file, "/stage_001/series/magnetization_by_species"), by_species);
    let steps: Vec<f64> = (0..3).map(|i| series_row(2, i).step as f64).collect();
    assert_eq!(h5dump_values(&file, "/stage_002/series/step"), steps);
    let samples: Vec<f64> = (0..4).map(|i| point_row(1, i).samples as f64).collect();
    assert_eq!(h5dump_values(&file, "/stage_001/points/samples"), samples);
    let binder_err: Vec<f64> = (0..4).map(|i| point_row(1, i).binder_err).collect();
    assert_eq!(h5dump_values(&file, "/stage_001/points/binder_err"), binder_err);
    let snaps: Vec<f64> = (0..2).flat_map(|i| spins(1, i).into_iter().flatten()).collect();
    assert_eq!(h5dump_values(&file, "/stage_001/snapshots/spins"), snaps);
    let fin: Vec<f64> = spins(9, 0).into_iter().flatten().collect();
    assert_eq!(h5dump_values(&file, "/final/spins"), fin);
    let pos: Vec<f64> = header().position.into_iter().flatten().collect();
    assert_eq!(h5dump_values(&file, "/lattice/position"), pos);
}

#[test]
fn reader_reads_back_what_the_sink_wrote() {
    let tmp = TempDir::new("reader");
    write_script(tmp.path(), 3);
    let r = RunReader::open(tmp.path()).expect("open");
    let h = header();
    let a = r.attributes().unwrap();
    assert_eq!(a.format, "spindrift-run");
    assert_eq!(a.format_version, 2);
    assert_eq!(a.config, h.config_toml);
    assert_eq!(a.inputs, h.inputs);
    assert_eq!(a.seed, h.seed);
    assert_eq!(a.title, h.title);
    assert_eq!(a.program_version, h.program_version);

    let stages: Vec<(usize, String)> = r.stages().unwrap().into_iter().map(|s| (s.index, s.kind)).collect();
    assert_eq!(stages, vec![(0, "evolve".into()), (1, "temperature-scan".into()), (2, "relax".into())]);

    let ds = r.datasets(1).unwrap();
    let field = ds.iter().find(|d| d.path == "/stage_001/points/field").expect("points/field listed");
    assert_eq!(field.shape, vec![4, 3]);
    assert_eq!(field.unit.as_deref(), Some("T"));
    let all = r.datasets_under("/").unwrap();
    assert_eq!(all.len(), expected_datasets().len());
    assert!(all.iter().all(|d| d.unit.is_some()), "every dataset has a unit");

    let time = r.read_1d("/stage_000/series/time").unwrap();
    assert_eq!(time, (0..7).map(|i| series_row(0, i).time).collect::<Vec<_>>());
    let steps = r.read_1d("stage_000/series/step").unwrap();
    assert_eq!(steps, (0..7).map(|i| series_row(0, i).step as f64).collect::<Vec<_>>());
    let m = r.read_2d("/stage_002/series/magnetization").unwrap();
    assert_eq!(m, (0..3).map(|i| series_row(2, i).magnetization.to_vec()).collect::<Vec<_>>());
    let (shape, flat) = r.read_flat("/stage_000/series/magnetization_by_layer").unwrap();
    assert_eq!(shape, vec![7, LAYERS, 3]);
    assert_eq!(
        flat,
        (0..7)
            .flat_map(|i| series_row(0, i).magnetization_by_layer.into_iter().flatten())
            .collect::<Vec<_>>()
    );

    let lat = r.lattice().unwrap();
    assert_eq!(lat.position, h.position);
    assert_eq!(lat.site, h.site);
    assert_eq!(lat.species, h.species);
    assert_eq!(lat.moment, h.moment);
    assert_eq!(lat.layer, h.layer);
    assert_eq!(lat.species_names, h.species_names);

    assert_eq!(r.snapshot_counts().unwrap(), vec![3, 2, 1]);
    let s = r.snapshot(0, 2).unwrap();
    assert_eq!((s.stage, s.index, s.step, s.time), (0, 2, 200, 0.2));
    assert_eq!(s.spins, spins(0, 2));
    let last = r.last_snapshot().unwrap().expect("a snapshot");
    assert_eq!((last.stage, last.index), (2, 0));
    assert_eq!(last.spins, spins(2, 0));
    assert_eq!(r.final_spins().unwrap(), Some(spins(9, 0)));

    assert!(matches!(r.read_1d("/stage_000/series/nothing"), Err(IoError::Invalid { .. })));
    assert!(matches!(r.read_1d("/no_group/series/time"), Err(IoError::Invalid { .. })));
    assert!(matches!(r.read_1d("/stage_000/series/field"), Err(IoError::Invalid { .. })));
    assert!(matches!(r.snapshot(0, 3), Err(IoError::Invalid { .. })));
}

#[test]
fn rows_reach_the_file_in_blocks_and_on_flush() {
    let tmp = TempDir::new("blocks");
    let mut f = RunFile::create(tmp.path()).unwrap();
    f.set_block_rows(4);
    let h = header();
    f.header(&h).unwrap();
    f.begin_stage(&StageInfo {
        index: 0,
        kind: "evolve".into(),
        layer_count: LAYERS,
        species_count: SPECIES,
    })
    .unwrap();
    f.flush().unwrap();
    let rows_in_file = || RunReader::open(tmp.path()).unwrap().shape("/stage_000/series/time").unwrap()[0];
    for i in 0..3 {
        f.series(0, &series_row(0, i)).unwrap();
    }
    assert_eq!(rows_in_file(), 0, "three rows stay buffered below the block size");
    f.series(0, &series_row(0, 3)).unwrap();
    f.flush().unwrap();
    assert_eq!(rows_in_file(), 4);
    f.series(0, &series_row(0, 4)).unwrap();
    f.flush().unwrap();
    assert_eq!(rows_in_file(), 5, "flush writes a partial block");
    assert_eq!(f.row_counts()[0].series, 5);
    f.close().unwrap();
    let t = RunReader::open(tmp.path()).unwrap().read_1d("/stage_000/series/time").unwrap();
    assert_eq!(t, (0..5).map(|i| series_row(0, i).time).collect::<Vec<_>>());
}

#[test]
fn a_config_larger_than_64_kib_is_stored_whole() {
    // Attributes in the oldest HDF5 object-header format are limited to 64 KiB (HDF5 user
    // guide, "Attributes": large attributes need dense storage, 1.8 format or later).
    let tmp = TempDir::new("bigconfig");
    let mut h = header();
    h.config_toml = (0..6000).map(|i| format!("# line {i:05} of a long resolved config\n")).collect();
    assert!(h.config_toml.len() > 200_000);
    let mut f = RunFile::create(tmp.path()).unwrap();
    f.header(&h).unwrap();
    f.close().unwrap();
    let r = RunReader::open(tmp.path()).unwrap();
    assert_eq!(r.attributes().unwrap().config, h.config_toml);
    let dumped = run_tool("h5dump", &["-a", "/config", tmp.path().join("run.h5").to_str().unwrap()]);
    assert!(dumped.contains("line 05999"), "h5dump reads the whole attribute");
}

#[test]
fn bad_records_are_errors_not_panics() {
    let tmp = TempDir::new("badrecords");
    let mut f = RunFile::create(tmp.path()).unwrap();
    let info = StageInfo { index: 0, kind: "evolve".into(), layer_count: LAYERS, species_count: SPECIES };
    assert!(f.begin_stage(&info).is_err(), "a stage before the header");
    let mut bad = header();
    bad.moment.pop();
    let e = f.header(&bad).unwrap_err();
    assert!(e.message.contains("moment"), "{}", e.message);
    f.header(&header()).unwrap();
    assert!(f.series(0, &series_row(0, 0)).is_err(), "a row for a stage never begun");
    f.begin_stage(&info).unwrap();
    let mut row = series_row(0, 0);
    row.charge_by_layer.push(0.0);
    let e = f.series(0, &row).unwrap_err();
    assert!(e.message.contains("layer"), "{}", e.message);
    assert!(f.snapshot(0, 0, 0.0, &spins(0, 0)[1..]).is_err(), "a snapshot of the wrong size");
    assert!(f.final_spins(&[[0.0, 0.0, 1.0]]).is_err(), "final spins of the wrong size");
    let other = StageInfo { kind: "relax".into(), ..info.clone() };
    assert!(f.begin_stage(&other).is_err(), "the same stage begun as another kind");
    assert!(f.begin_stage(&StageInfo { index: 1, layer_count: 0, ..info }).is_err(), "no layers");
    f.close().unwrap();
}

#[test]
fn missing_and_foreign_files_are_reported_with_their_path() {
    let tmp = TempDir::new("foreign");
    let dir = tmp.path();
    let run = dir.join("run.h5");

    let e = RunReader::open(dir).unwrap_err();
    assert!(matches!(&e, IoError::NotFound { path } if path == &run), "{e}");
    assert!(e.to_string().contains("run.h5"));

    std::fs::write(&run, "title = \"not HDF5\"\n").unwrap();
    let e = RunReader::open(dir).unwrap_err();
    assert!(matches!(&e, IoError::Foreign { found, .. } if found.contains("not an HDF5 file")), "{e}");
    assert!(RunFile::reopen(dir, &[]).is_err());

    // An HDF5 file of someone else's: no format attribute.
    std::fs::remove_file(&run).unwrap();
    {
        let f = hdf5::File::create(&run).unwrap();
        f.new_dataset::<f64>().shape(4).create("data").unwrap();
    }
    let e = RunReader::open(dir).unwrap_err();
    assert!(matches!(&e, IoError::Foreign { found, .. } if found.contains("without a format")), "{e}");
    assert!(e.to_string().contains("spindrift-run"), "{e}");

    // A checkpoint is HDF5 with a format attribute, but not a run file.
    let mut f = RunFile::create(dir).unwrap();
    f.header(&header()).unwrap();
    f.checkpoint(&spindrift_engine::Checkpoint::default()).unwrap();
    f.close().unwrap();
    std::fs::rename(dir.join("checkpoint.h5"), &run).unwrap();
    let e = RunReader::open(dir).unwrap_err();
    assert!(matches!(&e, IoError::Foreign { found, .. } if found.contains("spindrift-checkpoint")), "{e}");

    assert!(matches!(spindrift_io::read_checkpoint(&dir.join("nowhere")), Err(IoError::NotFound { .. })));
    assert!(matches!(spindrift_io::read_summary(dir), Err(IoError::NotFound { .. })));
    std::fs::write(dir.join("summary.json"), "{not json").unwrap();
    assert!(matches!(spindrift_io::read_summary(dir), Err(IoError::Json { .. })));
}

#[test]
fn a_run_with_only_a_header_reads_as_empty() {
    let tmp = TempDir::new("header-only");
    let mut f = RunFile::create(tmp.path()).unwrap();
    let mut h = header();
    h.species_names.clear();
    f.header(&h).unwrap();
    assert_eq!(f.row_counts(), vec![]);
    f.close().unwrap();
    let r = RunReader::open(tmp.path()).unwrap();
    assert!(r.lattice().unwrap().species_names.is_empty());
    assert!(r.stages().unwrap().is_empty());
    assert_eq!(r.snapshot_counts().unwrap(), Vec::<u64>::new());
    assert!(r.last_snapshot().unwrap().is_none());
    assert!(r.final_spins().unwrap().is_none());
}
