//! Load-time folding of large stored weights: a generator whose Gemm weight (8 MiB in f32) is
//! over tract's 4 MiB constant-folding budget, exported as f32, f16 (Cast after the weight) and
//! int8 (DequantizeLinear after it), each loaded with genloom's passes on (the default: the Cast
//! and DequantizeLinear are evaluated once at load) and off (`PassOptions` all false: whatever
//! tract leaves unfolded runs on every call).
//!
//! Read it as: with the passes on, the f16 and int8 rows should match the f32 row; with them off,
//! the gap is what the folding saves per call. Run with `cargo bench -p genloom-benches --bench fold`.
#![allow(missing_docs)] // criterion's macros generate undocumented functions

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, PassOptions, SampleOptions};
use std::hint::black_box;

fn folding(c: &mut Criterion) {
    let mut g = c.benchmark_group("fold-large-weights");
    for (name, bytes) in genloom_benches::wide_exports() {
        for passes in [true, false] {
            let mut load = LoadOptions::default();
            if !passes {
                load.passes = PassOptions::none();
            }
            let model = Model::from_bytes(&bytes, &load).expect("loads");
            let mut o = GeneratorOptions::default();
            o.micro_batch = 8;
            let gen = Generator::new(model, o).expect("plans");
            let z = gen.sample_latents(&SampleOptions::new(1, 8)).expect("latents");
            g.throughput(Throughput::Elements(8));
            let id = BenchmarkId::new(name, if passes { "passes-on-n8" } else { "passes-off-n8" });
            g.bench_function(id, |b| b.iter(|| gen.generate(black_box(&z), None).expect("generates")));
        }
    }
    g.finish();
}

criterion_group!(benches, folding);
criterion_main!(benches);
