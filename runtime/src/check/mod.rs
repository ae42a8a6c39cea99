//! The release gate: checks that an export is fit to ship, each with its measured figure, its
//! threshold, and pass / warn / fail.
//!
//! The checks, in order (ids are stable; the JSON schema is `genloom.check/1`):
//! - `structure`: a latent input and an image output are found; every operator is one that
//!   tract's ONNX register holds and its attributes take values the ONNX specification defines;
//!   no random-number operators. A pre-scan of the graph, so a problem is named by node before
//!   tract runs.
//! - `training-mode`: no BatchNormalization with `training_mode = 1` or extra outputs, no Dropout
//!   whose `training_mode` input is true.
//! - `batch`: runs at batch 1, 2, 7 and the largest asked (those up to the largest), with one
//!   image per latent.
//! - `batch-independence`: each image alone equals itself inside a batch, within a
//!   [`Tolerance`].
//! - `determinism`: the same latents twice give identical bits.
//! - `finiteness`: no NaN or infinity in any value the graph computes (every node's output, not
//!   only the image: [`crate::probe`]) for typical, truncated, 3x-norm and 10x-norm latents, nor
//!   in the images of the typical samples. A failure names the first node and the latent scale.
//!   The same probe gives each node's largest activation and its binary16 headroom (the report's
//!   `activations`).
//! - `range`: outputs inside the declared range (tolerance a share of its width); the share of
//!   saturated 8-bit values (warn above a share).
//! - `sensitivity`: different latents give different images; each latent dimension, nudged by
//!   one standard deviation, changes the output; dimensions whose effect is below a share of the
//!   median effect are dead (fail).
//! - `diversity`: the root-mean-square difference between pairs of samples, in units of the
//!   output range (fail below a floor), and the share of near-duplicate pairs, under one 8-bit
//!   level apart (fail above a share).
//! - `labels`: every class gives images distinct from every other class's.
//! - `parity-framework`: outputs saved from the training framework for given latents are matched
//!   within a [`Tolerance`].
//! - `parity-export`: an export matches its source (PSNR and SSIM floors).
//!
//! Every threshold is a field of [`CheckOptions`]; the report lists the ones used with where
//! each default comes from ([`Threshold::source`]).

mod batch;
mod outputs;
mod parity;
mod report;
mod response;
mod sheet;
mod structure;

pub use report::{CheckReport, CheckResult, Threshold};
pub use sheet::sheet;

use crate::error::{Error, Result};
use crate::generate::{Generator, GeneratorOptions, Images};
use crate::latent::{Latents, SampleOptions};
use crate::model::{LoadOptions, Model, Raw};
use crate::probe::ActivationReport;
use crate::signature::Signature;
use std::time::Instant;

/// Outcome of one check.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Fit to ship.
    Pass,
    /// Worth a look; does not block (unless the gate is strict).
    Warn,
    /// Blocks the release.
    Fail,
    /// Not run (an earlier check failed, it does not apply, or it was skipped on request).
    Skip,
}

/// The gate's checks, in the order they run. In JSON and on the command line each is its
/// kebab-case id (`batch-independence`, ...).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum CheckId {
    /// Signature found, operators and attributes supported, no random operators.
    Structure,
    /// No training-mode leftovers.
    TrainingMode,
    /// Runs at several batch sizes.
    Batch,
    /// An image does not depend on the others of its batch.
    BatchIndependence,
    /// Identical bits on a second run.
    Determinism,
    /// No NaN or infinity anywhere in the graph.
    Finiteness,
    /// Outputs inside the declared range.
    Range,
    /// Every latent dimension has an effect.
    Sensitivity,
    /// Samples differ from each other.
    Diversity,
    /// Every class gives distinct images.
    Labels,
    /// Matches outputs saved from the training framework.
    ParityFramework,
    /// Matches the source model it was exported from.
    ParityExport,
}

impl CheckId {
    /// Every check, in order.
    pub const ALL: [CheckId; 12] = [
        CheckId::Structure,
        CheckId::TrainingMode,
        CheckId::Batch,
        CheckId::BatchIndependence,
        CheckId::Determinism,
        CheckId::Finiteness,
        CheckId::Range,
        CheckId::Sensitivity,
        CheckId::Diversity,
        CheckId::Labels,
        CheckId::ParityFramework,
        CheckId::ParityExport,
    ];

    /// The stable kebab-case id.
    pub fn as_str(self) -> &'static str {
        match self {
            CheckId::Structure => "structure",
            CheckId::TrainingMode => "training-mode",
            CheckId::Batch => "batch",
            CheckId::BatchIndependence => "batch-independence",
            CheckId::Determinism => "determinism",
            CheckId::Finiteness => "finiteness",
            CheckId::Range => "range",
            CheckId::Sensitivity => "sensitivity",
            CheckId::Diversity => "diversity",
            CheckId::Labels => "labels",
            CheckId::ParityFramework => "parity-framework",
            CheckId::ParityExport => "parity-export",
        }
    }

    /// Whether `--skip` may leave it out: `structure` and `batch` are what every other check
    /// stands on.
    pub fn skippable(self) -> bool {
        !matches!(self, CheckId::Structure | CheckId::Batch)
    }
}

impl std::fmt::Display for CheckId {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl std::str::FromStr for CheckId {
    type Err = Error;
    fn from_str(s: &str) -> Result<CheckId> {
        CheckId::ALL.into_iter().find(|c| c.as_str() == s).ok_or_else(|| {
            let ids: Vec<&str> = CheckId::ALL.iter().map(|c| c.as_str()).collect();
            Error::invalid("check id", format!("`{s}`"), format!("one of {}", ids.join(", ")))
        })
    }
}

/// A closeness rule for two float arrays, the one `numpy.testing.assert_allclose` applies:
/// `|actual - desired| <= atol + rtol * |desired|` element-wise, with `atol` given as a share of
/// the output range's width so that one setting means the same on [-1, 1] and on [0, 255].
/// NaN equals NaN; NaN against a number fails.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Tolerance {
    /// Absolute term, as a share of the output range's width.
    pub atol: f64,
    /// Relative term, a share of `|desired|`.
    pub rtol: f64,
}

/// How two arrays compare under a [`Tolerance`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Closeness {
    /// Largest absolute difference (infinite where one side is NaN and the other not).
    pub max_abs: f64,
    /// Largest `|actual - desired| / (atol + rtol * |desired|)`: at most 1 passes.
    pub worst: f64,
    /// Elements past the tolerance.
    pub outside: usize,
}

impl Closeness {
    /// Whether every element is within the tolerance.
    pub fn ok(&self) -> bool {
        self.outside == 0
    }
}

impl Tolerance {
    /// Compares `actual` with `desired` for an output range `width` wide.
    pub fn compare(&self, actual: &[f32], desired: &[f32], width: f64) -> Closeness {
        let atol = self.atol * width;
        let mut c = Closeness { max_abs: 0.0, worst: 0.0, outside: 0 };
        for (&a, &d) in actual.iter().zip(desired) {
            let (diff, allowed) = if a.is_nan() || d.is_nan() {
                (if a.is_nan() && d.is_nan() { 0.0 } else { f64::INFINITY }, 1.0)
            } else {
                let d64 = f64::from(d);
                ((f64::from(a) - d64).abs(), atol + self.rtol * d64.abs())
            };
            c.max_abs = c.max_abs.max(diff);
            let ratio = if diff == 0.0 {
                0.0
            } else if allowed > 0.0 {
                diff / allowed
            } else {
                f64::INFINITY
            };
            c.worst = c.worst.max(ratio);
            if diff > allowed {
                c.outside += 1;
            }
        }
        c
    }
}

impl std::fmt::Display for Tolerance {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "|a - b| <= {:.0e} x range width + {:.0e} x |b|", self.atol, self.rtol)
    }
}

/// Outputs saved from the training framework for given latents.
#[derive(Debug, Clone, PartialEq)]
pub struct FrameworkReference {
    /// The latents fed.
    pub latents: Latents,
    /// Labels fed, for conditional models.
    pub labels: Option<Vec<i64>>,
    /// The outputs, in the model's layout, `count * values_per_image`.
    pub outputs: Vec<f32>,
}

/// How the gate runs and its thresholds. Where each default comes from is in
/// [`CheckOptions::thresholds`], and so in every report.
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct CheckOptions {
    /// Seed of every latent the gate draws. Default [`crate::DEFAULT_SEED`].
    pub seed: u64,
    /// The largest batch to try, 2 to 1024. Default 16.
    pub max_batch: usize,
    /// Samples for the diversity, range and finiteness checks, 8 to 1024. Default 64.
    pub samples: usize,
    /// Latents per scale run through the activation probe, 1 to 256. Default 16.
    pub probe_count: usize,
    /// `batch-independence`: an image alone against itself in a batch. Default atol 5e-5 of the
    /// range width, rtol 1e-5.
    pub batch_tolerance: Tolerance,
    /// `parity-framework`: genloom's outputs against the saved ones. Default as batch.
    pub reference_tolerance: Tolerance,
    /// `range`: how far outside the declared range a value may be, as a share of its width.
    /// Default 1e-3.
    pub range_tolerance: f64,
    /// `range`: the share of saturated 8-bit values (0 or 255) above which the check warns.
    /// Default 0.25.
    pub max_saturated: f64,
    /// `diversity`: least RMS pair difference in range units. Default 0.02.
    pub min_diversity: f64,
    /// `diversity`: most share of near-duplicate pairs. Default 0.05.
    pub max_duplicates: f64,
    /// `sensitivity`: a dimension is dead when its effect is below this share of the median.
    /// Default 0.001.
    pub dead_ratio: f64,
    /// Framework outputs to match.
    pub reference: Option<FrameworkReference>,
    /// The source an export should match.
    pub against: Option<Model>,
    /// `parity-export`: least PSNR against the source. Default 30 dB.
    pub min_psnr: f64,
    /// `parity-export`: least SSIM against the source. Default 0.95.
    pub min_ssim: f64,
    /// Warnings fail the gate too. Default false.
    pub strict: bool,
    /// Checks to leave out (reported as skipped). `structure` and `batch` cannot be skipped.
    pub skip: Vec<CheckId>,
}

impl Default for CheckOptions {
    fn default() -> Self {
        let close = Tolerance { atol: 5e-5, rtol: 1e-5 };
        CheckOptions {
            seed: crate::DEFAULT_SEED,
            max_batch: 16,
            samples: 64,
            probe_count: 16,
            batch_tolerance: close,
            reference_tolerance: close,
            range_tolerance: 1e-3,
            max_saturated: 0.25,
            min_diversity: 0.02,
            max_duplicates: 0.05,
            dead_ratio: 1e-3,
            reference: None,
            against: None,
            min_psnr: 30.0,
            min_ssim: 0.95,
            strict: false,
            skip: vec![],
        }
    }
}

impl CheckOptions {
    /// Refuses settings the gate cannot honour.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] naming the setting, its value and what it accepts.
    pub fn validate(&self) -> Result<()> {
        if !(2..=1024).contains(&self.max_batch) {
            return Err(Error::invalid(
                "the largest batch to try",
                self.max_batch,
                "2 to 1024 (batch independence needs a batch of at least 2)",
            ));
        }
        if !(8..=1024).contains(&self.samples) {
            return Err(Error::invalid("the gate's sample count", self.samples, "8 to 1024"));
        }
        if !(1..=256).contains(&self.probe_count) {
            return Err(Error::invalid("the activation probe's latent count", self.probe_count, "1 to 256"));
        }
        for (name, t) in
            [("batch-independence", self.batch_tolerance), ("parity-framework", self.reference_tolerance)]
        {
            if !(t.atol >= 0.0 && t.rtol >= 0.0 && t.atol.is_finite() && t.rtol.is_finite()) {
                return Err(Error::invalid(
                    format!("the {name} tolerance"),
                    format!("atol {} rtol {}", t.atol, t.rtol),
                    "finite, non-negative atol and rtol",
                ));
            }
        }
        let shares = [
            ("the range tolerance", self.range_tolerance),
            ("the saturation warning share", self.max_saturated),
            ("the near-duplicate share", self.max_duplicates),
            ("the dead-dimension ratio", self.dead_ratio),
            ("the least diversity", self.min_diversity),
            ("the least SSIM", self.min_ssim),
        ];
        for (name, v) in shares {
            if !(0.0..=1.0).contains(&v) {
                return Err(Error::invalid(name, v, "a share from 0 to 1"));
            }
        }
        if !self.min_psnr.is_finite() || self.min_psnr < 0.0 {
            return Err(Error::invalid("the least PSNR", self.min_psnr, "a finite number of dB, 0 or more"));
        }
        if let Some(id) = self.skip.iter().find(|c| !c.skippable()) {
            return Err(Error::invalid(
                "a skipped check",
                format!("`{id}`"),
                "a check other than `structure` and `batch`, which every other check stands on",
            ));
        }
        Ok(())
    }

    /// Every threshold in force, with where its default comes from.
    pub fn thresholds(&self) -> Vec<Threshold> {
        let t = |check: CheckId, name: &str, value: f64, source: &str| Threshold {
            check,
            name: name.into(),
            value,
            source: source.into(),
        };
        let close_rule =
            "the rule of numpy.testing.assert_allclose (|actual - desired| <= atol + rtol * |desired|)";
        vec![
            t(
                CheckId::BatchIndependence,
                "atol (share of range width)",
                self.batch_tolerance.atol,
                &format!(
                    "{close_rule}; default 5e-5 of the width is 1e-4 on [-1, 1], the f32 rung of the project's tolerance ladder: common practice, no source"
                ),
            ),
            t(
                CheckId::BatchIndependence,
                "rtol",
                self.batch_tolerance.rtol,
                "default 1e-5, the rtol of numpy.allclose and numpy.isclose",
            ),
            t(
                CheckId::Finiteness,
                "non-finite values anywhere in the graph",
                0.0,
                "none allowed: IEEE 754 NaN and infinity are never a valid pixel",
            ),
            t(
                CheckId::Range,
                "range tolerance (share of range width)",
                self.range_tolerance,
                "default 1e-3: common practice, no source",
            ),
            t(
                CheckId::Range,
                "saturated 8-bit values, warn above (share)",
                self.max_saturated,
                "default 0.25: common practice, no source",
            ),
            t(
                CheckId::Sensitivity,
                "dead-dimension ratio (share of the median effect)",
                self.dead_ratio,
                "default 1e-3: common practice, no source",
            ),
            t(
                CheckId::Diversity,
                "least mean pair RMS difference (share of range width)",
                self.min_diversity,
                "default 0.02 (about 5 of 255 levels): common practice, no source",
            ),
            t(
                CheckId::Diversity,
                "near-duplicate pairs, most (share)",
                self.max_duplicates,
                "default 0.05; a near-duplicate is under one 8-bit level (1/255 of the width) apart, the quantisation step of the 8-bit output: common practice, no source",
            ),
            t(
                CheckId::ParityFramework,
                "atol (share of range width)",
                self.reference_tolerance.atol,
                &format!("{close_rule}; default as batch-independence"),
            ),
            t(
                CheckId::ParityFramework,
                "rtol",
                self.reference_tolerance.rtol,
                "default 1e-5, the rtol of numpy.allclose and numpy.isclose",
            ),
            t(
                CheckId::ParityExport,
                "least PSNR (dB)",
                self.min_psnr,
                "default 30 dB, PSNR as defined for 8-bit images (peak 255): common practice for lossy image quality, no source",
            ),
            t(
                CheckId::ParityExport,
                "least SSIM",
                self.min_ssim,
                "default 0.95; SSIM with the settings of Wang et al. 2004: common practice, no source",
            ),
        ]
    }
}

/// Collects results.
struct Recorder {
    checks: Vec<CheckResult>,
    skip: Vec<CheckId>,
}

impl Recorder {
    fn add(
        &mut self,
        id: CheckId,
        status: Status,
        measured: impl Into<String>,
        threshold: impl Into<String>,
        detail: impl Into<String>,
    ) {
        self.checks.push(CheckResult {
            id,
            status,
            measured: measured.into(),
            threshold: threshold.into(),
            detail: detail.into(),
        });
    }

    fn skip(&mut self, id: CheckId, why: &str) {
        self.add(id, Status::Skip, "", "", why);
    }

    fn has(&self, id: CheckId) -> bool {
        self.checks.iter().any(|c| c.id == id)
    }

    /// Whether a check should run (not recorded yet, not skipped on request).
    fn wants(&mut self, id: CheckId) -> bool {
        if self.has(id) {
            return false;
        }
        if self.skip.contains(&id) {
            self.skip(id, "skipped on request");
            return false;
        }
        true
    }
}

/// What the run-time checks share: the generators, the latents and their images.
struct Ctx<'a> {
    model: &'a Model,
    o: &'a CheckOptions,
    sig: Signature,
    /// Width of the output range.
    width: f64,
    /// A generator with micro-batch `max_batch`.
    big: Generator,
    /// `max_batch` latents (seed) and their labels.
    batch_latents: Latents,
    batch_labels: Option<Vec<i64>>,
    /// Their images, generated as one batch.
    whole: Images,
    /// `samples` typical latents (seed + 1), their labels and images.
    typical: Latents,
    typical_labels: Option<Vec<i64>>,
    typical_out: Images,
}

impl<'a> Ctx<'a> {
    fn new(model: &'a Model, o: &'a CheckOptions) -> Result<Ctx<'a>> {
        let sig = model.signature().clone();
        let dim = sig.latent.dim;
        let big = generator(model, o.max_batch)?;
        let batch_latents = Latents::sample(dim, &SampleOptions::new(o.seed, o.max_batch))?;
        let batch_labels = sig.cycle_labels(o.max_batch);
        let whole = big.generate(&batch_latents, batch_labels.as_deref())?;
        let typical = Latents::sample(dim, &SampleOptions::new(o.seed.wrapping_add(1), o.samples))?;
        let typical_labels = sig.cycle_labels(o.samples);
        let typical_out = big.generate(&typical, typical_labels.as_deref())?;
        let width = f64::from(sig.image.range.hi - sig.image.range.lo);
        Ok(Ctx {
            model,
            o,
            sig,
            width,
            big,
            batch_latents,
            batch_labels,
            whole,
            typical,
            typical_labels,
            typical_out,
        })
    }
}

fn generator(model: &Model, micro_batch: usize) -> Result<Generator> {
    let o = GeneratorOptions { micro_batch, warm_up: false, max_cached_plans: 8, ..Default::default() };
    Generator::new(model.clone(), o)
}

/// Whether the gate goes on after a check.
enum Flow {
    Continue,
    Stop,
}

type RunCheck = fn(&Ctx<'_>, &mut Recorder, &mut Option<ActivationReport>) -> Result<Flow>;

/// The run-time checks, in order.
const RUN_TIME: [(CheckId, RunCheck); 10] = [
    (CheckId::Batch, batch::batch),
    (CheckId::BatchIndependence, batch::independence),
    (CheckId::Determinism, batch::determinism),
    (CheckId::Finiteness, outputs::finiteness),
    (CheckId::Range, outputs::range),
    (CheckId::Sensitivity, response::sensitivity),
    (CheckId::Diversity, response::diversity),
    (CheckId::Labels, response::labels),
    (CheckId::ParityFramework, parity::framework),
    (CheckId::ParityExport, parity::export),
];

/// Runs the gate on a model file.
///
/// # Errors
/// [`Error::InvalidOption`] for options the gate cannot honour; otherwise only when the file
/// cannot be read as an ONNX model at all (missing, empty, not protobuf, bad external data):
/// every defect of a readable model is a failed check in the report.
pub fn check_path(path: &std::path::Path, load: &LoadOptions, options: &CheckOptions) -> Result<CheckReport> {
    options.validate()?;
    let raw = crate::model::read_raw_path(path, &load.limits)?;
    Ok(check_raw(raw, &path.display().to_string(), load, options))
}

/// Runs the gate on single-file model bytes.
///
/// # Errors
/// As [`check_path`].
pub fn check_bytes(
    bytes: &[u8],
    name: &str,
    load: &LoadOptions,
    options: &CheckOptions,
) -> Result<CheckReport> {
    options.validate()?;
    let raw = crate::model::read_raw(bytes, name, None, &load.limits)?;
    Ok(check_raw(raw, name, load, options))
}

fn check_raw(raw: Raw, name: &str, load: &LoadOptions, options: &CheckOptions) -> CheckReport {
    let start = Instant::now();
    let mut r = Recorder { checks: vec![], skip: options.skip.clone() };
    let sha256 = raw.sha256.clone();
    let proto = raw.proto.clone();
    let model = if structure::prescan(&proto, &mut r) { structure::load(raw, load, &mut r) } else { None };
    if r.wants(CheckId::TrainingMode) {
        structure::training_mode(&proto, &mut r);
    }
    let mut activations = None;
    if let Some(m) = &model {
        if let Err(e) = run_checks(m, options, &mut r, &mut activations) {
            let training = r.checks.iter().any(|c| c.id == CheckId::TrainingMode && c.status == Status::Fail);
            if training {
                // tract refuses some training-mode nodes outright; that is the defect already named.
                for id in CheckId::ALL {
                    if !r.has(id) {
                        r.skip(id, &format!("not run: the training-mode leftovers stop inference ({e})"));
                    }
                }
            } else {
                let next = CheckId::ALL.into_iter().find(|id| !r.has(*id)).unwrap_or(CheckId::Batch);
                r.add(next, Status::Fail, "inference failed", "runs", e.to_string());
            }
        }
    }
    for id in CheckId::ALL {
        if !r.has(id) {
            let why = if model.is_none() {
                "not run: the model did not pass `structure`"
            } else {
                "not run: an earlier check stopped the gate"
            };
            r.skip(id, why);
        }
    }
    r.checks.sort_by_key(|c| c.id);
    CheckReport::new(report::Parts {
        model: name.to_string(),
        model_sha256: sha256,
        signature: model.as_ref().map(|m| m.signature().clone()),
        checks: r.checks,
        options,
        activations,
        elapsed_ms: start.elapsed().as_secs_f64() * 1e3,
    })
}

fn run_checks(
    model: &Model,
    o: &CheckOptions,
    r: &mut Recorder,
    activations: &mut Option<ActivationReport>,
) -> Result<()> {
    let ctx = Ctx::new(model, o)?;
    for (id, run) in RUN_TIME {
        if !r.wants(id) {
            continue;
        }
        if let Flow::Stop = run(&ctx, r, activations)? {
            break;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ids_round_trip_and_keep_their_json_names() {
        for id in CheckId::ALL {
            assert_eq!(id.as_str().parse::<CheckId>().unwrap(), id);
            assert_eq!(serde_json::to_string(&id).unwrap(), format!("\"{}\"", id.as_str()));
        }
        let e = "labelz".parse::<CheckId>().unwrap_err().to_string();
        assert!(e.contains("`labelz`") && e.contains("parity-export"), "{e}");
    }

    #[test]
    fn ids_sort_in_run_order() {
        let mut v = CheckId::ALL.to_vec();
        v.reverse();
        v.sort();
        assert_eq!(v, CheckId::ALL.to_vec());
    }

    /// The rule of `numpy.testing.assert_allclose`: |a - d| <= atol + rtol * |d|.
    #[test]
    fn tolerance_scales_with_the_range() {
        let t = Tolerance { atol: 5e-5, rtol: 1e-5 };
        // The reported case: 1.37e-4 off on a [0, 255] output is 5e-7 of the range: close.
        let c = t.compare(&[200.000_14], &[200.0], 255.0);
        assert!(c.ok() && c.max_abs > 1.3e-4, "{c:?}");
        // The same error on [-1, 1] is past atol 1e-4 (+ rtol 1e-5 x 0.5).
        let c = t.compare(&[0.500_137], &[0.5], 2.0);
        assert!(!c.ok() && c.worst > 1.0, "{c:?}");
        // Half an 8-bit level on [0, 255] is a real error.
        assert!(!t.compare(&[100.5], &[100.0], 255.0).ok());
        // NaN equals NaN, never a number.
        assert!(t.compare(&[f32::NAN], &[f32::NAN], 2.0).ok());
        let c = t.compare(&[f32::NAN], &[0.0], 2.0);
        assert!(!c.ok() && c.max_abs.is_infinite());
        // Zero tolerance accepts only equality.
        let z = Tolerance { atol: 0.0, rtol: 0.0 };
        assert!(z.compare(&[1.0], &[1.0], 2.0).ok());
        assert!(!z.compare(&[1.0], &[1.000_001], 2.0).ok());
    }

    #[test]
    fn options_are_validated() {
        let bad = |f: fn(&mut CheckOptions)| {
            let mut o = CheckOptions::default();
            f(&mut o);
            o.validate().unwrap_err().to_string()
        };
        assert!(bad(|o| o.max_batch = 1).contains("2 to 1024"));
        assert!(bad(|o| o.max_batch = 5000).contains("5000"));
        assert!(bad(|o| o.samples = 4).contains("8 to 1024"));
        assert!(bad(|o| o.max_saturated = 1.5).contains("saturation"));
        assert!(bad(|o| o.reference_tolerance.atol = -1.0).contains("parity-framework"));
        assert!(bad(|o| o.skip = vec![CheckId::Structure]).contains("`structure`"));
        CheckOptions::default().validate().unwrap();
    }

    #[test]
    fn every_threshold_names_its_source() {
        for t in CheckOptions::default().thresholds() {
            assert!(
                t.source.contains("numpy")
                    || t.source.contains("common practice")
                    || t.source.contains("IEEE"),
                "{t:?}"
            );
        }
    }
}
