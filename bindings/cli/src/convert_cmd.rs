//! `genloom convert`: write an f32, f16 or int8 export with a fidelity report.

use crate::common::{ensure_parent, out, out_json, usage, CliResult, Failure, ModelArgs, EXIT_FAILED};
use clap::Args;
use genloom::convert::{self, ConvertOptions, KeepFloat, Precision};
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, SampleOptions};
use std::path::{Path, PathBuf};
use std::time::Instant;

/// `--to` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum PrecisionArg {
    /// IEEE 754 binary32: the source packed into one file.
    F32,
    /// IEEE 754 binary16 weights.
    F16,
    /// int8 weights with DequantizeLinear.
    Int8,
}

impl PrecisionArg {
    fn precision(self) -> Precision {
        match self {
            PrecisionArg::F32 => Precision::F32,
            PrecisionArg::F16 => Precision::F16,
            PrecisionArg::Int8 => Precision::Int8,
        }
    }
}

/// Arguments of `convert`.
#[derive(Debug, Args)]
pub struct ConvertArgs {
    #[command(flatten)]
    pub model: ModelArgs,
    /// Target precision: f32 (packed into one file), f16 or int8.
    #[arg(long, value_enum, value_name = "PRECISION")]
    pub to: PrecisionArg,
    /// Where to write the export (default: MODEL's name with `.PRECISION.onnx`, in the current folder).
    #[arg(long, short = 'o')]
    pub out: Option<PathBuf>,
    /// Weight layers to keep in f32, comma-separated node names, or `none`
    /// (default: the first and last weight layers).
    #[arg(long, value_name = "LAYERS")]
    pub keep_float: Option<String>,
    /// One int8 scale per tensor instead of per output channel.
    #[arg(long)]
    pub per_tensor: bool,
    /// Fail (exit 1, nothing written) when the export's PSNR against the source is below DB.
    #[arg(long, value_name = "DB")]
    pub min_psnr: Option<f64>,
    /// Also write the report as JSON to this file.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Seed of the latents the fidelity report draws.
    #[arg(long, default_value_t = genloom::DEFAULT_SEED)]
    pub seed: u64,
    /// Number of latents the fidelity report draws.
    #[arg(long, default_value_t = 64)]
    pub count: usize,
    /// Print the JSON report instead of the table.
    #[arg(long)]
    pub json: bool,
}

fn per_image_ms(model: &Model) -> CliResult<f64> {
    let mut o = GeneratorOptions::default();
    o.micro_batch = 8;
    let g = Generator::new(model.clone(), o)?;
    let l = g.sample_latents(&SampleOptions::new(1, 64))?;
    let labels = g.signature().cycle_labels(64);
    g.generate(&l, labels.as_deref())?;
    let t = Instant::now();
    for _ in 0..3 {
        g.generate(&l, labels.as_deref())?;
    }
    Ok(t.elapsed().as_secs_f64() * 1e3 / (3.0 * 64.0))
}

fn mib(b: u64) -> String {
    format!("{:.2} MiB", b as f64 / f64::from(1 << 20))
}

pub fn run(a: &ConvertArgs) -> CliResult {
    let precision = a.to.precision();
    let mut options = ConvertOptions::new(precision);
    options.per_channel = !a.per_tensor;
    options.eval_seed = a.seed;
    options.eval_count = a.count;
    if a.per_tensor && precision != Precision::Int8 {
        return Err(usage("--per-tensor applies to --to int8 only"));
    }
    options.keep_float = match a.keep_float.as_deref() {
        None => KeepFloat::FirstAndLast,
        Some("none") => KeepFloat::Nodes(vec![]),
        Some(list) => KeepFloat::Nodes(
            list.split(',').map(|s| s.trim().to_string()).filter(|s| !s.is_empty()).collect(),
        ),
    };
    let out_path = match &a.out {
        Some(p) => p.clone(),
        None => {
            let stem = a
                .model
                .model
                .as_ref()
                .and_then(|p| p.file_stem())
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| "tiles".into());
            PathBuf::from(format!("{stem}.{precision}.onnx"))
        }
    };
    if a.model.model.as_ref().is_some_and(|m| m.canonicalize().ok() == out_path.canonicalize().ok()) {
        return Err(usage(format!(
            "--out {} is the source model itself; choose another file",
            out_path.display()
        )));
    }
    let (source, load_ms) = a.model.load()?;
    let t = Instant::now();
    let export = convert::convert(&source, &options)?;
    let convert_ms = t.elapsed().as_secs_f64() * 1e3;
    let r = &export.report;
    if let Some(min) = a.min_psnr {
        if r.fidelity.psnr_db < min {
            return Err(Failure {
                code: EXIT_FAILED,
                error: anyhow::anyhow!(
                    "the {precision} export reaches {:.2} dB PSNR against the source, below --min-psnr {min}; nothing was written",
                    r.fidelity.psnr_db
                ),
            });
        }
    }
    ensure_parent(&out_path)?;
    // The export and its report land together or not at all.
    let json = match &a.report {
        Some(p) => {
            ensure_parent(p)?;
            Some(serde_json::to_vec_pretty(r).map_err(anyhow::Error::from)?)
        }
        None => None,
    };
    let mut files: Vec<(&Path, &[u8])> = vec![(&out_path, &export.bytes)];
    if let (Some(p), Some(j)) = (&a.report, &json) {
        files.push((p, j));
    }
    genloom::files::write_all_atomic(&files)?;
    for w in &r.warnings {
        eprintln!("warning: {w}");
    }
    if a.json {
        return out_json(r);
    }
    let t = Instant::now();
    let exported = Model::from_bytes(&export.bytes, &LoadOptions::default())?;
    let export_load_ms = t.elapsed().as_secs_f64() * 1e3;
    let (src_ms, exp_ms) = (per_image_ms(&source)?, per_image_ms(&exported)?);
    let f = &r.fidelity;
    let kept = r.tensors.iter().filter(|d| d.reason.is_some()).count();
    let mut s = format!("wrote {} ({precision}) in {convert_ms:.0} ms\n\n", out_path.display());
    s.push_str(&format!("  {:<22} {:>14} {:>14}\n", "", "source", "export"));
    s.push_str(&format!("  {:<22} {:>14} {:>14}\n", "file", mib(r.source_bytes), mib(r.export_bytes)));
    s.push_str(&format!("  {:<22} {:>14} {:>13.1}%\n", "size vs source", "100%", r.size_ratio * 100.0));
    s.push_str(&format!("  {:<22} {:>14.1} {:>14.1}\n", "load ms", load_ms, export_load_ms));
    s.push_str(&format!("  {:<22} {:>14.3} {:>14.3}\n", "ms per image (batch 8)", src_ms, exp_ms));
    s.push_str(&format!("\n  fidelity over {} seeded latents (seed {}):\n", f.images, r.eval_seed));
    s.push_str(&format!(
        "    PSNR {:.2} dB (lowest image {:.2}), SSIM {:.5} (lowest {:.5})\n",
        f.psnr_db, f.min_psnr_db, f.ssim, f.min_ssim
    ));
    s.push_str(&format!(
        "    max abs error {:.3e}, mean {:.3e}, {:.3}% of 8-bit values off by more than 2 levels\n",
        f.max_abs,
        f.mean_abs,
        f.off_by_more_than_2 * 100.0
    ));
    s.push_str(&format!("  tensors: {} rewritten, {} kept in f32", r.tensors.len() - kept, kept));
    for d in r.tensors.iter().filter(|d| d.reason.is_some()) {
        s.push_str(&format!(
            "\n    {} ({}): {}",
            d.tensor,
            d.node.as_deref().unwrap_or("-"),
            d.reason.as_deref().unwrap_or("")
        ));
    }
    s.push('\n');
    if let Some(n) = &r.f16_tightest {
        s.push_str(&format!(
            "  largest activation: {:.3e} at `{}` ({}), {}\n",
            n.max_abs,
            n.node,
            n.op,
            n.headroom_words()
        ));
    }
    if let Some(p) = &a.report {
        s.push_str(&format!("  report written to {}\n", p.display()));
    }
    out(&s);
    Ok(())
}
