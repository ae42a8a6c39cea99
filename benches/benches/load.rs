//! Load and optimise: `Model::from_bytes` (sniffing, checks, passes, tract parse and typing,
//! signature) and `Generator::new` (optimising the batch-8 and batch-1 plans), per export of the
//! demo model.
//!
//! Read "load" as the cost of opening a model file in an app, and "load + optimise" as the time
//! before the first image can be drawn. Run with `cargo bench -p genloom-benches --bench load`.
#![allow(missing_docs)] // criterion's macros generate undocumented functions

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use genloom::{Generator, GeneratorOptions, LoadOptions, Model};
use std::hint::black_box;

fn load(c: &mut Criterion) {
    let exports = genloom_benches::exports();
    let mut g = c.benchmark_group("load");
    for (name, bytes) in &exports {
        g.bench_with_input(BenchmarkId::new("model", name), bytes, |b, bytes| {
            b.iter(|| Model::from_bytes(black_box(bytes), &LoadOptions::default()).expect("loads"))
        });
        g.bench_with_input(BenchmarkId::new("model + plans", name), bytes, |b, bytes| {
            b.iter(|| {
                let m = Model::from_bytes(black_box(bytes), &LoadOptions::default()).expect("loads");
                Generator::new(m, GeneratorOptions::default()).expect("plans")
            })
        });
    }
    g.finish();
}

criterion_group!(benches, load);
criterion_main!(benches);
