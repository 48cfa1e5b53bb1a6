//! Resuming: a run stopped after a checkpoint and continued with `RunFile::reopen` must end
//! with the same datasets, shapes and values as a run that was never stopped.
//!
//! Two independent comparisons: `h5diff` (The HDF Group's hdf5-tools), which exits 0 only
//! when every dataset and attribute of the two files matches, and the crate's own reader
//! comparing every dataset bit for bit.

mod common;

use std::path::Path;
use std::process::Command;

use common::*;
use spindrift_engine::Sink;
use spindrift_io::{read_checkpoint, RunFile, RunReader};

fn straight(dir: &Path) {
    let mut f = RunFile::create(dir).unwrap();
    f.set_block_rows(2);
    apply(&mut f, &script());
    f.close().unwrap();
}

/// Runs the script up to `cut`, checkpoints, runs `lost` more events (work the checkpoint
/// does not cover), stops, then resumes from the checkpoint. With `resend`, the resumed
/// engine sends the header and the current stage's `begin_stage` again.
fn interrupted(dir: &Path, cut: usize, lost: usize, resend: bool) {
    let events = script();
    {
        let mut f = RunFile::create(dir).unwrap();
        f.set_block_rows(3);
        apply(&mut f, &events[..cut]);
        f.checkpoint(&checkpoint_for(&events, cut)).unwrap();
        apply(&mut f, &events[cut..(cut + lost).min(events.len())]);
        f.close().unwrap();
    }
    let c = read_checkpoint(dir).unwrap();
    let mut f = RunFile::reopen(dir, &c.rows).unwrap();
    f.set_block_rows(5);
    if resend {
        apply(&mut f, &events[..1]);
        let begun =
            events[..cut]
                .iter()
                .rev()
                .find_map(|e| if let Event::Begin(i) = e { Some(i.clone()) } else { None });
        if let Some(info) = begun {
            f.begin_stage(&info).unwrap();
        }
    }
    apply(&mut f, &events[cut..]);
    f.close().unwrap();
}

/// Whether `h5diff -c` finds the two run files equal, with its report. h5diff exits 0 even
/// when datasets differ in shape ("not comparable"), so that report counts as a difference.
fn h5diff_same(a: &Path, b: &Path) -> (bool, String) {
    let out = Command::new(tool("h5diff"))
        .arg("-c")
        .args([a.join("run.h5"), b.join("run.h5")])
        .output()
        .expect("running h5diff");
    let report = format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
    (out.status.success() && !report.to_lowercase().contains("not comparable"), report)
}

fn h5diff_equal(a: &Path, b: &Path) {
    let (same, report) = h5diff_same(a, b);
    assert!(same, "h5diff finds differences:\n{report}");
}

fn reader_equal(a: &Path, b: &Path) {
    let ra = RunReader::open(a).unwrap();
    let rb = RunReader::open(b).unwrap();
    let da = ra.datasets_under("/").unwrap();
    let db = rb.datasets_under("/").unwrap();
    assert_eq!(da, db, "dataset paths, shapes and units");
    for d in &da {
        let (sa, va) = ra.read_flat(&d.path).unwrap();
        let (sb, vb) = rb.read_flat(&d.path).unwrap();
        assert_eq!(sa, sb, "{}", d.path);
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&va), bits(&vb), "{}: values", d.path);
    }
    assert_eq!(ra.attributes().unwrap(), rb.attributes().unwrap());
    assert_eq!(ra.stages().unwrap(), rb.stages().unwrap());
}

/// Index just after the `n`-th event (from 0) matching `pred`.
fn after(events: &[Event], n: usize, pred: impl Fn(&Event) -> bool) -> usize {
    events.iter().enumerate().filter(|(_, e)| pred(e)).nth(n).map(|(i, _)| i + 1).expect("event in script")
}

#[test]
fn resumed_runs_equal_the_straight_run() {
    let reference = TempDir::new("resume-ref");
    straight(reference.path());
    let events = script();
    let cuts = [
        // In stage 0 after its fourth row: rows, snapshots and a flush are lost.
        ("mid stage 0", after(&events, 3, |e| matches!(e, Event::Series(0, _))), 9),
        // In stage 1 after its second point: points/ exists and is cut back.
        ("mid stage 1", after(&events, 1, |e| matches!(e, Event::Point(1, _))), 6),
        // Right after stage 1 began: its points/ written later must disappear.
        ("stage 1 begun", after(&events, 0, |e| matches!(e, Event::Begin(i) if i.index == 1)), 8),
        // After stage 1 ended: stage 2 and /final, written later, must disappear.
        ("stage 1 ended", after(&events, 0, |e| matches!(e, Event::End(s) if s.index == 1)), 100),
    ];
    for (name, cut, lost) in cuts {
        for resend in [false, true] {
            let tmp = TempDir::new("resume");
            interrupted(tmp.path(), cut, lost, resend);
            eprintln!("checking {name} (resend = {resend})");
            h5diff_equal(reference.path(), tmp.path());
            reader_equal(reference.path(), tmp.path());
        }
    }
}

#[test]
fn h5diff_does_see_a_difference() {
    // Guards the comparison above: a run missing one row must not compare equal.
    let a = TempDir::new("diff-a");
    let b = TempDir::new("diff-b");
    straight(a.path());
    let mut events = script();
    let i = events.iter().position(|e| matches!(e, Event::Series(2, _))).unwrap();
    events.remove(i);
    let mut f = RunFile::create(b.path()).unwrap();
    apply(&mut f, &events);
    f.close().unwrap();
    let (same, _) = h5diff_same(a.path(), b.path());
    assert!(!same, "h5diff must report the missing row");
    // And a single changed value.
    let mut events = script();
    if let Some(Event::Series(_, row)) = events.iter_mut().find(|e| matches!(e, Event::Series(1, _))) {
        row.charge += 1e-9;
    }
    let c = TempDir::new("diff-c");
    let mut f = RunFile::create(c.path()).unwrap();
    apply(&mut f, &events);
    f.close().unwrap();
    let (same, report) = h5diff_same(a.path(), c.path());
    assert!(!same, "h5diff must report the changed value: {report}");
}

#[test]
fn reopen_refuses_a_run_file_older_than_the_checkpoint() {
    let tmp = TempDir::new("resume-old");
    let events = script();
    let cut = after(&events, 2, |e| matches!(e, Event::Series(0, _)));
    let mut f = RunFile::create(tmp.path()).unwrap();
    apply(&mut f, &events[..cut]);
    f.close().unwrap();
    let mut rows = checkpoint_for(&events, cut).rows;
    rows[0].series += 5;
    let e = RunFile::reopen(tmp.path(), &rows).unwrap_err();
    assert!(e.to_string().contains("older than the checkpoint"), "{e}");
    let mut rows = checkpoint_for(&events, cut).rows;
    rows.push(spindrift_engine::RowCounts { series: 1, points: 0, snapshots: 0 });
    let e = RunFile::reopen(tmp.path(), &rows).unwrap_err();
    assert!(e.to_string().contains("stage_001"), "{e}");
}
