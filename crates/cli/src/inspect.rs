//! `spindrift inspect`: what a run folder holds.

use crate::args::InspectArgs;
use crate::exit::{bad_input, Outcome, OK};
use serde_json::{json, Value};
use spindrift_io::{read_summary, RunReader};

pub fn inspect(args: &InspectArgs) -> Outcome {
    let dir = &args.run_dir;
    if dir.join("sweep.json").is_file() && !dir.join("run.h5").exists() {
        return Err(bad_input(anyhow::anyhow!(
            "{}: a sweep folder, not a run; inspect one of its points ({}) or collect them with: spindrift merge {}",
            dir.display(),
            dir.join("point_0000").display(),
            dir.display()
        )));
    }
    let reader = RunReader::open(dir).map_err(bad_input)?;
    let attrs = reader.attributes().map_err(bad_input)?;
    let lattice = reader.lattice().map_err(bad_input)?;
    let mut stages = Vec::new();
    for s in reader.stages().map_err(bad_input)? {
        let mut datasets = Vec::new();
        let mut last = serde_json::Map::new();
        for d in reader.datasets(s.index).map_err(bad_input)? {
            let name = d.path.rsplit('/').next().unwrap_or(&d.path).to_string();
            let group = d.path.split('/').nth(2).unwrap_or("").to_string();
            // The last row of small series and point tables: the stage's final values.
            if (group == "series" || group == "points") && d.shape.first().is_some_and(|&n| n > 0) {
                let (shape, data) = reader.read_flat(&d.path).map_err(bad_input)?;
                let row: usize = shape[1..].iter().product();
                if row <= 16 {
                    let tail = &data[data.len() - row..];
                    let v = if row == 1 { json!(tail[0]) } else { json!(tail) };
                    last.insert(format!("{group}/{name}"), v);
                }
            }
            datasets.push(json!({"path": d.path, "shape": d.shape, "unit": d.unit}));
        }
        stages.push(json!({"index": s.index, "kind": s.kind, "datasets": datasets, "last": last}));
    }
    let summary = read_summary(&args.run_dir).ok();
    let checkpoint = args.run_dir.join("checkpoint.h5").exists();
    let out = json!({
        "run_dir": args.run_dir.display().to_string(),
        "title": attrs.title,
        "seed": attrs.seed,
        "program_version": attrs.program_version,
        "format_version": attrs.format_version,
        "inputs": attrs.inputs.lines().collect::<Vec<_>>(),
        "sites": lattice.position.len(),
        "species": lattice.species_names,
        "layers": lattice.layer.iter().max().map_or(0, |&l| l + 1),
        "stages": stages,
        "has_final": reader.final_spins().map_err(bad_input)?.is_some(),
        "checkpoint": checkpoint,
        "summary": summary,
    });
    if args.json {
        say!("{}", serde_json::to_string_pretty(&out).map_err(bad_input)?);
    } else {
        print_text(&out);
    }
    Ok(OK)
}

fn print_text(v: &Value) {
    say!("{}", v["run_dir"].as_str().unwrap_or(""));
    if let Some(t) = v["title"].as_str().filter(|t| !t.is_empty()) {
        say!("  {t}");
    }
    say!(
        "  {} sites, {} layer(s), species {}, seed {}, written by spindrift {}",
        v["sites"],
        v["layers"],
        v["species"],
        v["seed"],
        v["program_version"].as_str().unwrap_or("?")
    );
    for line in v["inputs"].as_array().into_iter().flatten().filter_map(Value::as_str) {
        say!("  read {line}");
    }
    if v["checkpoint"].as_bool() == Some(true) {
        say!("  a checkpoint is present: the run stopped early and can be resumed with --resume");
    }
    for s in v["stages"].as_array().into_iter().flatten() {
        say!("stage {} {}", s["index"], s["kind"].as_str().unwrap_or("?"));
        for d in s["datasets"].as_array().into_iter().flatten() {
            say!(
                "  {:<48} {:<16} {}",
                d["path"].as_str().unwrap_or(""),
                d["shape"].to_string(),
                d["unit"].as_str().unwrap_or("")
            );
        }
        if let Some(last) = s["last"].as_object() {
            if !last.is_empty() {
                say!("  last values:");
                for (k, val) in last {
                    say!("    {k:<40} {val}");
                }
            }
        }
    }
    if let Some(sum) = v["summary"].as_object() {
        say!(
            "summary.json: {} spins, {} threads, {:.1} s",
            sum["spins"],
            sum["threads"],
            sum["wall_seconds"].as_f64().unwrap_or(0.0)
        );
    }
}
