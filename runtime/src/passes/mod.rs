//! Load-time graph passes: rewrite what exporters leave unfolded, before tract optimises.
//!
//! Each pass is exact, or exact up to float rounding, and can be switched off for diagnosis
//! ([`PassOptions`]):
//! - `drop-identity`: removes `Identity`, inference-form `Dropout` (no mask read, training mode
//!   absent or false) and `Reshape` to the shape its input already has;
//! - `fold-constants`: evaluates every node whose inputs are all constant into initializers,
//!   whatever its operator, so tract never sees a constant subgraph (a spectral-norm power
//!   iteration, a weight scale, a demodulation factor of weights): genloom's own evaluator for
//!   `Cast`, `DequantizeLinear`, `Reshape`, `Unsqueeze`, `Squeeze`, `Identity` and `MatMul` of
//!   vectors (numpy.matmul semantics, which tract's MatMul lacks when both operands are 1-D),
//!   tract on the node alone for the rest. Random operators are never folded, and results are
//!   bounded in size (tract's own folder skips tensors over 4 MiB, which would leave fp16 and
//!   int8 weights to be converted on every call);
//! - `matmul-vectors`: `MatMul` with a 1-D operand computed at run time written with matrices
//!   (Unsqueeze, MatMul, Squeeze), numpy.matmul's semantics, which tract's MatMul lacks;
//! - `fold-batchnorm`: folds an inference-form `BatchNormalization` into the `Conv`,
//!   `ConvTranspose` (output channels on weight axis 1), `Gemm` or `MatMul` before it:
//!   with `s = gamma / sqrt(var + eps)` and `t = beta - mean s`, the weights of output channel `c`
//!   are scaled by `s_c` and the bias becomes `b s + t` (created when the layer had none). This
//!   is the pattern PyTorch's legacy exporter leaves and tract runs as separate Mul/Add at batch > 1.
//!
//! - `einsum`: `Einsum` of one or two operands written exactly as `Transpose`, `Unsqueeze`,
//!   `Mul` and `ReduceSum` (a constant one is then folded like any other node);
//! - `upsample-to-resize`: `Upsample` (opsets 7 to 9) written as the equivalent `Resize`;
//! - `resize-modes`: `Resize` nodes that do not interpolate by nearest neighbour given the
//!   (unused) `nearest_mode` tract's parser needs.
//!
//! The same passes can be written into an export (`genloom convert`), so the shipped file is
//! already folded.

mod batchnorm;
mod einsum;
mod evaluate;
mod fold;
mod identity;
mod matmul;
mod resize;

use batchnorm::fold_batchnorm;
use einsum::rewrite_einsum;
use fold::fold_constants;
use identity::drop_identity;
use matmul::{analysed_ranks, matmul_vectors, needs_analysis};
use resize::{resize_modes, upsample_to_resize};

use crate::error::{Error, Result};
use crate::onnx::{self, dt, Names};
use std::collections::HashMap;
use tract_onnx::pb;

/// Which passes run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[non_exhaustive]
pub struct PassOptions {
    /// Remove identity-like nodes.
    pub drop_identity: bool,
    /// Evaluate constant subgraphs.
    pub fold_constants: bool,
    /// Fold BatchNormalization into the layer before it.
    pub fold_batchnorm: bool,
    /// Write `Einsum` of one or two operands as Transpose, Unsqueeze, Mul and ReduceSum.
    pub einsum: bool,
    /// Write `Upsample` as `Resize` and complete `Resize` attributes (needed to run opset-9
    /// resampling).
    pub resample: bool,
}

impl Default for PassOptions {
    fn default() -> Self {
        PassOptions {
            drop_identity: true,
            fold_constants: true,
            fold_batchnorm: true,
            einsum: true,
            resample: true,
        }
    }
}

impl PassOptions {
    /// Every pass off: the graph as exported.
    pub fn none() -> PassOptions {
        PassOptions {
            drop_identity: false,
            fold_constants: false,
            fold_batchnorm: false,
            einsum: false,
            resample: false,
        }
    }
}

/// What one pass did.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct PassResult {
    /// The pass's name.
    pub pass: String,
    /// Nodes before it ran.
    pub nodes_before: usize,
    /// Nodes after it ran.
    pub nodes_after: usize,
    /// One line per change ("BatchNormalization `bn1` into ConvTranspose `up1`").
    pub changes: Vec<String>,
}

/// Runs the enabled passes in order (resampling, identity, constants, batchnorm) and reports
/// what each changed.
///
/// # Errors
/// [`Error::Graph`] when a tensor the passes read is malformed.
pub fn run(model: &mut pb::ModelProto, options: &PassOptions) -> Result<Vec<PassResult>> {
    let opset = model
        .opset_import
        .iter()
        .find(|o| o.domain.is_empty() || o.domain == "ai.onnx")
        .map(|o| o.version)
        .unwrap_or(0);
    let opsets = model.opset_import.clone();
    // Ranks from tract's analysis, only when a MatMul operand's rank is not in the graph.
    let ranks = match model.graph.as_ref() {
        Some(g) if options.fold_constants && needs_analysis(g) => analysed_ranks(model),
        _ => HashMap::new(),
    };
    let Some(g) = model.graph.as_mut() else { return Ok(vec![]) };
    let mut report = vec![];
    let mut step = |name: &str,
                    g: &mut pb::GraphProto,
                    f: &dyn Fn(&mut pb::GraphProto) -> Result<Vec<String>>|
     -> Result<()> {
        let before = g.node.len();
        let changes = f(g)?;
        onnx::prune_constants(g);
        if !changes.is_empty() {
            report.push(PassResult {
                pass: name.into(),
                nodes_before: before,
                nodes_after: g.node.len(),
                changes,
            });
        }
        Ok(())
    };
    if options.resample {
        step("upsample-to-resize", g, &|g| upsample_to_resize(g, opset))?;
        step("resize-modes", g, &resize_modes)?;
    }
    if options.drop_identity {
        step("drop-identity", g, &drop_identity)?;
    }
    if options.einsum {
        step("einsum", g, &|g| rewrite_einsum(g, opset))?;
    }
    if options.fold_constants {
        step("fold-constants", g, &|g| fold_constants(g, &opsets))?;
        step("matmul-vectors", g, &|g| matmul_vectors(g, opset, &ranks))?;
    }
    if options.fold_batchnorm {
        step("fold-batchnorm", g, &fold_batchnorm)?;
    }
    Ok(report)
}

pub(super) fn is_graph_io(g: &pb::GraphProto, name: &str) -> bool {
    g.output.iter().any(|o| o.name == name) || g.input.iter().any(|i| i.name == name)
}

/// Replaces value `out` by `inp` everywhere, then drops node `idx`. When `out` is a graph
/// output, the producer of `inp` is renamed instead (graph output names are the model's API).
pub(super) fn bypass(g: &mut pb::GraphProto, idx: usize, inp: &str, out: &str) -> bool {
    let out_is_graph_output = g.output.iter().any(|o| o.name == out);
    if out_is_graph_output {
        let inp_is_free = !is_graph_io(g, inp) && !g.initializer.iter().any(|t| t.name == inp);
        let producer = onnx::producers(g).get(inp).copied();
        let (Some(p), true) = (producer, inp_is_free) else { return false };
        for o in &mut g.node[p].output {
            if o == inp {
                *o = out.to_string();
            }
        }
        onnx::rename_uses(g, inp, out);
    } else {
        onnx::rename_uses(g, out, inp);
    }
    g.node.remove(idx);
    true
}

/// Static shapes of values where the graph states them (graph inputs, value_info, initializers).
/// Only fully known dimensions are `Some`.
pub(super) fn value_shapes(g: &pb::GraphProto) -> HashMap<String, Vec<Option<usize>>> {
    use pb::tensor_shape_proto::dimension::Value;
    let mut m = HashMap::new();
    for v in g.input.iter().chain(&g.value_info) {
        if let Some(pb::type_proto::Value::TensorType(t)) = v.r#type.as_ref().and_then(|t| t.value.as_ref()) {
            if let Some(s) = &t.shape {
                let dims = s
                    .dim
                    .iter()
                    .map(|d| match d.value {
                        Some(Value::DimValue(v)) if v > 0 => Some(v as usize),
                        _ => None,
                    })
                    .collect();
                m.insert(v.name.clone(), dims);
            }
        }
    }
    m
}
