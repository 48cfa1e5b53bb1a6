//! One Heun step (T = 0 and T = 300 K) and one Metropolis sweep on 128 x 128 x 8 simple
//! cubic with exchange, interfacial DMI on in-plane bonds, anisotropy and a field.
//! Criterion reports elements (spins) per second; ns per spin-step is its inverse. The
//! second group runs the 300 K step and the sweep in pools of one and two threads, for the
//! parallel speed-up (the default group uses rayon's global pool). The third runs the sweep
//! on one thread at sizes whose rows do not hold a multiple of the sweep's 64-trial groups
//! (see `trial_groups.rs`), per spin against 128 x 128 x 8. Seeded spins; set-up (system,
//! colouring, pools) outside the timing.

// criterion_group! defines an undocumented function.
#![allow(missing_docs)]

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use spindrift_dynamics::{initial, Heun, HeunParams, Metropolis};
use spindrift_hamiltonian::{add_shell, Hamiltonian, ShellCoupling, ShellRef, Species};
use spindrift_lattice::{preset, BondList, Coupling, Supercell};

fn system(cells: [usize; 3]) -> Hamiltonian {
    let cell = Supercell::new(preset("simple-cubic", 3.0, None).unwrap(), cells, [true; 3], 0).unwrap();
    let mut bonds = BondList::new(1);
    // Exchange on all six neighbours, DMI only on the four in-plane ones.
    add_shell(
        &cell,
        &mut bonds,
        &ShellCoupling { shell: ShellRef::Index(1), j: 10.0, dmi: None, pair: None },
    )
    .unwrap();
    let n = [0.0, 0.0, 1.0];
    for (offset, r) in [([1, 0, 0], [3.0, 0.0, 0.0]), ([0, 1, 0], [0.0, 3.0, 0.0])] {
        let d = spindrift_hamiltonian::interfacial_vector(2.0, n, r);
        bonds.add_pair(0, 0, offset, r, Coupling { j: 0.0, d, tensor: None }).unwrap();
    }
    let species =
        vec![Species { name: "M".into(), moment: 2.0, damping: 0.1, anisotropy: 0.2, axis: [0.0, 0.0, 1.0] }];
    Hamiltonian::new(cell, species, bonds, [0.0, 0.0, 1.0]).unwrap()
}

fn bench(c: &mut Criterion) {
    let h = system([128, 128, 8]);
    let n = h.len();
    let mut spins = vec![[0.0; 3]; n];
    initial::random(&h, &mut spins, 1).unwrap();
    let mut group = c.benchmark_group("128x128x8 sc");
    group.throughput(Throughput::Elements(n as u64));
    group.sample_size(30);
    for t in [0.0, 300.0] {
        let mut heun = Heun::new(&h, 1);
        let p = HeunParams { dt: 1e-3, temperature: t };
        let mut s = spins.clone();
        let mut step = 0u64;
        group.bench_function(format!("heun step T={t} K"), |b| {
            b.iter(|| {
                heun.step(&h, &mut s, &p, step).unwrap();
                step += 1;
            })
        });
    }
    let mut mc = Metropolis::new(&h, 1).unwrap();
    let mut s = spins.clone();
    let mut sweep = 0u64;
    group.bench_function("metropolis sweep T=300 K", |b| {
        b.iter(|| {
            mc.sweep(&h, &mut s, 300.0, sweep, false).unwrap();
            sweep += 1;
        })
    });
    group.finish();

    let mut group = c.benchmark_group("128x128x8 sc, threads");
    group.throughput(Throughput::Elements(n as u64));
    group.sample_size(20);
    for threads in [1, 2] {
        let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
        let mut heun = Heun::new(&h, 1);
        let p = HeunParams { dt: 1e-3, temperature: 300.0 };
        let mut s = spins.clone();
        let mut step = 0u64;
        group.bench_function(format!("heun step T=300 K, {threads} thread(s)"), |b| {
            b.iter(|| {
                pool.install(|| heun.step(&h, &mut s, &p, step)).unwrap();
                step += 1;
            })
        });
        let mut mc = Metropolis::new(&h, 1).unwrap();
        let mut s = spins.clone();
        let mut sweep = 0u64;
        group.bench_function(format!("metropolis sweep T=300 K, {threads} thread(s)"), |b| {
            b.iter(|| {
                pool.install(|| mc.sweep(&h, &mut s, 300.0, sweep, false)).unwrap();
                sweep += 1;
            })
        });
    }
    group.finish();

    let mut group = c.benchmark_group("metropolis sweep by size, 1 thread");
    group.sample_size(20);
    let pool = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
    for cells in [[128, 128, 8], [100, 100, 8], [28, 28, 28]] {
        let h = system(cells);
        let mut s = vec![[0.0; 3]; h.len()];
        initial::random(&h, &mut s, 1).unwrap();
        group.throughput(Throughput::Elements(h.len() as u64));
        let mut mc = Metropolis::new(&h, 1).unwrap();
        let mut sweep = 0u64;
        let [n1, n2, n3] = cells;
        group.bench_function(format!("{n1}x{n2}x{n3} sc"), |b| {
            b.iter(|| {
                pool.install(|| mc.sweep(&h, &mut s, 300.0, sweep, false)).unwrap();
                sweep += 1;
            })
        });
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
