//! `genloom bench`: what each export costs here, in milliseconds and megabytes.

use crate::common::{out, out_json, usage, CliResult, SignatureArgs};
use clap::Args;
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, SampleOptions};
use std::path::PathBuf;
use std::time::Instant;

/// Arguments of `bench`.
#[derive(Debug, Args)]
pub struct BenchArgs {
    /// Models to measure (default: the built-in demo model). PSNR is against the first.
    pub models: Vec<PathBuf>,
    #[command(flatten)]
    pub signature: SignatureArgs,
    /// Micro-batch sizes to measure (a list: each is timed; the fastest per image is reported).
    #[arg(long, default_value = "1,2,4,8,16", value_delimiter = ',', value_name = "N,N,...")]
    pub micro_batch: Vec<usize>,
    /// Worker thread counts for the throughput figures (a list: each is timed; default 1 and all
    /// cores).
    #[arg(long, value_delimiter = ',', value_name = "N,N,...")]
    pub threads: Vec<usize>,
    /// Timed calls per latency figure.
    #[arg(long, default_value_t = 40)]
    pub iters: usize,
    /// Images per throughput run (each thread count is timed three times; the best run counts).
    #[arg(long, default_value_t = 512)]
    pub count: usize,
    /// Run with the load-time passes off, to see what they are worth.
    #[arg(long)]
    pub no_passes: bool,
    /// Compute in f16 (convolutions stay f32), to see its speed and memory against f32 compute.
    #[arg(long)]
    pub f16_compute: bool,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

#[derive(serde::Serialize)]
struct Row {
    model: String,
    file_bytes: u64,
    load_ms: f64,
    optimise_ms: f64,
    batch1_p50_ms: f64,
    batch1_p90_ms: f64,
    best_micro_batch: usize,
    best_p50_ms_per_image: f64,
    best_p90_ms_per_image: f64,
    throughput: Vec<(usize, f64)>,
    macs_per_image: Option<u64>,
    best_gmacs_per_s: Option<f64>,
    peak_heap_load_bytes: usize,
    steady_heap_bytes: usize,
    peak_heap_generate_bytes: usize,
    resident_bytes: Option<u64>,
    psnr_vs_first_db: Option<f64>,
}

#[derive(serde::Serialize)]
struct Report {
    schema: &'static str,
    date_note: &'static str,
    cores: usize,
    passes: bool,
    rows: Vec<Row>,
}

fn percentile(v: &mut [f64], p: f64) -> f64 {
    v.sort_by(f64::total_cmp);
    v[((v.len() - 1) as f64 * p).round() as usize]
}

fn resident() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/statm").ok()?;
    let pages: u64 = s.split_whitespace().nth(1)?.parse().ok()?;
    Some(pages * 4096)
}

pub fn run(a: &BenchArgs, alloc: &peak_alloc::PeakAlloc) -> CliResult {
    if a.iters == 0 || a.count == 0 || a.micro_batch.is_empty() || a.micro_batch.contains(&0) {
        return Err(usage("--iters, --count and every --micro-batch must be at least 1"));
    }
    if a.threads.contains(&0) {
        return Err(usage("every --threads value must be at least 1"));
    }
    let cores = std::thread::available_parallelism().map(|n| n.get()).unwrap_or(1);
    let threads: Vec<usize> = if a.threads.is_empty() {
        if cores > 1 {
            vec![1, cores]
        } else {
            vec![1]
        }
    } else {
        a.threads.clone()
    };
    let mut load = LoadOptions::with_overrides(a.signature.overrides()?);
    if a.no_passes {
        load.passes = genloom::PassOptions::none();
    }
    let names: Vec<Option<PathBuf>> =
        if a.models.is_empty() { vec![None] } else { a.models.iter().cloned().map(Some).collect() };
    let mut rows = vec![];
    let mut first: Option<Model> = None;
    for name in &names {
        let label = name.as_ref().map(|p| p.display().to_string()).unwrap_or_else(|| "built-in tiles".into());
        eprintln!("measuring {label} ...");
        alloc.reset_peak_usage();
        let before = alloc.current_usage();
        let t = Instant::now();
        let model = match name {
            Some(p) => Model::from_path(p, &load),
            None => Model::from_bytes(genloom::demo::TILES_ONNX, &load),
        }
        .map_err(|e| crate::common::Failure {
            code: crate::common::exit_code(&e),
            error: anyhow::Error::new(e).context(format!("cannot load {label}")),
        })?;
        let load_ms = t.elapsed().as_secs_f64() * 1e3;
        let t = Instant::now();
        let mut o = GeneratorOptions::default();
        o.f16_compute = a.f16_compute;
        o.micro_batch = 1;
        let g1 = Generator::new(model.clone(), o)?;
        let optimise_ms = t.elapsed().as_secs_f64() * 1e3;
        let peak_load = alloc.peak_usage().saturating_sub(before);
        let steady = alloc.current_usage().saturating_sub(before);
        let sig = model.signature().clone();
        let labels_of = |n: usize| sig.cycle_labels(n);
        // Batch-1 latency.
        let one = g1.sample_latents(&SampleOptions::new(3, 1))?;
        let l1 = labels_of(1);
        for _ in 0..5 {
            g1.generate(&one, l1.as_deref())?;
        }
        let mut times: Vec<f64> = (0..a.iters)
            .map(|_| {
                let t = Instant::now();
                let r = g1.generate(&one, l1.as_deref());
                (r, t.elapsed().as_secs_f64() * 1e3)
            })
            .map(|(r, ms)| r.map(|_| ms))
            .collect::<Result<_, _>>()?;
        let (b1_50, b1_90) = (percentile(&mut times, 0.5), percentile(&mut times, 0.9));
        // Best micro-batch by median per-image time.
        let mut best = (f64::INFINITY, 0.0, 1usize);
        let mut peak_gen = 0usize;
        for &mb in &a.micro_batch {
            let mut o = GeneratorOptions::default();
            o.f16_compute = a.f16_compute;
            o.micro_batch = mb;
            let g = Generator::new(model.clone(), o)?;
            let z = g.sample_latents(&SampleOptions::new(4, mb))?;
            let lab = labels_of(mb);
            g.generate(&z, lab.as_deref())?;
            alloc.reset_peak_usage();
            let base = alloc.current_usage();
            let iters = (a.iters / mb).max(5);
            let mut t: Vec<f64> = vec![];
            for _ in 0..iters {
                let s = Instant::now();
                g.generate(&z, lab.as_deref())?;
                t.push(s.elapsed().as_secs_f64() * 1e3 / mb as f64);
            }
            peak_gen = peak_gen.max(alloc.peak_usage().saturating_sub(base));
            let (p50, p90) = (percentile(&mut t, 0.5), percentile(&mut t, 0.9));
            if p50 < best.0 {
                best = (p50, p90, mb);
            }
        }
        // Throughput per thread count at the best micro-batch.
        let z = g1.sample_latents(&SampleOptions::new(5, a.count))?;
        let lab = labels_of(a.count);
        let mut throughput = vec![];
        for &th in &threads {
            let mut o = GeneratorOptions::default();
            o.f16_compute = a.f16_compute;
            o.micro_batch = best.2;
            o.threads = th;
            let g = Generator::new(model.clone(), o)?;
            g.generate(&z.slice(0..best.2.min(a.count))?, lab.as_ref().map(|l| &l[..best.2.min(a.count)]))?;
            // Best of three: one run of a few milliseconds is at the mercy of the scheduler.
            let mut fastest = f64::INFINITY;
            for _ in 0..3 {
                let s = Instant::now();
                g.generate(&z, lab.as_deref())?;
                fastest = fastest.min(s.elapsed().as_secs_f64());
            }
            throughput.push((th, a.count as f64 / fastest));
        }
        // PSNR against the first model in f32 compute (so with --f16-compute the first row too
        // shows what f16 compute costs in fidelity).
        let psnr = match (&first, a.f16_compute) {
            (None, false) => None,
            (None, true) => {
                let reference = Generator::new(model.clone(), GeneratorOptions::default())?;
                genloom::convert::compare_generators(&reference, &g1, genloom::DEFAULT_SEED, 32)
                    .ok()
                    .map(|x| x.psnr_db)
            }
            (Some(f), _) => {
                let reference = Generator::new(f.clone(), GeneratorOptions::default())?;
                genloom::convert::compare_generators(&reference, &g1, genloom::DEFAULT_SEED, 32)
                    .ok()
                    .map(|x| x.psnr_db)
            }
        };
        if first.is_none() {
            first = Some(model.clone());
        }
        rows.push(Row {
            model: label,
            file_bytes: model.info().file_bytes,
            load_ms,
            optimise_ms,
            batch1_p50_ms: b1_50,
            batch1_p90_ms: b1_90,
            best_micro_batch: best.2,
            best_p50_ms_per_image: best.0,
            best_p90_ms_per_image: best.1,
            best_gmacs_per_s: model
                .info()
                .macs_per_sample
                .map(|m| m as f64 * throughput.iter().map(|t| t.1).fold(0.0, f64::max) / 1e9),
            macs_per_image: model.info().macs_per_sample,
            throughput,
            peak_heap_load_bytes: peak_load,
            steady_heap_bytes: steady,
            peak_heap_generate_bytes: peak_gen,
            resident_bytes: resident(),
            psnr_vs_first_db: psnr,
        });
    }
    let report = Report {
        schema: "genloom.bench/1",
        date_note: "figures are for this machine at the time of the run",
        cores,
        passes: !a.no_passes,
        rows,
    };
    if a.json {
        return out_json(&report);
    }
    let mib = |b: f64| b / f64::from(1 << 20);
    let mut s = String::new();
    for r in &report.rows {
        let line = |s: &mut String, what: &str, value: String| s.push_str(&format!("  {what:<30} {value}\n"));
        s.push_str(&format!("{}\n", r.model));
        line(&mut s, "file", format!("{:.2} MiB", mib(r.file_bytes as f64)));
        line(&mut s, "load", format!("{:.1} ms", r.load_ms));
        line(&mut s, "prepare (build the plans)", format!("{:.1} ms", r.optimise_ms));
        line(
            &mut s,
            "batch 1, one image",
            format!("{:.3} ms median, {:.3} ms 90th percentile", r.batch1_p50_ms, r.batch1_p90_ms),
        );
        line(
            &mut s,
            "fastest micro-batch",
            format!(
                "{}: {:.3} ms per image median, {:.3} ms 90th percentile",
                r.best_micro_batch, r.best_p50_ms_per_image, r.best_p90_ms_per_image
            ),
        );
        let tp: Vec<String> = r
            .throughput
            .iter()
            .map(|(t, v)| format!("{v:.0} with {t} thread{}", if *t == 1 { "" } else { "s" }))
            .collect();
        line(&mut s, "images/s", tp.join(", "));
        if let Some(g) = r.best_gmacs_per_s {
            line(&mut s, "compute rate", format!("{g:.1} GMAC/s (at the fastest micro-batch)"));
        }
        line(
            &mut s,
            "heap",
            format!(
                "{:.1} MiB peak, {:.1} MiB steady",
                mib(r.peak_heap_load_bytes.max(r.peak_heap_generate_bytes) as f64),
                mib(r.steady_heap_bytes as f64)
            ),
        );
        if let Some(p) = r.psnr_vs_first_db {
            line(
                &mut s,
                "PSNR against the first model",
                if p.is_infinite() { "identical pixels".to_string() } else { format!("{p:.1} dB") },
            );
        }
    }
    out(&s);
    Ok(())
}
