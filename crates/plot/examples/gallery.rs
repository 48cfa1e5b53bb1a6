//! Renders one figure of each kind from synthetic data into the folder given as argument:
//!
//! ```text
//! cargo run -p spindrift-plot --example gallery -- /tmp/gallery
//! ```
//!
//! `dynamics.png` (a damped precession), `hysteresis.png` (a tanh loop with error bars),
//! `skyrmion.png` (a small skyrmion on a triangular layer, every site drawn with its arrow),
//! `skyrmion_medium.png` (about 10^4 sites) and `skyrmion_large.png` (about 10^5 sites,
//! drawn as a continuous map), the larger two with arrows on a subsample.

use std::error::Error;
use std::f64::consts::PI;
use std::path::PathBuf;
use std::time::Instant;

use spindrift_plot::{layer_png, panels_png, Curve, LayerView, Panel};

fn main() -> Result<(), Box<dyn Error>> {
    let dir = PathBuf::from(std::env::args().nth(1).ok_or("usage: gallery OUTPUT_DIR")?);
    std::fs::create_dir_all(&dir)?;

    let start = Instant::now();
    panels_png(&dir.join("dynamics.png"), "Damped precession in 1.5 T (synthetic)", &dynamics(), 2)?;
    println!("dynamics.png in {:.2} s", start.elapsed().as_secs_f64());

    let start = Instant::now();
    panels_png(&dir.join("hysteresis.png"), "Field loop at 20 K (synthetic)", &hysteresis(), 2)?;
    println!("hysteresis.png in {:.2} s", start.elapsed().as_secs_f64());

    let start = Instant::now();
    layer_png(
        &dir.join("skyrmion.png"),
        &skyrmion(36, 24, 2.7, 9.0, "Layer 0, t = 200 ps (synthetic skyrmion)"),
    )?;
    println!("skyrmion.png in {:.2} s", start.elapsed().as_secs_f64());

    let start = Instant::now();
    let medium = skyrmion(96, 110, 2.7, 40.0, "Layer 0, 96 x 110 sites (synthetic skyrmion)");
    layer_png(&dir.join("skyrmion_medium.png"), &medium)?;
    println!("skyrmion_medium.png in {:.2} s", start.elapsed().as_secs_f64());

    let start = Instant::now();
    let large = skyrmion(340, 300, 2.7, 120.0, "Layer 0, 102 000 sites (synthetic skyrmion)");
    layer_png(&dir.join("skyrmion_large.png"), &large)?;
    println!(
        "skyrmion_large.png ({} sites) in {:.2} s",
        large.positions.len(),
        start.elapsed().as_secs_f64()
    );
    Ok(())
}

/// A spin precessing about +z with Gilbert damping 0.1 and the energy it loses.
fn dynamics() -> Vec<Panel> {
    let (omega, alpha) = (2.0 * PI * 0.042, 0.1);
    let t: Vec<f64> = (0..=800).map(|k| k as f64 * 0.25).collect();
    let theta = |t: f64| 2.0 * ((PI / 2.0 * 0.95 / 2.0).tan() * (-alpha * omega * t).exp()).atan();
    let mx: Vec<f64> = t.iter().map(|&t| theta(t).sin() * (omega * t).cos()).collect();
    let my: Vec<f64> = t.iter().map(|&t| theta(t).sin() * (omega * t).sin()).collect();
    let mz: Vec<f64> = t.iter().map(|&t| theta(t).cos()).collect();
    let energy: Vec<f64> = mz.iter().map(|&m| -0.0868 * m - 21.3).collect();
    vec![
        Panel {
            title: "Magnetisation".into(),
            x_label: "time (ps)".into(),
            y_label: "m".into(),
            curves: vec![
                Curve { label: "m_x".into(), x: t.clone(), y: mx, err: None },
                Curve { label: "m_y".into(), x: t.clone(), y: my, err: None },
                Curve { label: "m_z".into(), x: t.clone(), y: mz, err: None },
            ],
        },
        Panel {
            title: "Energy".into(),
            x_label: "time (ps)".into(),
            y_label: "energy (meV per spin)".into(),
            curves: vec![Curve { label: "total".into(), x: t, y: energy, err: None }],
        },
    ]
}

/// Both branches of a loop, m = tanh((B ± B_c)/w), with made-up statistical error bars, and
/// the susceptibility with a missing point (NaN) to show a gap.
fn hysteresis() -> Vec<Panel> {
    let (b_c, w, n) = (0.35, 0.12, 41);
    let down: Vec<f64> = (0..n).map(|k| 1.0 - 2.0 * k as f64 / (n - 1) as f64).collect();
    let up: Vec<f64> = down.iter().rev().copied().collect();
    let m_down: Vec<f64> = down.iter().map(|&b| ((b + b_c) / w).tanh()).collect();
    let m_up: Vec<f64> = up.iter().map(|&b| ((b - b_c) / w).tanh()).collect();
    let err = |m: &[f64]| -> Vec<f64> { m.iter().map(|&m| 0.02 + 0.15 * (1.0 - m * m)).collect() };
    let chi = |b: f64, shift: f64| 1.0 / (w * ((b + shift) / w).cosh().powi(2));
    let mut chi_down: Vec<f64> = down.iter().map(|&b| chi(b, b_c)).collect();
    chi_down[12] = f64::NAN;
    let chi_up: Vec<f64> = up.iter().map(|&b| chi(b, -b_c)).collect();
    vec![
        Panel {
            title: "Hysteresis".into(),
            x_label: "field B_z (T)".into(),
            y_label: "m_z".into(),
            curves: vec![
                Curve {
                    label: "descending".into(),
                    x: down.clone(),
                    y: m_down.clone(),
                    err: Some(err(&m_down)),
                },
                Curve { label: "ascending".into(), x: up.clone(), y: m_up.clone(), err: Some(err(&m_up)) },
            ],
        },
        Panel {
            title: "Susceptibility".into(),
            x_label: "field B_z (T)".into(),
            y_label: "dm_z/dB (1/T)".into(),
            curves: vec![
                Curve { label: "descending".into(), x: down, y: chi_down, err: None },
                Curve { label: "ascending".into(), x: up, y: chi_up, err: None },
            ],
        },
    ]
}

/// A Néel skyrmion of radius `radius` (Å) whose core points along -z, centred on a
/// rectangular patch of a triangular lattice of `nx x ny` sites with spacing `a` (Å).
fn skyrmion(nx: usize, ny: usize, a: f64, radius: f64, title: &str) -> LayerView {
    let row = a * 3f64.sqrt() / 2.0;
    let (cx, cy) = ((nx as f64 - 0.5) * a / 2.0, (ny as f64 - 1.0) * row / 2.0);
    let wall = radius / 2.5;
    let mut positions = Vec::with_capacity(nx * ny);
    let mut spins = Vec::with_capacity(nx * ny);
    for j in 0..ny {
        for i in 0..nx {
            let (x, y) = (i as f64 * a + (j % 2) as f64 * a / 2.0, j as f64 * row);
            let (dx, dy) = (x - cx, y - cy);
            let r = dx.hypot(dy);
            let theta = 2.0 * ((radius - r) / wall).exp().atan();
            let phi = dy.atan2(dx);
            positions.push([x, y]);
            spins.push([theta.sin() * phi.cos(), theta.sin() * phi.sin(), theta.cos()]);
        }
    }
    LayerView { title: title.into(), positions, spins, spacing: a }
}
