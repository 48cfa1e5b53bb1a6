//! Small-amplitude precession of coupled spins against linear spin-wave theory: the
//! dynamics that equilibrium checks cannot see (a Boltzmann average does not depend on how
//! fast each spin turns, so an error in a site's `gamma / mu` scaling of its exchange or DMI
//! field would pass them).
//!
//! About a state along `+z`, write each spin as `S = (a_x, a_y, sqrt(1 - |a|^2))` and
//! `a = a_x + i a_y`. To first order in `a` the undamped LLG equation of INTERFACE.md,
//! `dS/dt = -gamma S x B_i`, reads `da_i/dt = i gamma (B_i,z a_i - B_i,perp)`, with `B_i,perp`
//! the complex transverse field. That is linear spin-wave theory in its classical form
//! (e.g. C. Kittel, Introduction to Solid State Physics, 8th ed., Wiley 2005, ch. 14, for
//! the dispersion of a Heisenberg ferromagnet; D. D. Stancil and A. Prabhakar, Spin Waves,
//! Springer 2009); the formulas of each test follow from it with the Hamiltonian of
//! INTERFACE.md.

use crate::common::*;
use spindrift_dynamics::{Heun, HeunParams};
use spindrift_hamiltonian::constants::{GAMMA_PER_PS, MU_B};
use spindrift_hamiltonian::{add_shell, DmiKind, Hamiltonian, Species};
use spindrift_lattice::{preset, BondList, Supercell, Vec3};
use std::f64::consts::TAU;

/// A complex number as `(re, im)`.
type C = (f64, f64);

fn mul(a: C, b: C) -> C {
    (a.0 * b.0 - a.1 * b.1, a.0 * b.1 + a.1 * b.0)
}

fn cis(phase: f64) -> C {
    (phase.cos(), phase.sin())
}

/// The spin tilted from `+z` by the small complex amplitude `a`.
fn tilted(a: C) -> Vec3 {
    let z = (1.0 - a.0 * a.0 - a.1 * a.1).sqrt();
    [a.0, a.1, z]
}

/// Undamped, zero-temperature Heun steps of `dt` ps, calling `each(step, spins)` after
/// every step.
fn precess(h: &Hamiltonian, spins: &mut Vec<Vec3>, dt: f64, steps: u64, mut each: impl FnMut(u64, &[Vec3])) {
    let mut heun = Heun::new(h, 0);
    let p = HeunParams { dt, temperature: 0.0 };
    for n in 0..steps {
        heun.step(h, spins, &p, n).unwrap();
        each(n + 1, spins);
    }
}

/// Simple cubic, `a` = 3 Å, one species (`mu` = 2), nearest-neighbour exchange `J` = 5 meV
/// with bulk DMI `d` = 1 meV (`D_ij = d r_ij / |r_ij|`), an easy axis `k` = 0.2 meV along z
/// and `B` = 1 T along z, in a box of 2 x 2 x 32 cells, periodic. A plane wave
/// `a_j = eps exp(i q z_j)` along the field is an eigenmode with
///
/// `Omega(q) = gamma [B + (2 k + 2 J (1 - cos q a) - 2 d sin q a) / (mu muB)]`
///
/// from `B_i,z = B + (2 k + z J) / (mu muB)` and, for the bonds along `+-z`,
/// `B_i,perp = (J (a_i+z + a_i-z) + d (S_i+z x z - S_i-z x z)_perp) / (mu muB)` with
/// `(S x z)_perp = -i a`; the in-plane bonds add nothing to first order for `q` along z.
/// The DMI term is odd in `q`: waves along and against the field precess at different
/// rates, the nonreciprocity of magnons in a chiral magnet magnetised along the wave
/// vector (M. Kataoka, J. Phys. Soc. Jpn. 56, 3635 (1987), from memory; any sign or factor
/// error in the DMI's field shows in it). `q = 0` is the uniform (Kittel) mode,
/// `gamma (B + 2 k / (mu muB))`.
#[test]
fn plane_waves_precess_at_the_linear_spin_wave_frequency() {
    let (a, mu, j, d, k, b) = (3.0, 2.0, 5.0, 1.0, 0.2, 1.0);
    let n = 32;
    let h = build(
        "simple-cubic",
        a,
        [2, 2, n],
        [true; 3],
        &[shell(1, j, Some((d, DmiKind::Bulk)))],
        species(mu, 0.0, k, [0.0, 0.0, 1.0]),
        [0.0, 0.0, b],
    );
    let eps = 0.01;
    let (dt, steps) = (1e-3, 2000);
    let mut worst: f64 = 0.0;
    for m in [-4i32, -2, -1, 0, 1, 2, 4] {
        let q = TAU * m as f64 / (n as f64 * a);
        let qa = q * a;
        let expect =
            GAMMA_PER_PS * (b + (2.0 * k + 2.0 * j * (1.0 - qa.cos()) - 2.0 * d * qa.sin()) / (mu * MU_B));
        let phases: Vec<f64> = (0..h.len()).map(|i| q * h.cell().position(i)[2]).collect();
        let mut spins: Vec<Vec3> = phases.iter().map(|&p| tilted(mul((eps, 0.0), cis(p)))).collect();
        // The mode's amplitude: the projection of the a_j on the plane wave.
        let amplitude = |s: &[Vec3]| -> C {
            let mut sum = (0.0, 0.0);
            for (v, &p) in s.iter().zip(&phases) {
                let t = mul((v[0], v[1]), cis(-p));
                sum = (sum.0 + t.0, sum.1 + t.1);
            }
            (sum.0 / s.len() as f64, sum.1 / s.len() as f64)
        };
        let (mut phase, mut last) = (0.0, 0.0);
        let mut leak: f64 = 0.0;
        precess(&h, &mut spins, dt, steps, |_, s| {
            let p = amplitude(s);
            let angle = p.1.atan2(p.0);
            phase += (angle - last) - TAU * ((angle - last) / TAU).round();
            last = angle;
            // An eigenmode keeps its amplitude: nothing leaks into other waves.
            leak = leak.max(((p.0 * p.0 + p.1 * p.1).sqrt() - eps).abs() / eps);
        });
        let omega = phase / (steps as f64 * dt);
        let error = (omega - expect).abs() / expect;
        println!("q a = {qa:+.4}: Omega {omega:.6} rad/ps, linear spin-wave theory {expect:.6}, relative error {error:.1e}, amplitude change {leak:.1e}");
        assert!(error < 1e-3, "q a = {qa}: {omega} against {expect}");
        assert!(leak < 1e-3, "q a = {qa}: amplitude changed by {leak}");
        worst = worst.max(error);
    }
    println!("worst relative error {worst:.1e}");
}

/// Two species of different moment on the two sites of bcc (`mu_A` = 2 at the corners,
/// `mu_B` = 3 at the body centres), nearest-neighbour exchange `J` = 2 meV between them
/// (`z` = 8), `B` = 1 T along z, undamped. The uniform motion of the two sublattices has two
/// modes: the whole magnet precessing at `gamma B`, and the exchange mode at
/// `gamma (B + z J (1/mu_A + 1/mu_B) / muB)` with amplitudes `(mu_B, -mu_A)`, which keeps
/// the total moment still (the exchange resonance of a two-sublattice magnet: R. K.
/// Wangsness, Phys. Rev. 91, 1085 (1953); C. Kittel, Introduction to Solid State Physics,
/// ch. 14). Tilting the A spins alone by `eps` starts both:
/// `a_A(t) = eps (mu_A e^{i w1 t} + mu_B e^{i w2 t}) / (mu_A + mu_B)`,
/// `a_B(t) = eps mu_A (e^{i w1 t} - e^{i w2 t}) / (mu_A + mu_B)`. A site's exchange field
/// divided by the wrong moment changes the frequency or the amplitudes.
#[test]
fn two_sublattices_show_the_exchange_mode() {
    let (mu_a, mu_b, j, b) = (2.0, 3.0, 2.0, 1.0);
    let mut crystal = preset("bcc", 3.0, None).unwrap();
    crystal.basis[1].species = 1;
    let cell = Supercell::new(crystal, [4, 4, 4], [true; 3], 0).unwrap();
    let mut bonds = BondList::new(cell.basis_len());
    add_shell(&cell, &mut bonds, &shell(1, j, None)).unwrap();
    let sa = species(mu_a, 0.0, 0.0, [0.0, 0.0, 1.0]);
    let sb = Species { name: "B".into(), moment: mu_b, ..sa.clone() };
    let h = Hamiltonian::new(cell, vec![sa, sb], bonds, [0.0, 0.0, b]).unwrap();
    let z = 8.0;
    let w1 = GAMMA_PER_PS * b;
    let w2 = GAMMA_PER_PS * (b + z * j * (1.0 / mu_a + 1.0 / mu_b) / MU_B);
    let eps = 0.01;
    let mut spins: Vec<Vec3> = (0..h.len())
        .map(|i| if h.cell().basis_of(i) == 0 { tilted((eps, 0.0)) } else { tilted((0.0, 0.0)) })
        .collect();
    let (dt, steps) = (1e-4, 10_000);
    let total = mu_a + mu_b;
    let mut worst: f64 = 0.0;
    precess(&h, &mut spins, dt, steps, |n, s| {
        if n % 50 != 0 {
            return;
        }
        let t = n as f64 * dt;
        let (e1, e2) = (cis(w1 * t), cis(w2 * t));
        let expect_a = ((mu_a * e1.0 + mu_b * e2.0) * eps / total, (mu_a * e1.1 + mu_b * e2.1) * eps / total);
        let expect_b = (mu_a * (e1.0 - e2.0) * eps / total, mu_a * (e1.1 - e2.1) * eps / total);
        for (i, v) in s.iter().enumerate() {
            let e = if h.cell().basis_of(i) == 0 { expect_a } else { expect_b };
            worst = worst.max(((v[0] - e.0).powi(2) + (v[1] - e.1).powi(2)).sqrt() / eps);
        }
    });
    println!(
        "exchange mode {w2:.4} rad/ps, Larmor {w1:.4} rad/ps: worst deviation from the linear solution over {} ps, {worst:.1e} of the tilt",
        steps as f64 * dt
    );
    assert!(worst < 1e-2, "{worst}");
}
