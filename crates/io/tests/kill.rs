//! A writer killed with SIGKILL (no destructor, no close) leaves a run file that opens, with
//! every row up to its last flush; and the run resumes from it to the same result as a
//! straight run.
//!
//! The test binary re-executes itself as the writer (`SPINDRIFT_IO_KILL_CHILD` set), which
//! writes past its last flush and then waits to be killed by `Child::kill` (SIGKILL on Unix).
//! The survivors are checked with `h5ls`/`h5diff` from The HDF Group's hdf5-tools and with
//! the crate's reader.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::*;
use spindrift_engine::Sink;
use spindrift_io::{RunFile, RunReader};

const CHILD_ENV: &str = "SPINDRIFT_IO_KILL_CHILD";
const TEST_NAME: &str = "sigkill_leaves_a_readable_file_with_every_flushed_row";

/// Index of the event after which the child flushes for the last time: after the fifth
/// series row of stage 1 (stage 0 complete, points and a snapshot in stage 1).
fn flush_point(events: &[Event]) -> usize {
    events
        .iter()
        .enumerate()
        .filter(|(_, e)| matches!(e, Event::Series(1, _)))
        .nth(4)
        .map(|(i, _)| i + 1)
        .unwrap()
}

fn child(dir: &Path) -> ! {
    let events = script();
    let cut = flush_point(&events);
    let mut f = RunFile::create(dir).expect("child: create");
    // Small blocks, so that rows after the last flush do reach HDF5 before the kill.
    f.set_block_rows(2);
    apply(&mut f, &events[..cut]);
    f.flush().expect("child: flush");
    // Work after the last flush: rows and block writes of the next stage, a snapshot.
    apply(
        &mut f,
        &events[cut..events.len() - 3]
            .iter()
            .filter(|e| !matches!(e, Event::Flush))
            .cloned()
            .collect::<Vec<_>>(),
    );
    std::fs::write(dir.join("ready"), b"ready").expect("child: marker");
    // Wait to be killed; leave by itself only if the parent is gone.
    std::thread::sleep(Duration::from_secs(120));
    std::process::exit(3);
}

#[test]
fn sigkill_leaves_a_readable_file_with_every_flushed_row() {
    if let Some(dir) = std::env::var_os(CHILD_ENV) {
        child(&PathBuf::from(dir));
    }
    let tmp = TempDir::new("kill");
    let dir = tmp.path();
    let mut proc = Command::new(std::env::current_exe().unwrap())
        .args([TEST_NAME, "--exact", "--test-threads=1"])
        .env(CHILD_ENV, dir)
        .stdout(Stdio::null())
        .stderr(Stdio::inherit())
        .spawn()
        .expect("re-executing the test binary");
    let start = Instant::now();
    while !dir.join("ready").exists() {
        if let Ok(Some(status)) = proc.try_wait() {
            panic!("the writer exited early with {status}");
        }
        assert!(start.elapsed() < Duration::from_secs(60), "the writer never got ready");
        std::thread::sleep(Duration::from_millis(20));
    }
    // While the writer lives, another process can read the file (no HDF5 file locks), and
    // sees at least the flushed rows.
    let live = h5ls_datasets(&dir.join("run.h5"));
    assert!(live["/stage_001/series/time"].dims[0] >= 5, "h5ls reads the live file");
    let live_rows = RunReader::open(dir).unwrap().shape("/stage_000/series/time").unwrap()[0];
    assert_eq!(live_rows, 7, "the reader opens the live file");
    proc.kill().expect("SIGKILL");
    let status = proc.wait().unwrap();
    {
        use std::os::unix::process::ExitStatusExt;
        assert_eq!(status.signal(), Some(9), "the writer died of SIGKILL");
    }

    let events = script();
    let cut = flush_point(&events);
    let flushed = counts(&events, cut);
    assert_eq!(flushed.len(), 2);

    // An independent reader opens the file and sees at least the flushed rows.
    let listed = h5ls_datasets(&dir.join("run.h5"));
    for (stage, c) in flushed.iter().enumerate() {
        let g = format!("/stage_{stage:03}");
        let rows = listed[&format!("{g}/series/time")].dims[0] as u64;
        assert!(rows >= c.series, "{g}: {rows} series rows, flushed {}", c.series);
        let snaps = listed[&format!("{g}/snapshots/spins")].dims[0] as u64;
        assert!(snaps >= c.snapshots, "{g}: {snaps} snapshots, flushed {}", c.snapshots);
        eprintln!("{g}: {rows} series rows after the kill, {} flushed", c.series);
    }
    assert!(listed["/stage_001/points/temperature"].dims[0] as u64 >= flushed[1].points);

    // The flushed values are intact.
    let r = RunReader::open(dir).unwrap();
    let time = r.read_1d("/stage_001/series/time").unwrap();
    let expect: Vec<f64> = (0..flushed[1].series as usize).map(|i| series_row(1, i).time).collect();
    assert_eq!(&time[..expect.len()], &expect[..]);
    let m = r.read_2d("/stage_000/series/magnetization").unwrap();
    assert_eq!(m.len(), 7);
    assert_eq!(m[6], series_row(0, 6).magnetization.to_vec());
    let snap = r.snapshot(1, 0).unwrap();
    assert_eq!(snap.spins, spins(1, 0));
    let pts = r.read_1d("/stage_001/points/susceptibility").unwrap();
    assert_eq!(pts[0], point_row(1, 0).susceptibility);
    drop(r);

    // Resuming from the flushed state ends where a straight run ends.
    let mut f = RunFile::reopen(dir, &flushed).unwrap();
    apply(&mut f, &events[cut..]);
    f.close().unwrap();
    let reference = TempDir::new("kill-ref");
    let mut g = RunFile::create(reference.path()).unwrap();
    apply(&mut g, &events);
    g.close().unwrap();
    let out = Command::new(tool("h5diff"))
        .arg("-c")
        .args([reference.path().join("run.h5"), dir.join("run.h5")])
        .output()
        .unwrap();
    let report = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(out.status.success() && !report.to_lowercase().contains("not comparable"), "h5diff: {report}");
}
