//! The `genloom` command: inspect, sample and morph ONNX image generators on a CPU.
//!
//! Human output goes to stdout (or JSON with `--json`), progress bars and errors to stderr.
//! Exit codes: 0 success, 1 a job that failed, 2 bad usage or unreadable input.

mod bench_cmd;
mod check_cmd;
mod common;
mod convert_cmd;
mod generate_cmds;
mod inspect;

use clap::{Parser, Subcommand};
use common::{Failure, EXIT_USAGE};

/// Ship a trained image generator: inspect it, sample it, morph between its latents.
#[derive(Debug, Parser)]
#[command(name = "genloom", version, about, long_about = None, propagate_version = true)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Describe a model: signature, size, ops, compute per image.
    Inspect(inspect::InspectArgs),
    /// Generate images from seeded or given latents: one PNG per image, or a grid.
    Sample(generate_cmds::SampleArgs),
    /// Animate a path through latents (seeds or NPY keyframes): a GIF or a strip PNG.
    Morph(generate_cmds::MorphArgs),
    /// Write a smaller export (f16 or int8 weights, or f32 packed into one file) with a fidelity report.
    Convert(convert_cmd::ConvertArgs),
    /// The release gate: structure, batch independence, determinism, finiteness, diversity, parity.
    Check(check_cmd::CheckArgs),
    /// Measure load time, latency per micro-batch, throughput per thread count and memory.
    Bench(bench_cmd::BenchArgs),
}

/// Counts heap bytes (current and peak) so that `bench` can report memory.
#[global_allocator]
static ALLOC: peak_alloc::PeakAlloc = peak_alloc::PeakAlloc;

fn main() {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { EXIT_USAGE } else { 0 };
            let _ = e.print();
            std::process::exit(code);
        }
    };
    let result = match cli.command {
        Command::Inspect(a) => inspect::run(&a),
        Command::Sample(a) => generate_cmds::sample(&a),
        Command::Morph(a) => generate_cmds::morph(&a),
        Command::Convert(a) => convert_cmd::run(&a),
        Command::Check(a) => check_cmd::run(&a),
        Command::Bench(a) => bench_cmd::run(&a, &ALLOC),
    };
    if let Err(Failure { code, error }) = result {
        // One line: the outer context and the chain of causes.
        let mut line = error.to_string();
        for cause in error.chain().skip(1) {
            let c = cause.to_string();
            if !line.contains(&c) {
                line.push_str(": ");
                line.push_str(&c);
            }
        }
        eprintln!("error: {line}");
        std::process::exit(code);
    }
}
