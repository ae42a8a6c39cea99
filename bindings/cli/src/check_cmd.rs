//! `genloom check`: the release gate.

use crate::common::{ensure_parent, out, out_json, usage, CliResult, Failure, ModelArgs, EXIT_FAILED};
use clap::Args;
use genloom::check::{self, CheckId, CheckOptions, FrameworkReference, Status, Tolerance};
use genloom::{LoadOptions, Model};
use std::path::PathBuf;

/// The ids `--skip` accepts (every check but `structure` and `batch`), listed by `--help`.
fn skip_parser() -> impl clap::builder::TypedValueParser<Value = CheckId> {
    use clap::builder::TypedValueParser;
    let ids: Vec<&'static str> =
        CheckId::ALL.into_iter().filter(|c| c.skippable()).map(CheckId::as_str).collect();
    clap::builder::PossibleValuesParser::new(ids)
        .map(|s| s.parse::<CheckId>().expect("every listed id parses"))
}

/// Arguments of `check`. Every threshold's default and where it comes from is listed in the
/// report (`--json`: `thresholds`).
#[derive(Debug, Args)]
pub struct CheckArgs {
    #[command(flatten)]
    pub model: ModelArgs,
    /// Outputs saved from the training framework: LATENTS.npy OUTPUTS.npy.
    #[arg(long, num_args = 2, value_names = ["LATENTS", "OUTPUTS"])]
    pub reference: Option<Vec<PathBuf>>,
    /// Labels fed with --reference (conditional models): an NPY file of integers.
    #[arg(long, value_name = "FILE", requires = "reference")]
    pub labels_in: Option<PathBuf>,
    /// --reference tolerance, absolute term as a share of the output range's width
    /// (|a - b| <= atol x width + rtol x |b|, the rule of numpy.testing.assert_allclose).
    #[arg(long, default_value_t = 5e-5)]
    pub parity_atol: f64,
    /// --reference tolerance, relative term.
    #[arg(long, default_value_t = 1e-5)]
    pub parity_rtol: f64,
    /// The source model this export was made from: applies the convert fidelity thresholds.
    #[arg(long, value_name = "SOURCE")]
    pub against: Option<PathBuf>,
    /// Least PSNR (dB) against --against.
    #[arg(long, default_value_t = 30.0)]
    pub min_psnr: f64,
    /// Least SSIM against --against.
    #[arg(long, default_value_t = 0.95)]
    pub min_ssim: f64,
    /// Largest batch to try (2 to 1024).
    #[arg(long, default_value_t = 16)]
    pub max_batch: usize,
    /// Samples for the diversity, range and finiteness checks (8 to 1024).
    #[arg(long, default_value_t = 64)]
    pub count: usize,
    /// Batch-independence tolerance, absolute term as a share of the output range's width.
    #[arg(long, default_value_t = 5e-5)]
    pub batch_atol: f64,
    /// Batch-independence tolerance, relative term.
    #[arg(long, default_value_t = 1e-5)]
    pub batch_rtol: f64,
    /// How far outside the declared range a value may be, as a share of its width.
    #[arg(long, default_value_t = 1e-3)]
    pub range_tolerance: f64,
    /// Share of saturated 8-bit values (0 or 255) above which `range` warns.
    #[arg(long, default_value_t = 0.25)]
    pub max_saturated: f64,
    /// Least mean pair RMS difference (share of the range) for diversity.
    #[arg(long, default_value_t = 0.02)]
    pub min_diversity: f64,
    /// Most share of near-duplicate sample pairs (under one 8-bit level apart).
    #[arg(long, default_value_t = 0.05)]
    pub max_duplicates: f64,
    /// A latent dimension is dead when its effect is below this share of the median effect.
    #[arg(long, default_value_t = 1e-3)]
    pub dead_ratio: f64,
    /// Seed of every latent the gate draws.
    #[arg(long, default_value_t = genloom::DEFAULT_SEED)]
    pub seed: u64,
    /// Warnings fail the gate too (exit 1).
    #[arg(long)]
    pub strict: bool,
    /// Leave a check out (repeatable); it is reported as skipped.
    #[arg(long, value_name = "CHECK", value_parser = skip_parser())]
    pub skip: Vec<CheckId>,
    /// Write a contact sheet: samples at several truncation levels and a latent path.
    #[arg(long, value_name = "PATH.png")]
    pub sheet: Option<PathBuf>,
    /// Print the JSON report (schema genloom.check/1).
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: &CheckArgs) -> CliResult {
    let mut o = CheckOptions::default();
    o.seed = a.seed;
    o.max_batch = a.max_batch;
    o.samples = a.count;
    o.batch_tolerance = Tolerance { atol: a.batch_atol, rtol: a.batch_rtol };
    o.reference_tolerance = Tolerance { atol: a.parity_atol, rtol: a.parity_rtol };
    o.range_tolerance = a.range_tolerance;
    o.max_saturated = a.max_saturated;
    o.min_diversity = a.min_diversity;
    o.max_duplicates = a.max_duplicates;
    o.dead_ratio = a.dead_ratio;
    o.min_psnr = a.min_psnr;
    o.min_ssim = a.min_ssim;
    o.strict = a.strict;
    o.skip = a.skip.clone();
    o.validate()?;
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
                let labels = a.labels_in.as_ref().map(|f| genloom::npy::read_labels(f)).transpose()?;
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
            Ok(m) if report.get(CheckId::Finiteness).is_some_and(|c| c.status == Status::Pass) => {
                ensure_parent(p)?;
                let provenance = genloom::pixels::Provenance {
                    model: report.model.clone(),
                    model_sha256: report.model_sha256.clone(),
                    origin: format!("the gate's contact sheet, seed {}", a.seed),
                };
                check::sheet(&m, a.seed)?.write_png_with(p, Some(&provenance))?;
            }
            _ => eprintln!("note: no contact sheet written (the finiteness check did not pass)"),
        }
    }
    if a.json {
        out_json(&report)?;
    } else {
        let mut s = format!("{report}\n");
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
        Err(Failure {
            code: EXIT_FAILED,
            error: if report.failed > 0 {
                anyhow::anyhow!("{} check(s) failed", report.failed)
            } else {
                anyhow::anyhow!("{} check(s) warned, and --strict makes warnings fail", report.warned)
            },
        })
    }
}
