//! Smaller exports: rewrite a generator's weights as fp16 or int8 and write standard ONNX, with a
//! fidelity report against the source.
//!
//! - `f32`: the same numbers, in one self-contained file (external data packed in), with the
//!   load-time passes applied.
//! - `f16`: every float tensor of 16 values or more is stored as IEEE 754 binary16 and
//!   followed by `Cast(to = FLOAT)`. A tensor with a value beyond the binary16 range (|x| > 65504
//!   rounds to infinity) stays f32, and the report says why.
//! - `int8`: the weight of each `Conv`, `ConvTranspose`, `Gemm` and `MatMul` is stored as int8
//!   with symmetric scales (`scale = max|w| / 127`, zero point 0, values rounded half to even as
//!   ONNX `QuantizeLinear` does) and followed by `DequantizeLinear`. Scales are per output
//!   channel by default: weight axis 0 for `Conv` and for `Gemm` with `transB = 1` (PyTorch's
//!   `Linear`), axis 1 for `ConvTranspose` (ONNX layout `[C_in, C_out/group, kH, kW]`), and the
//!   last axis for `MatMul` and `Gemm` with `transB = 0` (`[K, N]`). The first and last weight
//!   layers stay f32 by default (common practice for generators: the latent projection and
//!   the layer that draws the pixels matter most), overridable by name. Biases stay f32.
//!
//! On this CPU both are storage formats: genloom folds the `Cast` and `DequantizeLinear` of
//! constant weights once at load ([`crate::passes`]), so generation runs at f32 speed.
//! Every export records in its ONNX metadata what was done; converting the same input twice
//! gives byte-identical files.

use crate::error::{Error, Result};
use crate::metrics::Fidelity;
use crate::model::{LoadOptions, Model};
use crate::onnx::{self, dt, Names};
use crate::passes::PassResult;
use crate::{Generator, GeneratorOptions, SampleOptions};
use std::collections::BTreeMap;
use tract_onnx::pb;

/// Storage precision of an export's weights.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Precision {
    /// IEEE 754 binary32 (as trained).
    F32,
    /// IEEE 754 binary16 weights, cast to f32 at load.
    F16,
    /// int8 weights with scales, dequantized to f32 at load.
    Int8,
}

impl std::fmt::Display for Precision {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Precision::F32 => "f32",
            Precision::F16 => "f16",
            Precision::Int8 => "int8",
        })
    }
}

impl std::str::FromStr for Precision {
    type Err = Error;
    fn from_str(s: &str) -> Result<Precision> {
        match s.to_ascii_lowercase().as_str() {
            "f32" | "fp32" | "float32" => Ok(Precision::F32),
            "f16" | "fp16" | "float16" | "half" => Ok(Precision::F16),
            "int8" | "i8" => Ok(Precision::Int8),
            _ => Err(Error::invalid("precision", format!("`{s}`"), "`f32`, `f16` or `int8`")),
        }
    }
}

/// Which weight layers stay in f32.
#[derive(Debug, Clone, PartialEq, Eq, Default, serde::Serialize)]
#[non_exhaustive]
pub enum KeepFloat {
    /// For int8, the first and last weight layers, except one that holds more than 10% of all
    /// layer weights (keeping it would undo most of the saving); for f16, none (binary16 is
    /// accurate enough everywhere).
    #[default]
    FirstAndLast,
    /// Exactly these nodes (by ONNX node name); empty keeps none.
    Nodes(Vec<String>),
}

/// How to convert.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct ConvertOptions {
    /// Target precision.
    pub precision: Precision,
    /// int8 scales per output channel (default) or one per tensor.
    pub per_channel: bool,
    /// Layers kept in f32 (int8 and f16).
    pub keep_float: KeepFloat,
    /// Seed of the latents the fidelity report uses. Default [`crate::DEFAULT_SEED`].
    pub eval_seed: u64,
    /// Number of latents the fidelity report uses. Default 64.
    pub eval_count: usize,
}

impl Default for ConvertOptions {
    fn default() -> Self {
        ConvertOptions {
            precision: Precision::F16,
            per_channel: true,
            keep_float: KeepFloat::FirstAndLast,
            eval_seed: crate::DEFAULT_SEED,
            eval_count: 64,
        }
    }
}

impl ConvertOptions {
    /// Options for `precision` with the defaults otherwise.
    pub fn new(precision: Precision) -> ConvertOptions {
        ConvertOptions { precision, ..Default::default() }
    }
}

/// What was done to one stored tensor.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct TensorDecision {
    /// The tensor's name in the source.
    pub tensor: String,
    /// The node that reads it as a weight, if any.
    pub node: Option<String>,
    /// Values in the tensor.
    pub values: usize,
    /// How it is stored now: `f32`, `f16`, `int8 per-channel axis K` or `int8 per-tensor`.
    pub stored: String,
    /// Why, when it stayed f32.
    pub reason: Option<String>,
}

/// What an export is and how faithful it is to its source.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ConvertReport {
    /// Target precision.
    pub precision: Precision,
    /// SHA-256 of the source model file.
    pub source_sha256: String,
    /// Bytes of the source (with external data).
    pub source_bytes: u64,
    /// Bytes of the export.
    pub export_bytes: u64,
    /// `export_bytes / source_bytes`.
    pub size_ratio: f64,
    /// Per-tensor decisions (tensors of fewer than 16 values are not listed).
    pub tensors: Vec<TensorDecision>,
    /// The load-time passes written into the export.
    pub passes: Vec<PassResult>,
    /// Seed and count of the evaluation latents.
    pub eval_seed: u64,
    /// Number of evaluation latents.
    pub eval_count: usize,
    /// Export against source on those latents.
    pub fidelity: Fidelity,
    /// For an f16 export: the node whose activation comes closest to binary16's largest finite
    /// value (65504) for ordinary latents, from the activation probe ([`crate::probe`]).
    pub f16_tightest: Option<crate::probe::NodeActivation>,
    /// What a user should know before shipping this export (empty when nothing).
    pub warnings: Vec<String>,
}

/// An export: the ONNX bytes and the report.
#[derive(Debug, Clone)]
pub struct Export {
    /// Standard ONNX, self-contained.
    pub bytes: Vec<u8>,
    /// What was done and how faithful it is.
    pub report: ConvertReport,
}

const META_PREFIX: &str = "genloom.";
const MIN_VALUES: usize = 16;

fn weight_layers(g: &pb::GraphProto, consts: &BTreeMap<String, usize>) -> Vec<(usize, String)> {
    g.node
        .iter()
        .enumerate()
        .filter(|(_, n)| matches!(n.op_type.as_str(), "Conv" | "ConvTranspose" | "Gemm" | "MatMul"))
        .filter_map(|(i, n)| n.input.get(1).filter(|w| consts.contains_key(*w)).map(|w| (i, w.clone())))
        .collect()
}

fn channel_axis(n: &pb::NodeProto, rank: usize) -> usize {
    match n.op_type.as_str() {
        "Conv" => 0,
        "ConvTranspose" => 1,
        "Gemm" if onnx::attr_i(n, "transB", 0) == 1 => 0,
        _ => rank.saturating_sub(1),
    }
}

/// Symmetric int8 quantization of `w` along `axis` (or per tensor): returns the int8 values and
/// the scales. Values are rounded half to even, as ONNX `QuantizeLinear` specifies.
pub(crate) fn quantize_symmetric(w: &[f32], dims: &[i64], axis: Option<usize>) -> (Vec<i8>, Vec<f32>) {
    let (channels, inner) = match axis {
        Some(a) => {
            let c = dims[a] as usize;
            let inner: usize = dims[a + 1..].iter().map(|&d| d as usize).product();
            (c, inner.max(1))
        }
        None => (1, w.len().max(1)),
    };
    let ch_of = |i: usize| if channels == 1 { 0 } else { (i / inner) % channels };
    let mut max = vec![0f32; channels];
    for (i, v) in w.iter().enumerate() {
        let c = ch_of(i);
        max[c] = max[c].max(v.abs());
    }
    let scales: Vec<f32> = max.iter().map(|&m| if m > 0.0 { m / 127.0 } else { 1.0 }).collect();
    let q = w
        .iter()
        .enumerate()
        .map(|(i, &v)| (v / scales[ch_of(i)]).round_ties_even().clamp(-127.0, 127.0) as i8)
        .collect();
    (q, scales)
}

/// IEEE 754 binary16 of each value (round to nearest, ties to even), or the first value that
/// overflows to infinity.
pub(crate) fn to_f16(values: &[f32]) -> std::result::Result<Vec<u16>, f32> {
    values
        .iter()
        .map(|&v| {
            let h = half::f16::from_f32(v);
            if h.is_infinite() && v.is_finite() {
                Err(v)
            } else {
                Ok(h.to_bits())
            }
        })
        .collect()
}

/// Converts `source` as `options` say, and measures the export against it.
///
/// # Errors
/// [`Error::InvalidOption`] for a source that was already converted, a layer to keep that does
/// not exist, or per-channel int8 on an opset below 13; [`Error::Graph`] for malformed tensors;
/// then the errors of loading and running both models for the report.
pub fn convert(source: &Model, options: &ConvertOptions) -> Result<Export> {
    if options.eval_count == 0 || options.eval_count > 4096 {
        return Err(Error::invalid("evaluation count", options.eval_count, "1 to 4096 latents"));
    }
    if let Some(p) = source.info().metadata.get("genloom.precision") {
        return Err(Error::invalid(
            "source model",
            format!("an export already converted to {p} by genloom"),
            "the f32 source model it was made from (converting twice compounds the rounding)",
        ));
    }
    let mut proto = source.onnx().clone();
    let opset = source.info().opset;
    let mut decisions = vec![];
    {
        let g = proto.graph.as_mut().ok_or_else(|| Error::Graph { reason: "no graph".into() })?;
        let consts: BTreeMap<String, usize> =
            g.initializer.iter().enumerate().map(|(i, t)| (t.name.clone(), i)).collect();
        let layers = weight_layers(g, &consts);
        let names_of: Vec<String> = layers.iter().map(|(i, _)| g.node[*i].name.clone()).collect();
        let keep: Vec<String> = match &options.keep_float {
            KeepFloat::FirstAndLast if options.precision == Precision::Int8 => {
                let size = |w: &str| consts.get(w).map(|&i| onnx::numel(&g.initializer[i])).unwrap_or(0);
                let total: usize = layers.iter().map(|(_, w)| size(w)).sum();
                let ends = [layers.first(), layers.last()];
                let mut k: Vec<String> = ends
                    .iter()
                    .flatten()
                    .filter(|(_, w)| size(w) * 10 <= total)
                    .map(|(i, _)| g.node[*i].name.clone())
                    .collect();
                k.dedup();
                k
            }
            KeepFloat::FirstAndLast => vec![],
            KeepFloat::Nodes(list) => {
                for n in list {
                    if !names_of.contains(n) {
                        return Err(Error::invalid(
                            "layer to keep in float",
                            format!("`{n}`"),
                            format!(
                                "one of the weight layers: {}",
                                names_of.iter().map(|s| format!("`{s}`")).collect::<Vec<_>>().join(", ")
                            ),
                        ));
                    }
                }
                list.clone()
            }
        };
        if options.precision == Precision::Int8 && options.per_channel && opset < 13 {
            return Err(Error::invalid(
                "per-channel int8",
                format!("requested for a model of opset {opset}"),
                "opset 13 or later (per-axis DequantizeLinear); use per-tensor scales instead",
            ));
        }
        if options.precision == Precision::Int8 && opset < 10 {
            return Err(Error::invalid(
                "int8",
                format!("requested for a model of opset {opset}"),
                "opset 10 or later (DequantizeLinear)",
            ));
        }
        // Tensor -> the weight layer reading it.
        let mut reader: BTreeMap<String, usize> = BTreeMap::new();
        for (i, w) in &layers {
            reader.entry(w.clone()).or_insert(*i);
        }
        let mut names = Names::of(g);
        let mut new_nodes = vec![];
        let mut new_inits = vec![];
        let mut kept = vec![];
        for t in std::mem::take(&mut g.initializer) {
            let n = onnx::numel(&t);
            let node = reader.get(&t.name).map(|&i| &g.node[i]);
            let node_name = node.map(|n| n.name.clone());
            let is_float = t.data_type == dt::FLOAT;
            if !is_float || n < MIN_VALUES || options.precision == Precision::F32 {
                if is_float && n >= MIN_VALUES {
                    decisions.push(TensorDecision {
                        tensor: t.name.clone(),
                        node: node_name,
                        values: n,
                        stored: "f32".into(),
                        reason: None,
                    });
                }
                kept.push(t);
                continue;
            }
            let keep_this = node_name.as_ref().is_some_and(|nn| keep.contains(nn));
            if keep_this {
                decisions.push(TensorDecision {
                    tensor: t.name.clone(),
                    node: node_name,
                    values: n,
                    stored: "f32".into(),
                    reason: Some("layer kept in float".into()),
                });
                kept.push(t);
                continue;
            }
            let values = onnx::read_f32(&t)?;
            match options.precision {
                Precision::F16 => match to_f16(&values) {
                    Ok(bits) => {
                        let stored = names.fresh(&format!("{}.f16", t.name));
                        let raw: Vec<u8> = bits.iter().flat_map(|b| b.to_le_bytes()).collect();
                        new_inits.push(pb::TensorProto {
                            name: stored.clone(),
                            dims: t.dims.clone(),
                            data_type: dt::FLOAT16,
                            raw_data: raw,
                            ..Default::default()
                        });
                        new_nodes.push(pb::NodeProto {
                            name: names.fresh(&format!("{}.cast", t.name)),
                            op_type: "Cast".into(),
                            input: vec![stored],
                            output: vec![t.name.clone()],
                            attribute: vec![pb::AttributeProto {
                                name: "to".into(),
                                r#type: 2,
                                i: i64::from(dt::FLOAT),
                                ..Default::default()
                            }],
                            ..Default::default()
                        });
                        decisions.push(TensorDecision {
                            tensor: t.name.clone(),
                            node: node_name,
                            values: n,
                            stored: "f16".into(),
                            reason: None,
                        });
                    }
                    Err(v) => {
                        decisions.push(TensorDecision {
                            tensor: t.name.clone(),
                            node: node_name,
                            values: n,
                            stored: "f32".into(),
                            reason: Some(format!(
                                "holds {v}, beyond the binary16 range (largest finite 65504)"
                            )),
                        });
                        kept.push(t);
                    }
                },
                Precision::Int8 => {
                    let Some(node) = node else {
                        decisions.push(TensorDecision {
                            tensor: t.name.clone(),
                            node: None,
                            values: n,
                            stored: "f32".into(),
                            reason: Some("not a layer weight (biases and other tensors stay f32)".into()),
                        });
                        kept.push(t);
                        continue;
                    };
                    let axis = options
                        .per_channel
                        .then(|| channel_axis(node, t.dims.len()))
                        .filter(|&a| a < t.dims.len());
                    let (q, scales) = quantize_symmetric(&values, &t.dims, axis);
                    let qname = names.fresh(&format!("{}.int8", t.name));
                    let sname = names.fresh(&format!("{}.scale", t.name));
                    let zname = names.fresh(&format!("{}.zero_point", t.name));
                    let sdims: Vec<i64> = if axis.is_some() { vec![scales.len() as i64] } else { vec![] };
                    new_inits.push(pb::TensorProto {
                        name: qname.clone(),
                        dims: t.dims.clone(),
                        data_type: dt::INT8,
                        raw_data: q.iter().map(|&v| v as u8).collect(),
                        ..Default::default()
                    });
                    new_inits.push(onnx::f32_tensor(&sname, &sdims, &scales));
                    new_inits.push(pb::TensorProto {
                        name: zname.clone(),
                        dims: sdims.clone(),
                        data_type: dt::INT8,
                        raw_data: vec![0u8; scales.len()],
                        ..Default::default()
                    });
                    let mut attribute = vec![];
                    if let Some(a) = axis {
                        attribute.push(pb::AttributeProto {
                            name: "axis".into(),
                            r#type: 2,
                            i: a as i64,
                            ..Default::default()
                        });
                    }
                    new_nodes.push(pb::NodeProto {
                        name: names.fresh(&format!("{}.dequantize", t.name)),
                        op_type: "DequantizeLinear".into(),
                        input: vec![qname, sname, zname],
                        output: vec![t.name.clone()],
                        attribute,
                        ..Default::default()
                    });
                    let stored = match axis {
                        Some(a) => format!("int8 per-channel axis {a}"),
                        None => "int8 per-tensor".into(),
                    };
                    decisions.push(TensorDecision {
                        tensor: t.name.clone(),
                        node: node_name,
                        values: n,
                        stored,
                        reason: None,
                    });
                }
                Precision::F32 => kept.push(t),
            }
        }
        kept.extend(new_inits);
        g.initializer = kept;
        // New nodes first: they read only initializers, so the order stays topological.
        new_nodes.append(&mut g.node);
        g.node = new_nodes;
        // A graph input that shadowed a rewritten initializer must go (old exporters list them).
        let init_names: std::collections::HashSet<String> =
            g.initializer.iter().map(|t| t.name.clone()).collect();
        let produced: std::collections::HashSet<String> =
            g.node.iter().flat_map(|n| n.output.clone()).collect();
        g.input.retain(|i| init_names.contains(&i.name) || !produced.contains(&i.name));
    }
    // Metadata: what was done, deterministic (no times, sorted keys).
    proto.metadata_props.retain(|e| !e.key.starts_with(META_PREFIX));
    let scheme = match options.precision {
        Precision::F32 => "float32".to_string(),
        Precision::F16 => "IEEE 754 binary16 + Cast".to_string(),
        Precision::Int8 if options.per_channel => "int8 symmetric per-channel + DequantizeLinear".to_string(),
        Precision::Int8 => "int8 symmetric per-tensor + DequantizeLinear".to_string(),
    };
    let passes = source.info().passes.clone();
    let meta = [
        ("genloom.precision", options.precision.to_string()),
        ("genloom.scheme", scheme),
        ("genloom.source_sha256", source.info().sha256.clone()),
        ("genloom.tensors", serde_json::to_string(&decisions).unwrap_or_default()),
        (
            "genloom.passes",
            serde_json::to_string(&passes.iter().map(|p| p.pass.clone()).collect::<Vec<_>>())
                .unwrap_or_default(),
        ),
        (
            "genloom.evaluation",
            format!(
                "{{\"seed\":{},\"count\":{},\"labels\":\"cycle\"}}",
                options.eval_seed, options.eval_count
            ),
        ),
        ("genloom.converter", format!("genloom {}", crate::VERSION)),
    ];
    for (k, v) in meta {
        proto.metadata_props.push(pb::StringStringEntryProto { key: k.into(), value: v });
    }
    let bytes = {
        use prost::Message;
        proto.encode_to_vec()
    };
    // Fidelity: the export against its source, on seeded latents (labels cycling the classes).
    let export = Model::from_bytes(&bytes, &LoadOptions::default())?;
    let fidelity = compare(source, &export, options.eval_seed, options.eval_count)?;
    let source_bytes = source.info().file_bytes;
    let (f16_tightest, warnings) = match options.precision {
        Precision::F16 => f16_activation_warnings(source, options.eval_seed)?,
        _ => (None, vec![]),
    };
    let report = ConvertReport {
        precision: options.precision,
        source_sha256: source.info().sha256.clone(),
        source_bytes,
        export_bytes: bytes.len() as u64,
        size_ratio: bytes.len() as f64 / source_bytes.max(1) as f64,
        tensors: decisions,
        passes,
        eval_seed: options.eval_seed,
        eval_count: options.eval_count,
        fidelity,
        f16_tightest,
        warnings,
    };
    Ok(Export { bytes, report })
}

/// Activations set against binary16's range. An f16 export stores its weights in binary16 and
/// genloom computes it in f32, so large activations do not hurt it here; but an engine that
/// computes in the stored precision, and genloom's own f16 compute setting, would overflow.
fn f16_activation_warnings(
    source: &Model,
    seed: u64,
) -> Result<(Option<crate::probe::NodeActivation>, Vec<String>)> {
    let report = crate::probe::activations(source, &crate::probe::ProbeOptions::ordinary(seed, 16))?;
    let tightest = report.tightest().cloned();
    let mut warnings = vec![];
    if let Some(n) = &tightest {
        if n.max_abs > crate::probe::F16_MAX {
            warnings.push(format!(
                "node `{}` ({}) reaches {:.4e} for ordinary latents, past binary16's largest finite value 65504: \
                 this export stores f16 weights and computes in f32, which is sound, but computing it in f16 \
                 (genloom's f16 compute setting refuses it; other engines may not) would overflow there",
                n.node, n.op, n.max_abs
            ));
        } else if n.f16_headroom < F16_MARGIN {
            warnings.push(format!(
                "node `{}` ({}) reaches {:.4e} for ordinary latents, only {:.1}x under binary16's 65504: \
                 unusual latents could overflow if the model is computed in f16",
                n.node, n.op, n.max_abs, n.f16_headroom
            ));
        }
    }
    Ok((tightest, warnings))
}

/// Headroom under binary16's largest value below which an f16 export warns: 4x (common
/// practice, no source: latents at a few times their usual norm stay representable).
const F16_MARGIN: f64 = 4.0;

/// The binary16 bits genloom stores for `values`, or the first value that would overflow to
/// infinity (which makes `convert` keep that tensor in f32). Exposed for tests and tools.
///
/// # Errors
/// The overflowing value.
pub fn convert_probe_f16(values: &[f32]) -> std::result::Result<Vec<u16>, f32> {
    to_f16(values)
}

/// How two signatures differ in what a comparison needs, in words; empty when they agree.
pub(crate) fn signature_differences(source: &crate::Signature, export: &crate::Signature) -> Vec<String> {
    let mut v = vec![];
    if source.latent.dim != export.latent.dim {
        v.push(format!(
            "latent size {} in the export, {} in the source",
            export.latent.dim, source.latent.dim
        ));
    }
    let classes = |s: &crate::Signature| s.label.as_ref().map(|l| l.classes);
    if classes(source) != classes(export) {
        let show = |c: Option<usize>| c.map(|k| format!("{k} classes")).unwrap_or_else(|| "no label".into());
        v.push(format!("{} in the export, {} in the source", show(classes(export)), show(classes(source))));
    }
    let (a, b) = (&export.image, &source.image);
    if (a.channels, a.height, a.width) != (b.channels, b.height, b.width) {
        v.push(format!(
            "image {}x{}x{} in the export, {}x{}x{} in the source",
            a.channels, a.height, a.width, b.channels, b.height, b.width
        ));
    }
    v
}

/// Refuses two `what` ("models", "generators") whose outputs cannot be compared pixel for pixel,
/// naming how they differ.
fn same_signature(what: &str, a: &crate::Signature, b: &crate::Signature) -> Result<()> {
    let differences = signature_differences(a, b);
    if !differences.is_empty() {
        return Err(Error::invalid(
            format!("{what} to compare"),
            format!("{what} with different signatures ({})", differences.join("; ")),
            "two exports of the same generator (same latent size, label classes and image size)",
        ));
    }
    Ok(())
}

/// Generates the same seeded latents (and cycling labels) with two models and compares them.
///
/// # Errors
/// [`Error::InvalidOption`] when the two signatures differ; generation errors.
pub fn compare(reference: &Model, other: &Model, seed: u64, count: usize) -> Result<Fidelity> {
    same_signature("models", reference.signature(), other.signature())?;
    let o = GeneratorOptions { warm_up: false, ..Default::default() };
    let ga = Generator::new(reference.clone(), o.clone())?;
    let gb = Generator::new(other.clone(), o)?;
    compare_generators(&ga, &gb, seed, count)
}

/// As [`compare`], for two generators already built: the way to measure a run setting such as
/// [`GeneratorOptions::f16_compute`] against f32 compute of the same model.
///
/// # Errors
/// As [`compare`].
pub fn compare_generators(
    reference: &Generator,
    other: &Generator,
    seed: u64,
    count: usize,
) -> Result<Fidelity> {
    same_signature("generators", reference.signature(), other.signature())?;
    let latents = reference.sample_latents(&SampleOptions::new(seed, count))?;
    let labels = reference.signature().cycle_labels(count);
    let ia = reference.generate(&latents, labels.as_deref())?;
    let ib = other.generate(&latents, labels.as_deref())?;
    crate::metrics::fidelity(&ia, &ib)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ieee754_binary16_edges() {
        // IEEE 754 binary16: 65504 is the largest finite value; 65520 rounds to infinity.
        assert_eq!(to_f16(&[65504.0]).unwrap(), vec![0x7bff]);
        assert_eq!(to_f16(&[65520.0]), Err(65520.0));
        assert_eq!(to_f16(&[2f32.powi(-14)]).unwrap(), vec![0x0400]);
        assert_eq!(to_f16(&[2f32.powi(-24)]).unwrap(), vec![0x0001]);
        assert_eq!(to_f16(&[2f32.powi(-25)]).unwrap(), vec![0x0000]); // tie to even -> 0
        assert_eq!(to_f16(&[1.0 + 2f32.powi(-11)]).unwrap(), vec![0x3c00]); // tie to even -> 1
    }

    #[test]
    fn symmetric_quantization_rounds_ties_to_even() {
        // max |w| = 127 gives scale 1, so w / scale is w itself: 2.5 -> 2, 3.5 -> 4, -2.5 -> -2.
        let (q, s) = quantize_symmetric(&[127.0, 2.5, 3.5, -2.5], &[4], None);
        assert_eq!(s, vec![1.0]);
        assert_eq!(q, vec![127, 2, 4, -2]);
        // Per channel on axis 0 of [2, 2].
        let (q, s) = quantize_symmetric(&[1.0, -0.5, 10.0, 5.0], &[2, 2], Some(0));
        assert_eq!(s, vec![1.0 / 127.0, 10.0 / 127.0]);
        assert_eq!(q, vec![127, -64, 127, 64]);
    }
}
