//! Loading whole configs: the example of INTERFACE.md, every key, overrides, and located errors.
//!
//! Expected lines are found by searching the test's own text for the offending line, independently of
//! the crate's key scanner.

use std::path::{Path, PathBuf};

use spindrift_config::raw::{
    DmiKind, FerroSign, InitialState, PairListing, Preset, ScanMethod, ScanOrder, StageKind,
};
use spindrift_config::{load, load_str, validate, ConfigError, Dimension, Loaded, Quantity};

const DEMO: &str = "configs/demo.toml";

fn data(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data").join(name)
}

fn line_containing(text: &str, needle: &str) -> usize {
    let hits: Vec<usize> =
        text.lines().enumerate().filter(|(_, l)| l.contains(needle)).map(|(i, _)| i + 1).collect();
    assert_eq!(hits.len(), 1, "`{needle}` should be on exactly one line");
    hits[0]
}

fn q(loaded: &Loaded, key: &str, v: &Option<Quantity>, dim: Dimension) -> f64 {
    loaded.quantity(key, v.as_ref().expect(key), dim).expect(key)
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-12 * b.abs().max(1.0)
}

const MINIMAL: &str = r#"title = "minimal"
[lattice]
preset = "square"
a = 3.0
cells = [4, 4, 1]

[[species]]
name = "M"
moment = 2.0

[[exchange]]
shell = 1
j = 10.0

[[stage]]
kind = "relax"
temperature = 0

[[stage]]
kind = "evolve"
dt = "1 fs"
temperature = 10
"#;

#[test]
fn interface_example_loads_as_written() {
    let path = data("interface_example.toml");
    let loaded = load(&path, &[]).unwrap_or_else(|e| panic!("{e}"));
    let raw = &loaded.raw;
    assert_eq!(raw.title.as_deref(), Some("free text"));
    assert_eq!(raw.seed, Some(7));
    assert_eq!(raw.lattice.preset, Some(Preset::Triangular));
    assert_eq!(q(&loaded, "lattice.a", &raw.lattice.a, Dimension::Length), 2.7);
    assert_eq!(raw.lattice.cells, Some([96, 96, 1]));
    assert_eq!(raw.lattice.periodic, Some([true, true, false]));
    assert_eq!(raw.species.len(), 1);
    assert_eq!(raw.species[0].name, "M");
    assert_eq!(q(&loaded, "species.0.moment", &raw.species[0].moment, Dimension::Moment), 2.5);
    assert_eq!(raw.species[0].damping, Some(0.1));
    assert_eq!(q(&loaded, "species.0.anisotropy", &raw.species[0].anisotropy, Dimension::Energy), 0.25);
    assert_eq!(raw.species[0].axis, Some([0.0, 0.0, 1.0]));
    assert!(raw.site.is_empty() && raw.bond.is_empty() && raw.bond_table.is_empty());
    assert_eq!(raw.exchange[0].shell, Some(1));
    assert_eq!(loaded.quantity("exchange.0.j", &raw.exchange[0].j, Dimension::Energy), Ok(12.0));
    assert_eq!(raw.dmi[0].kind, Some(DmiKind::Interfacial));
    assert_eq!(loaded.quantity("dmi.0.d", &raw.dmi[0].d, Dimension::Energy), Ok(2.4));
    let b = raw.field.as_ref().and_then(|f| f.b.as_ref()).expect("field.b");
    assert_eq!(loaded.vector("field.b", b, Dimension::Field), Ok([0.0, 0.0, 2.0]));
    assert_eq!(raw.initial.as_ref().and_then(|i| i.state), Some(InitialState::Random));
    let s = &raw.stage[0];
    assert_eq!(s.kind, StageKind::Evolve);
    assert_eq!(q(&loaded, "stage.0.duration", &s.duration, Dimension::Time), 200.0);
    assert!(close(q(&loaded, "stage.0.dt", &s.dt, Dimension::Time), 1e-3));
    assert_eq!(q(&loaded, "stage.0.temperature", &s.temperature, Dimension::Temperature), 20.0);
    assert_eq!((s.observe_every, s.snapshot_every), (Some(100), Some(10000)));
    // Without overrides the recorded text is the file itself, and relative paths start at its folder.
    assert_eq!(loaded.text, std::fs::read_to_string(&path).unwrap());
    assert_eq!(loaded.dir, data(""));
    assert_eq!(loaded.resolve_path("couplings.dat"), data("couplings.dat"));
}

#[test]
fn every_key_loads_with_units_converted() {
    let loaded = load(&data("all_keys.toml"), &[]).unwrap_or_else(|e| panic!("{e}"));
    let raw = &loaded.raw;
    let l = &raw.lattice;
    let v = l.vectors.as_ref().expect("vectors");
    assert_eq!(loaded.vector("lattice.vectors.1", &v[1], Dimension::Length), Ok([0.0, 2.5, 0.0]));
    assert_eq!(loaded.vector("lattice.vectors.2", &v[2], Dimension::Length), Ok([0.0, 0.0, 3.0]));
    assert!(close(q(&loaded, "lattice.a", &l.a, Dimension::Length), 2.7));
    assert_eq!(q(&loaded, "lattice.c", &l.c, Dimension::Length), 3.0);
    assert_eq!(raw.species[0].anisotropy.as_ref().unwrap().to(Dimension::Energy), Ok(0.05));
    assert_eq!(raw.species[0].moment.as_ref().unwrap().to(Dimension::Moment), Ok(2.2));
    assert_eq!(raw.site[1].occupancy, Some(0.9));
    assert_eq!(raw.site[1].position, [0.5, 0.5, 0.5]);
    // 1 mRy = 13.605693122994 meV (CODATA 2018 Rydberg energy, Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)).
    assert!(close(raw.exchange[0].j.to(Dimension::Energy).unwrap(), 13.605_693_122_994));
    assert_eq!(raw.exchange[0].pair, Some(["Fe".to_string(), "Co".to_string()]));
    assert_eq!(raw.exchange[1].distance.as_ref().unwrap().to(Dimension::Length), Ok(2.5));
    assert_eq!(raw.dmi[0].kind, Some(DmiKind::Bulk));
    assert_eq!(raw.dmi[1].normal, Some([0.0, 0.0, 1.0]));
    assert_eq!(raw.bond[0].cell, Some([1, 0, -1]));
    assert_eq!(raw.bond[0].dmi.as_ref().unwrap().to(Dimension::Energy), Ok([0.1, 0.0, 0.2]));
    assert_eq!(raw.bond[1].tensor.as_ref().unwrap()[2].to(Dimension::Energy), Ok([0.0, 0.0, 1.0]));
    let t = &raw.bond_table[0];
    assert_eq!(
        (t.path.as_str(), t.unit.as_deref(), t.pairs, t.ferromagnetic),
        ("couplings.dat", Some("mRy"), Some(PairListing::BothDirections), Some(FerroSign::Negative))
    );
    let b = raw.field.as_ref().unwrap().b.as_ref().unwrap();
    assert!(close(loaded.vector("field.b", b, Dimension::Field).unwrap()[2], 0.05));
    let init = raw.initial.as_ref().unwrap();
    assert_eq!(init.state, Some(InitialState::Skyrmion));
    assert_eq!(init.center, Some([0.5, 0.5]));
    assert_eq!(init.radius.as_ref().unwrap().to(Dimension::Length), Ok(20.0));
    assert_eq!(init.helicity.as_ref().unwrap().to(Dimension::Angle), Ok(90.0));
    assert_eq!(init.wavevector, Some([0.1, 0.0, 0.0]));
    assert_eq!(init.path.as_deref(), Some("runs/x"));
    let st = &raw.stage;
    let kinds: Vec<StageKind> = st.iter().map(|s| s.kind).collect();
    assert_eq!(
        kinds,
        [
            StageKind::Relax,
            StageKind::Evolve,
            StageKind::FieldLoop,
            StageKind::Metropolis,
            StageKind::TemperatureScan
        ]
    );
    assert_eq!(st[0].max_steps, Some(5000));
    assert!(close(st[0].torque_tolerance.as_ref().unwrap().to(Dimension::Field).unwrap(), 1e-3));
    assert_eq!(st[1].duration.as_ref().unwrap().to(Dimension::Time), Ok(2000.0));
    let ramp = st[1].temperature_ramp.as_ref().unwrap();
    assert_eq!(
        (ramp[0].to(Dimension::Temperature), ramp[1].to(Dimension::Temperature)),
        (Ok(300.0), Ok(1.0))
    );
    let fr = st[1].field_ramp.as_ref().unwrap();
    assert_eq!(fr.to.to(Dimension::Field), Ok([0.0, 0.0, -0.5]));
    assert_eq!(fr.from.to(Dimension::Field), Ok([0.0, 0.0, 1.0]));
    assert_eq!(st[1].field.as_ref().unwrap().to(Dimension::Field), Ok([0.0, 0.0, 1.0]));
    assert_eq!((st[2].direction, st[2].points, st[2].relax), (Some([0.0, 0.0, 1.0]), Some(41), Some(true)));
    assert_eq!(st[2].max.as_ref().unwrap().to(Dimension::Field), Ok(2.0));
    assert_eq!(st[2].settle.as_ref().unwrap().to(Dimension::Time), Ok(10.0));
    assert_eq!((st[3].equilibrate, st[3].measure), (Some(1000), Some(5000)));
    let s = &st[4];
    let temps: Vec<f64> =
        s.temperatures.as_ref().unwrap().iter().map(|t| t.to(Dimension::Temperature).unwrap()).collect();
    assert_eq!(temps, [10.0, 20.0, 30.0]);
    assert_eq!((s.method, s.order), (Some(ScanMethod::Llg), Some(ScanOrder::Cooling)));
    assert_eq!(s.step.as_ref().unwrap().to(Dimension::Temperature), Ok(10.0));
    let every = raw.run.as_ref().unwrap().checkpoint_every.as_ref().unwrap();
    assert_eq!(every.0, std::time::Duration::from_secs(1800));
    assert_eq!(raw.output.as_ref().unwrap().snapshot_compression, Some(true));
}

#[test]
fn interface_unit_examples_parse() {
    // The strings of INTERFACE.md's Units section. Factors: SI prefixes; 1 mRy from CODATA 2018.
    let cases = [
        ("1 fs", Dimension::Time, 1e-3),
        ("0.2 meV", Dimension::Energy, 0.2),
        ("5 mRy", Dimension::Energy, 5.0 * 13.605_693_122_994),
        ("0.4 nm", Dimension::Length, 4.0),
        ("50 mT", Dimension::Field, 0.05),
        ("300 K", Dimension::Temperature, 300.0),
    ];
    for (text, dim, want) in cases {
        let got = Quantity::parse(text).and_then(|q| q.to(dim)).unwrap();
        assert!(close(got, want), "{text}: {got} != {want}");
    }
}

#[test]
fn misspelt_key_gives_path_line_and_suggestion() {
    let text = MINIMAL.replace("temperature = 10", "tempreature = 10");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    let line = line_containing(&text, "tempreature");
    assert_eq!(e.key, "stage.1.tempreature");
    assert_eq!(e.line, Some(line));
    assert_eq!(
        e.to_string(),
        format!("configs/demo.toml:{line}: stage.1.tempreature: unknown key; did you mean `temperature`?")
    );
}

#[test]
fn misspelt_table_and_value_are_suggested() {
    let text = MINIMAL.replace("[lattice]", "[lattic]");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!((e.key.as_str(), e.line), ("lattic", Some(2)));
    assert!(e.message.contains("did you mean `lattice`?"), "{e}");

    let text = MINIMAL.replace("\"square\"", "\"sqaure\"");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!((e.key.as_str(), e.line), ("lattice.preset", Some(3)));
    assert!(e.message.contains("unknown value `sqaure`; did you mean `square`?"), "{e}");

    let text = MINIMAL.replace("kind = \"relax\"", "kind = \"anneal\"");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "stage.0.kind");
    assert!(e.message.contains("`field-loop`") && e.message.contains("`temperature-scan`"), "{e}");
}

#[test]
fn wrong_type_names_key_and_line() {
    let text = MINIMAL.replace("cells = [4, 4, 1]", "cells = \"big\"");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "lattice.cells");
    assert_eq!(e.line, Some(line_containing(&text, "big")));
    assert!(e.message.contains("invalid type"), "{e}");

    let text = MINIMAL.replace("cells = [4, 4, 1]", "cells = [4, 4, true]");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "lattice.cells.2");
    assert_eq!(e.line, Some(line_containing(&text, "cells")));
}

#[test]
fn missing_required_key_points_at_its_table() {
    let text = MINIMAL.replace("j = 10.0\n", "");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "exchange.0");
    assert_eq!(e.message, "missing key `j`");
    assert_eq!(e.line, Some(line_containing(&text, "[[exchange]]")));
}

#[test]
fn wrong_unit_names_the_key() {
    let text = MINIMAL.replace("dt = \"1 fs\"", "dt = \"5 mT\"");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "stage.1.dt");
    assert_eq!(e.line, Some(line_containing(&text, "5 mT")));
    assert_eq!(e.message, "`5 mT` is a field, but `dt` needs a time");

    let text = MINIMAL.replace("dt = \"1 fs\"", "dt = \"1 fortnight\"");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "stage.1.dt");
    assert_eq!(e.line, Some(line_containing(&text, "fortnight")));
    assert!(e.message.contains("unknown unit `fortnight`"), "{e}");

    let text = MINIMAL.replace("j = 10.0", "j = \"10 K\"");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "exchange.0.j");
    assert!(e.message.contains("kelvin is not accepted as an energy unit"), "{e}");

    let text = format!("{MINIMAL}\n[field]\nb = [0, 0, \"2 meV\"]\n");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "field.b.2");
    assert_eq!(e.line, Some(line_containing(&text, "2 meV")));
    assert_eq!(e.message, "`2 meV` is an energy, but `b` needs a field");

    let text = format!("{MINIMAL}\n[[bond_table]]\npath = \"x.dat\"\nunit = \"T\"\n");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "bond_table.0.unit");
    assert_eq!(e.line, Some(line_containing(&text, "unit = \"T\"")));

    let text = format!("{MINIMAL}\n[run]\ncheckpoint_every = \"5 fs\"\n");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.key, "run.checkpoint_every");
    assert_eq!(e.line, Some(line_containing(&text, "5 fs")));
    assert!(e.message.contains("unknown unit `fs`"), "{e}");
}

#[test]
fn overrides_reach_nested_arrays_and_tables() {
    let sets: Vec<String> = [
        "stage.0.temperature=50",
        "field.b=[0,0,1.5]",
        "lattice.cells=[32,32,4]",
        "initial.state=skyrmion",
        "stage.1.dt=2 fs",
        "stage.1.field_ramp={ from = [0,0,1], to = [0,0,\"-1 T\"] }",
        "species.0.moment=\"3 muB\"",
    ]
    .map(String::from)
    .to_vec();
    let loaded = load_str(MINIMAL, Path::new(DEMO), &sets).unwrap_or_else(|e| panic!("{e}"));
    let raw = &loaded.raw;
    assert_eq!(raw.stage[0].temperature.as_ref().unwrap().to(Dimension::Temperature), Ok(50.0));
    assert_eq!(raw.field.as_ref().unwrap().b.as_ref().unwrap().to(Dimension::Field), Ok([0.0, 0.0, 1.5]));
    assert_eq!(raw.lattice.cells, Some([32, 32, 4]));
    assert_eq!(raw.initial.as_ref().unwrap().state, Some(InitialState::Skyrmion));
    assert!(close(raw.stage[1].dt.as_ref().unwrap().to(Dimension::Time).unwrap(), 2e-3));
    assert_eq!(raw.stage[1].field_ramp.as_ref().unwrap().to.to(Dimension::Field), Ok([0.0, 0.0, -1.0]));
    assert_eq!(raw.species[0].moment.as_ref().unwrap().to(Dimension::Moment), Ok(3.0));
    // Untouched values survive, and the recorded text is the resolved document.
    assert_eq!(raw.title.as_deref(), Some("minimal"));
    assert_eq!(raw.stage[1].temperature.as_ref().unwrap().to(Dimension::Temperature), Ok(10.0));
    let reread = load_str(&loaded.text, Path::new(DEMO), &[]).unwrap();
    assert_eq!(reread.raw, loaded.raw);
    assert_eq!(loaded.original, MINIMAL);
    assert!(loaded.is_set_on_command_line("field.b.2"));
    assert!(!loaded.is_set_on_command_line("field"));
    assert!(!loaded.is_set_on_command_line("stage.0.kind"));
}

#[test]
fn override_errors_name_file_and_key() {
    let e = load_str(MINIMAL, Path::new(DEMO), &["stage.2.temperature=5".into()]).unwrap_err();
    assert_eq!(e.file, Path::new(DEMO));
    assert_eq!(e.key, "stage.2.temperature");
    assert!(e.message.contains("past the end of `stage`"), "{e}");

    let e = load_str(MINIMAL, Path::new(DEMO), &["stage.0.temperature".into()]).unwrap_err();
    assert!(e.message.contains("has no `=`"), "{e}");

    let e = load_str(MINIMAL, Path::new(DEMO), &["lattice.a.x=1".into()]).unwrap_err();
    assert_eq!(e.key, "lattice.a.x");

    // A misspelt key given on the command line says so instead of pointing at a line.
    let e = load_str(MINIMAL, Path::new(DEMO), &["stage.0.tempreature=5".into()]).unwrap_err();
    assert_eq!((e.key.as_str(), e.line), ("stage.0.tempreature", None));
    assert_eq!(
        e.to_string(),
        "configs/demo.toml: stage.0.tempreature: unknown key; did you mean `temperature`? (set on the command line)"
    );
    let e = load_str(MINIMAL, Path::new(DEMO), &["stage.1.dt=5 mT".into()]).unwrap_err();
    assert!(e.message.ends_with("needs a time (set on the command line)"), "{e}");
}

#[test]
fn lines_refer_to_the_original_file_when_overrides_are_present() {
    // The override rewrites the document; the error in the file itself still gets its own line.
    let text = MINIMAL.replace("moment = 2.0", "momnet = 2.0");
    let e = load_str(&text, Path::new(DEMO), &["field.b=[0,0,1]".into(), "title=\"x\"".into()]).unwrap_err();
    assert_eq!(e.key, "species.0.momnet");
    assert_eq!(e.line, Some(line_containing(&text, "momnet")));
    assert!(e.message.contains("did you mean `moment`?"), "{e}");
}

#[test]
fn validator_helpers_point_at_lines() {
    let loaded = load_str(MINIMAL, Path::new(DEMO), &["stage.0.temperature=4".into()]).unwrap();
    let e = loaded.error_at("species.0.moment", "must be positive");
    assert_eq!(e.line, Some(line_containing(MINIMAL, "moment")));
    assert_eq!(
        e.to_string(),
        format!("configs/demo.toml:{}: species.0.moment: must be positive", e.line.unwrap())
    );
    let e = loaded.error_at("stage.0.temperature", "too hot");
    assert_eq!((e.line, e.message.as_str()), (None, "too hot (set on the command line)"));
    let e = loaded
        .quantity("stage.1.dt", loaded.raw.stage[1].dt.as_ref().unwrap(), Dimension::Energy)
        .unwrap_err();
    assert_eq!(e.message, "`1 fs` is a time, but `dt` needs an energy");
    assert_eq!(e.line, Some(line_containing(MINIMAL, "1 fs")));
}

#[test]
fn missing_file_and_syntax_errors_name_the_file() {
    let missing = data("no_such_config.toml");
    let e: ConfigError = load(&missing, &[]).unwrap_err();
    assert_eq!(e.file, missing);
    assert!(e.to_string().contains("no such file"), "{e}");

    let text = MINIMAL.replace("a = 3.0", "a = = 3.0");
    let e = load_str(&text, Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.line, Some(line_containing(&text, "a = = 3.0")));
    assert!(e.to_string().starts_with(&format!("configs/demo.toml:{}: ", e.line.unwrap())), "{e}");
    assert!(!e.to_string().contains('\n'), "one line: {e}");
    // The same with overrides, which parse the file before applying them.
    let e = load_str(&text, Path::new(DEMO), &["seed=1".into()]).unwrap_err();
    assert_eq!(e.line, Some(line_containing(&text, "a = = 3.0")));

    let e = load_str("title = \"x\"\n", Path::new(DEMO), &[]).unwrap_err();
    assert_eq!(e.message, "missing key `lattice`");
}

/// A system is refused once built when its exact memory estimate (what `check` prints)
/// exceeds the limit, even where the least any run needs per spin would fit; a limit of
/// exactly the estimate lets it through. (Our own behaviour, as the README's section on
/// bad input states it; no outside source.)
#[test]
fn memory_limit_refuses_with_the_exact_estimate() {
    let text = "[lattice]\npreset = \"square\"\na = 3.0\ncells = [8, 8, 1]\n[[species]]\nname = \"A\"\nmoment = 2.0\n[[exchange]]\nshell = 1\nj = 5.0\n[[stage]]\nkind = \"evolve\"\nduration = 0.01\n";
    let loaded = load_str(text, Path::new("memory.toml"), &[]).unwrap();
    let need = validate(&loaded, None).unwrap().memory_estimate_bytes;
    assert!(64 * spindrift_config::system::BYTES_PER_SPIN_LEAST < need - 1);
    let e = validate(&loaded, Some(need - 1)).unwrap_err().to_string();
    assert!(e.contains("lattice.cells") && e.contains("of memory"), "{e}");
    assert!(validate(&loaded, Some(need)).is_ok());
}
