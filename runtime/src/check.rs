//! The release gate: checks that an export is fit to ship, each with its measured figure, its
//! threshold, and pass / warn / fail.
//!
//! The checks, in order (ids are stable; the JSON schema is `genloom.check/1`):
//! - `structure`: a latent input and an image output are found; every op is one tract 0.23.9
//!   implements and its attributes take values the ONNX specification defines; no random-number
//!   ops. This is a pre-scan of the graph, so a problem is named by node before tract runs.
//! - `training-mode`: no BatchNormalization with `training_mode = 1` or extra outputs, no Dropout
//!   whose `training_mode` input is true.
//! - `batch`: runs at batch 1, 2, 7 and the largest asked, with consistent shapes.
//! - `batch-independence`: each image alone equals itself inside a batch (max abs <= 1e-4).
//! - `determinism`: the same latents twice give identical bits.
//! - `finiteness`: no NaN or infinity for typical and truncated latents (fail); the share for
//!   latents scaled to 3x and 10x their norm (warn).
//! - `range`: outputs inside the declared range (tolerance 0.1% of its width); the share of
//!   saturated 8-bit values (warn above 25%).
//! - `sensitivity`: different latents give different images; each latent dimension, nudged by
//!   one standard deviation, changes the output; dimensions with no effect (below 0.1% of the
//!   median effect) are listed as dead (fail).
//! - `diversity`: the root-mean-square difference between pairs of samples, in units of the
//!   output range (fail below 0.02), and the share of near-duplicate pairs, under one 8-bit
//!   level apart (fail above 5%).
//! - `labels`: every class gives distinct images; an out-of-range label is refused.
//! - `parity-framework`: outputs saved from the training framework for given latents are matched
//!   (default max abs 1e-4).
//! - `parity-export`: an export matches its source (default PSNR >= 30 dB, SSIM >= 0.95, the
//!   int8 targets of `convert`).
//!
//! The default thresholds are common practice for image generators, chosen to pass sound exports
//! with a wide margin and to catch the named defects; every one is overridable.

use crate::error::{Error, Result};
use crate::generate::{Generator, GeneratorOptions, Images};
use crate::latent::{Latents, SampleOptions};
use crate::model::{LoadOptions, Model, Raw};
use crate::signature::Batch;
use std::time::Instant;
use tract_onnx::pb;

/// Outcome of one check.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Fit to ship.
    Pass,
    /// Worth a look; does not block.
    Warn,
    /// Blocks the release.
    Fail,
    /// Not run (an earlier check failed, or it does not apply).
    Skip,
}

/// One check's result.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CheckResult {
    /// Stable id (`structure`, `batch-independence`, ...).
    pub id: String,
    /// Outcome.
    pub status: Status,
    /// What was measured, in words with the figure.
    pub measured: String,
    /// The threshold applied.
    pub threshold: String,
    /// Why it failed or warned, or notes.
    pub detail: String,
}

/// The gate's report.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CheckReport {
    /// Schema id of this JSON document.
    pub schema: String,
    /// The model checked.
    pub model: String,
    /// Its signature, when one was found.
    pub signature: Option<crate::Signature>,
    /// Every check, in order.
    pub checks: Vec<CheckResult>,
    /// Counts.
    pub passed: usize,
    /// Checks that warned.
    pub warned: usize,
    /// Checks that failed.
    pub failed: usize,
    /// Wall time of the whole gate in milliseconds.
    pub elapsed_ms: f64,
}

impl CheckReport {
    /// Whether nothing failed.
    pub fn ok(&self) -> bool {
        self.failed == 0
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

/// How the gate runs and its thresholds.
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct CheckOptions {
    /// Seed of every latent the gate draws. Default 1.
    pub seed: u64,
    /// The largest batch to try. Default 16.
    pub max_batch: usize,
    /// Samples for the diversity check. Default 64.
    pub samples: usize,
    /// Batch independence tolerance (max abs). Default 1e-4.
    pub batch_tolerance: f32,
    /// Least RMS pair difference in range units. Default 0.02.
    pub min_diversity: f64,
    /// Most share of near-duplicate pairs. Default 0.05.
    pub max_duplicates: f64,
    /// A dimension is dead when its effect is below this share of the median. Default 0.001.
    pub dead_ratio: f64,
    /// Framework outputs to match, and the max abs tolerance (default 1e-4).
    pub reference: Option<FrameworkReference>,
    /// Max abs tolerance of `parity-framework`.
    pub reference_tolerance: f32,
    /// The source an export should match.
    pub against: Option<Model>,
    /// Least PSNR against the source. Default 30 dB.
    pub min_psnr: f64,
    /// Least SSIM against the source. Default 0.95.
    pub min_ssim: f64,
}

impl Default for CheckOptions {
    fn default() -> Self {
        CheckOptions {
            seed: 1,
            max_batch: 16,
            samples: 64,
            batch_tolerance: 1e-4,
            min_diversity: 0.02,
            max_duplicates: 0.05,
            dead_ratio: 1e-3,
            reference: None,
            reference_tolerance: 1e-4,
            against: None,
            min_psnr: 30.0,
            min_ssim: 0.95,
        }
    }
}

struct Recorder {
    checks: Vec<CheckResult>,
}

impl Recorder {
    fn add(
        &mut self,
        id: &str,
        status: Status,
        measured: impl Into<String>,
        threshold: impl Into<String>,
        detail: impl Into<String>,
    ) {
        self.checks.push(CheckResult {
            id: id.into(),
            status,
            measured: measured.into(),
            threshold: threshold.into(),
            detail: detail.into(),
        });
    }

    fn skip(&mut self, id: &str, why: &str) {
        self.add(id, Status::Skip, "", "", why);
    }
}

const ALL: [&str; 12] = [
    "structure",
    "training-mode",
    "batch",
    "batch-independence",
    "determinism",
    "finiteness",
    "range",
    "sensitivity",
    "diversity",
    "labels",
    "parity-framework",
    "parity-export",
];

/// The ops tract 0.23.9 registers for the default ONNX domain (read from its op registry).
const TRACT_OPS: &[&str] = &[
    "Abs",
    "Acos",
    "Acosh",
    "Add",
    "And",
    "ArgMax",
    "ArgMin",
    "Asin",
    "Asinh",
    "Atan",
    "Atanh",
    "AveragePool",
    "BatchNormalization",
    "BitShift",
    "BitwiseAnd",
    "BitwiseNot",
    "BitwiseOr",
    "BitwiseXor",
    "BlackmanWindow",
    "Cast",
    "CastLike",
    "Ceil",
    "Celu",
    "Clip",
    "Compress",
    "Concat",
    "Constant",
    "ConstantOfShape",
    "Conv",
    "ConvInteger",
    "ConvTranspose",
    "Cos",
    "Cosh",
    "CumSum",
    "DFT",
    "DepthToSpace",
    "DequantizeLinear",
    "Div",
    "Dropout",
    "DynamicQuantizeLinear",
    "Einsum",
    "Elu",
    "Equal",
    "Erf",
    "Exp",
    "Expand",
    "EyeLike",
    "Flatten",
    "Floor",
    "GRU",
    "Gather",
    "GatherElements",
    "GatherND",
    "Gelu",
    "Gemm",
    "GlobalAveragePool",
    "GlobalLpPool",
    "GlobalMaxPool",
    "Greater",
    "GreaterOrEqual",
    "GridSample",
    "GroupNormalization",
    "HammingWindow",
    "HannWindow",
    "HardSigmoid",
    "HardSwish",
    "Hardmax",
    "Identity",
    "If",
    "InstanceNormalization",
    "IsInf",
    "IsNaN",
    "LRN",
    "LSTM",
    "LayerNormalization",
    "LeakyRelu",
    "Less",
    "LessOrEqual",
    "Log",
    "LogSoftmax",
    "LpNormalization",
    "MatMul",
    "MatMulInteger",
    "Max",
    "MaxPool",
    "Mean",
    "MeanVarianceNormalization",
    "MelWeightMatrix",
    "Min",
    "Mish",
    "Mod",
    "Mul",
    "Neg",
    "NonMaxSuppression",
    "NonZero",
    "Not",
    "OneHot",
    "Or",
    "PRelu",
    "Pad",
    "Pow",
    "QLinearConv",
    "QLinearMatMul",
    "QuantizeLinear",
    "RNN",
    "Range",
    "Reciprocal",
    "ReduceL1",
    "ReduceL2",
    "ReduceLogSum",
    "ReduceLogSumExp",
    "ReduceMax",
    "ReduceMean",
    "ReduceMin",
    "ReduceProd",
    "ReduceSum",
    "ReduceSumSquare",
    "Relu",
    "Reshape",
    "Resize",
    "Round",
    "STFT",
    "Scan",
    "Scatter",
    "ScatterElements",
    "ScatterND",
    "Selu",
    "Shape",
    "Shrink",
    "Sigmoid",
    "Sign",
    "Sin",
    "Sinh",
    "Size",
    "Slice",
    "Softmax",
    "Softplus",
    "Softsign",
    "SpaceToDepth",
    "Split",
    "Sqrt",
    "Squeeze",
    "Sub",
    "Sum",
    "Tan",
    "Tanh",
    "ThresholdedRelu",
    "Tile",
    "TopK",
    "Transpose",
    "Trilu",
    "Unsqueeze",
    "Where",
    "Xor",
];

const RANDOM_OPS: &[&str] =
    &["RandomNormal", "RandomUniform", "RandomNormalLike", "RandomUniformLike", "Multinomial", "Bernoulli"];

fn node_label(n: &pb::NodeProto) -> String {
    if n.name.is_empty() {
        format!("{} (output `{}`)", n.op_type, n.output.first().map(String::as_str).unwrap_or("?"))
    } else {
        format!("{} `{}`", n.op_type, n.name)
    }
}

/// String attributes whose values the ONNX specification enumerates, for ops generators use.
fn attribute_problem(n: &pb::NodeProto) -> Option<String> {
    let s = |name: &str| crate::graph::attr(n, name).map(|a| String::from_utf8_lossy(&a.s).into_owned());
    let allowed: &[(&str, &[&str])] = match n.op_type.as_str() {
        "Resize" | "Upsample" => &[
            ("mode", &["nearest", "linear", "cubic"]),
            (
                "coordinate_transformation_mode",
                &[
                    "half_pixel",
                    "half_pixel_symmetric",
                    "pytorch_half_pixel",
                    "align_corners",
                    "asymmetric",
                    "tf_crop_and_resize",
                ],
            ),
            ("nearest_mode", &["round_prefer_floor", "round_prefer_ceil", "floor", "ceil"]),
            ("keep_aspect_ratio_policy", &["stretch", "not_larger", "not_smaller"]),
        ],
        "Conv" | "ConvTranspose" | "AveragePool" | "MaxPool" => {
            &[("auto_pad", &["NOTSET", "SAME_UPPER", "SAME_LOWER", "VALID"])]
        }
        "Pad" => &[("mode", &["constant", "reflect", "edge", "wrap"])],
        "DepthToSpace" => &[("mode", &["DCR", "CRD"])],
        _ => &[],
    };
    for (attr, values) in allowed {
        if let Some(v) = s(attr) {
            if !values.contains(&v.as_str()) {
                return Some(format!(
                    "{} has {attr} = \"{v}\", which ONNX does not define (expected one of {})",
                    node_label(n),
                    values.join(", ")
                ));
            }
        }
    }
    if n.op_type == "Resize" {
        // Cubic with exclude_outside or a non-default coefficient, and crop-and-resize, rely on
        // paths a small CPU engine rarely implements: flagged so they are looked at before tract runs.
        if s("mode").as_deref() == Some("cubic")
            && s("coordinate_transformation_mode").as_deref() == Some("tf_crop_and_resize")
        {
            return Some(format!(
                "{} combines mode = \"cubic\" with coordinate_transformation_mode = \"tf_crop_and_resize\", which genloom does not support on tract 0.23.9",
                node_label(n)
            ));
        }
    }
    None
}

fn prescan(proto: &pb::ModelProto, r: &mut Recorder) -> bool {
    let Some(g) = proto.graph.as_ref() else { return false };
    let mut problems = vec![];
    for n in &g.node {
        let domain_ok = n.domain.is_empty() || n.domain == "ai.onnx";
        if RANDOM_OPS.contains(&n.op_type.as_str()) {
            problems.push(format!(
                "{} draws random numbers at inference (images would change from run to run)",
                node_label(n)
            ));
        } else if !domain_ok {
            problems.push(format!(
                "{} is in domain `{}`, which tract does not implement",
                node_label(n),
                n.domain
            ));
        } else if !TRACT_OPS.contains(&n.op_type.as_str()) {
            problems.push(format!("{} is not an op tract 0.23.9 implements", node_label(n)));
        } else if let Some(p) = attribute_problem(n) {
            problems.push(p);
        }
    }
    let init: std::collections::HashSet<&str> = g.initializer.iter().map(|t| t.name.as_str()).collect();
    let inputs: Vec<&str> = g.input.iter().map(|i| i.name.as_str()).filter(|n| !init.contains(n)).collect();
    if inputs.is_empty() {
        problems.push(
            "the graph has no inputs: the latent was traced away (exported with a constant in its place)"
                .into(),
        );
    }
    if g.output.is_empty() {
        problems.push("the graph has no outputs".into());
    }
    if problems.is_empty() {
        true
    } else {
        r.add(
            "structure",
            Status::Fail,
            format!("{} problem(s) in {} nodes", problems.len(), g.node.len()),
            "none",
            problems.join("; "),
        );
        false
    }
}

fn training_mode(proto: &pb::ModelProto, r: &mut Recorder) {
    let Some(g) = proto.graph.as_ref() else { return };
    let consts = crate::graph::constants(g);
    let mut found = vec![];
    let mut unsure = vec![];
    for n in &g.node {
        match n.op_type.as_str() {
            "BatchNormalization" => {
                if crate::graph::attr_i(n, "training_mode", 0) != 0 {
                    found.push(format!(
                        "{} has training_mode = 1 (statistics of the batch, not the learned ones)",
                        node_label(n)
                    ));
                } else if n.output.iter().skip(1).any(|o| !o.is_empty()) {
                    found.push(format!(
                        "{} has running-statistics outputs (a training-mode export)",
                        node_label(n)
                    ));
                }
            }
            "Dropout" => {
                if let Some(t) = n.input.get(2).filter(|s| !s.is_empty()) {
                    match consts.get(t.as_str()).and_then(|c| crate::graph::read_i64(c).ok()) {
                        Some(v) if v.first().copied().unwrap_or(0) != 0 => found.push(format!(
                            "{} has training_mode = true (drops values at random)",
                            node_label(n)
                        )),
                        Some(_) => {}
                        None => {
                            unsure.push(format!("{}'s training_mode is computed at run time", node_label(n)))
                        }
                    }
                }
            }
            _ => {}
        }
    }
    if !found.is_empty() {
        r.add(
            "training-mode",
            Status::Fail,
            format!("{} training-mode node(s)", found.len()),
            "none",
            found.join("; "),
        );
    } else if !unsure.is_empty() {
        r.add(
            "training-mode",
            Status::Warn,
            "training mode not constant",
            "constant false",
            unsure.join("; "),
        );
    } else {
        r.add("training-mode", Status::Pass, "no training-mode nodes", "none", "");
    }
}

fn labels_for(g: &Generator, n: usize) -> Option<Vec<i64>> {
    g.signature().label.as_ref().map(|l| (0..n).map(|i| (i % l.classes) as i64).collect())
}

fn generator(model: &Model, micro_batch: usize) -> Result<Generator> {
    let o = GeneratorOptions { micro_batch, warm_up: false, max_cached_plans: 8, ..Default::default() };
    Generator::new(model.clone(), o)
}

fn max_abs(a: &[f32], b: &[f32]) -> f32 {
    a.iter()
        .zip(b)
        .map(|(x, y)| {
            if x.is_nan() || y.is_nan() {
                if x.is_nan() && y.is_nan() {
                    0.0
                } else {
                    f32::INFINITY
                }
            } else {
                (x - y).abs()
            }
        })
        .fold(0.0, f32::max)
}

fn non_finite_share(images: &Images) -> f64 {
    let bad = (0..images.count).filter(|&i| images.image(i).iter().any(|v| !v.is_finite())).count();
    bad as f64 / images.count.max(1) as f64
}

/// The share of images whose pre-activation tensor (the input of the op that produces the
/// output) holds NaN or infinity, computed with a plan that exposes that tensor.
fn hidden_non_finite(model: &Model, latents: &Latents, labels: Option<&[i64]>) -> Result<f64> {
    use tract_onnx::prelude::*;
    let typed = &model.typed;
    let n = latents.count();
    let mut probe = match (&model.batch_symbol, model.signature().batch) {
        (Some(sym), _) => typed
            .set_symbols(&std::collections::HashMap::from([(sym.clone(), TDim::from(n as i64))]))
            .map_err(|e| Error::tract("fix the probe batch", e))?,
        (None, Batch::Fixed(b)) if b == n => typed.clone(),
        _ => return Ok(0.0),
    };
    let out = probe.output_outlets().map_err(|e| Error::tract("list the outputs", e))?[model.output_index];
    let Some(&pre) = probe.node(out.node).inputs.first() else { return Ok(0.0) };
    probe.select_output_outlets(&[pre]).map_err(|e| Error::tract("expose the pre-activation tensor", e))?;
    let plan = crate::model::guard("optimise the probe", || probe.into_optimized()?.into_runnable())?;
    let inputs = crate::generate::input_values(model, latents.as_slice(), labels, n)?;
    let outs = crate::model::guard("run the probe", || plan.run(inputs))?;
    let t = outs[0].cast_to::<f32>().map_err(|e| Error::tract("read the probe", e))?;
    let view = t.try_as_plain_ram().map_err(|e| Error::tract("read the probe", e))?;
    let v = view.as_slice::<f32>().map_err(|e| Error::tract("read the probe", e))?;
    let per = v.len() / n.max(1);
    if per == 0 {
        return Ok(0.0);
    }
    let bad = v.chunks(per).filter(|c| c.iter().any(|x| !x.is_finite())).count();
    Ok(bad as f64 / n as f64)
}

/// Runs the gate on a model file.
///
/// # Errors
/// Only when the file cannot be read as an ONNX model at all (missing, empty, not protobuf,
/// bad external data): every defect of a readable model is a failed check in the report.
pub fn check_path(path: &std::path::Path, load: &LoadOptions, options: &CheckOptions) -> Result<CheckReport> {
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
    let raw = crate::model::read_raw(bytes, name, None, &load.limits)?;
    Ok(check_raw(raw, name, load, options))
}

fn check_raw(raw: Raw, name: &str, load: &LoadOptions, options: &CheckOptions) -> CheckReport {
    let start = Instant::now();
    let mut r = Recorder { checks: vec![] };
    let proto = raw.proto.clone();
    let structure_ok = prescan(&proto, &mut r);
    let model = if structure_ok {
        match Model::from_raw(raw, load) {
            Ok(m) => {
                let s = m.signature();
                r.add(
                    "structure",
                    Status::Pass,
                    format!(
                        "latent `{}` ({}), image `{}` {}x{}x{} {}, range {}",
                        s.latent.name,
                        s.latent.dim,
                        s.image.name,
                        s.image.channels,
                        s.image.height,
                        s.image.width,
                        s.image.layout,
                        s.image.range
                    ),
                    "a latent input, an image output, supported ops",
                    "",
                );
                Some(m)
            }
            Err(e) => {
                r.add(
                    "structure",
                    Status::Fail,
                    "the model does not load",
                    "loads, with a signature",
                    e.to_string(),
                );
                None
            }
        }
    } else {
        None
    };
    training_mode(&proto, &mut r);
    let signature = model.as_ref().map(|m| m.signature().clone());
    if let Some(m) = &model {
        if let Err(e) = run_checks(m, options, &mut r) {
            let training = r.checks.iter().any(|c| c.id == "training-mode" && c.status == Status::Fail);
            let done: Vec<String> = r.checks.iter().map(|c| c.id.clone()).collect();
            if training {
                // tract refuses some training-mode nodes outright; that is the defect already named.
                for id in ALL.iter().filter(|id| !done.iter().any(|d| d == *id)) {
                    r.skip(id, &format!("not run: the training-mode leftovers stop inference ({e})"));
                }
            } else {
                let next = ALL.iter().find(|id| !done.iter().any(|d| d == *id)).copied().unwrap_or("batch");
                r.add(next, Status::Fail, "inference failed", "runs", e.to_string());
            }
        }
    }
    for id in ALL {
        if !r.checks.iter().any(|c| c.id == id) {
            let why = if model.is_none() {
                "not run: the model did not pass `structure`"
            } else {
                "not run: an earlier check stopped the gate"
            };
            r.skip(id, why);
        }
    }
    // Keep the documented order.
    r.checks.sort_by_key(|c| ALL.iter().position(|id| *id == c.id).unwrap_or(ALL.len()));
    let count = |s: Status| r.checks.iter().filter(|c| c.status == s).count();
    CheckReport {
        schema: "genloom.check/1".into(),
        model: name.to_string(),
        signature,
        passed: count(Status::Pass),
        warned: count(Status::Warn),
        failed: count(Status::Fail),
        checks: r.checks,
        elapsed_ms: start.elapsed().as_secs_f64() * 1e3,
    }
}

fn run_checks(model: &Model, o: &CheckOptions, r: &mut Recorder) -> Result<()> {
    let sig = model.signature().clone();
    let dim = sig.latent.dim;
    let range = sig.image.range;
    let width = f64::from(range.hi - range.lo);
    let max_batch = o.max_batch.max(7);
    // batch: 1, 2, 7 and the largest, each with its own plan.
    let latents = Latents::sample(dim, &SampleOptions::new(o.seed, max_batch))?;
    let g_big = generator(model, max_batch)?;
    let labels = labels_for(&g_big, max_batch);
    let whole = g_big.generate(&latents, labels.as_deref())?;
    let mut sizes = vec![];
    for b in [1usize, 2, 7] {
        let g = generator(model, b)?;
        let part = latents.slice(0..b)?;
        let out = g.generate(&part, labels.as_ref().map(|l| &l[..b]))?;
        if out.data.len() != b * sig.image.values_per_image() {
            r.add(
                "batch",
                Status::Fail,
                format!("batch {b} gave {} values", out.data.len()),
                "one image per latent",
                "",
            );
            return Ok(());
        }
        sizes.push(b);
    }
    sizes.push(max_batch);
    let fixed = match sig.batch {
        Batch::Fixed(n) => format!("; the model's batch is fixed at {n} (genloom loops and pads)"),
        Batch::Symbolic => String::new(),
    };
    r.add(
        "batch",
        Status::Pass,
        format!("ran at batch {sizes:?}{fixed}"),
        "batch 1, 2, 7 and the largest run",
        "",
    );

    // batch-independence
    let g1 = generator(model, 1)?;
    let alone = g1.generate(&latents, labels.as_deref())?;
    let d = max_abs(&alone.data, &whole.data);
    let status = if d <= o.batch_tolerance { Status::Pass } else { Status::Fail };
    let detail = if status == Status::Fail {
        "an image depends on the others in its batch: batch statistics at inference (BatchNorm in training mode, or a reduction over the batch axis)"
    } else {
        ""
    };
    r.add(
        "batch-independence",
        status,
        format!("max abs {d:.2e} between alone and in a batch of {max_batch}"),
        format!("<= {:.0e}", o.batch_tolerance),
        detail,
    );

    // determinism
    let again = g_big.generate(&latents, labels.as_deref())?;
    let same = whole.data.iter().zip(&again.data).all(|(a, b)| a.to_bits() == b.to_bits());
    r.add(
        "determinism",
        if same { Status::Pass } else { Status::Fail },
        if same {
            "identical bits on a second run".to_string()
        } else {
            format!("max abs {:.2e} between two runs", max_abs(&whole.data, &again.data))
        },
        "identical",
        if same { "" } else { "the same latents gave different images" },
    );

    // finiteness
    let typical = Latents::sample(dim, &SampleOptions::new(o.seed.wrapping_add(1), o.samples))?;
    let lab = labels_for(&g_big, o.samples);
    let t_out = g_big.generate(&typical, lab.as_deref())?;
    let mut so = SampleOptions::new(o.seed.wrapping_add(2), o.samples);
    so.truncation = Some(1.0);
    let trunc = Latents::sample(dim, &so)?;
    let tr_out = g_big.generate(&trunc, lab.as_deref())?;
    let scaled = |k: f32| Latents::new(dim, typical.as_slice().iter().map(|v| v * k).collect());
    let s3 = g_big.generate(&scaled(3.0)?, lab.as_deref())?;
    let s10 = g_big.generate(&scaled(10.0)?, lab.as_deref())?;
    let (mut ft, ftr, f3, f10) =
        (non_finite_share(&t_out), non_finite_share(&tr_out), non_finite_share(&s3), non_finite_share(&s10));
    // tract's Tanh and Sigmoid clamp, which turns NaN into a saturated value: look at the tensor
    // that enters the final op as well.
    // A probe that cannot be built is no evidence either way.
    let hidden = hidden_non_finite(model, &typical, lab.as_deref()).unwrap_or(0.0);
    let hidden_note = if hidden > ft {
        format!("; {:.1}% have NaN or infinity before the final op (hidden by its clamping)", hidden * 100.0)
    } else {
        String::new()
    };
    ft = ft.max(hidden);
    let measured = format!(
        "non-finite images: {:.1}% typical, {:.1}% truncated (1.0), {:.1}% at 3x norm, {:.1}% at 10x{hidden_note}",
        ft * 100.0,
        ftr * 100.0,
        f3 * 100.0,
        f10 * 100.0
    );
    let (status, detail) = if ft > 0.0 || ftr > 0.0 {
        (Status::Fail, "NaN or infinity for ordinary latents")
    } else if f3 > 0.0 || f10 > 0.0 {
        (Status::Warn, "NaN or infinity for latents far beyond the prior (clamp or truncate inputs)")
    } else {
        (Status::Pass, "")
    };
    r.add("finiteness", status, measured, "0% typical and truncated (fail); 0% scaled (warn)", detail);
    if status == Status::Fail {
        return Ok(()); // the remaining measures need finite images
    }

    // range
    let tol = 1e-3 * range.hi.abs().max(range.lo.abs()).max(range.hi - range.lo);
    let outside = t_out.data.iter().filter(|&&v| v < range.lo - tol || v > range.hi + tol).count();
    let (lo_v, hi_v) =
        t_out.data.iter().fold((f32::INFINITY, f32::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)));
    let saturated =
        t_out.data.iter().filter(|&&v| matches!(crate::pixels::to_byte(v, range), 0 | 255)).count() as f64
            / t_out.data.len().max(1) as f64;
    let status = if outside > 0 {
        Status::Fail
    } else if saturated > 0.25 {
        Status::Warn
    } else {
        Status::Pass
    };
    r.add(
        "range",
        status,
        format!("values in [{lo_v:.4}, {hi_v:.4}]; {:.2}% saturated 8-bit values", saturated * 100.0),
        format!("inside {range} (+/- {tol:.1e}); saturated <= 25% (warn)"),
        if outside > 0 {
            format!("{outside} values outside the declared range: is the range right?")
        } else {
            String::new()
        },
    );

    // sensitivity
    let bases = 4usize.min(o.samples);
    let base = typical.slice(0..bases)?;
    let base_lab = lab.as_ref().map(|l| l[..bases].to_vec());
    let base_out = g_big.generate(&base, base_lab.as_deref())?;
    let mut nudged = Vec::with_capacity(bases * dim * dim);
    for d in 0..dim {
        for b in 0..bases {
            let mut row = base.row(b).to_vec();
            row[d] += 1.0;
            nudged.extend(row);
        }
    }
    let nudged = Latents::new(dim, nudged)?;
    let nl: Option<Vec<i64>> = base_lab.as_ref().map(|l| (0..dim * bases).map(|i| l[i % bases]).collect());
    let n_out = g_big.generate(&nudged, nl.as_deref())?;
    let per = sig.image.values_per_image();
    let effects: Vec<f64> = (0..dim)
        .map(|d| {
            (0..bases)
                .map(|b| {
                    let x = n_out.image(d * bases + b);
                    let y = base_out.image(b);
                    x.iter().zip(y).map(|(p, q)| f64::from((p - q).abs())).sum::<f64>() / per as f64
                })
                .sum::<f64>()
                / bases as f64
        })
        .collect();
    let mut sorted = effects.clone();
    sorted.sort_by(f64::total_cmp);
    let median = sorted[sorted.len() / 2];
    let dead: Vec<usize> =
        (0..dim).filter(|&d| effects[d] <= o.dead_ratio * median || effects[d] == 0.0).collect();
    let distinct =
        (0..bases).all(|i| (i + 1..bases).all(|j| max_abs(base_out.image(i), base_out.image(j)) > 0.0));
    let status = if !distinct || !dead.is_empty() || median == 0.0 { Status::Fail } else { Status::Pass };
    let detail = if !distinct {
        "different latents gave identical images: the latent is ignored".to_string()
    } else if !dead.is_empty() {
        let list: Vec<String> = dead.iter().take(32).map(|d| d.to_string()).collect();
        format!(
            "{} of {dim} latent dimensions have no effect (dead): {}{}",
            dead.len(),
            list.join(", "),
            if dead.len() > 32 { ", ..." } else { "" }
        )
    } else {
        String::new()
    };
    r.add(
        "sensitivity",
        status,
        format!(
            "mean change per value for a 1-sigma nudge: median {:.2e} of range width, weakest {:.2e} (dimension {})",
            median / width,
            sorted[0] / width,
            effects.iter().position(|&e| e == sorted[0]).unwrap_or(0)
        ),
        format!("every dimension above {:.0e} of the median", o.dead_ratio),
        detail,
    );

    // diversity: RMS pair difference in range units, near-duplicates under one 8-bit level.
    let n = t_out.count;
    let (mut sum, mut pairs, mut dups) = (0f64, 0usize, 0usize);
    for i in 0..n {
        for j in i + 1..n {
            let (a, b) = (t_out.image(i), t_out.image(j));
            let ms = a.iter().zip(b).map(|(p, q)| f64::from(p - q).powi(2)).sum::<f64>() / per as f64;
            let rms = ms.sqrt() / width;
            sum += rms;
            pairs += 1;
            if rms < 1.0 / 255.0 {
                dups += 1;
            }
        }
    }
    let mean_rms = sum / pairs.max(1) as f64;
    let dup_share = dups as f64 / pairs.max(1) as f64;
    let mean_img: Vec<f64> =
        (0..per).map(|k| (0..n).map(|i| f64::from(t_out.image(i)[k])).sum::<f64>() / n as f64).collect();
    let spread = ((0..n)
        .map(|i| t_out.image(i).iter().zip(&mean_img).map(|(v, m)| (f64::from(*v) - m).powi(2)).sum::<f64>())
        .sum::<f64>()
        / (n * per) as f64)
        .sqrt()
        / width;
    let status =
        if mean_rms < o.min_diversity || dup_share > o.max_duplicates { Status::Fail } else { Status::Pass };
    r.add(
        "diversity",
        status,
        format!(
            "{n} samples: mean pair RMS difference {mean_rms:.4} of the range (spread {spread:.4}); {:.1}% near-duplicate pairs",
            dup_share * 100.0
        ),
        format!(">= {} RMS; <= {:.0}% near-duplicates (< 1 level apart)", o.min_diversity, o.max_duplicates * 100.0),
        if status == Status::Fail { "samples are nearly alike: a collapsed generator" } else { "" },
    );

    // labels
    match &sig.label {
        None => r.skip("labels", "the model is unconditional"),
        Some(l) => {
            let k = l.classes;
            let z = typical.slice(0..4.min(o.samples))?;
            let m = z.count();
            let mut outs = vec![];
            for c in 0..k {
                outs.push(g_big.generate(&z, Some(&vec![c as i64; m]))?);
            }
            let mut same_pairs = vec![];
            for a in 0..k {
                for b in a + 1..k {
                    let ms = outs[a]
                        .data
                        .iter()
                        .zip(&outs[b].data)
                        .map(|(p, q)| f64::from(p - q).powi(2))
                        .sum::<f64>()
                        / outs[a].data.len() as f64;
                    if ms.sqrt() / width < 1.0 / 255.0 {
                        same_pairs.push(format!("{a} and {b}"));
                    }
                }
            }
            let refused = matches!(
                g_big.generate(&z.slice(0..1)?, Some(&[k as i64])),
                Err(Error::LabelOutOfRange { .. })
            );
            let status = if same_pairs.is_empty() && refused { Status::Pass } else { Status::Fail };
            let mut detail = vec![];
            if !same_pairs.is_empty() {
                detail.push(format!(
                    "classes {} give the same images: the label is ignored",
                    same_pairs.join(", ")
                ));
            }
            if !refused {
                detail.push(format!("label {k} was not refused"));
            }
            r.add(
                "labels",
                status,
                format!(
                    "{k} classes, {} indistinct pairs; out-of-range label refused: {refused}",
                    same_pairs.len()
                ),
                "every class distinct; bad labels refused",
                detail.join("; "),
            );
        }
    }

    // parity-framework
    match &o.reference {
        None => {
            r.skip("parity-framework", "no framework outputs given (--reference LATENTS.npy OUTPUTS.npy)")
        }
        Some(reference) => {
            let out = g_big.generate(&reference.latents, reference.labels.as_deref())?;
            if out.data.len() != reference.outputs.len() {
                r.add(
                    "parity-framework",
                    Status::Fail,
                    format!("{} values vs {} saved", out.data.len(), reference.outputs.len()),
                    "same shape",
                    "the saved outputs do not match the model's output shape",
                );
            } else {
                let d = max_abs(&out.data, &reference.outputs);
                let rel = out
                    .data
                    .iter()
                    .zip(&reference.outputs)
                    .map(|(a, b)| f64::from((a - b).abs()) / f64::from(b.abs()).max(1e-6))
                    .fold(0.0, f64::max);
                let saved = Images { data: reference.outputs.clone(), ..out.clone() };
                let f = crate::metrics::fidelity(&saved, &out)?;
                let status = if d <= o.reference_tolerance { Status::Pass } else { Status::Fail };
                r.add(
                    "parity-framework",
                    status,
                    format!(
                        "max abs {d:.2e}, max rel {rel:.2e}, PSNR {:.1} dB, SSIM {:.5} over {} images",
                        f.psnr_db, f.ssim, out.count
                    ),
                    format!("max abs <= {:.0e}", o.reference_tolerance),
                    if status == Status::Fail {
                        "the export does not reproduce the training framework's outputs"
                    } else {
                        ""
                    },
                );
            }
        }
    }

    // parity-export
    match &o.against {
        None => r.skip("parity-export", "no source model given (--against SOURCE.onnx)"),
        Some(source) => {
            let f = crate::convert::compare(source, model, o.seed, o.samples)?;
            let status =
                if f.psnr_db >= o.min_psnr && f.ssim >= o.min_ssim { Status::Pass } else { Status::Fail };
            r.add(
                "parity-export",
                status,
                format!(
                    "PSNR {:.2} dB, SSIM {:.5}, max abs {:.2e} over {} images",
                    f.psnr_db, f.ssim, f.max_abs, f.images
                ),
                format!("PSNR >= {} dB and SSIM >= {}", o.min_psnr, o.min_ssim),
                if status == Status::Fail { "the export drifted from its source" } else { "" },
            );
        }
    }
    Ok(())
}

/// A contact sheet for people: rows of samples at truncation none, 2, 1 and 0.5, and a strip
/// along one slerp path, 8 tiles a row.
///
/// # Errors
/// Generation and image errors.
pub fn sheet(model: &Model, seed: u64) -> Result<crate::pixels::Pixels> {
    let g = generator(model, 8)?;
    let dim = model.signature().latent.dim;
    let mut tiles = vec![];
    let format = crate::pixels::PixelFormat::natural(model.signature().image.channels);
    for t in [None, Some(2.0), Some(1.0), Some(0.5)] {
        let mut o = SampleOptions::new(seed, 8);
        o.truncation = t;
        let l = Latents::sample(dim, &o)?;
        let imgs = g.generate(&l, labels_for(&g, 8).as_deref())?;
        tiles.extend(crate::pixels::all_pixels(&imgs, format)?.0);
    }
    let keys = Latents::sample(dim, &SampleOptions::new(seed.wrapping_add(100), 2))?;
    let po = crate::latent::PathOptions { steps: 7, ..Default::default() };
    let path = crate::latent::path(&keys, &po)?;
    let imgs = g.generate(&path, labels_for(&g, path.count()).as_deref())?;
    tiles.extend(crate::pixels::all_pixels(&imgs, format)?.0);
    let go = crate::pixels::GridOptions {
        columns: Some(8),
        scale: if model.signature().image.width <= 64 { 2 } else { 1 },
        ..Default::default()
    };
    crate::pixels::grid(&tiles, &go)
}
