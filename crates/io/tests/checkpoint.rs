//! Checkpoints round-trip bit for bit and are replaced atomically.
//!
//! Bit-for-bit: every real is compared through `f64::to_bits`, so NaN payloads, signed zeros,
//! infinities and subnormals (IEEE 754-2008 binary64 encodings) must survive. Atomic
//! replacement through a rename is POSIX `rename(2)` semantics (common practice).

mod common;

use std::collections::BTreeMap;

use common::*;
use spindrift_engine::{Checkpoint, CurieEstimate, RowCounts, Sink, StageSummary};
use spindrift_io::{read_checkpoint, write_checkpoint, IoError, RunFile};

/// Every value of a checkpoint as text, reals as their bit patterns.
fn canonical(c: &Checkpoint) -> Vec<String> {
    let b = |x: f64| format!("{:016x}", x.to_bits());
    let mut out = vec![format!("stage {}", c.stage)];
    out.extend(c.spins.iter().map(|s| format!("spin {} {} {}", b(s[0]), b(s[1]), b(s[2]))));
    out.extend(c.scalars.iter().map(|(k, v)| format!("scalar {k:?} {}", b(*v))));
    out.extend(c.counters.iter().map(|(k, v)| format!("counter {k:?} {v}")));
    for (k, a) in &c.arrays {
        out.push(format!("array {k:?} {}", a.iter().map(|&x| b(x)).collect::<Vec<_>>().join(" ")));
    }
    out.extend(c.rows.iter().map(|r| format!("rows {} {} {}", r.series, r.points, r.snapshots)));
    for s in &c.finished {
        let f = &s.final_state;
        let t = &f.energy_terms;
        out.push(format!(
            "finished {} {:?} {} {} {} | {} {} {} {} {} | {} {} {} {} {} | {:?} {:?} {:?} | {:?}",
            s.index,
            s.kind,
            s.steps,
            b(s.wall_seconds),
            b(s.spin_steps_per_second),
            b(f.time),
            b(f.magnetization[0]),
            b(f.magnetization[1]),
            b(f.magnetization[2]),
            b(f.energy),
            b(t.exchange),
            b(t.dmi),
            b(t.anisotropy),
            b(t.zeeman),
            b(f.charge),
            s.curie_temperature.as_ref().map(|c| (b(c.value), b(c.error), c.method.clone())),
            s.coercive_field.map(|(d, u)| (b(d), b(u))),
            s.remanence.map(b),
            s.extra.iter().map(|(k, v)| (k.clone(), b(*v))).collect::<Vec<_>>(),
        ));
    }
    out
}

fn tricky_checkpoint() -> Checkpoint {
    let nan_payload = f64::from_bits(0x7ff8_0000_dead_beef);
    let mut scalars = BTreeMap::new();
    scalars.insert("time".to_string(), 0.30000000000000004);
    scalars.insert("dt/adaptive".to_string(), -0.0);
    scalars.insert("τ_int".to_string(), f64::INFINITY);
    scalars.insert("".to_string(), nan_payload);
    scalars.insert("tiny".to_string(), f64::from_bits(1));
    let mut counters = BTreeMap::new();
    counters.insert("step".to_string(), u64::MAX);
    counters.insert("point.index".to_string(), 0);
    let mut arrays = BTreeMap::new();
    arrays.insert("samples".to_string(), vec![1.5, -2.25, f64::NEG_INFINITY, f64::MAX, f64::MIN_POSITIVE]);
    arrays.insert("empty".to_string(), vec![]);
    arrays.insert("energies".to_string(), (0..1000).map(|i| (i as f64).sqrt()).collect());
    let mut finished = vec![summary(0, "relax"), summary(1, "temperature-scan"), summary(2, "field-loop")];
    finished[1].curie_temperature = Some(CurieEstimate {
        value: 412.5,
        error: f64::NAN,
        method: "susceptibility-peak".into(),
        note: "a note kept across the checkpoint".into(),
    });
    finished.push(StageSummary { index: 3, kind: "evolve".into(), ..Default::default() });
    Checkpoint {
        stage: 4,
        spins: spins(3, 1),
        scalars,
        counters,
        arrays,
        rows: vec![
            RowCounts { series: 10, points: 0, snapshots: 1 },
            RowCounts { series: 0, points: 12, snapshots: 0 },
            RowCounts { series: 3, points: 41, snapshots: 2 },
            RowCounts { series: 7, points: 0, snapshots: 0 },
            RowCounts::default(),
        ],
        finished,
    }
}

#[test]
fn checkpoint_round_trips_bit_for_bit() {
    let tmp = TempDir::new("ckpt");
    let c = tricky_checkpoint();
    write_checkpoint(tmp.path(), &c).unwrap();
    let back = read_checkpoint(tmp.path()).unwrap();
    assert_eq!(canonical(&back), canonical(&c));
    // Options that are None stay None, Some stay Some.
    assert!(back.finished[0].curie_temperature.is_none() && back.finished[0].coercive_field.is_none());
    assert_eq!(back.finished[0].extra.len(), 2);
    assert!(back.finished[2].coercive_field.is_some() && back.finished[2].remanence.is_some());
    assert!(back.arrays["empty"].is_empty());
}

#[test]
fn an_empty_checkpoint_round_trips() {
    let tmp = TempDir::new("ckpt-empty");
    let c = Checkpoint::default();
    write_checkpoint(tmp.path(), &c).unwrap();
    assert_eq!(read_checkpoint(tmp.path()).unwrap(), c);
}

#[test]
fn the_hdf5_tools_read_the_checkpoint() {
    let tmp = TempDir::new("ckpt-tools");
    let c = tricky_checkpoint();
    write_checkpoint(tmp.path(), &c).unwrap();
    let file = tmp.path().join("checkpoint.h5");
    assert_eq!(h5dump_str_attr(&file, "/format"), vec!["spindrift-checkpoint"]);
    let listed = h5ls_datasets(&file);
    assert_eq!(listed["/spins"].dims, vec![SITES, 3]);
    assert_eq!(listed["/rows"].dims, vec![5, 3]);
    let rows: Vec<f64> =
        c.rows.iter().flat_map(|r| [r.series, r.points, r.snapshots]).map(|x| x as f64).collect();
    assert_eq!(h5dump_values(&file, "/rows"), rows);
}

#[test]
fn replacement_is_atomic_and_leaves_no_temporary() {
    let tmp = TempDir::new("ckpt-atomic");
    let dir = tmp.path();
    let mut first = tricky_checkpoint();
    first.stage = 1;
    write_checkpoint(dir, &first).unwrap();
    let second = tricky_checkpoint();
    write_checkpoint(dir, &second).unwrap();
    assert_eq!(read_checkpoint(dir).unwrap().stage, 4, "the newer checkpoint replaced the older");
    let names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, vec!["checkpoint.h5".to_string()], "no temporary file left behind");

    // A write that fails (its temporary path is taken by a folder) reports an error naming
    // the file and leaves the previous checkpoint intact.
    std::fs::create_dir(dir.join("checkpoint.h5.tmp")).unwrap();
    let mut third = tricky_checkpoint();
    third.stage = 9;
    let e = write_checkpoint(dir, &third).unwrap_err();
    assert!(e.to_string().contains("checkpoint.h5.tmp"), "{e}");
    assert_eq!(canonical(&read_checkpoint(dir).unwrap()), canonical(&second));
}

#[test]
fn the_sink_checkpoint_flushes_first_and_checks_the_row_counts() {
    let tmp = TempDir::new("ckpt-sink");
    let events = script();
    // Up to and including the second point of stage 1.
    let cut = events
        .iter()
        .enumerate()
        .filter(|(_, e)| matches!(e, Event::Point(1, _)))
        .nth(1)
        .map(|(i, _)| i + 1)
        .unwrap();
    let mut f = RunFile::create(tmp.path()).unwrap();
    f.set_block_rows(1000);
    apply(&mut f, &events[..cut]);
    let c = checkpoint_for(&events, cut);
    assert_eq!(c.rows[1].points, 2);
    f.checkpoint(&c).unwrap();
    // The rows counted by the checkpoint are in the file even though no block was full.
    let r = spindrift_io::RunReader::open(tmp.path()).unwrap();
    assert_eq!(r.shape("/stage_001/points/temperature").unwrap()[0], 2);
    assert_eq!(r.shape("/stage_001/series/time").unwrap()[0] as u64, c.rows[1].series);
    drop(r);
    assert_eq!(canonical(&read_checkpoint(tmp.path()).unwrap()), canonical(&c));

    let mut wrong = c.clone();
    wrong.rows[0].series += 1;
    wrong.stage = 99;
    let e = f.checkpoint(&wrong).unwrap_err();
    assert!(e.message.contains("row counts of stage 0"), "{}", e.message);
    assert_eq!(read_checkpoint(tmp.path()).unwrap().stage, c.stage, "a refused checkpoint replaces nothing");
    f.close().unwrap();
    assert!(matches!(read_checkpoint(&tmp.path().join("missing")), Err(IoError::NotFound { .. })));
}
