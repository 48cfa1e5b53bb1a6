//! `spindrift plot`: PNG figures of a run folder (or of a merged sweep).

use crate::args::PlotArgs;
use crate::exit::{bad_input, output, Outcome, OK};
use anyhow::anyhow;
use spindrift_io::RunReader;
use spindrift_plot::{layer_png, panels_png, Curve, LayerView, Panel};
use std::path::{Path, PathBuf};

/// Most layers drawn as top views (first, last and evenly between).
const MAX_LAYER_VIEWS: usize = 4;

pub fn plot(args: &PlotArgs) -> Outcome {
    let out = args.out.clone().unwrap_or_else(|| args.run_dir.join("plots"));
    if !args.run_dir.join("run.h5").exists() && args.run_dir.join("merged.csv").exists() {
        return crate::sweep::plot_merged(&args.run_dir, &out);
    }
    let reader = RunReader::open(&args.run_dir).map_err(bad_input)?;
    std::fs::create_dir_all(&out).map_err(|e| output(anyhow!("cannot create {}: {e}", out.display())))?;
    let title = reader.attributes().map_err(bad_input)?.title;
    let mut written = Vec::new();
    for s in reader.stages().map_err(bad_input)? {
        let prefix = format!("stage_{:03}", s.index);
        let series = format!("/{prefix}/series");
        let rows = reader.shape(&format!("{series}/step")).map(|s| s[0]).unwrap_or(0);
        if rows > 0 {
            let path = out.join(format!("{prefix}_series.png"));
            series_figure(
                &reader,
                &series,
                &s.kind,
                &format!("{title}: stage {} {}", s.index, s.kind),
                &path,
            )?;
            written.push(path);
        }
        let points = format!("/{prefix}/points");
        let n_points = reader.shape(&format!("{points}/temperature")).map(|s| s[0]).unwrap_or(0);
        if n_points > 0 && s.kind == "field-loop" {
            let path = out.join(format!("{prefix}_loop.png"));
            loop_figure(&reader, &points, &format!("{title} (stage {})", s.index), &path)?;
            written.push(path);
        } else if n_points > 1 {
            let path = out.join(format!("{prefix}_scan.png"));
            scan_figure(&reader, &points, &format!("{title} (stage {}; model estimates)", s.index), &path)?;
            written.push(path);
        }
    }
    written.extend(layer_figures(&reader, &out)?);
    for p in &written {
        say!("{}", p.display());
    }
    Ok(OK)
}

fn read(reader: &RunReader, path: &str) -> Result<Vec<f64>, crate::exit::Failure> {
    reader.read_1d(path).map_err(bad_input)
}

fn read3(reader: &RunReader, path: &str) -> Result<Vec<[f64; 3]>, crate::exit::Failure> {
    let (_, flat) = reader.read_flat(path).map_err(bad_input)?;
    Ok(flat.chunks_exact(3).map(|c| [c[0], c[1], c[2]]).collect())
}

fn curve(label: &str, x: &[f64], y: Vec<f64>, err: Option<Vec<f64>>) -> Curve {
    Curve { label: label.to_string(), x: x.to_vec(), y, err }
}

fn series_figure(reader: &RunReader, group: &str, kind: &str, title: &str, path: &Path) -> Outcome {
    let time = read(reader, &format!("{group}/time"))?;
    let step = read(reader, &format!("{group}/step"))?;
    let (x, x_label) = if time.iter().any(|&t| t > 0.0) {
        (time, "time (ps)")
    } else {
        (
            step,
            match kind {
                "relax" => "iteration",
                "metropolis" | "temperature-scan" => "sweep (or step)",
                "field-loop" => "field point",
                _ => "step",
            },
        )
    };
    let m = read3(reader, &format!("{group}/magnetization"))?;
    let comp = |a: usize| m.iter().map(|v| v[a]).collect::<Vec<_>>();
    let abs = m.iter().map(|v| (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt()).collect();
    let mut energy_curves = vec![curve("total", &x, read(reader, &format!("{group}/energy"))?, None)];
    for (name, label) in [
        ("energy_exchange", "exchange"),
        ("energy_dmi", "DMI"),
        ("energy_anisotropy", "anisotropy"),
        ("energy_zeeman", "Zeeman"),
    ] {
        let y = read(reader, &format!("{group}/{name}"))?;
        if y.iter().any(|&v| v != 0.0) {
            energy_curves.push(curve(label, &x, y, None));
        }
    }
    let panels = [
        Panel {
            title: "magnetisation".into(),
            x_label: x_label.into(),
            y_label: "m".into(),
            curves: vec![
                curve("m_x", &x, comp(0), None),
                curve("m_y", &x, comp(1), None),
                curve("m_z", &x, comp(2), None),
                curve("|m|", &x, abs, None),
            ],
        },
        Panel {
            title: "energy".into(),
            x_label: x_label.into(),
            y_label: "meV per spin".into(),
            curves: energy_curves,
        },
        Panel {
            title: "topological charge (mean over layers)".into(),
            x_label: x_label.into(),
            y_label: "Q".into(),
            curves: vec![curve("Q", &x, read(reader, &format!("{group}/charge"))?, None)],
        },
    ];
    panels_png(path, title, &panels, 3).map_err(output)?;
    Ok(OK)
}

fn loop_figure(reader: &RunReader, group: &str, title: &str, path: &Path) -> Outcome {
    let field = read3(reader, &format!("{group}/field"))?;
    let m = read3(reader, &format!("{group}/magnetization"))?;
    // The loop direction: the field of the first point, which is `+max` along it.
    let b0 = field.first().copied().unwrap_or([0.0, 0.0, 1.0]);
    let l = (b0[0] * b0[0] + b0[1] * b0[1] + b0[2] * b0[2]).sqrt().max(f64::MIN_POSITIVE);
    let dir = [b0[0] / l, b0[1] / l, b0[2] / l];
    let proj = |v: &[f64; 3]| v[0] * dir[0] + v[1] * dir[1] + v[2] * dir[2];
    let b: Vec<f64> = field.iter().map(proj).collect();
    let mp: Vec<f64> = m.iter().map(proj).collect();
    let half = b.len() / 2;
    let panels = [Panel {
        title: "m along the field direction".into(),
        x_label: "field along the loop direction (T)".into(),
        y_label: "m . direction".into(),
        curves: vec![
            curve("descending", &b[..half], mp[..half].to_vec(), None),
            curve("ascending", &b[half..], mp[half..].to_vec(), None),
        ],
    }];
    panels_png(path, title, &panels, 1).map_err(output)?;
    Ok(OK)
}

fn scan_figure(reader: &RunReader, group: &str, title: &str, path: &Path) -> Outcome {
    let t = read(reader, &format!("{group}/temperature"))?;
    let get = |name: &str| -> Result<(Vec<f64>, Option<Vec<f64>>), crate::exit::Failure> {
        Ok((read(reader, &format!("{group}/{name}"))?, reader.read_1d(&format!("{group}/{name}_err")).ok()))
    };
    let mut panels = Vec::new();
    for (name, label, y_label) in [
        ("m_abs", "<|m|>", "<|m|>"),
        ("susceptibility", "susceptibility", "chi per spin (1/meV)"),
        ("heat_capacity", "heat capacity", "C per spin (kB)"),
        ("binder", "Binder cumulant", "U4"),
    ] {
        let (y, e) = get(name)?;
        panels.push(Panel {
            title: label.into(),
            x_label: "temperature (K)".into(),
            y_label: y_label.into(),
            curves: vec![curve(label, &t, y, e)],
        });
    }
    panels_png(path, title, &panels, 2).map_err(output)?;
    Ok(OK)
}

fn layer_figures(reader: &RunReader, out: &Path) -> Result<Vec<PathBuf>, crate::exit::Failure> {
    let spins = match reader.final_spins().map_err(bad_input)? {
        Some(s) => s,
        None => match reader.last_snapshot().map_err(bad_input)? {
            Some(s) => s.spins,
            None => return Ok(Vec::new()),
        },
    };
    let lattice = reader.lattice().map_err(bad_input)?;
    let layers = lattice.layer.iter().max().map_or(0, |&l| l as usize + 1);
    let mut chosen: Vec<usize> = if layers <= MAX_LAYER_VIEWS {
        (0..layers).collect()
    } else {
        (0..MAX_LAYER_VIEWS).map(|k| k * (layers - 1) / (MAX_LAYER_VIEWS - 1)).collect()
    };
    chosen.dedup();
    let mut written = Vec::new();
    for layer in chosen {
        let idx: Vec<usize> = (0..spins.len())
            .filter(|&i| lattice.layer[i] as usize == layer && lattice.moment[i] > 0.0)
            .collect();
        if idx.is_empty() {
            continue;
        }
        let positions: Vec<[f64; 2]> =
            idx.iter().map(|&i| [lattice.position[i][0], lattice.position[i][1]]).collect();
        let spacing = nearest_spacing(&positions);
        let view = LayerView {
            title: format!("final state, layer {layer} (colour m_z, arrows in-plane)"),
            positions,
            spins: idx.iter().map(|&i| spins[i]).collect(),
            spacing,
        };
        let path = out.join(format!("final_layer_{layer:03}.png"));
        layer_png(&path, &view).map_err(output)?;
        written.push(path);
    }
    Ok(written)
}

/// Nearest-neighbour distance in a layer, from a sample of sites (Å).
fn nearest_spacing(p: &[[f64; 2]]) -> f64 {
    let mut best = f64::INFINITY;
    for i in (0..p.len()).step_by((p.len() / 64).max(1)) {
        for (j, q) in p.iter().enumerate() {
            if i != j {
                let d = ((p[i][0] - q[0]).powi(2) + (p[i][1] - q[1]).powi(2)).sqrt();
                if d > 1e-9 && d < best {
                    best = d;
                }
            }
        }
    }
    if best.is_finite() {
        best
    } else {
        1.0
    }
}
