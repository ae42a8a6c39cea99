//! Conversion: `convert::convert` of the demo model to f16 and int8, including the fidelity
//! report over 8 latents (most of the time is the two generators of that report).
//!
//! Run with `cargo bench -p genloom-benches --bench convert`.
#![allow(missing_docs)] // criterion's macros generate undocumented functions

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use genloom::convert::{self, ConvertOptions, Precision};

fn conversion(c: &mut Criterion) {
    let src = genloom_benches::demo_model();
    let mut g = c.benchmark_group("convert");
    g.sample_size(10);
    for p in [Precision::F16, Precision::Int8] {
        g.bench_function(BenchmarkId::from_parameter(p), |b| {
            let mut o = ConvertOptions::new(p);
            o.eval_count = 8;
            b.iter(|| convert::convert(&src, &o).expect("converts"))
        });
    }
    g.finish();
}

criterion_group!(benches, conversion);
criterion_main!(benches);
