//! The memory probe: a counting global allocator measures, per export of the demo model, the peak
//! heap during load + optimise, the steady heap after it, and the peak heap while generating a
//! batch of 64, plus the process's resident memory. Prints one table; not a criterion bench.
//!
//! Run with `cargo bench -p genloom-benches --bench memory` (CI runs it once as a smoke test).
#![allow(missing_docs)]

use genloom::{Generator, GeneratorOptions, LoadOptions, Model, SampleOptions};

#[global_allocator]
static ALLOC: peak_alloc::PeakAlloc = peak_alloc::PeakAlloc;

fn resident_mib() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/statm").ok()?;
    let pages: f64 = s.split_whitespace().nth(1)?.parse().ok()?;
    Some(pages * 4096.0 / 1048576.0)
}

fn main() {
    // `cargo bench` passes --bench; a filter argument is ignored.
    let exports = genloom_benches::exports();
    let mib = |b: usize| b as f64 / 1048576.0;
    println!(
        "{:<6} {:>10} {:>22} {:>18} {:>22} {:>14}",
        "export", "file MiB", "peak load+plans MiB", "steady MiB", "peak generate-64 MiB", "resident MiB"
    );
    for (name, bytes) in exports {
        let base = ALLOC.current_usage();
        ALLOC.reset_peak_usage();
        let model = Model::from_bytes(&bytes, &LoadOptions::default()).expect("loads");
        let g = Generator::new(model, GeneratorOptions::default()).expect("plans");
        let peak_load = ALLOC.peak_usage().saturating_sub(base);
        let steady = ALLOC.current_usage().saturating_sub(base);
        let z = g.sample_latents(&SampleOptions::new(1, 64)).expect("latents");
        let before = ALLOC.current_usage();
        ALLOC.reset_peak_usage();
        let images = g.generate(&z, None).expect("generates");
        let peak_gen = ALLOC.peak_usage().saturating_sub(before);
        assert_eq!(images.count, 64);
        println!(
            "{:<6} {:>10.2} {:>22.2} {:>18.2} {:>22.2} {:>14}",
            name,
            mib(bytes.len()),
            mib(peak_load),
            mib(steady),
            mib(peak_gen),
            resident_mib().map(|r| format!("{r:.1}")).unwrap_or_else(|| "-".into())
        );
        drop(g);
    }
}
