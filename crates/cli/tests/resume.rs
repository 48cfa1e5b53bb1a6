//! Stopping and resuming every kind of stage at many points: a run stopped at a safe point
//! and continued from its checkpoint writes bitwise the same rows, snapshots, stage
//! summaries and final spins as a run never stopped (INTERFACE.md: "`--resume DIR` continues to the
//! same result, bit for bit"). Our own behaviour, checked against the run itself.
//!
//! The stop is asked for from the monitor at its `n`-th progress update, so every stop
//! lands at a known place (the CLI tests stop a real process with a signal, at a moment
//! that varies); the engine then stops at its next safe point with a checkpoint, which is
//! what `--resume` reads.

mod common;

use common::system;
use spindrift_engine::{Control, MemorySink, Monitor, Outcome, Runner, Silent, StageSummary};
use std::sync::atomic::{AtomicI32, Ordering};
use std::sync::Arc;

/// Every stage kind: a relaxation cut at `max_steps` and one that converges, the relaxing
/// and the settling field loop, both scan methods and an evolve stage with temperature and
/// field ramps.
/// Small and short; a field loop's relaxation needs several iterations per field so that
/// a stop between fields meets a relaxer part-way through its step-length sequence.
const ALL_KINDS: &str = r#"
seed = 11
[lattice]
preset = "square"
a = 3.0
cells = [12, 10, 1]
periodic = [true, false, false]
[[species]]
name = "A"
moment = 2.0
damping = 0.3
anisotropy = 0.2
axis = [0.2, 0, 1]
[[exchange]]
shell = 1
j = 5.0
[[dmi]]
shell = 1
d = 1.5
[field]
b = [0.3, 0.1, 0.5]
[initial]
state = "random"
[[stage]]
kind = "relax"
max_steps = 40
observe_every = 3
[[stage]]
kind = "relax"
max_steps = 1000
torque_tolerance = 0.05
observe_every = 1
[[stage]]
kind = "field-loop"
direction = [0.1, 0, 1]
max = 4.0
points = 4
relax = true
max_steps = 60
snapshot_every = 3
[[stage]]
kind = "field-loop"
direction = [0, 0, 1]
max = 2.0
points = 3
settle = "20 fs"
dt = "1 fs"
temperature = 20
[[stage]]
kind = "metropolis"
temperature = 40
equilibrate = 20
measure = 30
observe_every = 7
snapshot_every = 14
[[stage]]
kind = "temperature-scan"
temperatures = [30, 90]
equilibrate = 10
measure = 20
observe_every = 4
[[stage]]
kind = "temperature-scan"
method = "llg"
dt = "1 fs"
temperatures = [30, 90]
equilibrate = 10
measure = 20
observe_every = 5
[[stage]]
kind = "evolve"
duration = "40 fs"
dt = "1 fs"
temperature = 30
observe_every = 6
snapshot_every = 12
[[stage]]
kind = "evolve"
duration = "30 fs"
dt = "1 fs"
temperature_ramp = [60, 10]
field_ramp = { from = [0, 0, 1], to = [0.5, 0, -1] }
observe_every = 4
"#;

/// Asks for a stop (as SIGTERM would) at its `at`-th progress update.
struct StopAt {
    at: u64,
    calls: u64,
    flag: Arc<AtomicI32>,
}

impl Monitor for StopAt {
    fn update(&mut self, _done: u64, _time: f64, _m_abs: f64, _charge: f64) {
        self.calls += 1;
        if self.calls == self.at {
            self.flag.store(15, Ordering::Relaxed);
        }
    }
}

/// Counts progress updates.
struct Count(u64);

impl Monitor for Count {
    fn update(&mut self, _done: u64, _time: f64, _m_abs: f64, _charge: f64) {
        self.0 += 1;
    }
}

/// A summary without its wall-clock figures, as text (`Debug` prints each float's
/// shortest round-trip form, so equal text is equal bits, and NaN, as a branch without a
/// coercive field gives, compares equal to itself).
fn without_clock(s: &[StageSummary]) -> Vec<String> {
    s.iter()
        .map(|s| {
            let mut s = s.clone();
            s.wall_seconds = 0.0;
            s.spin_steps_per_second = 0.0;
            format!("{s:?}")
        })
        .collect()
}

fn bits(spins: &[[f64; 3]]) -> Vec<u64> {
    spins.iter().flatten().map(|x| x.to_bits()).collect()
}

#[test]
fn every_stage_kind_resumes_to_the_same_bits() {
    let v = system(ALL_KINDS);
    let mut straight = MemorySink::default();
    let mut count = Count(0);
    let summaries = {
        let mut r =
            Runner::new(v.hamiltonian.clone(), &v.protocol, &mut straight, &mut count, Control::default())
                .expect("runner");
        match r.run(None).expect("run") {
            Outcome::Finished(s) => s,
            other => panic!("straight run did not finish: {other:?}"),
        }
    };
    let updates = count.0;
    assert!(updates > 40, "only {updates} updates");
    let snapshots: usize = straight.snapshots.iter().map(Vec::len).sum();
    assert!(snapshots >= 6, "only {snapshots} snapshots");
    let want_spins = bits(straight.final_spins.as_ref().expect("final spins"));
    let want = without_clock(&summaries);
    let mut stopped_in = std::collections::BTreeSet::new();
    for at in 1..updates {
        let flag = Arc::new(AtomicI32::new(0));
        let mut first = MemorySink::default();
        let mut monitor = StopAt { at, calls: 0, flag: flag.clone() };
        let outcome = {
            let control = Control::new(flag, None, None);
            let mut r = Runner::new(v.hamiltonian.clone(), &v.protocol, &mut first, &mut monitor, control)
                .expect("runner");
            r.run(None).expect("run")
        };
        let Outcome::Stopped { finished, .. } = outcome else {
            // Asked after the last safe point: the run ends normally.
            continue;
        };
        stopped_in.insert(finished.len());
        // Continue into the same sink, as `--resume` reopens the run file: it holds the
        // rows written up to the checkpoint, which is written at the stop itself.
        let checkpoint = first.checkpoint.take().expect("a stop writes a checkpoint");
        let mut silent = Silent;
        let mut r = Runner::resume(
            v.hamiltonian.clone(),
            &v.protocol,
            &mut first,
            &mut silent,
            Control::default(),
            checkpoint,
        )
        .expect("resume");
        let Outcome::Finished(got) = r.run(None).expect("resumed run") else {
            panic!("resumed run (stopped at update {at}) did not finish");
        };
        drop(r);
        let got = without_clock(&got);
        if let Some(k) = (0..want.len()).find(|&k| got.get(k) != want.get(k)) {
            panic!(
                "stopped at update {at}: stage {k}'s summary differs:\n{:?}\nwant\n{}",
                got.get(k),
                want[k]
            );
        }
        assert_eq!(without_clock(&first.summaries), want, "stopped at update {at}: summaries written");
        let spins = bits(first.final_spins.as_ref().expect("final spins"));
        assert!(spins == want_spins, "stopped at update {at}: final spins differ");
        // Every row and snapshot, as written, in order.
        assert_eq!(
            format!("{:?}", first.series),
            format!("{:?}", straight.series),
            "stopped at update {at}: series"
        );
        assert_eq!(
            format!("{:?}", first.points),
            format!("{:?}", straight.points),
            "stopped at update {at}: points"
        );
        assert_eq!(
            format!("{:?}", first.snapshots),
            format!("{:?}", straight.snapshots),
            "stopped at update {at}: snapshots"
        );
    }
    // Stops landed in every stage.
    let stages = v.protocol.stages.len();
    assert_eq!(stopped_in, (0..stages).collect(), "stages in which a stop landed");
}
