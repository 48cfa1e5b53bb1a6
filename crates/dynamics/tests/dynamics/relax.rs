//! Energy minimisation finds the known ground states, fast.

use crate::common::*;
use spindrift_dynamics::initial;
use spindrift_dynamics::{Heun, HeunParams, RelaxParams, Relaxer};
use spindrift_hamiltonian::constants::MU_B;
use spindrift_hamiltonian::timestep::recommended_dt;
use spindrift_hamiltonian::Hamiltonian;
use spindrift_lattice::Vec3;
use std::f64::consts::PI;

const J: f64 = 10.0;
const MU: f64 = 2.0;
const PERIOD: usize = 16;

/// Square monolayer, J and interfacial DMI on shell 1, with `D = J tan(2 pi / 16)` so that
/// the spiral period `2 pi a / atan(D/J)` is exactly 16 cells; the box is 16 x 4 cells.
fn spiral_system(field: f64) -> Hamiltonian {
    let d = J * (2.0 * PI / PERIOD as f64).tan();
    build(
        "square",
        3.0,
        [PERIOD, 4, 1],
        [true; 3],
        &[shell(1, J, interfacial(d))],
        species(MU, 1.0, 0.0, [0.0, 0.0, 1.0]),
        [0.0, 0.0, field],
    )
}

/// A helix of one period along `x`, perturbed by a random field of directions so that it
/// starts away from every stationary state and must find the spiral's phase, plane and
/// uniform pitch by itself.
fn perturbed_helix(h: &Hamiltonian) -> Vec<Vec3> {
    let mut s = vec![[0.0; 3]; h.len()];
    initial::helix(h, &mut s, [2.0 * PI / (PERIOD as f64 * 3.0), 0.0, 0.0], [0.0, 0.0, 1.0]).unwrap();
    let mut r = vec![[0.0; 3]; h.len()];
    initial::random(h, &mut r, 5).unwrap();
    for (v, w) in s.iter_mut().zip(&r) {
        let u = [v[0] + 0.6 * w[0], v[1] + 0.6 * w[1], v[2] + 0.6 * w[2]];
        let l = (u[0] * u[0] + u[1] * u[1] + u[2] * u[2]).sqrt();
        *v = [u[0] / l, u[1] / l, u[2] / l];
    }
    s
}

/// Steps of an `alpha = 1` LLG run (Heun, `T = 0`, the recommended time step) until the
/// torque falls below `tol`, checked every 10 steps; each step costs two field evaluations.
fn llg_steps_to(h: &Hamiltonian, mut s: Vec<Vec3>, tol: f64, limit: u64) -> u64 {
    let mut heun = Heun::new(h, 0);
    let p = HeunParams { dt: recommended_dt(h), temperature: 0.0 };
    for n in 0..limit {
        if n % 10 == 0 && max_torque(h, &s) < tol {
            return n;
        }
        heun.step(h, &mut s, &p, n).unwrap();
    }
    limit
}

/// For a flat cycloid of wave number `q` along `x` on the square lattice, each spin has one
/// `x` bond with energy `-J cos(qa) - D sin(qa)` and one `y` bond with `-J`, so the energy
/// per spin `-J - J cos(qa) - D sin(qa)` is least at `tan(qa) = D/J` and equals
/// `-J - sqrt(J^2 + D^2)` there (common practice: the classical spiral of the
/// Dzyaloshinskii-Moriya chain, I. E. Dzyaloshinskii, Sov. Phys. JETP 19, 960 (1964)).
/// Relaxation must reach that energy and a uniform turn of `2 pi / 16` per cell.
#[test]
fn relax_finds_the_dmi_spiral() {
    let h = spiral_system(0.0);
    let d = J * (2.0 * PI / PERIOD as f64).tan();
    let start = perturbed_helix(&h);
    let mut s = start.clone();
    let tol = 1e-5;
    let report = Relaxer::new(&h)
        .relax(&h, &mut s, &RelaxParams { torque_tolerance: tol, max_iterations: 20_000 })
        .unwrap();
    assert!(report.converged, "{report:?}");
    let expect = -J - (J * J + d * d).sqrt();
    println!("spiral: relax {report:?}; expected energy {expect:.9} meV/spin");
    assert!((report.energy - expect).abs() < 1e-9 * expect.abs(), "{} vs {expect}", report.energy);
    // Uniform pitch: consecutive spins along x turn by 2 pi / 16 in the plane of the cycloid.
    let cell = h.cell();
    for i in 0..h.len() {
        let (c, b) = cell.decompose(i);
        let j = cell.neighbour(c, [1, 0, 0], b).unwrap();
        let (a, bb) = (s[i], s[j]);
        let dotp = a[0] * bb[0] + a[1] * bb[1] + a[2] * bb[2];
        assert!((dotp.clamp(-1.0, 1.0).acos() - 2.0 * PI / PERIOD as f64).abs() < 1e-4, "site {i}");
        // The DMI vector of x bonds is along y: the sense of rotation about y is fixed.
        let cross_y = a[2] * bb[0] - a[0] * bb[2];
        assert!(cross_y > 0.0, "site {i}");
    }
    let llg = llg_steps_to(&h, start, tol, 2_000_000);
    println!(
        "spiral to {tol} T: {} relax iterations (1 field evaluation each) vs {llg} alpha=1 Heun steps (2 each)",
        report.steps
    );
    assert!(20 * report.steps < llg, "{} vs {llg}", report.steps);
}

/// In a field far above the spiral's saturation field the ground state is uniform along
/// the field, with energy `-2J - mu muB B` per spin on the square lattice (common
/// practice: every bond `-J`, DMI zero between parallel spins).
#[test]
fn relax_finds_the_uniform_state_in_a_strong_field() {
    let b = 60.0;
    let h = spiral_system(b);
    let start = perturbed_helix(&h);
    let mut s = start.clone();
    let tol = 1e-6;
    let report = Relaxer::new(&h)
        .relax(&h, &mut s, &RelaxParams { torque_tolerance: tol, max_iterations: 20_000 })
        .unwrap();
    assert!(report.converged, "{report:?}");
    let expect = -2.0 * J - MU * MU_B * b;
    println!("saturated: relax {report:?}; expected {expect:.9}");
    assert!((report.energy - expect).abs() < 1e-9 * expect.abs());
    for v in &s {
        assert!(v[2] > 1.0 - 1e-10, "{v:?}");
    }
    let llg = llg_steps_to(&h, start, tol, 2_000_000);
    println!("saturated to {tol} T: {} relax iterations vs {llg} alpha=1 Heun steps", report.steps);
    assert!(5 * report.steps < llg, "{} vs {llg}", report.steps);
}

/// The stepping API: `iterate` reports the torque of the spins it was given (checked
/// against a direct evaluation of `max_i |S_i x B_i|`) and leaves converged spins alone.
#[test]
fn iterate_stops_at_the_tolerance() {
    let h = spiral_system(60.0);
    let mut s = vec![[0.0, 0.0, 1.0]; h.len()];
    let mut r = Relaxer::new(&h);
    let t = r.iterate(&h, &mut s, 1e-8).unwrap();
    assert_eq!(t, 0.0);
    assert_eq!(r.iterations(), 0);
    assert!(s.iter().all(|v| *v == [0.0, 0.0, 1.0]));
    let mut s = perturbed_helix(&h);
    let mut last = f64::INFINITY;
    let mut count = 0;
    while last >= 1e-3 {
        last = r.iterate(&h, &mut s, 1e-3).unwrap();
        count += 1;
        assert!(count < 10_000);
    }
    assert!((max_torque(&h, &s) - last).abs() <= 1e-12 * (1.0 + last));
}

/// An iteration budget stops the minimisation and reports the torque where it stopped.
#[test]
fn relax_respects_the_iteration_budget() {
    let h = spiral_system(0.0);
    let mut s = perturbed_helix(&h);
    let params = RelaxParams { torque_tolerance: 1e-9, max_iterations: 3 };
    let report = Relaxer::new(&h).relax(&h, &mut s, &params).unwrap();
    assert_eq!(report.steps, 3);
    assert!(!report.converged);
    assert!((report.torque - max_torque(&h, &s)).abs() <= 1e-12 * report.torque);
    let zero = RelaxParams { max_iterations: 0, ..params };
    let before = bits(&s);
    assert_eq!(Relaxer::new(&h).relax(&h, &mut s, &zero).unwrap().steps, 0);
    assert_eq!(bits(&s), before);
}
