//! `genloom check`: the release gate.

use crate::common::{ensure_parent, out, out_json, usage, CliResult, Failure, ModelArgs, EXIT_FAILED};
use clap::Args;
use genloom::check::{self, CheckOptions, FrameworkReference, Status};
use genloom::{LoadOptions, Model};
use std::path::PathBuf;

/// Arguments of `check`.
#[derive(Debug, Args)]
pub struct CheckArgs {
    #[command(flatten)]
    pub model: ModelArgs,
    /// Outputs saved from the training framework: LATENTS.npy OUTPUTS.npy.
    #[arg(long, num_args = 2, value_names = ["LATENTS", "OUTPUTS"])]
    pub reference: Option<Vec<PathBuf>>,
    /// Labels fed with --reference (conditional models).
    #[arg(long, value_name = "LABELS")]
    pub labels: Option<PathBuf>,
    /// Max abs tolerance of --reference.
    #[arg(long, default_value_t = 1e-4)]
    pub reference_tolerance: f32,
    /// The source model this export was made from: applies the convert fidelity thresholds.
    #[arg(long, value_name = "SOURCE")]
    pub against: Option<PathBuf>,
    /// Least PSNR (dB) against --against.
    #[arg(long, default_value_t = 30.0)]
    pub min_psnr: f64,
    /// Least SSIM against --against.
    #[arg(long, default_value_t = 0.95)]
    pub min_ssim: f64,
    /// Largest batch to try.
    #[arg(long, default_value_t = 16)]
    pub max_batch: usize,
    /// Samples for the diversity and finiteness checks.
    #[arg(long, default_value_t = 64)]
    pub samples: usize,
    /// Batch-independence tolerance (max abs).
    #[arg(long, default_value_t = 1e-4)]
    pub batch_tolerance: f32,
    /// Least mean pair RMS difference (share of the range) for diversity.
    #[arg(long, default_value_t = 0.02)]
    pub min_diversity: f64,
    /// Seed of every latent the gate draws.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Write a contact sheet: samples at several truncation levels and a latent path.
    #[arg(long, value_name = "PATH.png")]
    pub sheet: Option<PathBuf>,
    /// Print the JSON report (schema genloom.check/1).
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: &CheckArgs) -> CliResult {
    if a.samples < 8 || a.samples > 1024 {
        return Err(usage(format!("--samples is {}, expected 8 to 1024", a.samples)));
    }
    let mut o = CheckOptions::default();
    o.seed = a.seed;
    o.max_batch = a.max_batch.clamp(1, 256);
    o.samples = a.samples;
    o.batch_tolerance = a.batch_tolerance;
    o.min_diversity = a.min_diversity;
    o.reference_tolerance = a.reference_tolerance;
    o.min_psnr = a.min_psnr;
    o.min_ssim = a.min_ssim;
    let load = LoadOptions::with_overrides(a.model.overrides()?);
    if let Some(src) = &a.against {
        o.against = Some(Model::from_path(src, &load)?);
    }
    let report = match &a.model.model {
        Some(p) => {
            if let Some(files) = &a.reference {
                // The latent size comes from the model; read it first (cheaply) for the NPY shape.
                let m = Model::from_path(p, &load)?;
                let dim = m.signature().latent.dim;
                let latents = genloom::npy::read_latents(&files[0], dim)?;
                let outputs = match genloom::npy::NpyArray::read(&files[1])?.data {
                    genloom::npy::NpyData::F32(v) => v,
                    genloom::npy::NpyData::F64(v) => v.into_iter().map(|x| x as f32).collect(),
                    other => {
                        return Err(usage(format!(
                            "{} holds {}, expected float32 outputs",
                            files[1].display(),
                            other.dtype_name()
                        )))
                    }
                };
                let labels = a.labels.as_ref().map(|f| genloom::npy::read_labels(f)).transpose()?;
                o.reference = Some(FrameworkReference { latents, labels, outputs });
            }
            check::check_path(p, &load, &o)?
        }
        None => {
            if a.reference.is_some() {
                return Err(usage("--reference needs a MODEL path"));
            }
            check::check_bytes(genloom::demo::TILES_ONNX, genloom::demo::TILES_NAME, &load, &o)?
        }
    };
    if let Some(p) = &a.sheet {
        let m = match &a.model.model {
            Some(path) => Model::from_path(path, &load),
            None => Model::from_bytes(genloom::demo::TILES_ONNX, &load),
        };
        match m {
            Ok(m)
                if report.checks.iter().any(|c| {
                    c.id == "finiteness" && c.status != Status::Fail && c.status != Status::Skip
                }) =>
            {
                ensure_parent(p)?;
                check::sheet(&m, a.seed)?.write_png(p)?;
            }
            _ => eprintln!("note: no contact sheet written (the model does not generate finite images)"),
        }
    }
    if a.json {
        out_json(&report)?;
    } else {
        let mut s = format!("{}\n", report.model);
        for c in &report.checks {
            let mark = match c.status {
                Status::Pass => "pass",
                Status::Warn => "WARN",
                Status::Fail => "FAIL",
                Status::Skip => "skip",
            };
            s.push_str(&format!("  {mark}  {:<19}", c.id));
            if !c.measured.is_empty() {
                s.push_str(&format!(" {}", c.measured));
            }
            if !c.threshold.is_empty() && c.status != Status::Pass {
                s.push_str(&format!(" [threshold: {}]", c.threshold));
            }
            if !c.detail.is_empty() {
                if c.measured.is_empty() {
                    s.push_str(&format!(" {}", c.detail));
                } else {
                    s.push_str(&format!("\n        {}", c.detail));
                }
            }
            s.push('\n');
        }
        let verdict = if report.ok() { "ship" } else { "do not ship" };
        s.push_str(&format!(
            "{verdict}: {} passed, {} warned, {} failed, {} skipped ({:.0} ms)\n",
            report.passed,
            report.warned,
            report.failed,
            report.checks.len() - report.passed - report.warned - report.failed,
            report.elapsed_ms
        ));
        if let Some(p) = &a.sheet {
            if p.exists() {
                s.push_str(&format!("contact sheet: {}\n", p.display()));
            }
        }
        out(&s);
    }
    if report.ok() {
        Ok(())
    } else {
        Err(Failure { code: EXIT_FAILED, error: anyhow::anyhow!("{} check(s) failed", report.failed) })
    }
}
