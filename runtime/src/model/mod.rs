//! Loading a generator: bytes or a path -> checked ONNX -> tract's typed model + [`Signature`].
//!
//! Loading is cheap (no optimisation): it sniffs the bytes, enforces [`Limits`], resolves external
//! data safely, checks the graph, parses it with tract, discovers the signature and reports what
//! the model is made of ([`ModelInfo`]). A [`crate::Generator`] is built from a [`Model`].

mod external;
mod limits;
mod sniffing;
mod typing;
mod validate;

pub(crate) use crate::guard::{guard, guard_run};
use crate::rules::check_attributes;
pub(crate) use crate::rules::MAX_DIM;
use external::resolve_external_data;
pub(crate) use limits::check_limit;
pub use limits::Limits;
use sniffing::{decode, hex, sniff};
use typing::build_typed;
use validate::{check_graph, check_operators, check_tensors};

use crate::error::{Error, Result};
use crate::onnx::{dtype_name, elem_size, element_count, for_each_tensor, for_each_tensor_mut};
use crate::signature::{self, Signature, SignatureOverrides};
use sha2::{Digest, Sha256};
use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::{Component, Path, PathBuf};
use tract_onnx::pb;
use tract_onnx::prelude::*;
use tract_onnx::tract_core::internal::DimLike;

/// How to load a model.
#[derive(Debug, Clone, Default, PartialEq)]
#[non_exhaustive]
pub struct LoadOptions {
    /// The limits.
    pub limits: Limits,
    /// Signature choices for models whose signature cannot be discovered.
    pub overrides: SignatureOverrides,
    /// The graph passes to run before tract optimises (all on by default).
    pub passes: crate::passes::PassOptions,
}

impl LoadOptions {
    /// Options with these signature overrides and default limits.
    pub fn with_overrides(overrides: SignatureOverrides) -> LoadOptions {
        LoadOptions { overrides, ..Default::default() }
    }
}

/// What a model is made of.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[non_exhaustive]
pub struct ModelInfo {
    /// Bytes of the model file, plus its external data.
    pub file_bytes: u64,
    /// External data files the model used (relative names), if any.
    pub external_data: Vec<String>,
    /// SHA-256 of the model file's bytes (hex).
    pub sha256: String,
    /// Parameters: elements in all initializers and constant tensors.
    pub parameters: u64,
    /// Bytes those weights take in their stored precision.
    pub weight_bytes: u64,
    /// Default-domain opset.
    pub opset: i64,
    /// ONNX IR version.
    pub ir_version: i64,
    /// Producer name and version as written by the exporter.
    pub producer: String,
    /// Node count per op type.
    pub ops: BTreeMap<String, usize>,
    /// Multiply-accumulates per sample in Conv, ConvTranspose, Gemm and MatMul nodes, when all
    /// their shapes are known.
    pub macs_per_sample: Option<u64>,
    /// The model's metadata entries (key, value).
    pub metadata: BTreeMap<String, String>,
    /// Nodes in the graph as stored.
    pub nodes: usize,
    /// Nodes after the load-time passes.
    pub nodes_after_passes: usize,
    /// What each load-time pass changed.
    pub passes: Vec<crate::passes::PassResult>,
}

/// A loaded, checked model with its signature. Cheap to inspect; build a
/// [`crate::Generator`] from it to generate.
#[derive(Debug, Clone)]
pub struct Model {
    pub(crate) proto: pb::ModelProto,
    pub(crate) typed: TypedModel,
    pub(crate) batch: BatchAxis,
    pub(crate) input_order: Vec<InputRole>,
    pub(crate) output_index: usize,
    signature: Signature,
    info: ModelInfo,
    limits: Limits,
}

/// The batch axis of a typed model: a symbol every plan fixes to its micro-batch, or a size
/// the export fixed.
#[derive(Debug, Clone)]
pub(crate) enum BatchAxis {
    /// Any batch: the symbol stands for it.
    Symbolic(Symbol),
    /// Only this batch; requests are looped and padded to it.
    Fixed(usize),
}

impl BatchAxis {
    /// The fixed batch, if the export fixed one.
    pub(crate) fn fixed(&self) -> Option<usize> {
        match self {
            BatchAxis::Fixed(n) => Some(*n),
            BatchAxis::Symbolic(_) => None,
        }
    }
}

/// What a tract input of the model is fed with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum InputRole {
    Latent,
    Label,
}

impl Model {
    /// Loads a model from a file, reading ONNX external data from the same folder.
    ///
    /// # Errors
    /// [`Error::Io`] when the file cannot be read; the load errors of [`Model::from_bytes`];
    /// [`Error::ExternalDataLocation`] for a location that is absolute or leaves the folder;
    /// [`Error::ExternalDataMissing`] when a data file is absent.
    pub fn from_path(path: impl AsRef<Path>, options: &LoadOptions) -> Result<Model> {
        Model::from_raw(read_raw_path(path.as_ref(), &options.limits)?, options)
    }

    /// Loads a single-file model from bytes.
    ///
    /// # Errors
    /// [`Error::EmptyModel`], [`Error::HtmlPage`], [`Error::LfsPointer`], [`Error::NotOnnx`] for
    /// bytes that are not an ONNX model; [`Error::ExternalDataNeedsPath`] when the model keeps
    /// weights in another file; [`Error::Limit`]; [`Error::TensorSize`], [`Error::Graph`] and [`Error::Attribute`] for
    /// malformed models; [`Error::UnsupportedOperator`] for an operator this build does not
    /// carry; [`Error::Tract`] when tract cannot parse or type it; [`Error::Signature`]
    /// and [`Error::RangeUnknown`] when it does not look like a generator.
    pub fn from_bytes(bytes: &[u8], options: &LoadOptions) -> Result<Model> {
        Model::load(bytes, "the model bytes", None, options)
    }

    fn load(bytes: &[u8], what: &str, dir: Option<&Path>, options: &LoadOptions) -> Result<Model> {
        Model::from_raw(read_raw(bytes, what, dir, &options.limits)?, options)
    }

    pub(crate) fn from_raw(raw: Raw, options: &LoadOptions) -> Result<Model> {
        let Raw { mut proto, sha256, file_bytes, external, parameters, weight_bytes } = raw;
        let graph = proto.graph.as_ref().ok_or_else(|| Error::Graph { reason: "no graph".into() })?;
        let mut ops = BTreeMap::new();
        for n in &graph.node {
            *ops.entry(n.op_type.clone()).or_insert(0) += 1;
        }
        let nodes = graph.node.len();
        let passes = crate::passes::run(&mut proto, &options.passes)?;
        let graph = proto.graph.as_ref().ok_or_else(|| Error::Graph { reason: "no graph".into() })?;
        let nodes_after_passes = graph.node.len();

        let found = signature::discover_inputs(graph, &options.overrides)?;
        let (typed, batch, input_order, output_index, image_shape, macs) = build_typed(&proto, &found)?;
        let signature = signature::finish(graph, &found, &image_shape, &options.overrides)?;
        let pixels = signature.image.height as u64 * signature.image.width as u64;
        check_limit(
            "the output's pixels per image",
            pixels,
            options.limits.max_output_pixels,
            "Limits::max_output_pixels",
        )?;

        let opset = proto
            .opset_import
            .iter()
            .find(|o| o.domain.is_empty() || o.domain == "ai.onnx")
            .map(|o| o.version)
            .unwrap_or(0);
        let producer = format!("{} {}", proto.producer_name, proto.producer_version).trim().to_string();
        let metadata = proto.metadata_props.iter().map(|e| (e.key.clone(), e.value.clone())).collect();
        let info = ModelInfo {
            file_bytes,
            external_data: external,
            sha256,
            parameters,
            weight_bytes,
            opset,
            ir_version: proto.ir_version,
            producer,
            ops,
            macs_per_sample: macs,
            metadata,
            nodes,
            nodes_after_passes,
            passes,
        };
        Ok(Model { proto, typed, batch, input_order, output_index, signature, info, limits: options.limits })
    }

    /// The discovered (or declared) signature.
    pub fn signature(&self) -> &Signature {
        &self.signature
    }

    /// Sizes, counts and provenance.
    pub fn info(&self) -> &ModelInfo {
        &self.info
    }

    /// The limits this model was loaded with (they also bound requests).
    pub fn limits(&self) -> &Limits {
        &self.limits
    }

    /// The model as a self-contained ONNX protobuf (external data already inlined).
    pub fn onnx(&self) -> &pb::ModelProto {
        &self.proto
    }
}

/// The checks every graph meets before tract sees it: operators this build carries, and the
/// attribute rules.
pub(crate) fn check_before_tract(proto: &pb::ModelProto) -> Result<()> {
    let onnx = crate::onnx::framework();
    check_operators(proto, |op| onnx.op_register.0.contains_key(op))?;
    match proto.graph.as_ref() {
        Some(graph) => check_attributes(graph),
        None => Ok(()),
    }
}

/// A model read and checked up to its ONNX graph (no tract yet): external data inlined, tensor
/// sizes and graph wiring checked, limits enforced.
#[derive(Debug, Clone)]
pub(crate) struct Raw {
    pub proto: pb::ModelProto,
    pub sha256: String,
    pub file_bytes: u64,
    pub external: Vec<String>,
    pub parameters: u64,
    pub weight_bytes: u64,
}

/// Reads a model file up to its ONNX graph (see [`Raw`]).
pub(crate) fn read_raw_path(path: &Path, limits: &Limits) -> Result<Raw> {
    let meta = std::fs::metadata(path).map_err(|e| Error::io("read", path, e))?;
    if meta.is_dir() {
        return Err(Error::io("read", path, std::io::Error::other("it is a folder; expected an .onnx file")));
    }
    check_limit(
        "the model file's size in bytes",
        meta.len(),
        limits.max_model_bytes,
        "Limits::max_model_bytes",
    )?;
    let bytes = std::fs::read(path).map_err(|e| Error::io("read", path, e))?;
    let dir = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let dir = if dir.as_os_str().is_empty() { PathBuf::from(".") } else { dir };
    read_raw(&bytes, &path.display().to_string(), Some(&dir), limits)
}

/// Reads model bytes up to the ONNX graph (see [`Raw`]); `dir` is where external data lives.
pub(crate) fn read_raw(bytes: &[u8], what: &str, dir: Option<&Path>, limits: &Limits) -> Result<Raw> {
    check_limit(
        "the model's size in bytes",
        bytes.len() as u64,
        limits.max_model_bytes,
        "Limits::max_model_bytes",
    )?;
    sniff(bytes, what)?;
    let mut proto = decode(bytes, what)?;
    let sha256 = hex(&Sha256::digest(bytes));
    let mut file_bytes = bytes.len() as u64;
    let external = resolve_external_data(&mut proto, dir, limits, &mut file_bytes)?;
    let graph = proto.graph.as_ref().ok_or_else(|| Error::NotOnnx {
        what: what.to_string(),
        reason: "it is protobuf but holds no graph".into(),
    })?;
    let (parameters, weight_bytes) = check_tensors(graph)?;
    check_limit("the model's parameter count", parameters, limits.max_parameters, "Limits::max_parameters")?;
    check_graph(graph)?;
    Ok(Raw { proto, sha256, file_bytes, external, parameters, weight_bytes })
}
