//! Metropolis sampling against exact equilibrium averages.

use crate::common::*;
use spindrift_dynamics::initial;
use spindrift_dynamics::{Metropolis, StepError};
use spindrift_hamiltonian::constants::{K_B, MU_B};
use spindrift_hamiltonian::Hamiltonian;
use spindrift_lattice::{preset, BondList, Supercell, Vec3};

fn average(h: &Hamiltonian, t: f64, f: impl Fn(Vec3) -> f64) -> (f64, f64) {
    let mut s = vec![[0.0, 0.0, 1.0]; h.len()];
    let mut mc = Metropolis::new(h, 23).unwrap();
    let (equilibrate, measure) = (300u64, 3_000u64);
    for n in 0..equilibrate {
        mc.sweep(h, &mut s, t, n, true).unwrap();
    }
    let mut sum = 0.0;
    let mut acc = 0.0;
    for n in equilibrate..equilibrate + measure {
        let st = mc.sweep(h, &mut s, t, n, false).unwrap();
        acc += st.acceptance();
        sum += s.iter().map(|v| f(*v)).sum::<f64>();
    }
    (sum / (measure as f64 * s.len() as f64), acc / measure as f64)
}

/// Detailed balance: free moments in a field sample `<m.b> = L(x)`, `x = mu muB B / kB T`
/// (Langevin function, `common::langevin`), within 1%, at x = 1 and x = 5, with the field
/// along a direction that is no lattice axis.
#[test]
fn free_spins_give_the_langevin_function() {
    let (mu, b) = (2.0, 4.0);
    let dir = [0.48, -0.6, 0.64];
    let h = build(
        "simple-cubic",
        3.0,
        [64, 64, 1],
        [true; 3],
        &[],
        species(mu, 0.1, 0.0, [0.0, 0.0, 1.0]),
        [b * dir[0], b * dir[1], b * dir[2]],
    );
    for x in [1.0, 5.0] {
        let t = mu * MU_B * b / (K_B * x);
        let (m, acc) = average(&h, t, |s| s[0] * dir[0] + s[1] * dir[1] + s[2] * dir[2]);
        let expect = langevin(x);
        println!(
            "Metropolis, free spins, x = {x}: <m.b> = {m:.5}, L(x) = {expect:.5}, rel. error {:.2e}, acceptance {acc:.3}",
            (m - expect) / expect
        );
        assert!((m - expect).abs() < 0.01 * expect, "x = {x}: {m} vs {expect}");
    }
}

/// Uniaxial anisotropy: `<cos^2 theta>` against the Boltzmann average with weight
/// `exp(k cos^2 theta / kB T)` (W. F. Brown, Phys. Rev. 130, 1677 (1963)), within 1%, at a
/// temperature where the two minima are separated by a barrier of 4 kB T: the reflection
/// move carries spins across.
#[test]
fn anisotropy_average_is_boltzmann() {
    let (k, a) = (0.5, 4.0);
    let t = k / (a * K_B);
    let h = build(
        "simple-cubic",
        3.0,
        [64, 64, 1],
        [true; 3],
        &[],
        species(2.0, 0.1, k, [0.0, 0.0, 1.0]),
        [0.0; 3],
    );
    let (m, _) = average(&h, t, |s| s[2] * s[2]);
    let w = |c: f64| (a * c * c).exp();
    let expect = simpson(|c| c * c * w(c), -1.0, 1.0, 2000) / simpson(w, -1.0, 1.0, 2000);
    let (z, _) = average(&h, t, |s| s[2]);
    println!("Metropolis, anisotropy k/kBT = {a}: <cos^2> = {m:.5}, Boltzmann {expect:.5}; <cos> = {z:.4}");
    assert!((m - expect).abs() < 0.01 * expect, "{m} vs {expect}");
    // Both wells are visited equally (symmetry of the energy).
    assert!(z.abs() < 0.02, "{z}");
}

/// At zero temperature no accepted move raises the energy (Metropolis rule with
/// `exp(-dE/0) = 0`), and a ferromagnet in a field only goes down in energy.
#[test]
fn zero_temperature_sweeps_only_go_downhill() {
    let h = build(
        "triangular",
        3.0,
        [12, 12, 1],
        [true; 3],
        &[shell(1, 4.0, interfacial(1.0))],
        species(2.0, 0.1, 0.1, [0.0, 0.0, 1.0]),
        [0.0, 0.0, 2.0],
    );
    let mut s = vec![[0.0; 3]; h.len()];
    initial::random(&h, &mut s, 8).unwrap();
    let mut mc = Metropolis::new(&h, 1).unwrap();
    let mut e = h.energy(&s).total();
    for n in 0..50 {
        mc.sweep(&h, &mut s, 0.0, n, true).unwrap();
        let e2 = h.energy(&s).total();
        assert!(e2 <= e + 1e-9 * e.abs(), "{e2} > {e}");
        e = e2;
    }
    assert!(matches!(mc.sweep(&h, &mut s, -1.0, 0, false), Err(StepError::BadParameter { .. })));
}

/// The energy change a sweep reports is the total energy after it minus before, evaluated
/// afresh by the independent term-by-term sum (`Hamiltonian::energy`), to rounding: the
/// bookkeeping Monte Carlo stages use instead of a full evaluation per sweep. Exchange,
/// interfacial DMI, anisotropy and field on a periodic triangular lattice, spread over
/// several chunks, at a temperature where about half the moves pass; with 1 and 2 threads
/// the reported changes are bitwise equal (integer sums).
#[test]
fn sweep_energy_change_is_the_energy_difference() {
    let h = build(
        "triangular",
        3.0,
        [96, 96, 1],
        [true; 3],
        &[shell(1, 4.0, interfacial(1.0))],
        species(2.0, 0.1, 0.3, [0.0, 0.0, 1.0]),
        [0.0, 0.0, 1.0],
    );
    let run = |threads| {
        with_threads(threads, || {
            let mut s = vec![[0.0; 3]; h.len()];
            initial::random(&h, &mut s, 4).unwrap();
            let mut mc = Metropolis::new(&h, 9).unwrap();
            let mut changes = Vec::new();
            for n in 0..20 {
                let before = h.energy(&s).total();
                let st = mc.sweep(&h, &mut s, 40.0, n, n < 10).unwrap();
                let after = h.energy(&s).total();
                assert!(st.accepted > 0 && st.accepted < st.attempted);
                // Each accepted change is rounded to 2^-32 meV; the totals (about 1e5 meV)
                // to 1e-11 relative.
                let tolerance = st.accepted as f64 * 2f64.powi(-33) + 1e-11 * before.abs();
                assert!(
                    (st.energy_change - (after - before)).abs() <= tolerance,
                    "sweep {n}: reported {} vs {}",
                    st.energy_change,
                    after - before
                );
                changes.push(st.energy_change.to_bits());
            }
            changes
        })
    };
    assert_eq!(run(1), run(2));
}

/// The fixed-point moment sum a sweep gathers from the spins it decides is exactly that
/// of a fresh pass over the spins after the sweep (an integer sum, independent of order:
/// common practice), and its magnetisation is `sum mu_i S_i / sum mu_i` (INTERFACE.md) to
/// rounding. Two species of different moments on the two sites of a diluted bcc basis,
/// several chunks; the same sums with 1 and 2 threads.
#[test]
fn sweep_moment_is_the_moment_of_the_spins() {
    let mut crystal = preset("bcc", 3.0, None).unwrap();
    crystal.basis[1].species = 1;
    for b in &mut crystal.basis {
        b.occupancy = 0.9;
    }
    let cell = Supercell::new(crystal, [16, 16, 12], [true, true, false], 5).unwrap();
    let mut bonds = BondList::new(2);
    spindrift_hamiltonian::add_shell(&cell, &mut bonds, &shell(1, 5.0, None)).unwrap();
    let mut heavy = species(3.7, 0.1, 0.2, [0.0, 0.0, 1.0]);
    heavy.name = "B".into();
    let light = species(1.3, 0.1, 0.0, [0.0, 0.0, 1.0]);
    let h = Hamiltonian::new(cell, vec![light, heavy], bonds, [0.0, 0.0, 0.5]).unwrap();
    let moment = |i: usize| if h.cell().basis_of(i) == 0 { 1.3 } else { 3.7 };
    let run = |threads| {
        with_threads(threads, || {
            let mut s = vec![[0.0; 3]; h.len()];
            initial::random(&h, &mut s, 6).unwrap();
            let mut mc = Metropolis::new(&h, 11).unwrap();
            let mut tally = [0; 3];
            let mut sums = Vec::new();
            for n in 0..12 {
                let st = mc.sweep(&h, &mut s, 200.0, n, n < 6).unwrap();
                assert!(st.accepted > 0 && st.accepted < st.attempted);
                tally = mc.tally().units(&s);
                assert_eq!(st.moment, tally, "sweep {n}");
                sums.push(st.moment);
            }
            let mut sum = [0.0; 3];
            let mut total = 0.0;
            for (i, v) in s.iter().enumerate() {
                if h.cell().is_occupied(i) {
                    total += moment(i);
                    for a in 0..3 {
                        sum[a] += moment(i) * v[a];
                    }
                }
            }
            let m = mc.tally().magnetization(tally);
            for a in 0..3 {
                assert!((m[a] - sum[a] / total).abs() < 1e-13, "{m:?} vs {sum:?} / {total}");
            }
            sums
        })
    };
    assert_eq!(run(1), run(2));
}

/// Vacant sites are never touched, and the sampler's memory is small.
#[test]
fn diluted_lattice_and_memory() {
    let mut crystal = preset("bcc", 3.0, None).unwrap();
    for b in &mut crystal.basis {
        b.occupancy = 0.6;
    }
    let cell = Supercell::new(crystal, [10, 10, 10], [true; 3], 3).unwrap();
    let mut bonds = BondList::new(2);
    spindrift_hamiltonian::add_shell(&cell, &mut bonds, &shell(1, 5.0, None)).unwrap();
    let h = Hamiltonian::new(cell, vec![species(2.0, 0.1, 0.0, [0.0, 0.0, 1.0])], bonds, [0.0; 3]).unwrap();
    let mut s = vec![[0.0; 3]; h.len()];
    initial::random(&h, &mut s, 2).unwrap();
    let mut mc = Metropolis::new(&h, 5).unwrap();
    let st = mc.sweep(&h, &mut s, 300.0, 0, false).unwrap();
    assert_eq!(st.attempted as usize, h.spin_count());
    for (i, v) in s.iter().enumerate() {
        if !h.cell().is_occupied(i) {
            assert_eq!(*v, [0.0; 3]);
        }
    }
    let big = build(
        "simple-cubic",
        3.0,
        [128, 128, 8],
        [true; 3],
        &[shell(1, 5.0, None)],
        species(2.0, 0.1, 0.0, [0.0, 0.0, 1.0]),
        [0.0; 3],
    );
    let mc = Metropolis::new(&big, 0).unwrap();
    println!(
        "Metropolis memory on 128x128x8 simple cubic: {:.2} bytes per spin ({} colours)",
        mc.bytes_per_site(),
        mc.colouring().len()
    );
    assert!(mc.bytes_per_site() < 20.0);
}

/// Equipartition on a film swept in blocks of layers: far below its ordering temperature a
/// classical ferromagnet has two quadratic degrees of freedom per spin (the deviations
/// from the axis), so `<E> - E0 = N kB T` to first order in `T` (equipartition theorem;
/// e.g. C. Kittel and H. Kroemer, Thermal Physics, 2nd ed., Freeman (1980), ch. 3; the
/// uniaxial anisotropy gaps the uniform mode). 24x24x8 simple cubic, open along a3 (four
/// blocks of two layers), J = 10 meV, K = 0.5 meV, at kB T = 0.005 J and 0.01 J, within
/// 0.5% (seen: 2e-5 and 9e-4, the second-order term), on 1 and 2 threads.
#[test]
fn film_in_layer_blocks_obeys_equipartition() {
    let h = build(
        "simple-cubic",
        3.0,
        [24, 24, 8],
        [true, true, false],
        &[shell(1, 10.0, None)],
        species(2.0, 0.1, 0.5, [0.0, 0.0, 1.0]),
        [0.0; 3],
    );
    let up = vec![[0.0, 0.0, 1.0]; h.len()];
    let e0 = h.energy_total(&up);
    for threads in [1, 2] {
        for kt in [0.05, 0.1] {
            let t = kt / K_B;
            let excess = with_threads(threads, || {
                let mut mc = Metropolis::new(&h, 31).unwrap();
                assert_eq!(mc.layer_blocks(), 4);
                let mut s = up.clone();
                let (equilibrate, measure) = (400u64, 2_000u64);
                for n in 0..equilibrate {
                    mc.sweep(&h, &mut s, t, n, true).unwrap();
                }
                let mut sum = 0.0;
                for n in equilibrate..equilibrate + measure {
                    mc.sweep(&h, &mut s, t, n, false).unwrap();
                    sum += h.energy_total(&s) - e0;
                }
                sum / measure as f64
            });
            let expect = h.len() as f64 * kt;
            println!(
                "Metropolis, film in blocks of layers, {threads} threads, kB T = {kt} meV: <E> - E0 = {excess:.3} meV, N kB T = {expect:.3} meV, rel. {:.2e}",
                excess / expect - 1.0
            );
            assert!((excess / expect - 1.0).abs() < 0.005, "kB T = {kt}: {excess} vs {expect}");
        }
    }
}
