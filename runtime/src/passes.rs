//! Load-time graph passes: rewrite what exporters leave unfolded, before tract optimises.
//!
//! Each pass is exact, or exact up to float rounding, and can be switched off for diagnosis
//! ([`PassOptions`]):
//! - `drop-identity`: removes `Identity`, inference-form `Dropout` (no mask read, training mode
//!   absent or false) and `Reshape` to the shape its input already has;
//! - `fold-constants`: evaluates nodes whose inputs are all constant (`Constant`, `Cast`,
//!   `DequantizeLinear`, `Reshape`, `Unsqueeze`, `Squeeze`, `Identity`) into initializers, of any
//!   size (tract's own folder skips tensors over 4 MiB, which would leave fp16 and int8 weights
//!   to be converted on every call);
//! - `fold-batchnorm`: folds an inference-form `BatchNormalization` into the `Conv`,
//!   `ConvTranspose` (output channels on weight axis 1), `Gemm` or `MatMul` before it:
//!   with `s = gamma / sqrt(var + eps)` and `t = beta - mean s`, the weights of output channel `c`
//!   are scaled by `s_c` and the bias becomes `b s + t` (created when the layer had none). This
//!   is the pattern PyTorch's legacy exporter leaves and tract runs as separate Mul/Add at batch > 1.
//!
//! The same passes can be written into an export (`genloom convert`), so the shipped file is
//! already folded.

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
}

impl Default for PassOptions {
    fn default() -> Self {
        PassOptions { drop_identity: true, fold_constants: true, fold_batchnorm: true }
    }
}

impl PassOptions {
    /// Every pass off: the graph as exported.
    pub fn none() -> PassOptions {
        PassOptions { drop_identity: false, fold_constants: false, fold_batchnorm: false }
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

/// Runs the enabled passes in order (identity, constants, batchnorm, constants again) and reports
/// what each changed.
///
/// # Errors
/// [`Error::Graph`] when a tensor the passes read is malformed.
pub fn run(model: &mut pb::ModelProto, options: &PassOptions) -> Result<Vec<PassResult>> {
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
    if options.drop_identity {
        step("drop-identity", g, &drop_identity)?;
    }
    if options.fold_constants {
        step("fold-constants", g, &fold_constants)?;
    }
    if options.fold_batchnorm {
        step("fold-batchnorm", g, &fold_batchnorm)?;
    }
    Ok(report)
}

fn is_graph_io(g: &pb::GraphProto, name: &str) -> bool {
    g.output.iter().any(|o| o.name == name) || g.input.iter().any(|i| i.name == name)
}

/// Replaces value `out` by `inp` everywhere, then drops node `idx`. When `out` is a graph
/// output, the producer of `inp` is renamed instead (graph output names are the model's API).
fn bypass(g: &mut pb::GraphProto, idx: usize, inp: &str, out: &str) -> bool {
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

fn drop_identity(g: &mut pb::GraphProto) -> Result<Vec<String>> {
    // Decide first (reading the graph once), then rewrite.
    let removable: Vec<String> = {
        let consts = onnx::constants(g);
        let shapes = value_shapes(g);
        let uses = onnx::use_counts(g);
        g.node
            .iter()
            .filter(|n| identity_like(n, &consts, &shapes, &uses))
            .filter_map(|n| n.output.first().cloned())
            .collect()
    };
    let mut changes = vec![];
    for out in removable {
        let Some(i) = g.node.iter().position(|n| n.output.first() == Some(&out)) else { continue };
        let Some(inp) = g.node[i].input.first().cloned() else { continue };
        let (op, name) = (g.node[i].op_type.clone(), g.node[i].name.clone());
        if bypass(g, i, &inp, &out) {
            changes.push(format!("{op} `{name}` removed"));
        }
    }
    Ok(changes)
}

/// Identity, inference-form Dropout (no mask read, training mode absent or constant false), or
/// Reshape to the shape its input already has.
fn identity_like(
    n: &pb::NodeProto,
    consts: &HashMap<&str, &pb::TensorProto>,
    shapes: &HashMap<String, Vec<Option<usize>>>,
    uses: &HashMap<String, usize>,
) -> bool {
    if n.input.is_empty() || n.output.is_empty() {
        return false;
    }
    match n.op_type.as_str() {
        "Identity" => true,
        "Dropout" => {
            let mask_read = n.output.get(1).is_some_and(|m| !m.is_empty() && uses.contains_key(m));
            let training = n.input.get(2).filter(|s| !s.is_empty()).map(|s| {
                consts.get(s.as_str()).and_then(|t| onnx::read_i64(t).ok()).map(|v| v.first() == Some(&1))
            });
            // Training mode given by a non-constant input: leave it for the release gate.
            !mask_read && matches!(training, None | Some(Some(false)))
        }
        "Reshape" => {
            let target =
                n.input.get(1).and_then(|s| consts.get(s.as_str())).and_then(|t| onnx::read_i64(t).ok());
            match (target, shapes.get(&n.input[0])) {
                (Some(t), Some(shape)) => {
                    t.len() == shape.len()
                        && t.iter().zip(shape).all(|(&a, &b)| a > 0 && b == Some(a as usize))
                }
                _ => false,
            }
        }
        _ => false,
    }
}

/// Static shapes of values where the graph states them (graph inputs, value_info, initializers).
/// Only fully known dimensions are `Some`.
fn value_shapes(g: &pb::GraphProto) -> HashMap<String, Vec<Option<usize>>> {
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

/// Evaluates one node whose inputs are all constant, if it is one of the ops we fold.
fn eval_const(n: &pb::NodeProto, inputs: &[Option<&pb::TensorProto>]) -> Result<Option<pb::TensorProto>> {
    let out = n.output.first().cloned().unwrap_or_default();
    let first = match inputs.first() {
        Some(Some(t)) => *t,
        _ => return Ok(None),
    };
    let t = match n.op_type.as_str() {
        "Identity" => {
            let mut t = first.clone();
            t.name = out;
            t
        }
        "Cast" => {
            let to = onnx::attr_i(n, "to", 0) as i32;
            match to {
                dt::FLOAT => onnx::f32_tensor(&out, &first.dims, &onnx::read_f32(first)?),
                dt::INT64 if matches!(first.data_type, dt::INT32 | dt::INT64 | dt::INT8 | dt::UINT8) => {
                    onnx::i64_tensor(&out, &first.dims, &onnx::read_i64(first)?)
                }
                _ => return Ok(None),
            }
        }
        "DequantizeLinear" => {
            let (Some(Some(scale)), zp) = (inputs.get(1), inputs.get(2).copied().flatten()) else {
                return Ok(None);
            };
            if !matches!(first.data_type, dt::INT8 | dt::UINT8 | dt::INT32) {
                return Ok(None);
            }
            let x = onnx::read_i64(first)?;
            let s = onnx::read_f32(scale)?;
            let z = match zp {
                Some(z) => onnx::read_i64(z)?,
                None => vec![0; s.len()],
            };
            if s.is_empty() || z.len() != s.len() {
                return Ok(None);
            }
            // ONNX DequantizeLinear: y = (x - zero_point) * scale, per tensor or along `axis`.
            let y: Vec<f32> = if s.len() == 1 {
                x.iter().map(|&v| (v - z[0]) as f32 * s[0]).collect()
            } else {
                let rank = first.dims.len() as i64;
                let axis = onnx::attr_i(n, "axis", 1);
                let axis = if axis < 0 { axis + rank } else { axis } as usize;
                if axis >= first.dims.len() || first.dims[axis] as usize != s.len() {
                    return Err(Error::Graph {
                        reason: format!(
                            "DequantizeLinear `{}` has {} scales for axis {axis} of shape {:?}",
                            n.name,
                            s.len(),
                            first.dims
                        ),
                    });
                }
                let inner: usize = first.dims[axis + 1..].iter().map(|&d| d as usize).product();
                let ch = s.len();
                x.iter()
                    .enumerate()
                    .map(|(i, &v)| {
                        let c = (i / inner.max(1)) % ch;
                        (v - z[c]) as f32 * s[c]
                    })
                    .collect()
            };
            onnx::f32_tensor(&out, &first.dims, &y)
        }
        "Reshape" | "Unsqueeze" | "Squeeze" => {
            let dims = match n.op_type.as_str() {
                "Reshape" => {
                    let Some(Some(shape)) = inputs.get(1) else { return Ok(None) };
                    let mut target = onnx::read_i64(shape)?;
                    let total = onnx::numel(first) as i64;
                    for (i, d) in target.iter_mut().enumerate() {
                        if *d == 0 {
                            *d = *first.dims.get(i).unwrap_or(&1);
                        }
                    }
                    if let Some(pos) = target.iter().position(|&d| d == -1) {
                        let known: i64 = target.iter().filter(|&&d| d != -1).product();
                        if known == 0 {
                            return Ok(None);
                        }
                        target[pos] = total / known;
                    }
                    target
                }
                _ => {
                    let axes = match inputs.get(1) {
                        Some(Some(a)) => onnx::read_i64(a)?,
                        _ => onnx::attr_ints(n, "axes").unwrap_or_default(),
                    };
                    let mut dims = first.dims.clone();
                    if n.op_type == "Unsqueeze" {
                        let rank = (dims.len() + axes.len()) as i64;
                        let mut axes: Vec<i64> =
                            axes.iter().map(|&a| if a < 0 { a + rank } else { a }).collect();
                        axes.sort_unstable();
                        for a in axes {
                            dims.insert((a as usize).min(dims.len()), 1);
                        }
                        dims
                    } else {
                        let rank = dims.len() as i64;
                        let axes: Vec<i64> = axes.iter().map(|&a| if a < 0 { a + rank } else { a }).collect();
                        dims.iter()
                            .enumerate()
                            .filter(|(i, &d)| !(d == 1 && (axes.is_empty() || axes.contains(&(*i as i64)))))
                            .map(|(_, &d)| d)
                            .collect()
                    }
                }
            };
            if dims.iter().product::<i64>() != onnx::numel(first) as i64 {
                return Ok(None);
            }
            let mut t = first.clone();
            t.name = out;
            t.dims = dims;
            t
        }
        _ => return Ok(None),
    };
    Ok(Some(t))
}

fn fold_constants(g: &mut pb::GraphProto) -> Result<Vec<String>> {
    let mut changes = vec![];
    // Constant nodes become initializers.
    let mut i = 0;
    while i < g.node.len() {
        let n = &g.node[i];
        if n.op_type == "Constant" {
            if let (Some(out), Some(t)) =
                (n.output.first(), onnx::attr(n, "value").and_then(|a| a.t.as_ref()))
            {
                let mut t = t.clone();
                t.name = out.clone();
                if !is_graph_io(g, out) {
                    changes.push(format!("Constant `{}` made an initializer", n.name));
                    g.initializer.push(t);
                    g.node.remove(i);
                    continue;
                }
            }
        }
        i += 1;
    }
    loop {
        let consts = onnx::constants(g);
        let mut folded = None;
        for (i, n) in g.node.iter().enumerate() {
            if n.input.is_empty() || n.output.len() != 1 || is_graph_io(g, &n.output[0]) {
                continue;
            }
            let inputs: Vec<Option<&pb::TensorProto>> = n
                .input
                .iter()
                .map(|s| if s.is_empty() { None } else { consts.get(s.as_str()).copied() })
                .collect();
            let all_const = n.input.iter().zip(&inputs).all(|(s, t)| s.is_empty() || t.is_some());
            if !all_const {
                continue;
            }
            if let Some(t) = eval_const(n, &inputs)? {
                folded = Some((i, t));
                break;
            }
        }
        let Some((i, t)) = folded else { break };
        let n = g.node.remove(i);
        changes.push(format!("{} `{}` evaluated into a {:?} constant", n.op_type, n.name, t.dims));
        g.initializer.push(t);
    }
    Ok(changes)
}

fn fold_batchnorm(g: &mut pb::GraphProto) -> Result<Vec<String>> {
    let mut changes = vec![];
    let mut names = Names::of(g);
    loop {
        let consts = onnx::constants(g);
        let uses = onnx::use_counts(g);
        let prods = onnx::producers(g);
        let mut plan = None;
        for (bi, bn) in g.node.iter().enumerate() {
            if bn.op_type != "BatchNormalization" || bn.input.len() < 5 {
                continue;
            }
            // Inference form only: one output, training_mode unset or 0.
            if bn.output.iter().skip(1).any(|o| !o.is_empty()) || onnx::attr_i(bn, "training_mode", 0) != 0 {
                continue;
            }
            let x = &bn.input[0];
            let Some(&li) = prods.get(x) else { continue };
            let layer = &g.node[li];
            if !matches!(layer.op_type.as_str(), "Conv" | "ConvTranspose" | "Gemm" | "MatMul")
                || uses.get(x) != Some(&1)
            {
                continue;
            }
            let params: Option<Vec<&pb::TensorProto>> =
                bn.input[1..5].iter().map(|s| consts.get(s.as_str()).copied()).collect();
            let Some(w) = layer.input.get(1).and_then(|s| consts.get(s.as_str()).copied()) else { continue };
            let bias = layer.input.get(2).filter(|s| !s.is_empty()).map(|s| consts.get(s.as_str()).copied());
            if matches!(bias, Some(None)) {
                continue; // a bias computed at run time
            }
            if let Some(p) = params {
                plan = Some((
                    bi,
                    li,
                    p.into_iter().cloned().collect::<Vec<_>>(),
                    w.clone(),
                    bias.flatten().cloned(),
                ));
                break;
            }
        }
        let Some((bi, li, p, w, bias)) = plan else { break };
        let eps = onnx::attr_f(&g.node[bi], "epsilon", 1e-5);
        let (gamma, beta, mean, var) =
            (onnx::read_f32(&p[0])?, onnx::read_f32(&p[1])?, onnx::read_f32(&p[2])?, onnx::read_f32(&p[3])?);
        let c = gamma.len();
        if [beta.len(), mean.len(), var.len()].iter().any(|&l| l != c) {
            break;
        }
        // Computed in f64, rounded once.
        let scale: Vec<f64> =
            (0..c).map(|i| f64::from(gamma[i]) / (f64::from(var[i]) + f64::from(eps)).sqrt()).collect();
        let shift: Vec<f64> = (0..c).map(|i| f64::from(beta[i]) - f64::from(mean[i]) * scale[i]).collect();
        let layer = g.node[li].clone();
        let mut wv = onnx::read_f32(&w)?;
        let dims = w.dims.clone();
        let op = layer.op_type.as_str();
        let group = onnx::attr_i(&layer, "group", 1).max(1) as usize;
        // The output channel of each weight element.
        let ok = match op {
            "Conv" => dims.first().map(|&d| d as usize) == Some(c),
            "ConvTranspose" => dims.get(1).map(|&d| d as usize * group) == Some(c),
            "Gemm" => {
                let trans_b = onnx::attr_i(&layer, "transB", 0) == 1;
                dims.len() == 2 && dims[if trans_b { 0 } else { 1 }] as usize == c
            }
            _ => dims.len() == 2 && dims[1] as usize == c, // MatMul with B [K, F]
        };
        if !ok {
            break;
        }
        let channel_of = |idx: usize| -> usize {
            match op {
                "Conv" => idx / (wv_len(&dims) / dims[0] as usize),
                "ConvTranspose" => {
                    let per_in = wv_len(&dims) / dims[0] as usize; // C_out/g * kH * kW
                    let k = per_in / dims[1] as usize;
                    let cin = idx / per_in;
                    let j = (idx % per_in) / k;
                    let cin_per_group = dims[0] as usize / group;
                    (cin / cin_per_group) * dims[1] as usize + j
                }
                "Gemm" if onnx::attr_i(&layer, "transB", 0) == 1 => idx / dims[1] as usize,
                _ => idx % dims[1] as usize,
            }
        };
        for (idx, v) in wv.iter_mut().enumerate() {
            *v = (f64::from(*v) * scale[channel_of(idx)]) as f32;
        }
        let (alpha_beta_ok, gemm_beta) = if op == "Gemm" {
            let b = onnx::attr_f(&layer, "beta", 1.0);
            (b != 0.0 || bias.is_none(), b)
        } else {
            (true, 1.0)
        };
        if !alpha_beta_ok {
            break;
        }
        let old_b: Vec<f32> = match &bias {
            Some(b) => onnx::read_f32(b)?,
            None => vec![0.0; c],
        };
        if old_b.len() != c {
            break;
        }
        let beta_eff = if bias.is_some() { f64::from(gemm_beta) } else { 1.0 };
        let new_b: Vec<f32> =
            (0..c).map(|i| (f64::from(old_b[i]) * scale[i] + shift[i] / beta_eff) as f32).collect();
        // Write new tensors (fresh names: weights may be shared with other nodes).
        let base = if layer.name.is_empty() { layer.output[0].clone() } else { layer.name.clone() };
        let wname = names.fresh(&format!("{base}.weight_bn"));
        let bname = names.fresh(&format!("{base}.bias_bn"));
        g.initializer.push(onnx::f32_tensor(&wname, &dims, &wv));
        g.initializer.push(onnx::f32_tensor(&bname, &[c as i64], &new_b));
        let bn = g.node[bi].clone();
        let bn_out = bn.output[0].clone();
        let layer_out = layer.output[0].clone();
        if op == "MatMul" {
            // MatMul has no bias: add one after it.
            let n = &mut g.node[li];
            n.input[1] = wname;
            let add = pb::NodeProto {
                name: names.fresh(&format!("{base}.bn_add")),
                op_type: "Add".into(),
                input: vec![layer_out.clone(), bname],
                output: vec![bn_out.clone()],
                ..Default::default()
            };
            g.node[bi] = add;
        } else {
            let n = &mut g.node[li];
            n.input[1] = wname;
            if n.input.len() > 2 {
                n.input[2] = bname;
            } else {
                n.input.push(bname);
            }
            if op == "Gemm" && bias.is_none() {
                n.attribute.retain(|a| a.name != "beta");
                n.attribute.push(onnx::float_attr("beta", 1.0));
            }
            // The layer now writes what the BN wrote.
            n.output[0] = bn_out.clone();
            g.node.remove(bi);
        }
        changes
            .push(format!("BatchNormalization `{}` folded into {} `{}`", bn.name, layer.op_type, layer.name));
    }
    Ok(changes)
}

fn wv_len(dims: &[i64]) -> usize {
    dims.iter().map(|&d| d as usize).product()
}
