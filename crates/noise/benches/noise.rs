//! Throughput of the bulk generators over 10^5 sites: the thermal noise (three Gaussians
//! per site) in one call and in the 256-site blocks of the Heun step, the per-site call for
//! comparison, and the Monte Carlo trial draws of a colour class (every other site).
//! Criterion reports elements per second; the time per site is the reciprocal.
// criterion's macros define public functions without doc comments.
#![allow(missing_docs)]

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use spindrift_noise::{NoiseStream, STREAM_LLG_THERMAL, STREAM_METROPOLIS};
use std::hint::black_box;

const SITES: usize = 100_000;

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("noise");
    group.throughput(Throughput::Elements(SITES as u64));

    let thermal = NoiseStream::new(7, STREAM_LLG_THERMAL);
    let mut g = vec![[0.0; 3]; SITES];
    let mut step = 0u64;
    group.bench_function("fill_gaussian3_dense per 1e5 sites", |b| {
        b.iter(|| {
            step += 1;
            thermal.fill_gaussian3_dense(black_box(step), 0, 1.0, &mut g);
            black_box(&g);
        })
    });
    // As the Heun step calls it: one 256-site block at a time, output in L1, scaled by a
    // thermal width.
    group.bench_function("fill_gaussian3_dense in 256-site blocks, 1e5 sites", |b| {
        b.iter(|| {
            step += 1;
            for (k, block) in g.chunks_mut(256).enumerate() {
                thermal.fill_gaussian3_dense(black_box(step), (k * 256) as u64, 0.3, block);
            }
            black_box(&g);
        })
    });
    group.bench_function("gaussian3_dense per site, 1e5 sites", |b| {
        b.iter(|| {
            step += 1;
            for (k, v) in g.iter_mut().enumerate() {
                *v = thermal.gaussian3_dense(black_box(step), k as u64);
            }
            black_box(&g);
        })
    });

    let metropolis = NoiseStream::new(7, STREAM_METROPOLIS);
    let sites: Vec<u32> = (0..SITES as u32).map(|i| 2 * i).collect();
    let (mut pick, mut accept) = (vec![0.0; SITES], vec![0.0; SITES]);
    let mut kick = [vec![0.0; SITES], vec![0.0; SITES], vec![0.0; SITES]];
    group.bench_function("fill_trial_at, every other site of 2e5", |b| {
        b.iter(|| {
            step += 1;
            metropolis.fill_trial_at(
                black_box(step),
                &sites,
                kick.each_mut().map(Vec::as_mut_slice),
                &mut pick,
                &mut accept,
            );
            black_box((&kick, &pick, &accept));
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
