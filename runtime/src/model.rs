//! Loading a generator: bytes or a path -> checked ONNX -> tract's typed model + [`Signature`].
//!
//! Loading is cheap (no optimisation): it sniffs the bytes, enforces [`Limits`], resolves external
//! data safely, checks the graph, parses it with tract, discovers the signature and reports what
//! the model is made of ([`ModelInfo`]). A [`crate::Generator`] is built from a [`Model`].

use crate::error::{BoxError, Error, Result, TractStage};
use crate::onnx::{dtype_name, elem_size, element_count, for_each_tensor_mut};
use crate::signature::{self, Signature, SignatureOverrides};
use sha2::{Digest, Sha256};
use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::{Component, Path, PathBuf};
use tract_onnx::pb;
use tract_onnx::prelude::*;
use tract_onnx::tract_core::internal::DimLike;

/// Upper bounds on what a model and a request may cost. The defaults are generous for image
/// generators (which are rarely over 200 MB) and stop absurd inputs before any allocation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[non_exhaustive]
pub struct Limits {
    /// Largest model file (with its external data) in bytes. Default 1 GiB.
    pub max_model_bytes: u64,
    /// Most parameters (weight elements). Default 500 million.
    pub max_parameters: u64,
    /// Most pixels in one output image (height x width). Default 16 777 216 (4096 x 4096).
    pub max_output_pixels: u64,
    /// Most images in one request. Default 100 000.
    pub max_images: u64,
    /// Most bytes of float output in one micro-batch. Default 256 MiB.
    pub max_micro_batch_bytes: u64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_model_bytes: 1 << 30,
            max_parameters: 500_000_000,
            max_output_pixels: 4096 * 4096,
            max_images: 100_000,
            max_micro_batch_bytes: 256 << 20,
        }
    }
}

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
    /// weights in another file; [`Error::Limit`]; [`Error::TensorSize`] and [`Error::Graph`] for
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

/// Runs a tract step, turning both its errors and its panics into [`Error::Tract`]: tract is a
/// large engine, and a model that reaches an unimplemented path in it must not take the host
/// application down.
pub(crate) fn guard<T>(action: impl Into<String>, f: impl FnOnce() -> TractResult<T>) -> Result<T> {
    guard_stage(TractStage::Prepare, action, f)
}

/// As [`guard`], for running a plan: its failures are inference errors.
pub(crate) fn guard_run<T>(action: impl Into<String>, f: impl FnOnce() -> TractResult<T>) -> Result<T> {
    guard_stage(TractStage::Run, action, f)
}

fn guard_stage<T>(
    stage: TractStage,
    action: impl Into<String>,
    f: impl FnOnce() -> TractResult<T>,
) -> Result<T> {
    let make = |action: String, e: BoxError| Error::Tract { action, stage, source: e };
    match std::panic::catch_unwind(std::panic::AssertUnwindSafe(f)) {
        Ok(Ok(v)) => Ok(v),
        Ok(Err(e)) => Err(make(action.into(), e.into())),
        Err(panic) => {
            let msg = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "an unknown panic".into());
            Err(make(action.into(), format!("tract stopped on an internal error (panic: {msg})").into()))
        }
    }
}

pub(crate) fn check_limit(what: &str, actual: u64, max: u64, setting: &str) -> Result<()> {
    if actual > max {
        return Err(Error::Limit { limit: what.to_string(), actual, max, setting: setting.to_string() });
    }
    Ok(())
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// Names the common ways a file that is not a model reaches a loader.
fn sniff(bytes: &[u8], what: &str) -> Result<()> {
    if bytes.is_empty() {
        return Err(Error::EmptyModel { what: what.to_string() });
    }
    let head = &bytes[..bytes.len().min(512)];
    let text = String::from_utf8_lossy(head);
    let trimmed = text.trim_start_matches(['\u{feff}', ' ', '\t', '\r', '\n']).to_ascii_lowercase();
    if trimmed.starts_with("<!doctype html")
        || trimmed.starts_with("<html")
        || trimmed.starts_with("<?xml") && trimmed.contains("<html")
    {
        return Err(Error::HtmlPage { what: what.to_string() });
    }
    if trimmed.starts_with("version https://git-lfs.github.com/spec/") {
        return Err(Error::LfsPointer { what: what.to_string(), size: bytes.len() });
    }
    // An ONNX ModelProto starts with a field key: a varint whose low three bits are a wire type
    // in 0..=5 and whose field number is at least 1. Text files never do.
    let printable = head.iter().all(|&b| b == b'\n' || b == b'\r' || b == b'\t' || (0x20..0x7f).contains(&b));
    if printable && bytes.len() >= 8 {
        return Err(Error::NotOnnx {
            what: what.to_string(),
            reason: format!(
                "it is plain text (starts with {:?}), while ONNX models are binary protobuf",
                first_line(&text)
            ),
        });
    }
    Ok(())
}

fn first_line(text: &str) -> String {
    let line = text.lines().next().unwrap_or("");
    line.chars().take(40).collect()
}

fn decode(bytes: &[u8], what: &str) -> Result<pb::ModelProto> {
    use prost::Message;
    let proto = pb::ModelProto::decode(bytes).map_err(|e| Error::NotOnnx {
        what: what.to_string(),
        reason: format!("its protobuf does not decode as an ONNX ModelProto ({e}); is the file truncated or of another format?"),
    })?;
    if proto.graph.is_none() {
        return Err(Error::NotOnnx {
            what: what.to_string(),
            reason: "it decodes as protobuf but holds no graph".into(),
        });
    }
    if proto.ir_version <= 0 && proto.opset_import.is_empty() {
        return Err(Error::NotOnnx {
            what: what.to_string(),
            reason: "it has neither an IR version nor an opset import".into(),
        });
    }
    Ok(proto)
}

const EXTERNAL: i32 = 1;

/// Checks an external-data location: a relative path of normal components only.
pub(crate) fn check_location(tensor: &str, location: &str) -> Result<()> {
    let bad = |reason: &str| Error::ExternalDataLocation {
        tensor: tensor.to_string(),
        location: location.to_string(),
        reason: reason.to_string(),
    };
    if location.is_empty() {
        return Err(bad("is empty"));
    }
    let p = Path::new(location);
    if p.is_absolute() || location.starts_with('/') || location.starts_with('\\') || location.contains(':') {
        return Err(bad("is an absolute path"));
    }
    for c in p.components() {
        match c {
            Component::Normal(_) | Component::CurDir => {}
            Component::ParentDir => return Err(bad("leaves the model's folder (`..`)")),
            _ => return Err(bad("is not a plain relative path")),
        }
    }
    Ok(())
}

/// Inlines all external data into `raw_data`, returning the files used.
fn resolve_external_data(
    proto: &mut pb::ModelProto,
    dir: Option<&Path>,
    limits: &Limits,
    total: &mut u64,
) -> Result<Vec<String>> {
    let mut files: BTreeMap<String, Vec<u8>> = BTreeMap::new();
    let Some(graph) = proto.graph.as_mut() else { return Ok(vec![]) };
    let canonical_dir = match dir {
        Some(d) => Some(d.canonicalize().map_err(|e| Error::io("open the folder", d, e))?),
        None => None,
    };
    for_each_tensor_mut(graph, &mut |t| {
        if t.data_location != Some(EXTERNAL) {
            return Ok(());
        }
        let get = |k: &str| t.external_data.iter().find(|e| e.key == k).map(|e| e.value.clone());
        let location = get("location").ok_or_else(|| Error::ExternalDataLocation {
            tensor: t.name.clone(),
            location: String::new(),
            reason: "is missing (no `location` key)".into(),
        })?;
        check_location(&t.name, &location)?;
        let Some(dir) = canonical_dir.as_ref() else {
            return Err(Error::ExternalDataNeedsPath { tensor: t.name.clone(), location });
        };
        if !files.contains_key(&location) {
            let path = dir.join(&location);
            let real = path.canonicalize().map_err(|e| Error::ExternalDataMissing {
                tensor: t.name.clone(),
                path: path.clone(),
                source: e,
            })?;
            if !real.starts_with(dir) {
                return Err(Error::ExternalDataLocation {
                    tensor: t.name.clone(),
                    location: location.clone(),
                    reason: "resolves (through a link) outside the model's folder".into(),
                });
            }
            let len = std::fs::metadata(&real)
                .map_err(|e| Error::ExternalDataMissing {
                    tensor: t.name.clone(),
                    path: real.clone(),
                    source: e,
                })?
                .len();
            *total += len;
            check_limit(
                "the model's size in bytes with its external data",
                *total,
                limits.max_model_bytes,
                "Limits::max_model_bytes",
            )?;
            let data = std::fs::read(&real).map_err(|e| Error::ExternalDataMissing {
                tensor: t.name.clone(),
                path: real.clone(),
                source: e,
            })?;
            files.insert(location.clone(), data);
        }
        let data = &files[&location];
        let parse_num = |key: &str| -> Result<Option<u64>> {
            match get(key) {
                None => Ok(None),
                Some(v) => v.trim().parse::<u64>().map(Some).map_err(|_| Error::ExternalDataRange {
                    tensor: t.name.clone(),
                    reason: format!("external data `{key}` is `{v}`, expected a byte count"),
                }),
            }
        };
        let offset = parse_num("offset")?.unwrap_or(0);
        let elems = element_count(t)?;
        let size = elem_size(t.data_type).ok_or_else(|| Error::ExternalDataRange {
            tensor: t.name.clone(),
            reason: format!("external data of element type {} is not supported", dtype_name(t.data_type)),
        })? as u64;
        let expected = elems.saturating_mul(size);
        let length = parse_num("length")?.unwrap_or(expected);
        if length != expected {
            return Err(Error::ExternalDataRange {
                tensor: t.name.clone(),
                reason: format!(
                    "external data length is {length} bytes but its shape {:?} of {} needs {expected}",
                    t.dims,
                    dtype_name(t.data_type)
                ),
            });
        }
        let end = offset.checked_add(length).filter(|&e| e <= data.len() as u64).ok_or_else(|| Error::ExternalDataRange {
            tensor: t.name.clone(),
            reason: format!(
                "external data at offset {offset} of {length} bytes runs past the end of `{location}` ({} bytes)",
                data.len()
            ),
        })?;
        t.raw_data = data[offset as usize..end as usize].to_vec();
        t.data_location = None;
        t.external_data.clear();
        Ok(())
    })?;
    Ok(files.into_keys().collect())
}

/// Checks that each stored tensor holds as many bytes as its shape says; returns the parameter
/// count and weight bytes.
fn check_tensors(graph: &pb::GraphProto) -> Result<(u64, u64)> {
    let mut params = 0u64;
    let mut bytes = 0u64;
    let mut g = graph.clone();
    for_each_tensor_mut(&mut g, &mut |t| {
        let n = element_count(t)?;
        let held = if !t.raw_data.is_empty() {
            let Some(size) = elem_size(t.data_type) else { return Ok(()) };
            let expected = n.saturating_mul(size as u64);
            if t.raw_data.len() as u64 != expected {
                return Err(Error::TensorSize {
                    tensor: t.name.clone(),
                    shape: t.dims.clone(),
                    dtype: dtype_name(t.data_type),
                    actual: t.raw_data.len(),
                    expected: expected as usize,
                });
            }
            expected
        } else {
            let count = (t.float_data.len()
                + t.int32_data.len()
                + t.int64_data.len()
                + t.double_data.len()
                + t.uint64_data.len()) as u64;
            if count != 0 && count != n && t.data_type != 8 {
                return Err(Error::TensorSize {
                    tensor: t.name.clone(),
                    shape: t.dims.clone(),
                    dtype: dtype_name(t.data_type),
                    actual: count as usize,
                    expected: n as usize,
                });
            }
            n * elem_size(t.data_type).unwrap_or(4) as u64
        };
        params += n;
        bytes += held;
        Ok(())
    })?;
    Ok((params, bytes))
}

/// Every node input must be produced by something, and the graph must be acyclic.
fn check_graph(graph: &pb::GraphProto) -> Result<()> {
    let mut known: HashSet<&str> = graph.input.iter().map(|i| i.name.as_str()).collect();
    known.extend(graph.initializer.iter().map(|t| t.name.as_str()));
    let mut producer: HashMap<&str, usize> = HashMap::new();
    for (i, n) in graph.node.iter().enumerate() {
        for o in &n.output {
            if !o.is_empty() {
                producer.insert(o.as_str(), i);
            }
        }
    }
    for n in &graph.node {
        for inp in &n.input {
            if !inp.is_empty() && !known.contains(inp.as_str()) && !producer.contains_key(inp.as_str()) {
                return Err(Error::Graph {
                    reason: format!(
                        "node `{}` ({}) reads `{inp}`, which no node, input or initializer provides",
                        n.name, n.op_type
                    ),
                });
            }
        }
    }
    for o in &graph.output {
        if !known.contains(o.name.as_str()) && !producer.contains_key(o.name.as_str()) {
            return Err(Error::Graph { reason: format!("graph output `{}` is produced by no node", o.name) });
        }
    }
    // Kahn's algorithm over node -> node edges.
    let mut indegree = vec![0usize; graph.node.len()];
    let mut users: Vec<Vec<usize>> = vec![vec![]; graph.node.len()];
    for (i, n) in graph.node.iter().enumerate() {
        for inp in &n.input {
            if let Some(&p) = producer.get(inp.as_str()) {
                if !known.contains(inp.as_str()) {
                    indegree[i] += 1;
                    users[p].push(i);
                }
            }
        }
    }
    let mut ready: Vec<usize> = (0..graph.node.len()).filter(|&i| indegree[i] == 0).collect();
    let mut seen = 0;
    while let Some(i) = ready.pop() {
        seen += 1;
        for &u in &users[i] {
            indegree[u] -= 1;
            if indegree[u] == 0 {
                ready.push(u);
            }
        }
    }
    if seen != graph.node.len() {
        let stuck = (0..graph.node.len())
            .find(|&i| indegree[i] > 0)
            .map(|i| graph.node[i].name.clone())
            .unwrap_or_default();
        return Err(Error::Graph {
            reason: format!("it has a cycle (through node `{stuck}`); ONNX graphs must be acyclic"),
        });
    }
    Ok(())
}

/// Refuses a graph with an operator tract has no builder for, naming it, before tract turns it
/// into a placeholder that fails later with a less useful message.
fn check_operators(proto: &pb::ModelProto, known: impl Fn(&str) -> bool) -> Result<()> {
    let Some(graph) = proto.graph.as_ref() else { return Ok(()) };
    for (ix, n) in graph.node.iter().enumerate() {
        if !known(&n.op_type) {
            let node = if n.name.is_empty() { format!("#{ix}") } else { n.name.clone() };
            #[cfg(target_arch = "wasm32")]
            let (build, hint) = (
                "genloom's web build",
                "; the web build carries the operators image generators are made of (the list is in \
                 bindings/wasm/README.md); native genloom runs every operator tract knows",
            );
            #[cfg(not(target_arch = "wasm32"))]
            let (build, hint) = ("this build of genloom", "");
            return Err(Error::UnsupportedOperator { node, op_type: n.op_type.clone(), build, hint });
        }
    }
    Ok(())
}

type Built = (TypedModel, BatchAxis, Vec<InputRole>, usize, Vec<TDim>, Option<u64>);

/// Parses with tract, fixes the input facts from the discovered inputs, and types the model.
fn build_typed(proto: &pb::ModelProto, found: &signature::FoundInputs) -> Result<Built> {
    let onnx = tract_onnx::onnx().with_ignore_output_shapes(true).with_ignore_value_info(true);
    check_operators(proto, |op| onnx.op_register.0.contains_key(op))?;
    let parsed = guard("parse the model", || onnx.parse(proto, None))?;
    if !parsed.unresolved_inputs.is_empty() {
        return Err(Error::Graph {
            reason: format!("inputs {:?} could not be resolved", parsed.unresolved_inputs),
        });
    }
    let mut model = parsed.model;
    let batch = match found.batch {
        signature::Batch::Symbolic => BatchAxis::Symbolic(model.symbols.sym("N")),
        signature::Batch::Fixed(n) => BatchAxis::Fixed(n),
    };
    let batch_dim: TDim = match &batch {
        BatchAxis::Symbolic(s) => s.clone().into(),
        BatchAxis::Fixed(n) => n.to_dim(),
    };
    let mut roles = vec![];
    let inputs: Vec<OutletId> =
        model.input_outlets().map_err(|e| Error::tract("list the inputs", e))?.to_vec();
    for (ix, outlet) in inputs.iter().enumerate() {
        let name = model.node(outlet.node).name.clone();
        let fact = if name == found.latent.name {
            roles.push(InputRole::Latent);
            let mut shape: TVec<TDim> = tvec![batch_dim.clone(), found.latent.dim.to_dim()];
            if found.latent.layout == signature::LatentLayout::Spatial {
                shape.push(1.to_dim());
                shape.push(1.to_dim());
            }
            InferenceFact::dt_shape(f32::datum_type(), shape)
        } else if found.label.as_ref().is_some_and(|l| l.name == name) {
            roles.push(InputRole::Label);
            let label = found.label.as_ref().expect("checked above");
            match label.kind {
                signature::LabelKind::Index => {
                    let dt = if label.int32 { i32::datum_type() } else { i64::datum_type() };
                    InferenceFact::dt_shape(dt, tvec![batch_dim.clone()])
                }
                signature::LabelKind::OneHot => InferenceFact::dt_shape(
                    f32::datum_type(),
                    tvec![batch_dim.clone(), label.classes.to_dim()],
                ),
            }
        } else {
            return Err(Error::Signature {
                reason: format!("tract sees an input `{name}` that is neither the latent nor the label"),
            });
        };
        model
            .set_input_fact(ix, fact)
            .map_err(|e| Error::tract(format!("set the fact of input `{name}`"), e))?;
    }
    // Find the image output among the model outputs.
    let outputs: Vec<OutletId> =
        model.output_outlets().map_err(|e| Error::tract("list the outputs", e))?.to_vec();
    let output_index = outputs
        .iter()
        .position(|o| parsed.outlets_by_name.get(&found.output).is_some_and(|x| x == o))
        .ok_or_else(|| Error::Signature {
            reason: format!("output `{}` is not among tract's outputs", found.output),
        })?;
    let typed = guard("type the model (infer every shape and type)", || model.into_typed())?;
    let out = typed.output_outlets().map_err(|e| Error::tract("list the outputs", e))?[output_index];
    let fact = typed.outlet_fact(out).map_err(|e| Error::tract("read the output fact", e))?;
    if fact.datum_type != f32::datum_type()
        && fact.datum_type != f16::datum_type()
        && fact.datum_type != f64::datum_type()
    {
        return Err(Error::Signature {
            reason: format!("output `{}` is {:?}, expected a float tensor", found.output, fact.datum_type),
        });
    }
    let shape: Vec<TDim> = fact.shape.iter().cloned().collect();
    let macs = count_macs(proto, &typed, &batch);
    Ok((typed, batch, roles, output_index, shape, macs))
}

fn count_macs(proto: &pb::ModelProto, typed: &TypedModel, batch: &BatchAxis) -> Option<u64> {
    let graph = proto.graph.as_ref()?;
    let values = match batch {
        BatchAxis::Symbolic(s) => SymbolValues::default().with(s, 1),
        BatchAxis::Fixed(_) => SymbolValues::default(),
    };
    let mut producer: HashMap<&str, (&str, usize)> = HashMap::new();
    for n in &graph.node {
        for (slot, o) in n.output.iter().enumerate() {
            producer.insert(o.as_str(), (n.name.as_str(), slot));
        }
    }
    let inits: HashMap<&str, &pb::TensorProto> =
        graph.initializer.iter().map(|t| (t.name.as_str(), t)).collect();
    // Shapes per sample (batch evaluated at 1), read from tract's typed model.
    let shape_of = |name: &str| -> Option<Vec<u64>> {
        if let Some(t) = inits.get(name) {
            return Some(t.dims.iter().map(|&d| d.max(0) as u64).collect());
        }
        let (node, slot) = match producer.get(name) {
            Some(&(n, s)) => (n, s),
            None => (name, 0),
        };
        // tract keeps the ONNX name on the last node of an op's expansion, or names the
        // expansion `NAME.something`: take the exact name, else the last non-constant `NAME.*`.
        let node = typed.node_by_name(node).ok().or_else(|| {
            let prefix = format!("{node}.");
            typed
                .nodes()
                .iter()
                .filter(|n| n.name.starts_with(&prefix) && n.op.name() != "Const")
                .max_by_key(|n| n.id)
        })?;
        let fact = &node.outputs.get(slot).or_else(|| node.outputs.first())?.fact;
        fact.shape.iter().map(|d| d.eval(&values).to_usize().ok().map(|v| v as u64)).collect()
    };
    let mut total = 0u64;
    for n in &graph.node {
        let macs = match n.op_type.as_str() {
            "Conv" => {
                // Each output element sums C_in/group * kH * kW products.
                let w = shape_of(n.input.get(1)?)?;
                let y = shape_of(n.output.first()?)?;
                y.iter().skip(1).product::<u64>() * w.iter().skip(1).product::<u64>()
            }
            "ConvTranspose" => {
                // Each input element meets C_out/group * kH * kW weights.
                let x = shape_of(n.input.first()?)?;
                let w = shape_of(n.input.get(1)?)?;
                x.iter().skip(1).product::<u64>() * w.iter().skip(1).product::<u64>()
            }
            "Gemm" | "MatMul" => {
                let a = shape_of(n.input.first()?)?;
                let y = shape_of(n.output.first()?)?;
                let k = if n.op_type == "Gemm" && n.attribute.iter().any(|a| a.name == "transA" && a.i == 1) {
                    *a.first()?
                } else {
                    *a.last()?
                };
                y.iter().skip(1).product::<u64>() * k
            }
            _ => 0,
        };
        total += macs;
    }
    Some(total)
}
