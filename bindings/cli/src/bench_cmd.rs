//! `genloom bench`: what each export costs here, in milliseconds and megabytes.

use crate::common::{out, out_json, usage, CliResult, SignatureArgs};
use clap::Args;
use genloom::{Generator, GeneratorOptions, LoadOptions, Model};
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
    /// Also time every node of the batch-1 plan: time per operator type and the ten costliest
    /// nodes.
    #[arg(long)]
    pub profile: bool,
    /// Timed runs for --profile (after one untimed run).
    #[arg(long, default_value_t = 20, value_name = "N")]
    pub profile_runs: usize,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

#[derive(serde::Serialize)]
struct Row {
    model: String,
    file_bytes: u64,
    load_ms: f64,
    #[serde(flatten)]
    measured: genloom::bench::Measurement,
    macs_per_image: Option<u64>,
    best_gmacs_per_s: Option<f64>,
    peak_heap_load_bytes: usize,
    resident_bytes: Option<u64>,
    psnr_vs_first_db: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    profile: Option<genloom::bench::Profile>,
}

#[derive(serde::Serialize)]
struct Report {
    schema: &'static str,
    date_note: &'static str,
    cores: usize,
    passes: bool,
    rows: Vec<Row>,
}

/// The counting allocator of the `genloom` program, as the runtime's heap meter.
struct Meter<'a>(&'a peak_alloc::PeakAlloc);

impl genloom::bench::HeapMeter for Meter<'_> {
    fn current(&self) -> usize {
        self.0.current_usage()
    }
    fn peak(&self) -> usize {
        self.0.peak_usage()
    }
    fn reset_peak(&self) {
        self.0.reset_peak_usage()
    }
}

fn resident() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/statm").ok()?;
    let pages: u64 = s.split_whitespace().nth(1)?.parse().ok()?;
    Some(pages * 4096)
}

pub fn run(a: &BenchArgs, alloc: &peak_alloc::PeakAlloc) -> CliResult {
    let mut options = genloom::bench::BenchOptions::default();
    options.micro_batches = a.micro_batch.clone();
    if !a.threads.is_empty() {
        options.threads = a.threads.clone();
    }
    options.iters = a.iters;
    options.count = a.count;
    options.f16_compute = a.f16_compute;
    options.validate().map_err(|e| usage(e.to_string()))?;
    if a.profile_runs == 0 {
        return Err(usage("--profile-runs must be at least 1"));
    }
    let cores = std::thread::available_parallelism().map(|n| n.get()).unwrap_or(1);
    let mut load = LoadOptions::with_overrides(a.signature.overrides()?);
    if a.no_passes {
        load.passes = genloom::PassOptions::none();
    }
    let names: Vec<Option<PathBuf>> =
        if a.models.is_empty() { vec![None] } else { a.models.iter().cloned().map(Some).collect() };
    let mut rows = vec![];
    let mut first: Option<Model> = None;
    let meter = Meter(alloc);
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
        let peak_load = alloc.peak_usage().saturating_sub(before);
        let measured = genloom::bench::measure(&model, &options, &meter, &mut |step| eprintln!("  {step}"))?;
        let mut o = GeneratorOptions::default();
        o.f16_compute = a.f16_compute;
        o.micro_batch = measured.best_micro_batch;
        let generator = Generator::new(model.clone(), o)?;
        let profile = if a.profile {
            eprintln!("  profile: {} runs at batch 1", a.profile_runs);
            Some(generator.profile(1, a.profile_runs)?)
        } else {
            None
        };
        // PSNR against the first model in f32 compute (so with --f16-compute the first row too
        // shows what f16 compute costs in fidelity).
        let reference = match (&first, a.f16_compute) {
            (None, false) => None,
            (None, true) => Some(model.clone()),
            (Some(f), _) => Some(f.clone()),
        };
        let psnr = match reference {
            None => None,
            Some(r) => {
                let reference = Generator::new(r, GeneratorOptions::default())?;
                genloom::convert::compare_generators(&reference, &generator, genloom::DEFAULT_SEED, 32)
                    .ok()
                    .map(|x| x.psnr_db)
            }
        };
        if first.is_none() {
            first = Some(model.clone());
        }
        let best_rate = measured.throughput.iter().map(|t| t.1).fold(0.0, f64::max);
        rows.push(Row {
            model: label,
            file_bytes: model.info().file_bytes,
            load_ms,
            best_gmacs_per_s: model.info().macs_per_sample.map(|m| m as f64 * best_rate / 1e9),
            macs_per_image: model.info().macs_per_sample,
            measured,
            peak_heap_load_bytes: peak_load,
            resident_bytes: resident(),
            psnr_vs_first_db: psnr,
            profile,
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
        line(&mut s, "prepare (build the plans)", format!("{:.1} ms", r.measured.prepare_ms));
        line(
            &mut s,
            "batch 1, one image",
            format!(
                "{:.3} ms median, {:.3} ms 90th percentile",
                r.measured.batch1_p50_ms, r.measured.batch1_p90_ms
            ),
        );
        line(
            &mut s,
            "fastest micro-batch",
            format!(
                "{}: {:.3} ms per image median, {:.3} ms 90th percentile",
                r.measured.best_micro_batch,
                r.measured.best_p50_ms_per_image,
                r.measured.best_p90_ms_per_image
            ),
        );
        let tp: Vec<String> = r
            .measured
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
                mib(r
                    .peak_heap_load_bytes
                    .max(r.measured.peak_heap_prepare_bytes)
                    .max(r.measured.peak_heap_generate_bytes) as f64),
                mib(r.measured.steady_heap_bytes as f64)
            ),
        );
        if let Some(p) = r.psnr_vs_first_db {
            line(
                &mut s,
                "PSNR against the first model",
                if p.is_infinite() { "identical pixels".to_string() } else { format!("{p:.1} dB") },
            );
        }
        if let Some(p) = &r.profile {
            s.push_str(&profile_text(p));
        }
    }
    out(&s);
    Ok(())
}

/// The profile as text: time per operator type, then the ten costliest nodes.
fn profile_text(p: &genloom::bench::Profile) -> String {
    let mut s = format!(
        "  where the time goes ({:.3} ms per run of {} image{}, mean of {} runs):\n",
        p.total_ms,
        p.batch,
        if p.batch == 1 { "" } else { "s" },
        p.runs
    );
    s.push_str(&format!("    {:<24} {:>6} {:>10} {:>7}\n", "operator", "nodes", "ms", "share"));
    for o in &p.by_op {
        s.push_str(&format!("    {:<24} {:>6} {:>10.3} {:>6.1}%\n", o.op, o.nodes, o.ms, o.share * 100.0));
    }
    s.push_str(&format!("    {:<40} {:<16} {:>10} {:>7}\n", "costliest nodes", "operator", "ms", "share"));
    for n in &p.costliest {
        s.push_str(&format!("    {:<40} {:<16} {:>10.3} {:>6.1}%\n", n.node, n.op, n.ms, n.share * 100.0));
    }
    s
}
