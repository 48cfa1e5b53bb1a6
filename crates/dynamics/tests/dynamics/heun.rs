//! The Heun integrator against exact solutions, its order, its conservation laws and the
//! equilibrium distributions its thermostat must produce.

use crate::common::*;
use spindrift_dynamics::initial;
use spindrift_dynamics::{Heun, HeunParams, StepError};
use spindrift_hamiltonian::constants::{GAMMA_PER_PS, K_B, MU_B};
use spindrift_hamiltonian::{Hamiltonian, Species};
use spindrift_lattice::{preset, BondList, Supercell, Vec3};

fn run(h: &Hamiltonian, spins: &mut Vec<Vec3>, dt: f64, steps: u64, temperature: f64, seed: u64) {
    let mut heun = Heun::new(h, seed);
    let p = HeunParams { dt, temperature };
    for n in 0..steps {
        heun.step(h, spins, &p, n).unwrap();
    }
}

/// One free spin in `B = B z`: the Landau-Lifshitz-Gilbert equation gives precession at
/// `omega = gamma B / (1 + alpha^2)` and `tan(theta/2) = tan(theta0/2) exp(-alpha omega t)`
/// (T. L. Gilbert, IEEE Trans. Magn. 40, 3443 (2004)). The sense of precession follows
/// from the equation in INTERFACE.md: `dS/dt = -omega S x z` turns `x` towards `y`.
#[test]
fn larmor_precession_and_damping_of_one_spin() {
    let (b, alpha) = (5.0, 0.1);
    // A 1x1x1 periodic supercell: no site is its own neighbour, so there are no bonds.
    let h = build(
        "simple-cubic",
        3.0,
        [1, 1, 1],
        [true; 3],
        &[],
        species(2.0, alpha, 0.0, [0.0, 0.0, 1.0]),
        [0.0, 0.0, b],
    );
    assert_eq!(h.bonds().directed_len(), 0);
    let theta0: f64 = 1.0;
    let mut spins = vec![[theta0.sin(), 0.0, theta0.cos()]];
    let dt = 1e-3;
    let mut heun = Heun::new(&h, 1);
    let p = HeunParams { dt, temperature: 0.0 };
    let omega = GAMMA_PER_PS * b / (1.0 + alpha * alpha);
    let mut phase = 0.0;
    let mut last_phi = 0.0;
    let steps = 20_000;
    let mut worst: f64 = 0.0;
    for n in 0..steps {
        heun.step(&h, &mut spins, &p, n).unwrap();
        let s = spins[0];
        let phi = s[1].atan2(s[0]);
        let mut d = phi - last_phi;
        d -= std::f64::consts::TAU * (d / std::f64::consts::TAU).round();
        phase += d;
        last_phi = phi;
        assert!(((s[0] * s[0] + s[1] * s[1] + s[2] * s[2]).sqrt() - 1.0).abs() < 1e-14);
        if (n + 1) % 1000 == 0 {
            let t = (n + 1) as f64 * dt;
            let theta = s[2].clamp(-1.0, 1.0).acos();
            let expect_theta = 2.0 * ((theta0 / 2.0).tan() * (-alpha * omega * t).exp()).atan();
            let e_phase = (phase - omega * t).abs() / (omega * t);
            let e_theta = (theta - expect_theta).abs() / expect_theta;
            worst = worst.max(e_phase).max(e_theta);
        }
    }
    println!("Larmor: worst relative error of phase and polar angle over 20 ps: {worst:.2e}");
    assert!(worst < 1e-4, "{worst}");
}

/// Two species of different damping on the two sites of bcc, without bonds, in `B = B z`:
/// each spin follows the exact solution above with its own `alpha` (Gilbert 2004), so the
/// integrator applies each site's own constants (read per site when the basis sites
/// differ, once when they agree).
#[test]
fn each_species_relaxes_with_its_own_damping() {
    let b = 5.0;
    let alphas = [0.1, 0.5];
    let mut crystal = preset("bcc", 3.0, None).unwrap();
    crystal.basis[1].species = 1;
    let cell = Supercell::new(crystal, [8, 8, 8], [true; 3], 0).unwrap();
    let a = species(2.0, alphas[0], 0.0, [0.0, 0.0, 1.0]);
    let other = Species { name: "B".into(), moment: 1.5, damping: alphas[1], ..a.clone() };
    let h = Hamiltonian::new(cell, vec![a, other], BondList::new(2), [0.0, 0.0, b]).unwrap();
    let theta0: f64 = 1.0;
    let mut spins = vec![[theta0.sin(), 0.0, theta0.cos()]; h.len()];
    let (dt, steps) = (1e-3, 5000);
    run(&h, &mut spins, dt, steps, 0.0, 1);
    let t = steps as f64 * dt;
    for (i, s) in spins.iter().enumerate() {
        let alpha = alphas[h.cell().basis_of(i)];
        let omega = GAMMA_PER_PS * b / (1.0 + alpha * alpha);
        let expect_theta = 2.0 * ((theta0 / 2.0).tan() * (-alpha * omega * t).exp()).atan();
        let expect_phi = omega * t - std::f64::consts::TAU * (omega * t / std::f64::consts::TAU).round();
        let theta = s[2].clamp(-1.0, 1.0).acos();
        let phi = s[1].atan2(s[0]);
        assert!(
            (theta - expect_theta).abs() < 1e-5 * expect_theta,
            "site {i}: theta {theta}, {expect_theta}"
        );
        assert!((phi - expect_phi).abs() < 1e-5, "site {i}: phi {phi}, {expect_phi}");
    }
}

/// A small coupled system with every term: exchange, interfacial DMI, anisotropy, a
/// tilted field.
fn coupled(alpha: f64) -> Hamiltonian {
    build(
        "square",
        3.0,
        [4, 4, 1],
        [true; 3],
        &[shell(1, 5.0, interfacial(1.5)), shell(2, -0.5, None)],
        species(2.0, alpha, 0.2, [0.1, 0.0, 1.0]),
        [0.3, -0.2, 1.0],
    )
}

fn max_distance(a: &[Vec3], b: &[Vec3]) -> f64 {
    a.iter()
        .zip(b)
        .map(|(x, y)| ((x[0] - y[0]).powi(2) + (x[1] - y[1]).powi(2) + (x[2] - y[2]).powi(2)).sqrt())
        .fold(0.0, f64::max)
}

/// Heun's method is of second order for deterministic equations (common practice; e.g.
/// E. Hairer, S. P. Nørsett, G. Wanner, Solving Ordinary Differential Equations I,
/// Springer 1993): halving the step divides the error at a fixed time by about four.
#[test]
fn heun_is_second_order() {
    let h = coupled(0.1);
    let mut start = vec![[0.0; 3]; h.len()];
    initial::random(&h, &mut start, 3).unwrap();
    let t_end = 0.4;
    let reference = {
        let mut s = start.clone();
        run(&h, &mut s, 4e-3 / 256.0, 25_600, 0.0, 0);
        s
    };
    let mut errors = Vec::new();
    for k in 0..4 {
        let dt = 4e-3 / (1u64 << k) as f64;
        let steps = (t_end / dt).round() as u64;
        let mut s = start.clone();
        run(&h, &mut s, dt, steps, 0.0, 0);
        errors.push(max_distance(&s, &reference));
    }
    let ratios: Vec<f64> = errors.windows(2).map(|w| w[0] / w[1]).collect();
    println!("Heun errors at dt = 4, 2, 1, 0.5 fs: {errors:.3?}; ratios {ratios:.3?}");
    for r in ratios {
        assert!((3.5..=4.5).contains(&r), "{r}");
    }
}

/// Without damping and noise the LLG equation conserves the energy (Gilbert 2004) and the
/// spin length. Heun's scheme is not symplectic, so the energy drifts, but by an amount
/// that is small and shrinks as `dt^2` (common practice); renormalisation keeps `|S| = 1`.
#[test]
fn undamped_dynamics_conserves_energy_and_length() {
    let h = coupled(0.0);
    let mut start = vec![[0.0; 3]; h.len()];
    initial::random(&h, &mut start, 5).unwrap();
    let e0 = h.energy(&start).total();
    let mut drift = Vec::new();
    for dt in [1e-3, 5e-4] {
        let mut s = start.clone();
        let mut heun = Heun::new(&h, 0);
        let p = HeunParams { dt, temperature: 0.0 };
        let steps = (2.0 / dt).round() as u64;
        let mut worst: f64 = 0.0;
        for n in 0..steps {
            heun.step(&h, &mut s, &p, n).unwrap();
            if n % 10 == 9 {
                worst = worst.max((h.energy(&s).total() - e0).abs());
            }
        }
        for v in &s {
            assert!(((v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt() - 1.0).abs() < 1e-12);
        }
        drift.push(worst);
    }
    println!(
        "alpha = 0: max |E - E0| over 2 ps = {:.3e} meV (dt 1 fs), {:.3e} meV (dt 0.5 fs); E0 = {e0:.3} meV",
        drift[0], drift[1]
    );
    assert!(drift[0] < 1e-3 * e0.abs(), "{drift:?}");
    assert!(drift[1] < drift[0] / 3.0, "{drift:?}");
}

/// Isotropic exchange only moves moments between sites: the torques of a pair cancel
/// (`mu_i dS_i/dt = -gamma S_i x J S_j - ...` and its partner), so without damping the
/// total moment `M = sum_i mu_i S_i` obeys `dM/dt = -gamma M x B` exactly, whatever the
/// amplitude, and precesses rigidly about a uniform field at `gamma |B|` (the total spin
/// commutes with a Heisenberg Hamiltonian: textbook). Checked on an fcc film with three
/// species of different moment, a diluted sublattice, three shells (one
/// antiferromagnetic), a tilted field and a random start: a site's exchange field divided
/// by another site's moment, or a species' precession rate off, turns `M` away from the
/// rotation. Heun's discretisation breaks the law at second order in `dt`, which the
/// test also checks.
#[test]
fn undamped_exchange_keeps_the_total_moment_precessing() {
    let mut crystal = preset("fcc", 3.6, None).unwrap();
    for (site, species) in crystal.basis.iter_mut().zip([0, 1, 2, 1]) {
        site.species = species;
    }
    crystal.basis[2].occupancy = 0.75;
    let cell = Supercell::new(crystal, [4, 4, 3], [true, true, false], 9).unwrap();
    let mut bonds = BondList::new(cell.basis_len());
    for (n, j) in [(1, 4.0), (2, -1.5), (3, 0.5)] {
        spindrift_hamiltonian::add_shell(&cell, &mut bonds, &shell(n, j, None)).unwrap();
    }
    let a = species(2.0, 0.0, 0.0, [0.0, 0.0, 1.0]);
    let list = vec![
        a.clone(),
        Species { name: "B".into(), moment: 0.7, ..a.clone() },
        Species { name: "C".into(), moment: 3.1, ..a },
    ];
    let field = [0.6, -0.3, 1.2];
    let h = Hamiltonian::new(cell, list, bonds, field).unwrap();
    assert!(h.spin_count() < h.len(), "the dilution left every site occupied");
    let mut start = vec![[0.0; 3]; h.len()];
    initial::random(&h, &mut start, 4).unwrap();
    let total = |s: &[Vec3]| -> Vec3 {
        let mut m = [0.0; 3];
        for (i, v) in s.iter().enumerate() {
            for a in 0..3 {
                m[a] += h.moment(i) * v[a];
            }
        }
        m
    };
    let m0 = total(&start);
    let scale: f64 = (0..h.len()).map(|i| h.moment(i)).sum();
    let b = (field[0] * field[0] + field[1] * field[1] + field[2] * field[2]).sqrt();
    let axis = field.map(|x| x / b);
    // Rodrigues: M0 turned about the field by gamma |B| t (dM/dt = gamma B x M).
    let rotated = |t: f64| -> Vec3 {
        let (c, s) = ((GAMMA_PER_PS * b * t).cos(), (GAMMA_PER_PS * b * t).sin());
        let along = axis[0] * m0[0] + axis[1] * m0[1] + axis[2] * m0[2];
        let cross = [
            axis[1] * m0[2] - axis[2] * m0[1],
            axis[2] * m0[0] - axis[0] * m0[2],
            axis[0] * m0[1] - axis[1] * m0[0],
        ];
        [0, 1, 2].map(|k| m0[k] * c + cross[k] * s + axis[k] * along * (1.0 - c))
    };
    let t_end = 2.0;
    let mut errors = Vec::new();
    for dt in [2e-4, 1e-4] {
        let mut s = start.clone();
        let mut worst: f64 = 0.0;
        let mut heun = Heun::new(&h, 0);
        let p = HeunParams { dt, temperature: 0.0 };
        let steps = (t_end / dt).round() as u64;
        for n in 0..steps {
            heun.step(&h, &mut s, &p, n).unwrap();
            if (n + 1) % 100 == 0 {
                let (m, e) = (total(&s), rotated((n + 1) as f64 * dt));
                let d = ((m[0] - e[0]).powi(2) + (m[1] - e[1]).powi(2) + (m[2] - e[2]).powi(2)).sqrt();
                worst = worst.max(d / scale);
            }
        }
        errors.push(worst);
    }
    let turned = GAMMA_PER_PS * b * t_end;
    println!(
        "|M0| / sum mu = {:.3}, turned by {turned:.3} rad in {t_end} ps; worst |M - R M0| / sum mu at dt = 0.2, 0.1 fs: {:.2e}, {:.2e}",
        (m0[0] * m0[0] + m0[1] * m0[1] + m0[2] * m0[2]).sqrt() / scale,
        errors[0],
        errors[1]
    );
    assert!(errors[0] < 1e-5, "{errors:?}");
    assert!(errors[1] < errors[0] / 3.0, "{errors:?}");
}

/// Time and ensemble average of `f` over `n` independent spins at temperature `t`.
fn thermal_average(h: &Hamiltonian, t: f64, dt: f64, f: impl Fn(Vec3) -> f64) -> f64 {
    let mut s = vec![[0.0, 0.0, 1.0]; h.len()];
    let mut heun = Heun::new(h, 17);
    let p = HeunParams { dt, temperature: t };
    let (equilibrate, measure, every) = (2_000, 20_000, 20);
    let mut sum = 0.0;
    let mut count = 0usize;
    for n in 0..equilibrate + measure {
        heun.step(h, &mut s, &p, n).unwrap();
        if n >= equilibrate && n % every == 0 {
            sum += s.iter().map(|v| f(*v)).sum::<f64>();
            count += s.len();
        }
    }
    sum / count as f64
}

/// Non-interacting moments in a field: `<m.b> = L(x)`, `x = mu muB B / kB T` (Langevin
/// function, see `common::langevin`), within 1% at x = 1 and x = 3. This checks the
/// strength of the thermal field, `2 alpha kB T / (gamma mu muB dt)` (W. F. Brown,
/// Phys. Rev. 130, 1677 (1963)), and the Stratonovich treatment of the noise.
#[test]
fn thermostat_gives_the_langevin_function() {
    let (mu, b) = (2.0, 10.0);
    let h = build(
        "simple-cubic",
        3.0,
        [64, 64, 1],
        [true; 3],
        &[],
        species(mu, 1.0, 0.0, [0.0, 0.0, 1.0]),
        [0.0, 0.0, b],
    );
    for x in [1.0, 3.0] {
        let t = mu * MU_B * b / (K_B * x);
        let m = thermal_average(&h, t, 5e-3, |s| s[2]);
        let expect = langevin(x);
        println!(
            "Heun, free spins, x = {x}: <m.b> = {m:.5}, L(x) = {expect:.5}, rel. error {:.2e}",
            (m - expect) / expect
        );
        assert!((m - expect).abs() < 0.01 * expect, "x = {x}: {m} vs {expect}");
    }
}

/// Uniaxial anisotropy alone: the equilibrium density of the polar angle is
/// `exp(k cos^2(theta) / kB T)` per unit `d cos(theta)` (W. F. Brown, Phys. Rev. 130,
/// 1677 (1963)); `<cos^2 theta>` integrated numerically, within 1%.
#[test]
fn thermostat_gives_the_anisotropy_boltzmann_average() {
    let (mu, k) = (2.0, 0.5);
    let a = 2.0; // k / kB T
    let t = k / (a * K_B);
    let h = build(
        "simple-cubic",
        3.0,
        [64, 64, 1],
        [true; 3],
        &[],
        species(mu, 1.0, k, [0.0, 0.0, 1.0]),
        [0.0; 3],
    );
    let m = thermal_average(&h, t, 5e-3, |s| s[2] * s[2]);
    let w = |c: f64| (a * c * c).exp();
    let expect = simpson(|c| c * c * w(c), -1.0, 1.0, 2000) / simpson(w, -1.0, 1.0, 2000);
    println!(
        "Heun, anisotropy k/kBT = {a}: <cos^2> = {m:.5}, Boltzmann {expect:.5}, rel. error {:.2e}",
        (m - expect) / expect
    );
    assert!((m - expect).abs() < 0.01 * expect, "{m} vs {expect}");
}

/// A failing step reports the first bad site and leaves every spin as it was, even where
/// other chunks had already been advanced.
#[test]
fn non_finite_step_restores_the_spins() {
    let mut crystal = preset("bcc", 3.0, None).unwrap();
    crystal.basis[1].species = 1;
    let cell = Supercell::new(crystal, [16, 16, 16], [true; 3], 0).unwrap();
    let bonds = BondList::new(2);
    let tame =
        Species { name: "A".into(), moment: 2.0, damping: 0.1, anisotropy: 0.1, axis: [0.0, 0.0, 1.0] };
    let wild = Species { name: "B".into(), anisotropy: 1e300, ..tame.clone() };
    let h = Hamiltonian::new(cell, vec![tame, wild], bonds, [0.0, 0.0, 1.0]).unwrap();
    let mut s = vec![[0.0; 3]; h.len()];
    initial::random(&h, &mut s, 1).unwrap();
    let before = bits(&s);
    let mut heun = Heun::new(&h, 0);
    let err = heun.step(&h, &mut s, &HeunParams { dt: 1e-3, temperature: 10.0 }, 42).unwrap_err();
    // The first site of the second basis site (the first row's second piece).
    assert_eq!(err, StepError::NonFinite { site: h.cell().index([0, 0, 0], 1), step: 42 });
    assert_eq!(bits(&s), before);
    // Bad parameters are refused before anything happens.
    assert!(matches!(
        heun.step(&h, &mut s, &HeunParams { dt: -1.0, temperature: 0.0 }, 0),
        Err(StepError::BadParameter { name: "dt", .. })
    ));
    assert!(matches!(
        heun.step(&h, &mut s[1..].to_vec(), &HeunParams::default(), 0),
        Err(StepError::LengthMismatch { .. })
    ));
}

/// Vacant sites stay zero and occupied ones unit length under thermal dynamics.
#[test]
fn vacant_sites_stay_empty() {
    let mut crystal = preset("simple-cubic", 3.0, None).unwrap();
    crystal.basis[0].occupancy = 0.7;
    let cell = Supercell::new(crystal, [20, 20, 20], [true; 3], 9).unwrap();
    let mut bonds = BondList::new(1);
    spindrift_hamiltonian::add_shell(&cell, &mut bonds, &shell(1, 5.0, None)).unwrap();
    let h = Hamiltonian::new(cell, vec![species(2.0, 0.2, 0.1, [0.0, 0.0, 1.0])], bonds, [0.0, 0.0, 1.0])
        .unwrap();
    let mut s = vec![[0.0; 3]; h.len()];
    initial::random(&h, &mut s, 4).unwrap();
    run(&h, &mut s, 1e-3, 50, 100.0, 3);
    for (i, v) in s.iter().enumerate() {
        let l = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
        if h.cell().is_occupied(i) {
            assert!((l - 1.0).abs() < 1e-12);
        } else {
            assert_eq!(*v, [0.0; 3]);
        }
    }
}
