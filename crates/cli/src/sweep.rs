//! `spindrift sweep` and `spindrift merge`: families of runs over swept config values.
//!
//! A sweep is the Cartesian product of the `--vary` values; point `k` runs in
//! `DIR/point_kkkk/` with the config's seed replaced by one derived from the base seed
//! and `k`, so a point's result does not depend on which machine or shard ran it. A sweep
//! that varies `seed` itself runs each point with its swept seed instead.
//! `DIR/sweep.json` lists the points and their values (every shard writes the same
//! content, atomically); each point's own `status.json` says whether it finished, so
//! shards on a shared filesystem never write the same file. Re-running a sweep skips
//! finished points and resumes points that stopped with a checkpoint. Points of small
//! systems run side by side, each on a share of the threads ([`point_threads`]); a point's
//! result does not depend on that.

use crate::args::{MergeArgs, RunArgs, SweepArgs};
use crate::exit::{self, bad_input, output, Failure, Outcome, OK};
use crate::point_threads;
use crate::run::default_out;
use crate::signals;
use crate::system::{available_memory, set_threads};
use anyhow::anyhow;
use point_threads::Budget;
use serde_json::{json, Value};
use spindrift_config::{load, range_values, validate};
use spindrift_engine::seeds::point_seed;
use spindrift_io::{read_summary, RunReader};
use spindrift_observe::{binder_crossing, BinderCurve, ScanPoint};
use spindrift_plot::{panels_png, Curve, Panel};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicI32, Ordering};
use std::sync::{Arc, Condvar, Mutex};

/// One swept key and its values, as TOML value texts.
#[derive(Debug, Clone, PartialEq)]
struct Vary {
    key: String,
    values: Vec<String>,
}

/// Splits `a,b,[1,2],c` at the commas outside brackets and quotes.
fn split_top(s: &str) -> Vec<String> {
    let mut out = Vec::new();
    let (mut depth, mut quoted, mut cur) = (0i32, false, String::new());
    for ch in s.chars() {
        match ch {
            '"' => quoted = !quoted,
            '[' | '{' if !quoted => depth += 1,
            ']' | '}' if !quoted => depth -= 1,
            ',' if depth == 0 && !quoted => {
                out.push(std::mem::take(&mut cur).trim().to_string());
                continue;
            }
            _ => {}
        }
        cur.push(ch);
    }
    out.push(cur.trim().to_string());
    out
}

/// A value of a `from:to:step` range as TOML text, rounded to 12 significant digits so that
/// the rounding of `from + k step` does not show (`0.3`, not `0.30000000000000004`); Rust's
/// `Debug` form, which is valid TOML (`0.3`, `1e-7`).
fn range_value(x: f64) -> String {
    let rounded: f64 = format!("{x:.11e}").parse().unwrap_or(x);
    format!("{rounded:?}")
}

fn parse_vary(spec: &str) -> Result<Vary, Failure> {
    let (key, values) =
        spec.split_once('=').ok_or_else(|| bad_input(anyhow!("--vary {spec}: expected KEY=V1,V2,...")))?;
    let key = key.trim().to_string();
    if key.is_empty() {
        return Err(bad_input(anyhow!("--vary {spec}: the key is empty")));
    }
    let mut out = Vec::new();
    for v in split_top(values) {
        if v.is_empty() {
            return Err(bad_input(anyhow!("--vary {key}: an empty value in `{values}`")));
        }
        let parts: Vec<&str> = v.split(':').collect();
        if parts.len() == 3 && !v.contains('[') && !v.contains('"') {
            let num = |p: &str| {
                p.trim().parse::<f64>().map_err(|_| {
                    bad_input(anyhow!("--vary {key}: `{v}` is not a range from:to:step of numbers"))
                })
            };
            let (a, b, st) = (num(parts[0])?, num(parts[1])?, num(parts[2])?);
            if !(st > 0.0 && st.is_finite()) {
                return Err(bad_input(anyhow!("--vary {key}: the step of `{v}` must be positive")));
            }
            let xs = range_values(a, b, st, 100_000).map_err(|n| {
                bad_input(anyhow!("--vary {key}: `{v}` gives {n:.3e} values (at most 100000)"))
            })?;
            let integral =
                [parts[0], parts[1], parts[2]].iter().all(|p| !p.contains('.') && !p.contains('e'));
            for x in xs {
                out.push(if integral { format!("{}", x.round() as i64) } else { range_value(x) });
            }
        } else {
            out.push(v);
        }
    }
    Ok(Vary { key, values: out })
}

/// Every combination, first `--vary` slowest.
fn product(varies: &[Vary]) -> Vec<Vec<String>> {
    let mut points = vec![Vec::new()];
    for v in varies {
        points = points
            .into_iter()
            .flat_map(|p| {
                v.values.iter().map(move |x| {
                    let mut q = p.clone();
                    q.push(x.clone());
                    q
                })
            })
            .collect();
    }
    points
}

fn parse_shard(s: &str) -> Result<(usize, usize), Failure> {
    let bad = || bad_input(anyhow!("--shard {s}: expected I/N with 0 <= I < N"));
    let (i, n) = s.split_once('/').ok_or_else(bad)?;
    let (i, n): (usize, usize) = (i.trim().parse().map_err(|_| bad())?, n.trim().parse().map_err(|_| bad())?);
    if n == 0 || i >= n {
        return Err(bad());
    }
    Ok((i, n))
}

fn write_atomic(path: &Path, text: &str) -> Result<(), Failure> {
    let tmp = path.with_extension(format!("tmp.{}", std::process::id()));
    std::fs::write(&tmp, text).map_err(|e| output(anyhow!("cannot write {}: {e}", tmp.display())))?;
    std::fs::rename(&tmp, path).map_err(|e| output(anyhow!("cannot write {}: {e}", path.display())))
}

fn point_dir(dir: &Path, k: usize) -> PathBuf {
    dir.join(format!("point_{k:04}"))
}

pub fn sweep(args: &SweepArgs) -> Outcome {
    // Once for the whole sweep, before the points are built (see `run_until`).
    let stop = signals::install().map_err(|e| output(anyhow!("cannot install signal handlers: {e}")))?;
    let varies = args.vary.iter().map(|s| parse_vary(s)).collect::<Result<Vec<_>, _>>()?;
    for (k, v) in varies.iter().enumerate() {
        if varies[..k].iter().any(|w| w.key == v.key) {
            return Err(bad_input(anyhow!("--vary {}: the key is swept twice", v.key)));
        }
    }
    let shard = args.shard.as_deref().map(parse_shard).transpose()?;
    let started = std::time::Instant::now();
    let max_wall = args
        .max_wall
        .as_deref()
        .map(spindrift_config::parse_wall_duration)
        .transpose()
        .map_err(|e| bad_input(anyhow!("--max-wall: {}", e.message_for("--max-wall"))))?;
    let dir = args.out.clone().unwrap_or_else(|| default_out(&args.config, "-sweep"));
    let base = load(&args.config, &args.set).map_err(bad_input)?;
    let base_seed = base.raw.seed.unwrap_or(0);
    let points = product(&varies);
    // Every point is validated before any runs, so a bad value stops the sweep at once.
    let mut sets_of = Vec::new();
    // Each point's sites and memory estimate, bytes: how many can run at once.
    let mut sizes = Vec::new();
    for (k, values) in points.iter().enumerate() {
        let mut sets = args.set.clone();
        for (v, x) in varies.iter().zip(values) {
            sets.push(format!("{}={x}", v.key));
        }
        // A swept seed is the user's choice for that point (repeats of a run with the seeds
        // they name); replacing it by the derived one would make the swept values mean nothing.
        if !varies.iter().any(|v| v.key == "seed") {
            sets.push(format!("seed={}", point_seed(base_seed, k)));
        }
        let loaded = load(&args.config, &sets)
            .map_err(|e| bad_input(anyhow!("point {k} ({}): {e}", describe(&varies, values))))?;
        let v = validate(&loaded, available_memory())
            .map_err(|e| bad_input(anyhow!("point {k} ({}): {e}", describe(&varies, values))))?;
        sizes.push((v.hamiltonian.len(), v.memory_estimate_bytes));
        sets_of.push(sets);
    }
    std::fs::create_dir_all(&dir).map_err(|e| output(anyhow!("cannot create {}: {e}", dir.display())))?;
    let manifest = json!({
        "config": args.config.display().to_string(),
        "base_seed": base_seed,
        "set": args.set,
        "vary": varies.iter().map(|v| json!({"key": v.key, "values": v.values})).collect::<Vec<_>>(),
        "points": points.iter().enumerate().map(|(k, values)| json!({
            "index": k,
            "dir": format!("point_{k:04}"),
            "values": varies.iter().zip(values).map(|(v, x)| (v.key.clone(), Value::String(x.clone()))).collect::<serde_json::Map<_, _>>(),
        })).collect::<Vec<_>>(),
    });
    write_atomic(&dir.join("sweep.json"), &serde_json::to_string_pretty(&manifest).map_err(output)?)?;
    let threads = set_threads(args.threads)?;
    // The points this invocation runs: its shard's, less those finished before.
    let mut queue = Vec::new();
    for (k, sets) in sets_of.into_iter().enumerate() {
        if shard.is_some_and(|(i, n)| k % n != i) {
            continue;
        }
        let status = std::fs::read_to_string(point_dir(&dir, k).join("status.json"))
            .ok()
            .and_then(|t| serde_json::from_str::<Value>(&t).ok());
        if status.as_ref().and_then(|s| s["status"].as_str()) == Some("done") {
            eprintln!("point {k}: done already, skipped");
            continue;
        }
        queue.push((k, sets));
    }
    let sweep =
        Points { config: &args.config, dir: &dir, varies: &varies, points: &points, max_wall, started, stop };
    let budget = Mutex::new(Budget { threads, memory: available_memory().unwrap_or(u64::MAX), running: 0 });
    let freed = Condvar::new();
    let halt = AtomicBool::new(false);
    // Each point starts once the threads it needs (and its memory) are free, the first in
    // index order that fits (`point_threads::next_to_start`); each runs on a thread of its
    // own with a pool of its share of the threads.
    let mut pending: Vec<usize> = (0..queue.len()).collect();
    let mut needs: Vec<(usize, u64)> =
        queue.iter().map(|(k, _)| (point_threads::demand(threads, sizes[*k].0), sizes[*k].1)).collect();
    let ends: Vec<Result<PointEnd, Failure>> = std::thread::scope(|scope| {
        let mut running = Vec::new();
        while !pending.is_empty() {
            let mut b = budget.lock().unwrap_or_else(|e| e.into_inner());
            let mut pick = None;
            while !halt.load(Ordering::Relaxed) {
                pick = point_threads::next_to_start(&needs, &b);
                if pick.is_some() {
                    break;
                }
                b = freed.wait(b).unwrap_or_else(|e| e.into_inner());
            }
            let Some(p) = pick.filter(|_| !halt.load(Ordering::Relaxed)) else {
                break;
            };
            let (at, (need, bytes)) = (pending.remove(p), needs.remove(p));
            let (k, sets) = &queue[at];
            let give = point_threads::share(need, b.threads, pending.len() + 1);
            // A point let in alone beyond the memory left takes what there is.
            let taken = bytes.min(b.memory);
            b.threads -= give;
            b.memory -= taken;
            b.running += 1;
            drop(b);
            let (sweep, budget, freed, halt) = (&sweep, &budget, &freed, &halt);
            running.push(scope.spawn(move || {
                // Returns the point's threads and memory however it ends (a panic included,
                // so that the loop above never waits for them in vain).
                let _release = Release { budget, freed, threads: give, memory: taken };
                let end = sweep.point(*k, sets, give, threads);
                if !matches!(end, Ok(PointEnd::Done | PointEnd::Failed)) {
                    halt.store(true, Ordering::Relaxed);
                }
                end
            }));
        }
        running.into_iter().map(|w| w.join().unwrap_or_else(|p| std::panic::resume_unwind(p))).collect()
    });
    let (mut failed, mut stopped) = (0, None);
    for end in ends {
        match end? {
            PointEnd::Done => {}
            PointEnd::Failed => failed += 1,
            PointEnd::Stopped(code) => stopped = stopped.or(Some(code)),
        }
    }
    if let Some(code) = stopped {
        return Ok(code);
    }
    if failed > 0 {
        return Err(Failure {
            code: exit::NUMERICAL,
            error: anyhow!("{failed} point(s) failed; see their status.json"),
        });
    }
    eprintln!("sweep folder {}; collect the results with: spindrift merge {}", dir.display(), dir.display());
    Ok(OK)
}

/// Gives a running point's threads and memory back to the sweep's budget when dropped.
struct Release<'a> {
    budget: &'a Mutex<Budget>,
    freed: &'a Condvar,
    threads: usize,
    memory: u64,
}

impl Drop for Release<'_> {
    fn drop(&mut self) {
        let mut b = self.budget.lock().unwrap_or_else(|e| e.into_inner());
        b.threads += self.threads;
        b.memory += self.memory;
        b.running -= 1;
        drop(b);
        self.freed.notify_all();
    }
}

/// A sweep's points as its workers run them.
struct Points<'a> {
    config: &'a Path,
    dir: &'a Path,
    varies: &'a [Vary],
    points: &'a [Vec<String>],
    max_wall: Option<std::time::Duration>,
    started: std::time::Instant,
    stop: Arc<AtomicI32>,
}

impl Points<'_> {
    /// Runs (or resumes) point `k` with its `--set` values on a pool of `threads` threads
    /// (of the sweep's `total`), and records its status.
    fn point(&self, k: usize, sets: &[String], threads: usize, total: usize) -> Result<PointEnd, Failure> {
        let pdir = point_dir(self.dir, k);
        // A signal before the point starts: stop here, as a running point would.
        let signal = self.stop.load(Ordering::Relaxed);
        if signal != 0 {
            eprintln!("sweep: signal {signal} received before point {k}; run the sweep again to go on");
            return Ok(PointEnd::Stopped(if signal == 2 { exit::SIGINT } else { exit::SIGTERM }));
        }
        let remaining = match self.max_wall {
            Some(limit) => {
                let left = limit.saturating_sub(self.started.elapsed());
                if left.is_zero() {
                    eprintln!("sweep: --max-wall reached before point {k}; run the sweep again to go on");
                    return Ok(PointEnd::Stopped(exit::WALL_LIMIT));
                }
                Some(format!("{} s", left.as_secs_f64()))
            }
            None => None,
        };
        let resume = pdir.join("checkpoint.h5").exists();
        if !resume && pdir.join("run.h5").exists() {
            // Killed without a checkpoint: start the point afresh.
            std::fs::remove_file(pdir.join("run.h5"))
                .map_err(|e| output(anyhow!("cannot clear {}: {e}", pdir.display())))?;
        }
        std::fs::create_dir_all(&pdir)
            .map_err(|e| output(anyhow!("cannot create {}: {e}", pdir.display())))?;
        eprintln!(
            "point {k} ({}){}{}",
            describe(self.varies, &self.points[k]),
            if resume { ": resuming" } else { "" },
            if threads < total { format!(" [{threads} of {total} threads]") } else { String::new() }
        );
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .map_err(|e| output(anyhow!("cannot start {threads} worker threads: {e}")))?;
        let run_args = RunArgs {
            config: self.config.to_path_buf(),
            out: if resume { None } else { Some(pdir.clone()) },
            set: sets.to_vec(),
            threads: None,
            resume: resume.then(|| pdir.clone()),
            max_wall: remaining,
            quiet: true,
        };
        let (code, message) = match pool.install(|| crate::run::run_until(&run_args, self.stop.clone())) {
            Ok(code) => (code, None),
            Err(Failure { code, error }) => (code, Some(format!("{error:#}"))),
        };
        let state = match code {
            exit::OK => "done",
            exit::WALL_LIMIT | exit::SIGINT | exit::SIGTERM => "stopped",
            _ => "failed",
        };
        write_atomic(
            &pdir.join("status.json"),
            &serde_json::to_string_pretty(&json!({"status": state, "exit_code": code, "error": message}))
                .map_err(output)?,
        )?;
        Ok(match state {
            "stopped" => {
                eprintln!("point {k} stopped with a checkpoint (exit {code}); run the same sweep command again to resume");
                PointEnd::Stopped(code)
            }
            "failed" => {
                eprintln!("point {k} failed (exit {code}): {}", message.unwrap_or_default());
                PointEnd::Failed
            }
            _ => PointEnd::Done,
        })
    }
}

/// How one point's run ended.
enum PointEnd {
    Done,
    Failed,
    /// Stopped with a checkpoint (wall limit or signal), with the exit code.
    Stopped(u8),
}

fn describe(varies: &[Vary], values: &[String]) -> String {
    varies.iter().zip(values).map(|(v, x)| format!("{}={x}", v.key)).collect::<Vec<_>>().join(", ")
}

/// The columns of a merged table.
const SCALARS: [&str; 13] = [
    "m_x",
    "m_y",
    "m_z",
    "m_abs",
    "energy",
    "charge",
    "curie_temperature",
    "curie_temperature_error",
    "coercive_descending",
    "coercive_ascending",
    "remanence",
    "curie_mean_field",
    "curie_rpa",
];

fn scalars_of(summary: &Value) -> Vec<f64> {
    let mut out = vec![f64::NAN; SCALARS.len()];
    let stages = summary["stages"].as_array().cloned().unwrap_or_default();
    if let Some(last) = stages.last() {
        let m: Vec<f64> = last["final"]["magnetization"]
            .as_array()
            .into_iter()
            .flatten()
            .map(|x| x.as_f64().unwrap_or(f64::NAN))
            .collect();
        if m.len() == 3 {
            out[0..3].copy_from_slice(&m);
            out[3] = (m[0] * m[0] + m[1] * m[1] + m[2] * m[2]).sqrt();
        }
        out[4] = last["final"]["energy"].as_f64().unwrap_or(f64::NAN);
        out[5] = last["final"]["charge"].as_f64().unwrap_or(f64::NAN);
    }
    for s in &stages {
        if let Some(c) = s.get("curie_temperature") {
            out[6] = c["value"].as_f64().unwrap_or(f64::NAN);
            out[7] = c["error"].as_f64().unwrap_or(f64::NAN);
        }
        if let Some(c) = s.get("coercive_field") {
            out[8] = c["descending"].as_f64().unwrap_or(f64::NAN);
            out[9] = c["ascending"].as_f64().unwrap_or(f64::NAN);
        }
        if let Some(r) = s.get("remanence") {
            out[10] = r.as_f64().unwrap_or(f64::NAN);
        }
    }
    out[11] = summary["estimates"]["curie_mean_field"].as_f64().unwrap_or(f64::NAN);
    out[12] = summary["estimates"]["curie_rpa"].as_f64().unwrap_or(f64::NAN);
    out
}

pub fn merge(args: &MergeArgs) -> Outcome {
    for dir in &args.dirs {
        merge_one(dir)?;
    }
    Ok(OK)
}

fn merge_one(dir: &Path) -> Outcome {
    let text = std::fs::read_to_string(dir.join("sweep.json"))
        .map_err(|e| bad_input(anyhow!("{}: not a sweep folder (no sweep.json: {e})", dir.display())))?;
    let manifest: Value =
        serde_json::from_str(&text).map_err(|e| bad_input(anyhow!("{}/sweep.json: {e}", dir.display())))?;
    let keys: Vec<String> = manifest["vary"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|v| v["key"].as_str().map(String::from))
        .collect();
    let mut csv = String::new();
    csv.push_str("index,status");
    for k in &keys {
        csv.push_str(&format!(",{k}"));
    }
    for s in SCALARS {
        csv.push_str(&format!(",{s}"));
    }
    csv.push_str(",note\n");
    let mut rows = Vec::new();
    let mut curves = Vec::new();
    for p in manifest["points"].as_array().into_iter().flatten() {
        let k = p["index"].as_u64().unwrap_or(0) as usize;
        let pdir = point_dir(dir, k);
        let status_json = std::fs::read_to_string(pdir.join("status.json"))
            .ok()
            .and_then(|t| serde_json::from_str::<Value>(&t).ok());
        let status = status_json
            .as_ref()
            .and_then(|v| v["status"].as_str().map(String::from))
            .unwrap_or_else(|| "pending".into());
        let summary = if status == "done" { read_summary(&pdir).ok() } else { None };
        // Why a cell is empty: a failed point's error, or a scan's note (no peak in range).
        let note = match &summary {
            Some(sm) => sm["stages"]
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(|st| st["curie_temperature"]["note"].as_str())
                .collect::<Vec<_>>()
                .join("; "),
            None => status_json.as_ref().and_then(|v| v["error"].as_str()).unwrap_or("").to_string(),
        };
        let values: Vec<String> =
            keys.iter().map(|key| p["values"][key].as_str().unwrap_or("").to_string()).collect();
        let scalars = summary.as_ref().map_or(vec![f64::NAN; SCALARS.len()], scalars_of);
        csv.push_str(&format!("{k},{status}"));
        for v in &values {
            csv.push_str(&format!(",\"{}\"", v.replace('"', "'")));
        }
        for x in &scalars {
            // `Debug` keeps every digit but writes 2e-18 as such, not as 0.000000000000000002.
            csv.push_str(&if x.is_finite() { format!(",{x:?}") } else { ",".to_string() });
        }
        csv.push_str(&format!(",\"{}\"\n", note.replace('"', "'")));
        if status == "done" {
            if let Some(c) = binder_curve(&pdir) {
                curves.push(c);
            }
        }
        rows.push((k, status, values, scalars, note));
    }
    write_atomic(&dir.join("merged.csv"), &csv)?;
    let mut merged = json!({
        "keys": keys,
        "columns": SCALARS,
        "rows": rows.iter().map(|(k, st, v, s, note)| json!({"index": k, "status": st, "values": v,
            "scalars": s.iter().map(|x| if x.is_finite() { json!(x) } else { Value::Null }).collect::<Vec<_>>(),
            "note": note})).collect::<Vec<_>>(),
    });
    // Several sizes of one system with temperature scans: the Binder cumulants' crossing.
    // Only when the sweep varies nothing but `lattice.cells`, and every point has the same
    // number of cells along a3 (films of one thickness) or is a cube (bulk): crossing
    // curves of different thicknesses would mean nothing.
    let sizes_only = keys.len() == 1 && keys[0] == "lattice.cells" && {
        let cells: Vec<Vec<f64>> = rows.iter().map(|r| parse_numbers(&r.2[0])).collect();
        let same_depth = cells.iter().all(|c| c.len() == 3 && c[2] == cells[0][2]);
        let cubes = cells.iter().all(|c| c.len() == 3 && c[0] == c[1] && c[1] == c[2]);
        same_depth || cubes
    };
    if sizes_only && curves.len() >= 2 {
        match binder_crossing(&curves, 1) {
            Ok(b) => {
                say!(
                    "Binder crossing of {} sizes: Tc = {:.2} +- {:.2} K (a model estimate)",
                    curves.len(),
                    b.estimate.value,
                    b.estimate.error
                );
                merged["curie_temperature"] = json!({"value": b.estimate.value, "error": b.estimate.error, "method": b.estimate.method});
            }
            Err(e) => eprintln!("no Binder crossing: {e}"),
        }
    }
    write_atomic(&dir.join("merged.json"), &serde_json::to_string_pretty(&merged).map_err(output)?)?;
    spindrift_io::write_table(
        &dir.join("merged.h5"),
        &keys,
        &rows.iter().map(|r| r.2.clone()).collect::<Vec<_>>(),
        &SCALARS,
        &rows.iter().map(|r| r.3.clone()).collect::<Vec<_>>(),
    )
    .map_err(output)?;
    say!("{}", dir.join("merged.csv").display());
    say!("{}", dir.join("merged.h5").display());
    Ok(OK)
}

/// The numbers in a value text such as `[12,12,3]`.
fn parse_numbers(v: &str) -> Vec<f64> {
    v.trim_matches(|c| c == '[' || c == ']').split(',').filter_map(|x| x.trim().parse().ok()).collect()
}

/// The Binder cumulant of the last temperature scan of a point, sized by its spin count.
fn binder_curve(pdir: &Path) -> Option<BinderCurve> {
    let r = RunReader::open(pdir).ok()?;
    let stage = r.stages().ok()?.into_iter().rfind(|s| s.kind == "temperature-scan")?;
    let g = format!("/stage_{:03}/points", stage.index);
    let t = r.read_1d(&format!("{g}/temperature")).ok()?;
    let u = r.read_1d(&format!("{g}/binder")).ok()?;
    let e = r.read_1d(&format!("{g}/binder_err")).ok()?;
    let n = r.lattice().ok()?.moment.iter().filter(|&&m| m > 0.0).count();
    Some(BinderCurve {
        size: n as f64,
        points: t
            .iter()
            .zip(u.iter().zip(&e))
            .map(|(&t, (&v, &e))| ScanPoint { temperature: t, value: v, error: e })
            .collect(),
    })
}

/// `spindrift plot` of a merged sweep: the scalars against the first swept key.
pub fn plot_merged(dir: &Path, out: &Path) -> Outcome {
    let text = std::fs::read_to_string(dir.join("merged.json"))
        .map_err(|e| bad_input(anyhow!("{}: run `spindrift merge` first ({e})", dir.display())))?;
    let merged: Value = serde_json::from_str(&text).map_err(bad_input)?;
    let key = merged["keys"][0].as_str().unwrap_or("point").to_string();
    let mut x = Vec::new();
    let mut cols: Vec<Vec<f64>> = vec![Vec::new(); SCALARS.len()];
    for (k, row) in merged["rows"].as_array().into_iter().flatten().enumerate() {
        let v = row["values"][0].as_str().unwrap_or("");
        // Numbers plot as numbers; arrays (e.g. cells) by their last element (the thickness).
        let num = v
            .trim_matches(|c| c == '[' || c == ']')
            .rsplit(',')
            .next()
            .and_then(|s| s.trim().trim_matches('"').split_whitespace().next()?.parse::<f64>().ok());
        x.push(num.unwrap_or(k as f64));
        for (c, col) in cols.iter_mut().enumerate() {
            col.push(row["scalars"][c].as_f64().unwrap_or(f64::NAN));
        }
    }
    std::fs::create_dir_all(out).map_err(|e| output(anyhow!("cannot create {}: {e}", out.display())))?;
    let idx = |name: &str| SCALARS.iter().position(|s| *s == name).expect("column");
    let x_label = if key == "lattice.cells" { "layers (cells along a3)".to_string() } else { key.clone() };
    let line = |label: &str, name: &str, err: Option<&str>| Curve {
        label: label.into(),
        x: x.clone(),
        y: cols[idx(name)].clone(),
        err: err.map(|e| cols[idx(e)].clone()),
    };
    let panel = |title: &str, y_label: &str, curves: Vec<Curve>| Panel {
        title: title.into(),
        x_label: x_label.clone(),
        y_label: y_label.into(),
        curves,
    };
    let has = |name: &str| cols[idx(name)].iter().any(|v| v.is_finite());
    let panels = if has("curie_temperature") {
        // Temperature scans: the final state is the last temperature's, so only the
        // Curie temperatures are worth a figure, beside the estimates `check` prints.
        let ratio: Vec<f64> = cols[idx("curie_temperature")]
            .iter()
            .zip(&cols[idx("curie_mean_field")])
            .map(|(t, m)| t / m)
            .collect();
        vec![
            panel(
                "Curie temperature (model estimates: classical spins, finite size)",
                "Tc (K)",
                vec![
                    line(
                        "Monte Carlo (susceptibility peak)",
                        "curie_temperature",
                        Some("curie_temperature_error"),
                    ),
                    line("mean field", "curie_mean_field", None),
                    line("RPA", "curie_rpa", None),
                ],
            ),
            panel(
                "Monte Carlo over mean field",
                "Tc / Tc(mean field)",
                vec![Curve { label: "ratio".into(), x: x.clone(), y: ratio, err: None }],
            ),
        ]
    } else {
        let mut p = vec![
            panel("final |m|", "|m|", vec![line("|m|", "m_abs", None)]),
            panel("final energy", "meV per spin", vec![line("E", "energy", None)]),
            panel("final topological charge", "Q", vec![line("Q", "charge", None)]),
        ];
        if has("coercive_ascending") {
            p.push(panel(
                "coercive field",
                "T",
                vec![
                    line("descending", "coercive_descending", None),
                    line("ascending", "coercive_ascending", None),
                ],
            ));
        }
        p
    };
    let path = out.join("sweep.png");
    let title = if key == "lattice.cells" {
        "Curie temperature against thickness".to_string()
    } else {
        format!("sweep over {key}")
    };
    panels_png(&path, &title, &panels, 2).map_err(output)?;
    say!("{}", path.display());
    Ok(OK)
}
