//! End-to-end checks of the `spindrift` binary as a user runs it: exit codes, messages,
//! files read back by independent tools, determinism, stop and resume.

mod common;

use common::{bin, repo, spindrift, temp_dir, write_config};
use serde_json::Value;
use spindrift_io::RunReader;
use std::path::Path;
use std::process::{Child, Stdio};
use std::time::{Duration, Instant};

fn stderr(o: &std::process::Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// `check --json` of the config at `path`, which must succeed.
fn check_json(path: &Path) -> Value {
    let o = spindrift(&["check", path.to_str().unwrap(), "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    serde_json::from_slice(&o.stdout).unwrap()
}

/// The mean-field Curie temperature `check --json` printed is `mf` K, to 1e-9 relative.
fn assert_mean_field(v: &Value, mf: f64) {
    assert!((v["curie_mean_field"].as_f64().unwrap() - mf).abs() < 1e-9 * mf, "{}", v["curie_mean_field"]);
}

/// `check --json` prints the keys INTERFACE.md promises, with the values of the
/// definitions (mean field for classical spins `kB T = J0 / 3`, textbook).
#[test]
fn check_json_has_the_interface_keys() {
    let o = spindrift(&["check", "configs/demo.toml", "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: Value = serde_json::from_slice(&o.stdout).expect("json");
    for k in [
        "spins",
        "memory_estimate_bytes",
        "energy_initial",
        "curie_mean_field",
        "curie_rpa",
        "recommended_dt",
    ] {
        assert!(v.get(k).is_some(), "missing {k}");
    }
    for k in ["total", "exchange", "dmi", "anisotropy", "zeeman"] {
        assert!(v["energy_initial"][k].is_number(), "energy_initial.{k}");
    }
    assert_eq!(v["spins"], 4096);
    // The run's disk reserve, as the README gives it: 8 MiB plus 48 bytes per spin.
    assert_eq!(v["disk_reserve_bytes"], 8 * 1024 * 1024 + 48 * 4096);
    // J0 = 6 (6.0 - 0.4) meV over two shells of six neighbours.
    let mf = 6.0 * (6.0 - 0.4) / (3.0 * 8.617333262e-2);
    assert!((v["curie_mean_field"].as_f64().unwrap() - mf).abs() < 1e-9 * mf);
    assert!(v["curie_rpa"].as_f64().unwrap() < mf);
    let text = spindrift(&["check", "configs/demo.toml"]);
    assert!(String::from_utf8_lossy(&text.stdout).contains("mean field"));
    // Extreme values print as numbers one can read (1e300, not 301 digits); a scan is not
    // said to run at the stage temperature it does not use. Our own behaviour.
    let o = spindrift(&["check", "configs/demo.toml", "--set", "stage.1.torque_tolerance=1e300"]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("to torque < 1e300 T"), "{text}");
    let o = spindrift(&["check", "configs/thickness.toml"]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("temperature-scan  ") && !text.contains("temperature-scan  at"), "{text}");
}

/// A bond table in mRy: every pair once, reverse bonds added; the mean-field estimate is
/// the coupling sum over 3 kB (CODATA 2018 Rydberg 13.605693122994 eV).
#[test]
fn bond_table_in_mry_gives_the_expected_couplings() {
    let o = spindrift(&["check", "tests/configs/table.toml", "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    let j0 = (8.0 * 1.2 + 6.0 * 0.3) * 13.605693122994;
    let mf = j0 / (3.0 * 8.617333262e-2);
    let got = v["curie_mean_field"].as_f64().unwrap();
    assert!((got - mf).abs() < 1e-9 * mf, "{got} vs {mf}");
    assert_eq!(v["warnings"].as_array().map(Vec::len), Some(0), "{}", v["warnings"]);
}

/// The same bulk table on a film one cell thick (the two layers of bcc's conventional
/// cell): the rows that cross the open faces are left out with a warning, not refused, so
/// one table serves the bulk and films. Each site keeps 4 of its 8 first and 4 of its 6
/// second neighbours, so the mean-field estimate is the in-plane coupling sum over 3 kB
/// (classical mean field, common practice; both sites alike, so the largest eigenvalue of
/// the coupling matrix is that sum).
#[test]
fn bulk_bond_table_on_a_film_leaves_out_the_cut_rows() {
    for periodic in ["[true,true,false]", "[true,true,true]"] {
        let o = spindrift(&[
            "check",
            "tests/configs/table.toml",
            "--json",
            "--set",
            "lattice.cells=[6,6,1]",
            "--set",
            &format!("lattice.periodic={periodic}"),
        ]);
        assert!(o.status.success(), "{}", stderr(&o));
        let v: Value = serde_json::from_slice(&o.stdout).unwrap();
        let j0 = (4.0 * 1.2 + 4.0 * 0.3) * 13.605693122994;
        let mf = j0 / (3.0 * 8.617333262e-2);
        let got = v["curie_mean_field"].as_f64().unwrap();
        assert!((got - mf).abs() < 1e-9 * mf, "{periodic}: {got} vs {mf}");
        let w = v["warnings"].to_string();
        assert!(w.contains("bond_table.0: 6 of the 14 rows") && w.contains("line 6"), "{periodic}: {w}");
    }
    // An explicit interlayer bond on a monolayer: left out the same way.
    let dir = temp_dir("cut-bond");
    let p = write_config(
        &dir,
        "c.toml",
        "[lattice]\npreset = \"square\"\na = 3.0\ncells = [4, 4, 1]\nperiodic = [true, true, false]\n\
         [[species]]\nname = \"A\"\nmoment = 2.0\n[[exchange]]\nshell = 1\nj = 5.0\n\
         [[bond]]\nfrom = 0\nto = 0\ncell = [0, 0, 1]\nj = 9.0\n",
    );
    let v = check_json(&p);
    let mf = 4.0 * 5.0 / (3.0 * 8.617333262e-2);
    assert_mean_field(&v, mf);
    assert!(v["warnings"].to_string().contains("bond.0: the bond reaches beyond"), "{}", v["warnings"]);
}

/// An initial skyrmion wider than the box is warned about; one that fits is not.
#[test]
fn a_skyrmion_wider_than_the_box_is_warned_about() {
    let dir = temp_dir("wide-skyrmion");
    let text = |r: f64| {
        format!(
            "[lattice]\npreset = \"square\"\na = 3.0\ncells = [16, 12, 1]\n[[species]]\nname = \"A\"\nmoment = 2.0\n\
             [[exchange]]\nshell = 1\nj = 5.0\n[[dmi]]\nshell = 1\nd = 1.0\n[initial]\nstate = \"skyrmion\"\nradius = {r}\n"
        )
    };
    for (r, warned) in [(5.0, false), (500.0, true)] {
        let p = write_config(&dir, "c.toml", &text(r));
        let o = spindrift(&["check", p.to_str().unwrap(), "--json"]);
        assert!(o.status.success(), "{}", stderr(&o));
        let v: Value = serde_json::from_slice(&o.stdout).unwrap();
        let w = v["warnings"].to_string();
        assert_eq!(
            w.contains("initial.radius: a skyrmion of radius 500 Å does not fit in the box (48.0 x 36.0 Å"),
            warned,
            "{w}"
        );
    }
}

/// A key of another initial state (a skyrmion's radius under `state = "uniform"`) is left
/// unused with a warning, so that one config serves both states (`--set` or a sweep over
/// `initial.state`); our own behaviour. The energy printed is that of the state named.
#[test]
fn keys_of_another_initial_state_are_warned_about() {
    let dir = temp_dir("other-state");
    let text = "[lattice]\npreset = \"square\"\na = 3.0\ncells = [16, 16, 1]\n[[species]]\nname = \"A\"\nmoment = 2.0\n\
                [[exchange]]\nshell = 1\nj = 5.0\n[initial]\nstate = \"skyrmion\"\nradius = 6.0\n";
    let p = write_config(&dir, "c.toml", text);
    let energy = |state: &str| {
        let o =
            spindrift(&["check", p.to_str().unwrap(), "--json", "--set", &format!("initial.state={state}")]);
        assert!(o.status.success(), "{state}: {}", stderr(&o));
        let v: Value = serde_json::from_slice(&o.stdout).unwrap();
        (v["energy_initial"]["exchange"].as_f64().unwrap(), v["warnings"].to_string())
    };
    let (skyrmion, w) = energy("skyrmion");
    assert!(!w.contains("not used"), "{w}");
    let (uniform, w) = energy("uniform");
    assert!(
        w.contains("initial.radius: not used by the initial state `uniform` (it takes: direction)"),
        "{w}"
    );
    // The uniform state's exchange energy is -z J / 2 per spin on the periodic square
    // lattice, z = 4 (the Heisenberg energy of the aligned state, textbook).
    assert!((uniform + 4.0 * 5.0 / 2.0).abs() < 1e-9, "{uniform}");
    assert!(skyrmion > uniform + 0.1, "{skyrmion} {uniform}");
    // A centre off the box along an open axis is warned about; along a periodic one it
    // wraps (minimum images), and nothing is said.
    let check = |sets: &[&str]| {
        let mut args = vec!["check", p.to_str().unwrap(), "--json"];
        args.extend(sets.iter().flat_map(|s| ["--set", *s]));
        let o = spindrift(&args);
        assert!(o.status.success(), "{sets:?}: {}", stderr(&o));
        serde_json::from_slice::<Value>(&o.stdout).unwrap()["warnings"].to_string()
    };
    let w = check(&["initial.center=[1.4,0.5]", "lattice.periodic=[false,true,true]"]);
    assert!(w.contains("initial.center: 1.4 along the open a1 lies outside the box"), "{w}");
    let w = check(&["initial.center=[1.4,0.5]"]);
    assert!(!w.contains("initial.center"), "{w}");
}

/// Pairs that a short periodic axis folds onto their own site are left out with a warning
/// (our own behaviour, see `Supercell::self_image`), from a shell and from a bond table
/// alike: the fourth shell of simple cubic (2a, six neighbours) in a box of 2 cells along
/// a3 keeps its four in-plane neighbours, so the mean-field Tc is 4 J / 3 kB (classical
/// mean field, common practice).
#[test]
fn self_images_are_left_out_with_a_warning() {
    let dir = temp_dir("self-image");
    std::fs::write(dir.join("t.dat"), "# from to n1 n2 n3 J\n0 0 1 0 0 2.0\n0 0 0 0 2 3.0\n").unwrap();
    let base = "[lattice]\npreset = \"simple-cubic\"\na = 3.0\ncells = [6, 6, 2]\n[[species]]\nname = \"A\"\nmoment = 2.0\n";
    let p = write_config(&dir, "c.toml", &format!("{base}[[exchange]]\nshell = 4\nj = 5.0\n"));
    let v = check_json(&p);
    let mf = 4.0 * 5.0 / (3.0 * 8.617333262e-2);
    assert_mean_field(&v, mf);
    let w = v["warnings"].to_string();
    assert!(w.contains("exchange.0: 1 pair per cell at 6.0000 Å lands on its own site"), "{w}");
    let p = write_config(&dir, "t.toml", &format!("{base}[[bond_table]]\npath = \"t.dat\"\n"));
    let v = check_json(&p);
    let w = v["warnings"].to_string();
    assert!(
        w.contains("1 of the 2 rows") && w.contains("line 3, lands on its own site at cell offset [0, 0, 2]"),
        "{w}"
    );
    let mf = 2.0 * 2.0 / (3.0 * 8.617333262e-2);
    assert_mean_field(&v, mf);
}

/// A shell given twice adds the two couplings (mean field 4 (5 + 2) / 3 kB on the square
/// lattice: classical mean field, common practice) and says so in a warning; shells of
/// different species pairs do not.
#[test]
fn a_shell_given_twice_adds_with_a_warning() {
    let dir = temp_dir("twice");
    let base = "[lattice]\npreset = \"square\"\na = 3.0\ncells = [4, 4, 1]\n[[species]]\nname = \"A\"\nmoment = 2.0\n\
                [[exchange]]\nshell = 1\nj = 5.0\n";
    let p = write_config(&dir, "c.toml", &format!("{base}[[exchange]]\nshell = 1\nj = 2.0\n"));
    let v = check_json(&p);
    let mf = 4.0 * 7.0 / (3.0 * 8.617333262e-2);
    assert_mean_field(&v, mf);
    let w = v["warnings"].to_string();
    assert!(w.contains("exchange.1: the pairs at 3.0000 Å are also coupled by exchange.0"), "{w}");
    let two = base.replace("moment = 2.0\n", "moment = 2.0\n[[species]]\nname = \"B\"\nmoment = 1.0\n")
        + "[[site]]\nspecies = \"A\"\nposition = [0, 0, 0]\n[[site]]\nspecies = \"B\"\nposition = [0.5, 0.5, 0]\n";
    let p = write_config(
        &dir,
        "d.toml",
        &two.replace(
            "j = 5.0\n",
            "j = 5.0\npair = [\"A\", \"A\"]\n[[exchange]]\nshell = 1\nj = 3.0\npair = [\"B\", \"B\"]\n",
        ),
    );
    let v = check_json(&p);
    assert_eq!(v["warnings"].as_array().map(Vec::len), Some(0), "{}", v["warnings"]);
}

/// Bad input gets exit code 2 and a message naming the key, file or line; never a panic.
#[test]
fn bad_input_is_reported_with_exit_code_2() {
    let dir = temp_dir("bad");
    let good = "[lattice]\npreset = \"square\"\na = 3.0\ncells = [8, 8, 1]\n[[species]]\nname = \"A\"\nmoment = 2.0\n[[exchange]]\nshell = 1\nj = 5.0\n[[stage]]\nkind = \"evolve\"\nduration = 0.01\n";
    let cases: Vec<(String, &str)> = vec![
        (good.replace("kind = \"evolve\"", "kind = \"evolve\"\ntempreature = 3"), "did you mean `temperature`"),
        (good.replace("cells = [8, 8, 1]", "cells = \"big\""), "lattice.cells"),
        (good.replace("cells = [8, 8, 1]", "cells = [-8, 8, 1]"), "lattice.cells"),
        (good.replace("cells = [8, 8, 1]", "cells = [0, 8, 1]"), "lattice.cells"),
        (good.replace("moment = 2.0", "moment = 2.0\n[[site]]\nspecies = \"Q\"\nposition = [0, 0, 0]"), "no species named `Q`"),
        ("[lattice]\nvectors = [[1, 0, 0], [2, 0, 0], [0, 0, 1]]\ncells = [4, 4, 1]\n[[species]]\nname = \"A\"\nmoment = 2.0\n[[site]]\nspecies = \"A\"\nposition = [0, 0, 0]\n".to_string(), "collinear"),
        (good.replace("name = \"A\"\nmoment = 2.0", "name = \"A\"\nmoment = 2.0\n[[site]]\nspecies = \"A\"\nposition = [0, 0, 0]\n[[site]]\nspecies = \"A\"\nposition = [1, 0, 0]"), "overlap"),
        (good.replace("shell = 1", "shell = 40"), "exchange.0"),
        (good.replace("cells = [8, 8, 1]", "cells = [100000, 100000, 1000]"), "memory"),
        (good.replace("duration = 0.01", "duration = \"10 mT\""), "stage.0.duration"),
        (good.replace("duration = 0.01", "duration = 0.01\ndt = \"1 ps\""), "recommended"),
        // An LLG scan of 6 steps sampled every 10 (the default) would have no samples.
        (
            good.replace(
                "kind = \"evolve\"\nduration = 0.01",
                "kind = \"temperature-scan\"\nmethod = \"llg\"\ntemperatures = [10]\nmeasure = 6",
            ),
            "c11.toml:15: stage.0.measure: 6 steps sampled every 10",
        ),
        // Moments in the wrong unit: a recommended time step so small the stage cannot run.
        (good.replace("moment = 2.0", "moment = 2e-300"), "stage.0.duration: 0.01 ps at dt = 1.000e-303 ps is 1.0e301 steps, more than 1e15"),
        // A scan range of 1e298 temperatures: refused as too many (its count wrapped to 0,
        // "needs at least one temperature").
        (
            good.replace(
                "kind = \"evolve\"\nduration = 0.01",
                "kind = \"temperature-scan\"\nfrom = 10\nto = 1e300\nstep = 45",
            ),
            "stage.0.step: 2.222e298 temperatures is too many",
        ),
        // Initial-state vectors the engine would refuse later, without naming the key.
        (good.replace("[[stage]]", "[initial]\nstate = \"helix\"\nwavevector = [0, 0, 0]\n[[stage]]"), "initial.wavevector: must be a finite non-zero wavevector"),
        (
            good.replace("[[stage]]", "[initial]\nstate = \"skyrmion\"\nradius = 5\ncenter = [inf, 0.5]\n[[stage]]"),
            "initial.center: `inf` is not a finite number",
        ),
        // A field loop settling for 1e15 ps at each of its 6 fields: 6e18 steps.
        (
            good.replace(
                "kind = \"evolve\"\nduration = 0.01",
                "kind = \"field-loop\"\ndirection = [0, 0, 1]\nmax = 1.0\npoints = 3\nsettle = 1e15\ndt = \"1 fs\"",
            ),
            "stage.0.settle: 6.0e18 steps at dt = 1.000e-3 ps in all, more than 1e15",
        ),
        // Counts whose products would pass 64 bits.
        (good.replace("duration = 0.01", "duration = 0.01\nobserve_every = 2000000000000000"), "stage.0.observe_every: must be at most 1e15"),
        (
            good.replace(
                "kind = \"evolve\"\nduration = 0.01",
                "kind = \"temperature-scan\"\ntemperatures = [1, 2, 3]\nmeasure = 900000000000000",
            ),
            "3 temperatures of 1000 + 900000000000000 steps are more than 1e15 in all",
        ),
        // A longer array is refused, not cut to its first three elements.
        (good.replace("cells = [8, 8, 1]", "cells = [8, 8, 1, 2]"), "lattice.cells: invalid length 4"),
        // A table's place holding a number: no Rust type name in the message.
        (
            format!("stage = [5]\n{}", good.split("[[stage]]").next().unwrap()),
            "stage.0: invalid type: integer `5`, expected a table",
        ),
        // A number's or a count's place holding text: said in words, not as a Rust type.
        (
            good.replace("moment = 2.0", "moment = 2.0\ndamping = \"big\""),
            "species.0.damping: invalid type: string \"big\", expected a number",
        ),
        (
            good.replace("duration = 0.01", "duration = 0.01\nobserve_every = -3"),
            "stage.0.observe_every: invalid value: integer `-3`, expected a whole number of at least 0",
        ),
        (good.replace("[[stage]]", "[[bond_table]]\npath = \"table.dat\"\n[[stage]]"), "table.dat"),
    ];
    std::fs::write(dir.join("table.dat"), "0 0 1 0 0 1.0\n0 0 0 1 x 1.0\n").unwrap();
    for (k, (text, needle)) in cases.iter().enumerate() {
        let p = write_config(&dir, &format!("c{k}.toml"), text);
        let o = spindrift(&["check", p.to_str().unwrap()]);
        let e = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "case {k}: {e}");
        assert!(e.contains(needle), "case {k}: expected `{needle}` in: {e}");
        assert!(!e.contains("panicked"), "case {k}: {e}");
    }
    // The malformed table line is named with its file and line number.
    let p = dir.join(format!("c{}.toml", cases.len() - 1));
    let e = stderr(&spindrift(&["check", p.to_str().unwrap()]));
    assert!(e.contains("table.dat:2"), "{e}");
    // Flags: a missing file and a bad --set.
    assert_eq!(spindrift(&["check", "no/such.toml"]).status.code(), Some(2));
    let o = spindrift(&["check", "configs/demo.toml", "--set", "lattice.cells.7=3"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    // A number TOML cannot hold is refused as a number, not as a string in a number's place.
    let o = spindrift(&["check", "configs/demo.toml", "--set", "species.0.damping=1e400"]);
    assert!(
        stderr(&o).contains("species.0.damping: --set: `1e400` is not a finite number"),
        "{}",
        stderr(&o)
    );
    assert_eq!(
        spindrift(&["run", "configs/demo.toml", "--threads", "0", "--out", dir.join("x").to_str().unwrap()])
            .status
            .code(),
        Some(2)
    );
}

const FILM: &str = "tests/configs/evolve-small.toml";
const BIG: &str = "lattice.cells=[48,48,3]";

fn run_film(out: &Path, threads: &str, extra: &[&str]) -> std::process::Output {
    let mut args =
        vec!["run", FILM, "--out", out.to_str().unwrap(), "--threads", threads, "--set", BIG, "-q"];
    args.extend_from_slice(extra);
    spindrift(&args)
}

/// Every dataset of two run files, compared bit for bit.
fn assert_same_run(a: &Path, b: &Path) {
    let (ra, rb) = (RunReader::open(a).unwrap(), RunReader::open(b).unwrap());
    let stages = ra.stages().unwrap();
    assert_eq!(stages, rb.stages().unwrap());
    let mut compared = 0;
    for s in &stages {
        for d in ra.datasets(s.index).unwrap() {
            let (sa, va) = ra.read_flat(&d.path).unwrap();
            let (sb, vb) = rb.read_flat(&d.path).unwrap();
            assert_eq!(sa, sb, "{}", d.path);
            let same = va.iter().zip(&vb).all(|(x, y)| x.to_bits() == y.to_bits());
            assert!(same, "{} differs", d.path);
            compared += 1;
        }
    }
    assert!(compared > 10, "only {compared} datasets");
    let (fa, fb) = (ra.final_spins().unwrap().unwrap(), rb.final_spins().unwrap().unwrap());
    assert!(
        fa.iter().flatten().zip(fb.iter().flatten()).all(|(x, y)| x.to_bits() == y.to_bits()),
        "final spins differ"
    );
}

/// The same config and seed give bitwise the same output with 1 and 2 threads (two
/// chunks of sites, so the work is really split).
#[test]
fn results_are_identical_for_any_thread_count() {
    let dir = temp_dir("threads");
    let (a, b) = (dir.join("one"), dir.join("two"));
    assert!(run_film(&a, "1", &[]).status.success());
    assert!(run_film(&b, "2", &[]).status.success());
    assert_same_run(&a, &b);
}

/// The kernels compiled for the baseline x86-64 and for the widest level this CPU has
/// (AVX2 or AVX-512; see `spindrift_isa`) give bitwise the same output: LLG stage and
/// Metropolis stage of the film, every dataset. On a CPU with no wider level the two runs
/// use the same code and the test still checks run-to-run reproducibility.
#[test]
fn results_are_identical_on_every_instruction_set_level() {
    let dir = temp_dir("isa");
    let (a, b) = (dir.join("baseline"), dir.join("best"));
    let args = |out: &Path| {
        vec![
            "run".to_string(),
            FILM.into(),
            "--out".into(),
            out.to_str().unwrap().into(),
            "--threads".into(),
            "2".into(),
            "--set".into(),
            BIG.into(),
            "-q".into(),
        ]
    };
    let o = bin().args(args(&a)).env("SPINDRIFT_ISA", "baseline").output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let o = bin().args(args(&b)).env_remove("SPINDRIFT_ISA").output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert_same_run(&a, &b);
}

/// A system large enough for the fused Heun step (see `spindrift_dynamics::Heun`) gives
/// bitwise the same run on one thread with the baseline kernels as on two threads with
/// the widest kernels: the rows that two tasks share are computed by both with the same
/// bits, and the task split does not change any site's arithmetic.
#[test]
fn large_runs_are_identical_for_any_thread_count_and_instruction_set() {
    let dir = temp_dir("large");
    let (a, b) = (dir.join("one"), dir.join("two"));
    let args = |out: &Path, threads: &str| {
        vec![
            "run".to_string(),
            "tests/configs/evolve-large.toml".into(),
            "--out".into(),
            out.to_str().unwrap().into(),
            "--threads".into(),
            threads.into(),
            "-q".into(),
        ]
    };
    let o = bin().args(args(&a, "1")).env("SPINDRIFT_ISA", "baseline").output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let o = bin().args(args(&b, "2")).env_remove("SPINDRIFT_ISA").output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert_same_run(&a, &b);
}

fn spawn_film(out: &Path, duration: &str) -> Child {
    bin()
        .args([
            "run",
            FILM,
            "--out",
            out.to_str().unwrap(),
            "--threads",
            "2",
            "--set",
            BIG,
            "--set",
            &format!("stage.0.duration=\"{duration}\""),
            "-q",
        ])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn")
}

/// Waits until the run file in `dir` has at least `rows` series rows in stage 0.
fn wait_for_rows(dir: &Path, rows: usize) {
    let start = Instant::now();
    while start.elapsed() < Duration::from_secs(120) {
        if let Ok(r) = RunReader::open(dir) {
            if r.shape("/stage_000/series/step").map(|s| s[0]).unwrap_or(0) >= rows {
                return;
            }
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    panic!("no rows appeared in {}", dir.display());
}

fn signal(child: &Child, sig: &str) {
    // The shell's built-in kill: a bare system may have no kill binary.
    let ok = std::process::Command::new("sh")
        .args(["-c", &format!("kill {sig} {}", child.id())])
        .status()
        .expect("sh")
        .success();
    assert!(ok);
}

/// Stopped by a real SIGTERM part-way, then resumed: the run file equals, bit for bit,
/// that of a run never stopped. Exit codes 143 then 0; the checkpoint goes on success.
#[test]
fn sigterm_then_resume_equals_an_uninterrupted_run() {
    let dir = temp_dir("resume");
    let (straight, stopped) = (dir.join("straight"), dir.join("stopped"));
    let o = run_film(&straight, "2", &["--set", "stage.0.duration=\"30 ps\""]);
    assert!(o.status.success(), "{}", stderr(&o));
    let mut child = spawn_film(&stopped, "30 ps");
    // The run takes seconds; stop it one second after its file appears (not waiting for
    // a flushed row: rows are flushed every 5 s, about as long as the whole run).
    let start = Instant::now();
    while !stopped.join("run.h5").exists() && start.elapsed() < Duration::from_secs(120) {
        std::thread::sleep(Duration::from_millis(20));
    }
    std::thread::sleep(Duration::from_secs(1));
    signal(&child, "-TERM");
    let status = child.wait().unwrap();
    assert_eq!(status.code(), Some(143));
    assert!(stopped.join("checkpoint.h5").exists());
    let o = spindrift(&[
        "run",
        FILM,
        "--resume",
        stopped.to_str().unwrap(),
        "--set",
        BIG,
        "--set",
        "stage.0.duration=\"30 ps\"",
        "-q",
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(!stopped.join("checkpoint.h5").exists());
    assert_same_run(&straight, &stopped);
    // An independent reader agrees: h5diff (The HDF Group's tool) finds no difference in
    // the stages and the final spins.
    for path in ["/stage_000", "/stage_001", "/final"] {
        let out = std::process::Command::new("h5diff")
            .args([
                "-c",
                "-r",
                straight.join("run.h5").to_str().unwrap(),
                stopped.join("run.h5").to_str().unwrap(),
                path,
                path,
            ])
            .output()
            .expect("h5diff (apt-get install hdf5-tools)");
        let text = String::from_utf8_lossy(&out.stdout);
        let differs =
            text.lines().any(|l| l.contains("differences found") && !l.trim_start().starts_with("0 "));
        // Empty datasets (a stage without snapshots) are "not comparable" to h5diff.
        let incomparable =
            text.lines().any(|l| l.starts_with("Not comparable") && !l.contains("empty dataset"));
        assert!(out.status.success() && !differs && !incomparable, "{path}: {text}");
    }
    // Resuming with another config is refused.
    let o = spindrift(&["run", FILM, "--resume", straight.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
}

/// `--max-wall` stops with exit 75 and a checkpoint; the run then resumes to the end.
#[test]
fn max_wall_stops_with_a_checkpoint() {
    let dir = temp_dir("wall").join("run");
    let o = run_film(&dir, "2", &["--set", "stage.0.duration=\"200 ps\"", "--max-wall", "1 s"]);
    assert_eq!(o.status.code(), Some(75), "{}", stderr(&o));
    assert!(dir.join("checkpoint.h5").exists());
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    assert!(summary["stages"].as_array().unwrap().is_empty());
    let o = spindrift(&["inspect", dir.to_str().unwrap()]);
    assert!(o.status.success());
    assert!(String::from_utf8_lossy(&o.stdout).contains("checkpoint is present"));
}

/// A temperature scan of 10-30 K on the 8 x 8 square lattice, J = 5 meV, k = 0.5 meV.
const SQUARE_SCAN: &str =
    "seed = 3\n[lattice]\npreset = \"square\"\na = 3.0\ncells = [8, 8, 1]\n[[species]]\n\
    name = \"M\"\nmoment = 2.0\nanisotropy = 0.5\n[[exchange]]\nshell = 1\nj = 5.0\n[[stage]]\n\
    kind = \"temperature-scan\"\ntemperatures = [10, 20, 30]\nequilibrate = 50\nmeasure = 100\n";

/// A scan whose susceptibility peaks at its last temperature gives no Curie temperature, and
/// its summary says why (a sweep's points run quietly, so the merged table's empty cell
/// needs the reason on record). The 8 x 8 square lattice with J = 5 meV has estimates of
/// 49 K (RPA) and 77 K (mean field), as `check` prints, above a scan of 10-30 K. Our own
/// behaviour.
#[test]
fn a_scan_without_a_peak_says_why() {
    let dir = temp_dir("no-peak");
    let cfg = write_config(&dir, "c.toml", SQUARE_SCAN);
    let out = dir.join("run");
    let o = spindrift(&["run", cfg.to_str().unwrap(), "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let c = &summary["stages"][0]["curie_temperature"];
    assert!(c["value"].is_null() && c["method"] == "none", "{c}");
    assert!(c["note"].as_str().unwrap().contains("largest at the edge of the scan (30 K)"), "{c}");
    assert!(String::from_utf8_lossy(&o.stdout).contains("no Curie temperature from the susceptibility"));
}

/// `check` warns of a scan that ends below half the RPA estimate or starts above the mean-field
/// one (mean field overestimates a ferromagnet's Tc: common practice), and not of one that
/// brackets them. The 8 x 8 square lattice, J = 5 meV, k = 0.5 meV: RPA 48.8 K, mean field
/// 4 J / 3 kB = 77.4 K (classical mean field, textbook).
#[test]
fn scans_that_miss_the_estimates_are_warned_about() {
    let dir = temp_dir("scan-range");
    let cfg = write_config(&dir, "c.toml", SQUARE_SCAN);
    let warnings = |temps: &str| {
        let o = spindrift(&[
            "check",
            cfg.to_str().unwrap(),
            "--json",
            "--set",
            &format!("stage.0.temperatures={temps}"),
        ]);
        assert!(o.status.success(), "{}", stderr(&o));
        let v: Value = serde_json::from_slice(&o.stdout).unwrap();
        assert!((v["curie_mean_field"].as_f64().unwrap() - 20.0 / (3.0 * 8.617333262e-2)).abs() < 1e-6);
        v["warnings"].to_string()
    };
    assert!(warnings("[10,20]").contains("stage.0: the scan ends at 20 K, below half the RPA estimate"));
    assert!(
        warnings("[100,120]").contains("stage.0: the scan starts at 100 K, above the mean-field estimate")
    );
    assert!(!warnings("[20,40,60]").contains("stage.0:"));
}

/// A resume compares what the run computes from, not how it is written: a comment added to
/// the config or to its bond table is no difference (the resumed run equals one never
/// stopped), a changed coupling in the table is refused, naming the table, and a changed
/// config value is refused naming its key. Our own behaviour (INTERFACE.md: `--resume`
/// continues to the same result, bit for bit).
#[test]
fn a_resume_refuses_changed_couplings_but_not_comments() {
    let dir = temp_dir("resume-inputs");
    let table = std::fs::read_to_string(repo().join("tests/configs/bonds.dat")).unwrap();
    let config = std::fs::read_to_string(repo().join("tests/configs/table.toml")).unwrap().replace(
        "cells = [6, 6, 6]",
        "cells = [12, 12, 12]\n[[stage]]\nkind = \"evolve\"\nduration = \"1 ps\"\ntemperature = 50",
    );
    std::fs::write(dir.join("bonds.dat"), &table).unwrap();
    let cfg = write_config(&dir, "c.toml", &config);
    let c = cfg.to_str().unwrap();
    let (straight, stopped) = (dir.join("straight"), dir.join("stopped"));
    let o = spindrift(&["run", c, "--out", straight.to_str().unwrap(), "-q"]);
    assert!(o.status.success(), "{}", stderr(&o));
    // 3.5e7 spin-steps: seconds at the rates of README's table, stopped after 0.2 s.
    let o = spindrift(&["run", c, "--out", stopped.to_str().unwrap(), "-q", "--max-wall", "0.2 s"]);
    assert_eq!(o.status.code(), Some(75), "{}", stderr(&o));
    let o = spindrift(&["inspect", stopped.to_str().unwrap()]);
    assert!(String::from_utf8_lossy(&o.stdout).contains("read bond_table.0: 14 pairs, fnv1a64 "));
    let resume = || spindrift(&["run", c, "--resume", stopped.to_str().unwrap(), "-q"]);
    // A coupling of the table changed: refused.
    std::fs::write(dir.join("bonds.dat"), table.replacen("1.2", "1.3", 1)).unwrap();
    let o = resume();
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("a bond table's couplings changed")
            && stderr(&o).contains("bond_table.0: 14 pairs")
    );
    // A config value changed: refused, naming it.
    write_config(&dir, "c.toml", &config.replace("temperature = 50", "temperature = 60"));
    std::fs::write(dir.join("bonds.dat"), &table).unwrap();
    let o = resume();
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("`stage.0.temperature`: `50` before, `60` now"), "{}", stderr(&o));
    // Comments added to both: resumed, to the run never stopped.
    write_config(&dir, "c.toml", &format!("# resumed on another node\n{config}"));
    std::fs::write(dir.join("bonds.dat"), format!("# checked again\n{table}")).unwrap();
    let o = resume();
    assert!(o.status.success(), "{}", stderr(&o));
    assert_same_run(&straight, &stopped);
}

/// A disk that fills mid-run: exit 4, and the run file opens with the rows written before
/// the failure (a prefix of the run) and the last state, where without the disk reserve the
/// failed flush on closing left a file HDF5 could not open (every row lost). The disk is a
/// 12 MiB tmpfs in a private mount namespace (`unshare`, util-linux; as another user than root
/// through a user namespace, where the system allows them); everything that reads the small disk runs
/// inside it, and the run file is copied out for the checks.
#[test]
fn full_disk_keeps_the_rows_written() {
    let dir = temp_dir("full-disk");
    // `-m` alone for root (no /proc needed for a user mapping), `-rm` for other users.
    let flags = ["-m", "-rm"].into_iter().find(|f| {
        std::process::Command::new("unshare").args([f, "true"]).status().is_ok_and(|s| s.success())
    });
    let Some(flags) = flags else {
        eprintln!("full_disk_keeps_the_rows_written: this machine allows no private mount namespace (unshare); not run");
        return;
    };
    // 8192 spins: 196 KiB per snapshot, uncompressed, 101 snapshots: far more than the disk.
    let cfg = write_config(
        &dir,
        "c.toml",
        "[lattice]\npreset = \"simple-cubic\"\na = 3.0\ncells = [32, 32, 8]\n[[species]]\nname = \"A\"\n\
         moment = 2.0\n[[exchange]]\nshell = 1\nj = 5.0\n[output]\nsnapshot_compression = false\n\
         [[stage]]\nkind = \"evolve\"\nduration = \"2 ps\"\ndt = \"1 fs\"\ntemperature = 100\n\
         observe_every = 5\nsnapshot_every = 20\n",
    );
    let mnt = dir.join("disk");
    std::fs::create_dir_all(&mnt).unwrap();
    let script = format!(
        "mount -t tmpfs -o size=12m none '{m}' || exit 99; '{bin}' run '{c}' --out '{m}/r' -q 2> '{d}/err'; \
         echo $? > '{d}/code'; ls -a '{m}/r' > '{d}/files'; cp '{m}/r/run.h5' '{d}/run.h5'",
        m = mnt.display(),
        bin = env!("CARGO_BIN_EXE_spindrift"),
        c = cfg.display(),
        d = dir.display()
    );
    let o = std::process::Command::new("unshare").args([flags, "sh", "-c", &script]).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let read = |name: &str| std::fs::read_to_string(dir.join(name)).unwrap();
    assert_eq!(read("code").trim(), "4", "{}", read("err"));
    assert!(
        read("err").contains("No space left on device") && read("err").contains("/final"),
        "{}",
        read("err")
    );
    assert!(!read("files").contains(".spindrift-reserve"), "the reserve stays: {}", read("files"));
    let copy = dir.join("copy");
    std::fs::create_dir_all(&copy).unwrap();
    std::fs::rename(dir.join("run.h5"), copy.join("run.h5")).unwrap();
    let r = RunReader::open(&copy).expect("the run file opens after the failure");
    let steps = r.read_1d("/stage_000/series/step").unwrap();
    let snaps = r.shape("/stage_000/snapshots/spins").unwrap()[0];
    // Cut short, with the rows before the cut: steps 0, 5, 10, ... without a gap.
    assert!((10..101).contains(&snaps), "{snaps} snapshots");
    assert!(steps.len() >= 2 * snaps, "{} rows", steps.len());
    assert!(steps.iter().enumerate().all(|(k, &s)| s == 5.0 * k as f64), "{steps:?}");
    let last = r.final_spins().unwrap().expect("the last state in /final");
    assert_eq!(last.len(), 8192);
    assert!(last.iter().all(|s| ((s[0] * s[0] + s[1] * s[1] + s[2] * s[2]).sqrt() - 1.0).abs() < 1e-9));
}

/// A per-file size limit (`ulimit -f`, set here with util-linux's `prlimit`): the run file
/// stops growing at the limit less the room kept for the last state, so the run ends with
/// exit 4 and a file that opens with its rows and `/final`; before, the write past the limit
/// raised SIGXFSZ, which killed the process (exit 153) and left a file HDF5 could not open.
/// A limit below that room is refused at the start, with exit 4, not a kill.
#[test]
fn a_file_size_limit_keeps_the_rows_written() {
    let dir = temp_dir("fsize");
    if !std::process::Command::new("prlimit").arg("--version").output().is_ok_and(|o| o.status.success()) {
        eprintln!(
            "a_file_size_limit_keeps_the_rows_written: no prlimit (util-linux) on this machine; not run"
        );
        return;
    }
    // 4096 spins: 96 KiB per snapshot uncompressed, 201 snapshots (19 MiB), against a 12 MiB
    // limit of which 8.2 MiB are kept for the last state.
    let cfg = write_config(
        &dir,
        "c.toml",
        "[lattice]\npreset = \"square\"\na = 3.0\ncells = [64, 64, 1]\n[[species]]\nname = \"A\"\n\
         moment = 2.0\n[[exchange]]\nshell = 1\nj = 5.0\n[output]\nsnapshot_compression = false\n\
         [[stage]]\nkind = \"evolve\"\nduration = \"1 ps\"\ndt = \"1 fs\"\ntemperature = 100\n\
         observe_every = 5\nsnapshot_every = 5\n",
    );
    let run = |limit: &str, out: &Path| {
        std::process::Command::new("prlimit")
            .args([&format!("--fsize={limit}"), env!("CARGO_BIN_EXE_spindrift"), "run"])
            .args([cfg.to_str().unwrap(), "--out", out.to_str().unwrap(), "-q"])
            .output()
            .unwrap()
    };
    let out = dir.join("run");
    let o = run("12582912", &out);
    assert_eq!(o.status.code(), Some(4), "{}", stderr(&o));
    assert!(stderr(&o).contains("per-file size limit (ulimit -f) of 12582912 bytes"), "{}", stderr(&o));
    let r = RunReader::open(&out).expect("the run file opens after the limit");
    let steps = r.read_1d("/stage_000/series/step").unwrap();
    let snaps = r.shape("/stage_000/snapshots/spins").unwrap()[0];
    assert!((10..201).contains(&snaps), "{snaps} snapshots");
    // Rows at steps 0, 5, 10, ..., at least up to the last snapshot's.
    assert!(steps.len() >= snaps, "{} rows, {snaps} snapshots", steps.len());
    assert!(steps.iter().enumerate().all(|(k, &s)| s == 5.0 * k as f64), "{steps:?}");
    assert_eq!(r.final_spins().unwrap().expect("the last state in /final").len(), 4096);
    assert!(!out.join(".spindrift-reserve").exists());
    let o = run("2097152", &dir.join("small"));
    assert_eq!(o.status.code(), Some(4), "{}", stderr(&o));
    assert!(stderr(&o).contains("leaves no room beyond the 8585216 bytes"), "{}", stderr(&o));
    // Other commands write files too: `plot`'s PNGs past a 1 KiB limit fail with exit 4
    // and a message, where SIGXFSZ ended the process.
    let o = std::process::Command::new("prlimit")
        .args(["--fsize=1024", env!("CARGO_BIN_EXE_spindrift"), "plot", out.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(4), "{}", stderr(&o));
    assert!(stderr(&o).contains("File too large"), "{}", stderr(&o));
}

/// Numerical failures end with exit 3 and the last state in `/final` (INTERFACE.md's exit
/// codes): spins that become non-finite (a damping of 1e300 at the first step), and
/// Monte Carlo averages that overflow (a moment of 1e300 muB in 1 T: energies near 1e299
/// meV, whose squares overflow), which used to end with exit 2 as if the input were unreadable.
#[test]
fn numerical_failures_exit_3_with_the_last_state() {
    let dir = temp_dir("numerical");
    let base = "[lattice]\npreset = \"square\"\na = 3.0\ncells = [8, 8, 1]\n[[species]]\nname = \"A\"\nmoment = 2.0\n\
                [[exchange]]\nshell = 1\nj = 5.0\n[field]\nb = [0, 0, 1]\n";
    let cases = [
        (
            "damping",
            "[[stage]]\nkind = \"evolve\"\nduration = \"10 fs\"\ntemperature = 10\n",
            "species.0.damping=1e300",
            "spin 0 became non-finite at step 0",
        ),
        (
            "moment",
            "[[stage]]\nkind = \"metropolis\"\ntemperature = 100\nequilibrate = 5\nmeasure = 20\n",
            "species.0.moment=1e300",
            "stage 0: at 100 K the averages overflow",
        ),
    ];
    for (name, stage, set, needle) in cases {
        let cfg = write_config(&dir, &format!("{name}.toml"), &format!("{base}{stage}"));
        let out = dir.join(name);
        let o =
            spindrift(&["run", cfg.to_str().unwrap(), "--set", set, "--out", out.to_str().unwrap(), "-q"]);
        assert_eq!(o.status.code(), Some(3), "{name}: {}", stderr(&o));
        assert!(stderr(&o).contains(needle), "{name}: {}", stderr(&o));
        let r = RunReader::open(&out).unwrap();
        assert_eq!(r.final_spins().unwrap().expect("the last state in /final").len(), 64, "{name}");
    }
}

/// A run killed with SIGKILL leaves a readable run file with the rows up to its last flush.
#[test]
fn sigkill_leaves_a_readable_run_file() {
    let dir = temp_dir("kill").join("run");
    // Long enough that rows are flushed (every 5 s) well before it would end.
    let mut child = spawn_film(&dir, "300 ps");
    wait_for_rows(&dir, 1);
    signal(&child, "-KILL");
    let _ = child.wait();
    let r = RunReader::open(&dir).expect("readable after SIGKILL");
    let rows = r.shape("/stage_000/series/step").unwrap()[0];
    assert!(rows >= 1);
    let t = r.read_1d("/stage_000/series/time").unwrap();
    assert_eq!(t.len(), rows);
    assert!(t.windows(2).all(|w| w[1] > w[0]));
    let o = spindrift(&["inspect", dir.to_str().unwrap(), "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
}

/// The run file has INTERFACE.md's layout, read by an independent reader (h5dump, The
/// HDF Group), with a `unit` attribute on the dimensional datasets; summary.json and
/// run.xdmf are written; `plot` draws PNG files.
#[test]
fn run_file_layout_read_by_h5dump() {
    let dir = temp_dir("layout").join("run");
    let o = spindrift(&["run", FILM, "--out", dir.to_str().unwrap(), "-q"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let h5 = dir.join("run.h5");
    let dump = |args: &[&str]| -> String {
        let o = std::process::Command::new("h5dump")
            .args(args)
            .arg(&h5)
            .output()
            .expect("h5dump (apt-get install hdf5-tools)");
        assert!(o.status.success(), "h5dump {args:?}: {}", String::from_utf8_lossy(&o.stderr));
        String::from_utf8_lossy(&o.stdout).into_owned()
    };
    let header = dump(&["-H"]);
    for name in [
        "/lattice/position",
        "/stage_000/series/magnetization_by_layer",
        "/stage_000/snapshots/spins",
        "/stage_001/points/susceptibility_err",
        "/final/spins",
    ] {
        let leaf = name.rsplit('/').next().unwrap();
        assert!(header.contains(&format!("DATASET \"{leaf}\"")), "{name} missing");
    }
    for (path, unit) in [
        ("/stage_000/series/time", "ps"),
        ("/stage_000/series/field", "T"),
        ("/stage_000/series/energy", "meV/spin"),
        ("/stage_000/series/temperature", "K"),
        ("/lattice/position", "angstrom"),
    ] {
        let a = dump(&["-a", &format!("{path}/unit")]);
        assert!(a.contains(&format!("\"{unit}\"")), "{path}: {a}");
    }
    let shape = dump(&["-H", "-d", "/stage_000/snapshots/spins"]);
    assert!(shape.contains("( 4, 1728, 3 )"), "{shape}");
    let root = dump(&["-a", "/format"]);
    assert!(root.contains("spindrift-run"));
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    for k in ["spins", "threads", "wall_seconds", "stages"] {
        assert!(summary.get(k).is_some(), "summary.{k}");
    }
    let st = &summary["stages"][0];
    for k in ["index", "kind", "steps", "spin_steps_per_second", "final"] {
        assert!(st.get(k).is_some(), "stage.{k}");
    }
    for k in ["time", "magnetization", "energy", "energy_terms", "charge"] {
        assert!(st["final"].get(k).is_some(), "final.{k}");
    }
    assert!(dir.join("run.xdmf").exists());
    let o = spindrift(&["plot", dir.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    for f in ["stage_000_series.png", "stage_001_series.png", "final_layer_000.png", "final_layer_002.png"] {
        assert!(dir.join("plots").join(f).exists(), "{f}");
    }
    // A second run into the same folder is refused rather than overwriting it.
    let o = spindrift(&["run", FILM, "--out", dir.to_str().unwrap(), "-q"]);
    assert_eq!(o.status.code(), Some(2));
}

const SWEEP_CONFIG: &str = "[lattice]\npreset = \"square\"\na = 3.0\ncells = [12, 12, 1]\n[[species]]\nname = \"A\"\nmoment = 2.0\nanisotropy = 0.2\n[[exchange]]\nshell = 1\nj = 5.0\n[initial]\nstate = \"random\"\n[[stage]]\nkind = \"evolve\"\nduration = \"2 ps\"\ntemperature = 10\nobserve_every = 200\n";

/// `spindrift sweep CONFIG --out OUT` with the further arguments `rest`.
fn sweep(config: &Path, out: &Path, rest: &[&str]) -> std::process::Output {
    let mut args = vec!["sweep", config.to_str().unwrap(), "--out", out.to_str().unwrap()];
    args.extend_from_slice(rest);
    spindrift(&args)
}

/// A sweep's points start first fit (our own scheduling rule, README "Sweeps on a
/// cluster"): on two threads a point of 135424 sites needs both, so while the first small
/// point runs on one thread the small point after the large one starts on the other, and
/// the large one starts when both are free, on both. In index order the large point would
/// have waited with a thread idle and the last point would have run alone on both.
#[test]
fn sweep_starts_a_small_point_while_a_large_one_waits() {
    let dir = temp_dir("sweep-first-fit");
    let cfg = write_config(&dir, "s.toml", &SWEEP_CONFIG.replace("\"2 ps\"", "\"5 ps\""));
    let out = dir.join("out");
    let o = sweep(&cfg, &out, &["--vary", "lattice.cells=[72,72,1],[368,368,1],[12,12,1]", "--threads", "2"]);
    let e = stderr(&o);
    assert!(o.status.success(), "{e}");
    let line = |k: usize| {
        let at =
            e.find(&format!("point {k} (")).unwrap_or_else(|| panic!("no start line for point {k}: {e}"));
        (at, e[at..].lines().next().unwrap().to_string())
    };
    let (first, second, last) = (line(0), line(2), line(1));
    assert!(first.1.ends_with("[1 of 2 threads]") && second.1.ends_with("[1 of 2 threads]"), "{e}");
    assert!(last.0 > first.0 && last.0 > second.0 && !last.1.contains("threads]"), "{e}");
    for k in 0..3 {
        let status = std::fs::read_to_string(out.join(format!("point_{k:04}/status.json"))).unwrap();
        assert!(status.contains("\"done\""), "point {k}: {status}");
    }
}

/// A sweep of 4 points split into 2 shards run as separate processes gives the same
/// merged table as the unsharded sweep; re-running skips finished points; bad --vary keys
/// are refused before anything runs.
#[test]
fn sweep_shards_merge_to_the_same_table() {
    let dir = temp_dir("sweep");
    let cfg = write_config(&dir, "s.toml", SWEEP_CONFIG);
    let whole = dir.join("whole");
    let sharded = dir.join("sharded");
    let vary = ["--vary", "stage.0.temperature=5,20", "--vary", "field.b=[0,0,0],[0,0,2]"];
    let run = |out: &Path, extra: &[&str]| {
        let o = sweep(&cfg, out, &[&vary[..], extra].concat());
        assert!(o.status.success(), "{}", stderr(&o));
        o
    };
    run(&whole, &[]);
    run(&sharded, &["--shard", "0/2"]);
    run(&sharded, &["--shard", "1/2"]);
    let again = run(&whole, &[]);
    assert_eq!(stderr(&again).matches("done already").count(), 4);
    for d in [&whole, &sharded] {
        let o = spindrift(&["merge", d.to_str().unwrap()]);
        assert!(o.status.success(), "{}", stderr(&o));
    }
    let a = std::fs::read_to_string(whole.join("merged.csv")).unwrap();
    let b = std::fs::read_to_string(sharded.join("merged.csv")).unwrap();
    assert_eq!(a.lines().count(), 5);
    assert_eq!(a, b);
    assert!(!a.contains(",pending,") && !a.contains(",failed,"), "{a}");
    let o = spindrift(&["plot", whole.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(whole.join("plots/sweep.png").exists());
    // `inspect` of the sweep folder itself points to its runs.
    let o = spindrift(&["inspect", whole.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("a sweep folder, not a run"), "{}", stderr(&o));
    // Bad keys and values: exit 2, naming the key, and no point folder made.
    let bad = dir.join("bad");
    let o = sweep(&cfg, &bad, &["--vary", "stage.0.tempreature=1,2"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("tempreature"), "{}", stderr(&o));
    let o = sweep(&cfg, &bad, &["--vary", "stage.0.temperature=5,-3"]);
    assert_eq!(o.status.code(), Some(2));
    // A range's values as written, not as `0.1 + 2 * 0.1` rounds (0.30000000000000004).
    let range = dir.join("range");
    let o = sweep(
        &cfg,
        &range,
        &["--set", "stage.0.duration=\"10 fs\"", "--vary", "stage.0.temperature=0.1:0.7:0.1"],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let manifest = std::fs::read_to_string(range.join("sweep.json")).unwrap();
    let v: Value = serde_json::from_str(&manifest).unwrap();
    assert_eq!(v["vary"][0]["values"], serde_json::json!(["0.1", "0.2", "0.3", "0.4", "0.5", "0.6", "0.7"]));
    let o = sweep(&cfg, &bad, &["--vary", "stage.0.temperature=0:1e300:1"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("values (at most 100000)"), "{}", stderr(&o));
    assert!(!bad.join("point_0000").exists());
    let _ = repo();
}

/// A sweep over `seed` runs each point with the seed it names (our own behaviour: other sweeps
/// derive each point's seed from the config's), so that a point is repeated by `run --set seed=`.
#[test]
fn a_swept_seed_is_the_points_seed() {
    let dir = temp_dir("sweep-seed");
    let cfg = write_config(&dir, "s.toml", SWEEP_CONFIG);
    let c = cfg.to_str().unwrap();
    let out = dir.join("seeds");
    let o = sweep(&cfg, &out, &["--vary", "seed=11,12"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let alone = dir.join("alone");
    let o = spindrift(&["run", c, "--out", alone.to_str().unwrap(), "--set", "seed=12", "-q"]);
    assert!(o.status.success(), "{}", stderr(&o));
    for (k, seed) in [(0, 11), (1, 12)] {
        let o = spindrift(&["inspect", out.join(format!("point_{k:04}")).to_str().unwrap(), "--json"]);
        let v: Value = serde_json::from_slice(&o.stdout).unwrap();
        assert_eq!(v["seed"].as_u64(), Some(seed), "{v}");
    }
    assert_same_run(&out.join("point_0001"), &alone);
}

/// `merge` says why a cell is empty: a failed point's error in its `note` (CSV and JSON), an
/// empty note for a point that finished. Our own behaviour.
#[test]
fn merge_notes_why_a_point_has_no_results() {
    let dir = temp_dir("merge-note");
    let cfg = write_config(&dir, "s.toml", &SWEEP_CONFIG.replace("\"2 ps\"", "\"20 fs\""));
    let out = dir.join("sweep");
    let o = sweep(&cfg, &out, &["--vary", "species.0.damping=0.1,1e300"]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let o = spindrift(&["merge", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let csv = std::fs::read_to_string(out.join("merged.csv")).unwrap();
    let lines: Vec<&str> = csv.lines().collect();
    assert!(lines[0].ends_with(",note") && lines[1].ends_with(",\"\""), "{csv}");
    assert!(lines[2].starts_with("1,failed,") && lines[2].contains("became non-finite at step 0"), "{csv}");
    let merged: Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("merged.json")).unwrap()).unwrap();
    assert!(merged["rows"][1]["note"].as_str().unwrap().contains("became non-finite"), "{merged}");
}

/// A point stopped mid-run is resumed by re-running the sweep; finished points are not
/// re-run, and the result equals an uninterrupted sweep. With two threads the two small
/// points run at once (one thread each), a signal stops both with checkpoints, and the
/// results are those of the sweep run one point at a time on one thread (our own behaviour:
/// a run gives the same bits for any thread count).
#[test]
fn stopped_sweep_point_is_resumed() {
    let dir = temp_dir("sweep-stop");
    let long =
        SWEEP_CONFIG.replace("cells = [12, 12, 1]", "cells = [72, 72, 1]").replace("\"2 ps\"", "\"20 ps\"");
    let cfg = write_config(&dir, "s.toml", &long);
    let c = cfg.to_str().unwrap();
    let args = |out: &Path, threads: &str| -> Vec<String> {
        [
            "sweep",
            c,
            "--out",
            out.to_str().unwrap(),
            "--vary",
            "stage.0.temperature=5,20",
            "--threads",
            threads,
        ]
        .iter()
        .map(|s| s.to_string())
        .collect()
    };
    let straight = dir.join("straight");
    let o = bin().args(args(&straight, "1")).output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(!stderr(&o).contains(" threads]"), "{}", stderr(&o));
    // One thread: point 1 is stopped once point 0 has finished. Two threads: both points
    // run at once and are stopped together.
    for (threads, first) in [("1", "point_0001"), ("2", "point_0000")] {
        let stopped = dir.join(format!("stopped-{threads}"));
        let mut child =
            bin().args(args(&stopped, threads)).stderr(Stdio::piped()).stdout(Stdio::null()).spawn().unwrap();
        let start = Instant::now();
        while !(stopped.join(first).join("run.h5").exists() && stopped.join("point_0001/run.h5").exists())
            && start.elapsed() < Duration::from_secs(120)
        {
            std::thread::sleep(Duration::from_millis(20));
        }
        // Not waiting for a flushed row: rows are flushed every 5 s, longer than the point
        // takes. The point runs for seconds; a stop 0.3 s after its file appears lands inside.
        std::thread::sleep(Duration::from_millis(300));
        signal(&child, "-TERM");
        let status = child.wait().unwrap();
        let mut first_err = String::new();
        std::io::Read::read_to_string(&mut child.stderr.take().unwrap(), &mut first_err).unwrap();
        assert_eq!(status.code(), Some(143), "{first_err}");
        let o = bin().args(args(&stopped, threads)).output().unwrap();
        assert!(o.status.success(), "{}", stderr(&o));
        let e = stderr(&o);
        if threads == "1" {
            assert!(
                e.contains("point 0: done already")
                    && e.contains("point 1 (stage.0.temperature=20): resuming"),
                "{e}"
            );
        } else {
            assert_eq!(first_err.matches("[1 of 2 threads]").count(), 2, "{first_err}");
            assert_eq!(first_err.matches("stopped with a checkpoint").count(), 2, "{first_err}");
            assert_eq!(e.matches("resuming").count(), 2, "{e}");
        }
        for k in 0..2 {
            let p = format!("point_{k:04}");
            assert_same_run(&straight.join(&p), &stopped.join(&p));
        }
    }
}

/// `[output] snapshot_compression = false` stores snapshots without a deflate filter, as
/// h5dump (The HDF Group) reports; the default compresses.
#[test]
fn snapshot_compression_can_be_turned_off() {
    let dir = temp_dir("compression");
    let text = std::fs::read_to_string(repo().join(FILM)).unwrap().replace(
        "[[stage]]\nkind = \"metropolis\"",
        "[output]\nsnapshot_compression = false\n\n[[stage]]\nkind = \"metropolis\"",
    );
    let cfg = write_config(&dir, "c.toml", &text);
    for (name, extra) in [("plain", vec!["--set", "output.snapshot_compression=false"]), ("deflate", vec![])]
    {
        let out = dir.join(name);
        let mut args = vec![
            "run",
            cfg.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "-q",
            "--set",
            "stage.0.duration=\"2 ps\"",
        ];
        args.extend(extra);
        if name == "deflate" {
            args.extend(["--set", "output.snapshot_compression=true"]);
        }
        let o = spindrift(&args);
        assert!(o.status.success(), "{}", stderr(&o));
        let d = std::process::Command::new("h5dump")
            .args(["-p", "-H", "-d", "/stage_000/snapshots/spins"])
            .arg(out.join("run.h5"))
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&d.stdout);
        assert_eq!(text.contains("DEFLATE"), name == "deflate", "{name}: {text}");
    }
}

/// `[initial] state = "file"` starts from the final spins of an earlier run folder (path
/// relative to the config's folder): the second run's first row has the first run's
/// final energy; a run folder of another size is refused with exit 2; a stopped run gives
/// its checkpoint's spins.
#[test]
fn initial_state_from_an_earlier_run() {
    let dir = temp_dir("from-file");
    let first = write_config(&dir, "first.toml", SWEEP_CONFIG);
    let out = dir.join("first");
    let o = spindrift(&["run", first.to_str().unwrap(), "--out", out.to_str().unwrap(), "-q"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let second = SWEEP_CONFIG.replace("state = \"random\"", "state = \"file\"\npath = \"first\"");
    let cfg = write_config(&dir, "second.toml", &second);
    let o = spindrift(&["run", cfg.to_str().unwrap(), "--out", dir.join("second").to_str().unwrap(), "-q"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let a: Value = serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let r = RunReader::open(&dir.join("second")).unwrap();
    let e0 = r.read_1d("/stage_000/series/energy").unwrap()[0];
    let e1 = a["stages"][0]["final"]["energy"].as_f64().unwrap();
    assert!((e0 - e1).abs() < 1e-12 * e1.abs(), "{e0} vs {e1}");
    let o = spindrift(&["check", cfg.to_str().unwrap(), "--set", "lattice.cells=[10,10,1]"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("initial.path"), "{}", stderr(&o));
    // A run stopped before its end (no /final, no snapshot): the checkpoint's spins.
    let stopped = dir.join("stopped");
    let o = spindrift(&[
        "run",
        first.to_str().unwrap(),
        "--out",
        stopped.to_str().unwrap(),
        "-q",
        "--max-wall",
        "0.001 s",
    ]);
    assert_eq!(o.status.code(), Some(75), "{}", stderr(&o));
    let spins = spindrift_io::read_checkpoint(&stopped).unwrap().spins;
    let third = SWEEP_CONFIG.replace("state = \"random\"", "state = \"file\"\npath = \"stopped\"");
    let cfg = write_config(&dir, "third.toml", &third);
    let o = spindrift(&["run", cfg.to_str().unwrap(), "--out", dir.join("third").to_str().unwrap(), "-q"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let m0 =
        RunReader::open(&dir.join("third")).unwrap().read_flat("/stage_000/series/magnetization").unwrap().1;
    let n = spins.len() as f64;
    let mz = spins.iter().map(|s| s[2]).sum::<f64>() / n;
    assert!((m0[2] - mz).abs() < 1e-12, "{} vs {mz}", m0[2]);
}

/// Run files of `format_version` 1, written before the site order changed, hold the
/// per-site arrays of a lattice with several basis sites with the basis innermost
/// (`spindrift_io::layout::SITE_ORDER_VERSION`; our own file format): `[initial] state =
/// "file"` reorders them, so a bcc helix written that way starts the next run with the
/// energy it ended with (taken in the present order unchanged, the two sublattices' spins
/// would be scrambled and the exchange energy would differ), and `--resume` of such a run
/// is refused with exit 2.
#[test]
fn runs_in_the_earlier_site_order_are_reordered_or_refused() {
    let dir = temp_dir("site-order");
    let config = "[lattice]\npreset = \"bcc\"\na = 2.9\ncells = [6, 5, 4]\nperiodic = [true, true, false]\n[[species]]\nname = \"A\"\nmoment = 2.0\nanisotropy = 0.1\n[[exchange]]\nshell = 1\nj = 5.0\n[initial]\nstate = \"helix\"\nwavevector = [0.4, 0.1, 0.2]\n[[stage]]\nkind = \"evolve\"\nduration = \"0.1 ps\"\ntemperature = 0\nobserve_every = 50\n";
    let first = write_config(&dir, "first.toml", config);
    let out = dir.join("first");
    let o = spindrift(&["run", first.to_str().unwrap(), "--out", out.to_str().unwrap(), "-q"]);
    assert!(o.status.success(), "{}", stderr(&o));
    // The run as version 1 wrote it: the final spins with the basis innermost. The present
    // order is `i = ((c3 n2 + c2) nb + b) n1 + c1`, the earlier `((c3 n2 + c2) n1 + c1) nb + b`.
    let spins = RunReader::open(&out).unwrap().final_spins().unwrap().unwrap();
    let (n1, nb) = (6, 2);
    let mut old = vec![[0.0; 3]; spins.len()];
    for (i, s) in spins.iter().enumerate() {
        let (c1, b, row) = (i % n1, (i / n1) % nb, i / (n1 * nb));
        old[(row * n1 + c1) * nb + b] = *s;
    }
    assert_ne!(old, spins, "the two orders differ for this state");
    let rewrite_as_version_1 = |run: &Path, spins: Option<&[[f64; 3]]>| {
        let f = hdf5::File::open_rw(run.join("run.h5")).unwrap();
        f.attr("format_version").unwrap().write_scalar(&1u64).unwrap();
        if let Some(spins) = spins {
            f.dataset("final/spins").unwrap().write_raw(spins.as_flattened()).unwrap();
        }
    };
    rewrite_as_version_1(&out, Some(&old));
    let second = config.replace("state = \"helix\"", "state = \"file\"\npath = \"first\"");
    let cfg = write_config(&dir, "second.toml", &second);
    let o = spindrift(&["run", cfg.to_str().unwrap(), "--out", dir.join("second").to_str().unwrap(), "-q"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let a: Value = serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let e0 = RunReader::open(&dir.join("second")).unwrap().read_1d("/stage_000/series/energy").unwrap()[0];
    let e1 = a["stages"][0]["final"]["energy"].as_f64().unwrap();
    assert!((e0 - e1).abs() < 1e-12 * e1.abs(), "{e0} vs {e1}");
    // A stopped run of version 1 does not resume.
    let stopped = dir.join("stopped");
    let longer = ["--set", "stage.0.duration=\"20 ps\""];
    let mut args = vec!["run", first.to_str().unwrap(), "--out", stopped.to_str().unwrap(), "-q"];
    args.extend(longer);
    let o = spindrift(&[args.as_slice(), &["--max-wall", "0.001 s"]].concat());
    assert_eq!(o.status.code(), Some(75), "{}", stderr(&o));
    rewrite_as_version_1(&stopped, None);
    let mut args = vec!["run", first.to_str().unwrap(), "--resume", stopped.to_str().unwrap(), "-q"];
    args.extend(longer);
    let o = spindrift(&args);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("format_version 1"), "{}", stderr(&o));
}

/// A run folder that cannot be written is an output failure, exit 4 (INTERFACE.md).
#[test]
fn unwritable_output_is_exit_4() {
    let dir = temp_dir("unwritable");
    let blocker = dir.join("file");
    std::fs::write(&blocker, "not a folder").unwrap();
    let out = blocker.join("run");
    let o = spindrift(&["run", FILM, "--out", out.to_str().unwrap(), "-q"]);
    assert_eq!(o.status.code(), Some(4), "{}", stderr(&o));
    assert!(stderr(&o).contains("cannot create"), "{}", stderr(&o));
}
