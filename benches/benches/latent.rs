//! Latent operations: drawing latents (portable Philox vs NumPy-compatible MT19937, with and
//! without truncation) and slerp paths through keyframes.
//!
//! Read the figures as time per call for the stated count; latent work should stay far below
//! the cost of one image (a fraction of a millisecond for the demo model), so sampling is never
//! the bottleneck of a request. Run with `cargo bench -p genloom-benches --bench latent`.

#![allow(missing_docs)] // criterion's macros generate undocumented functions

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use genloom::{Latents, PathOptions, RngMode, SampleOptions};
use std::hint::black_box;

fn sampling(c: &mut Criterion) {
    let mut g = c.benchmark_group("sample 64 latents of 64");
    for (name, mode, trunc) in [
        ("portable", RngMode::Portable, None),
        ("portable truncated 1.0", RngMode::Portable, Some(1.0)),
        ("numpy-compatible", RngMode::NumpyCompatible, None),
    ] {
        g.bench_function(BenchmarkId::from_parameter(name), |b| {
            let mut o = SampleOptions::new(7, 64);
            o.mode = mode;
            o.truncation = trunc;
            b.iter(|| Latents::sample(64, black_box(&o)).expect("valid options"))
        });
    }
    g.finish();
}

fn paths(c: &mut Criterion) {
    let keys = Latents::sample(64, &SampleOptions::new(1, 4)).expect("valid options");
    c.bench_function("slerp path: 4 keyframes x 32 steps, looped", |b| {
        let mut o = PathOptions::default();
        o.steps = 32;
        o.looped = true;
        b.iter(|| genloom::latent::path(black_box(&keys), &o).expect("valid path"))
    });
}

criterion_group!(benches, sampling, paths);
criterion_main!(benches);
