//! Field evaluation on 128 x 128 x 8 simple cubic (periodic in-plane, open along z):
//! the fused kernel of all terms (one shell, then one to three shells, to show the cost
//! growing with the bonds, and one shell of exchange alone), each reference term alone, and the energy: by term bond by
//! bond (the reference), by term and in total through the row kernel; then the fused
//! kernel on as many sites in rows of 32, 128 and 2048 cells, which shows what each row's
//! set-up and end cells cost, and in one layer of rows of 128 (a monolayer: no bonds
//! between layers, the on-site terms in a pass of their own); then lattices with two sites
//! per cell (bcc 64 x 64 x 16 and honeycomb 128 x 128 x 4, as many sites, one shell, with
//! and without DMI), whose rows hold the two sites interleaved.
//! Single-threaded (`field_range` over the whole array) so the figures are per core;
//! criterion reports elements (sites) per second. Seeded spins, set-up outside the timing.

// criterion_group! defines an undocumented function.
#![allow(missing_docs)]

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use spindrift_hamiltonian::{add_shell, DmiKind, Hamiltonian, ShellCoupling, ShellRef, Species};
use spindrift_lattice::{preset, unit_hash, BondList, Supercell, Vec3};
use std::hint::black_box;

/// Exchange on the first `shells` shells, interfacial DMI (normal z) on the first, on
/// `cells` (periodic in-plane, open along z).
fn system(shells: usize, cells: [usize; 3]) -> Hamiltonian {
    system_with(shells, cells, true)
}

/// [`system`], with DMI on the first shell or without.
fn system_with(shells: usize, cells: [usize; 3], with_dmi: bool) -> Hamiltonian {
    lattice_system("simple-cubic", shells, cells, with_dmi)
}

/// Exchange on the first `shells` shells (J = 5 meV / shell), interfacial DMI (normal z)
/// on the first when `with_dmi`, on `lattice` with `cells` (periodic in-plane, open along z).
fn lattice_system(lattice: &str, shells: usize, cells: [usize; 3], with_dmi: bool) -> Hamiltonian {
    let cell = Supercell::new(preset(lattice, 3.0, None).unwrap(), cells, [true, true, false], 0).unwrap();
    let mut bonds = BondList::new(cell.basis_len());
    for shell in 1..=shells {
        let dmi = (with_dmi && shell == 1).then_some((1.0, DmiKind::Interfacial { normal: [0.0, 0.0, 1.0] }));
        let spec = ShellCoupling { shell: ShellRef::Index(shell), j: 5.0 / shell as f64, dmi, pair: None };
        add_shell(&cell, &mut bonds, &spec).unwrap();
    }
    let species =
        vec![Species { name: "M".into(), moment: 2.0, damping: 0.1, anisotropy: 0.2, axis: [0.0, 0.0, 1.0] }];
    Hamiltonian::new(cell, species, bonds, [0.0, 0.0, 1.0]).unwrap()
}

fn random_spins(n: usize) -> Vec<Vec3> {
    (0..n)
        .map(|i| {
            let z = 2.0 * unit_hash(1, 1, i as u64) - 1.0;
            let phi = std::f64::consts::TAU * unit_hash(1, 2, i as u64);
            let r = (1.0 - z * z).sqrt();
            [r * phi.cos(), r * phi.sin(), z]
        })
        .collect()
}

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("field 128x128x8 sc");
    group.sample_size(20);
    for shells in 1..=3 {
        let h = system(shells, [128, 128, 8]);
        let n = h.len();
        let spins = random_spins(n);
        let mut out = vec![[0.0; 3]; n];
        let bonds = h.bonds().from_basis(0).len();
        group.throughput(Throughput::Elements(n as u64));
        group.bench_function(format!("fused field, {shells} shell(s), {bonds} bonds/site"), |b| {
            b.iter(|| h.field_range(black_box(&spins), 0, &mut out))
        });
        if shells == 1 {
            // Pure exchange: one pack of isotropic pairs, merged with the on-site terms.
            let exchange_only = system_with(1, [128, 128, 8], false);
            group.bench_function("fused field, 1 shell, exchange only", |b| {
                b.iter(|| exchange_only.field_range(black_box(&spins), 0, &mut out))
            });
            for term in h.terms() {
                group.bench_function(format!("term {} gradient (reference)", term.name()), |b| {
                    b.iter(|| term.add_gradient(h.cell(), black_box(&spins), &mut out))
                });
            }
            group.bench_function("energy by term, bond by bond (reference)", |b| {
                b.iter(|| black_box(h.energy(black_box(&spins))))
            });
            group.bench_function("energy by term, row kernel", |b| {
                b.iter(|| black_box(h.energy_terms(black_box(&spins))))
            });
            group.bench_function("energy total, row kernel", |b| {
                b.iter(|| black_box(h.energy_total(black_box(&spins))))
            });
        }
    }
    group.finish();

    let mut group = c.benchmark_group("field by row length, 131072 sites");
    group.sample_size(20);
    for cells in [[32, 512, 8], [128, 128, 8], [2048, 8, 8], [128, 1024, 1]] {
        let h = system(1, cells);
        let spins = random_spins(h.len());
        let mut out = vec![[0.0; 3]; h.len()];
        group.throughput(Throughput::Elements(h.len() as u64));
        let layers = if cells[2] == 1 { ", one layer" } else { "" };
        group.bench_function(format!("rows of {} cells{layers}", cells[0]), |b| {
            b.iter(|| h.field_range(black_box(&spins), 0, &mut out))
        });
    }
    group.finish();

    // Lattices with two sites per cell (the rows' sites interleaved), with and without
    // DMI: 131072 sites as above.
    let mut group = c.benchmark_group("field, two sites per cell, 131072 sites");
    group.sample_size(20);
    for (lattice, cells, dmi) in [
        ("bcc", [64, 64, 16], true),
        ("bcc", [64, 64, 16], false),
        ("honeycomb", [128, 128, 4], false),
        ("honeycomb", [128, 128, 4], true),
    ] {
        let h = lattice_system(lattice, 1, cells, dmi);
        let spins = random_spins(h.len());
        let mut out = vec![[0.0; 3]; h.len()];
        group.throughput(Throughput::Elements(h.len() as u64));
        let what = if dmi { "exchange and DMI" } else { "exchange only" };
        group.bench_function(format!("{lattice} {}x{}x{}, {what}", cells[0], cells[1], cells[2]), |b| {
            b.iter(|| h.field_range(black_box(&spins), 0, &mut out))
        });
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
