//! Generation: time per call for the demo model's f32, f16 and int8 exports at micro-batch 1 and
//! 8 with 1 and 2 threads (64 images per call for the threaded rows), and a bare tract baseline:
//! the same folded graph run by tract directly with a fixed batch-1 plan and no genloom code.
//!
//! Divide by the images per call for per-image figures. genloom's batch-1 row against the bare
//! tract row is the runtime's overhead. Run with `cargo bench -p genloom-benches --bench generate`.
#![allow(missing_docs)] // criterion's macros generate undocumented functions

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, SampleOptions};
use prost::Message;
use std::hint::black_box;
use tract_onnx::prelude::*;

fn generator(bytes: &[u8], micro_batch: usize, threads: usize) -> Generator {
    let m = Model::from_bytes(bytes, &LoadOptions::default()).expect("loads");
    let mut o = GeneratorOptions::default();
    o.micro_batch = micro_batch;
    o.threads = threads;
    Generator::new(m, o).expect("plans")
}

fn generation(c: &mut Criterion) {
    let exports = genloom_benches::exports();
    let mut g = c.benchmark_group("generate");
    for (name, bytes) in &exports {
        for (mb, threads, count) in [(1usize, 1usize, 1usize), (8, 1, 8), (8, 1, 64), (8, 2, 64)] {
            let gen = generator(bytes, mb, threads);
            let z = gen.sample_latents(&SampleOptions::new(1, count)).expect("latents");
            g.throughput(Throughput::Elements(count as u64));
            g.bench_function(BenchmarkId::new(*name, format!("mb{mb}-t{threads}-n{count}")), |b| {
                b.iter(|| gen.generate(black_box(&z), None).expect("generates"))
            });
        }
    }
    // The bare tract baseline: the graph genloom runs (after its passes), batch fixed at 1.
    let model = genloom_benches::demo_model();
    let bytes = model.onnx().encode_to_vec();
    let plan = tract_onnx::onnx()
        .model_for_read(&mut bytes.as_slice())
        .expect("parses")
        .with_input_fact(0, f32::fact([1, 64]).into())
        .expect("fact")
        .into_optimized()
        .expect("optimises")
        .into_runnable()
        .expect("plan");
    let z = Tensor::from_shape(&[1, 64], &vec![0.5f32; 64]).expect("tensor");
    g.throughput(Throughput::Elements(1));
    g.bench_function(BenchmarkId::new("bare-tract", "batch1"), |b| {
        b.iter(|| plan.run(tvec![black_box(z.clone()).into_tvalue()]).expect("runs"))
    });
    g.finish();
}

criterion_group!(benches, generation);
criterion_main!(benches);
