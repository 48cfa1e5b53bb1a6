//! Bitwise reproducibility across thread counts and across a stop and resume
//! (INTERFACE.md: results are identical for every `--threads N`; `--resume` continues bit
//! for bit).

use crate::common::*;
use spindrift_dynamics::initial;
use spindrift_dynamics::{Heun, HeunParams, Metropolis, Relaxer};
use spindrift_hamiltonian::Hamiltonian;
use spindrift_lattice::Vec3;

/// Large enough for several chunks of `CHUNK` sites (24 x 24 x 16 = 9216 sites).
fn system() -> Hamiltonian {
    build(
        "simple-cubic",
        3.0,
        [24, 24, 16],
        [true, true, false],
        &[shell(1, 5.0, interfacial(1.0)), shell(2, 0.5, None)],
        species(2.0, 0.1, 0.2, [0.0, 0.0, 1.0]),
        [0.0, 0.3, 1.0],
    )
}

fn start(h: &Hamiltonian) -> Vec<Vec3> {
    let mut s = vec![[0.0; 3]; h.len()];
    initial::random(h, &mut s, 77).unwrap();
    s
}

fn heun_run(h: &Hamiltonian, from: u64, to: u64, s: &mut Vec<Vec3>) {
    let mut heun = Heun::new(h, 2024);
    let p = HeunParams { dt: 1e-3, temperature: 300.0 };
    for n in from..to {
        heun.step(h, s, &p, n).unwrap();
    }
}

#[test]
fn heun_is_bitwise_reproducible() {
    let h = system();
    let one = with_threads(1, || {
        let mut s = start(&h);
        heun_run(&h, 0, 20, &mut s);
        s
    });
    let two = with_threads(2, || {
        let mut s = start(&h);
        heun_run(&h, 0, 20, &mut s);
        s
    });
    assert_eq!(bits(&one), bits(&two));
    // Stopped after 8 steps and resumed with a new integrator: the same spins.
    let resumed = with_threads(2, || {
        let mut s = start(&h);
        heun_run(&h, 0, 8, &mut s);
        heun_run(&h, 8, 20, &mut s);
        s
    });
    assert_eq!(bits(&one), bits(&resumed));
    // And the noise did something: a different seed gives different spins.
    let mut other = start(&h);
    let mut heun = Heun::new(&h, 2025);
    for n in 0..20 {
        heun.step(&h, &mut other, &HeunParams { dt: 1e-3, temperature: 300.0 }, n).unwrap();
    }
    assert_ne!(bits(&one), bits(&other));
}

#[test]
fn metropolis_is_bitwise_reproducible() {
    let h = system();
    let sweeps = |threads: usize, stop: Option<u64>| {
        with_threads(threads, || {
            let mut s = start(&h);
            let mut mc = Metropolis::new(&h, 9).unwrap();
            for n in 0..12 {
                if Some(n) == stop {
                    // Resume: a new sampler carrying the checkpointed width.
                    let sigma = mc.sigma();
                    mc = Metropolis::new(&h, 9).unwrap();
                    mc.set_sigma(sigma);
                }
                mc.sweep(&h, &mut s, 150.0, n, n < 6).unwrap();
            }
            s
        })
    };
    let one = sweeps(1, None);
    assert_eq!(bits(&one), bits(&sweeps(2, None)));
    assert_eq!(bits(&one), bits(&sweeps(2, Some(4))));
}

#[test]
fn relaxation_is_bitwise_reproducible() {
    let h = system();
    let iterate = |threads: usize, stop: Option<u64>| {
        with_threads(threads, || {
            let mut s = start(&h);
            let mut r = Relaxer::new(&h);
            for n in 0..30 {
                if Some(n) == stop {
                    let state = r.state();
                    r = Relaxer::new(&h);
                    r.restore(&state).unwrap();
                }
                r.iterate(&h, &mut s, 0.0).unwrap();
            }
            s
        })
    };
    let one = iterate(1, None);
    assert_eq!(bits(&one), bits(&iterate(2, None)));
    assert_eq!(bits(&one), bits(&iterate(2, Some(13))));
}
