//! Helpers over the ONNX protobuf, at the bottom of the runtime's modules (they import only
//! `error`): data types and element counts, reading and writing tensor values, attributes,
//! producers and consumers, tensor visitors, and fresh names. Used by loading, signature
//! discovery, the load-time passes, `convert` and the gate.

use crate::error::{Error, Result};
use std::collections::{HashMap, HashSet};
use tract_onnx::pb;

/// ONNX `TensorProto.DataType` codes used here.
pub(crate) mod dt {
    pub const FLOAT: i32 = 1;
    pub const UINT8: i32 = 2;
    pub const INT8: i32 = 3;
    pub const BOOL: i32 = 9;
    pub const INT32: i32 = 6;
    pub const INT64: i32 = 7;
    pub const FLOAT16: i32 = 10;
    pub const DOUBLE: i32 = 11;
}

pub(crate) fn numel(t: &pb::TensorProto) -> usize {
    t.dims.iter().map(|&d| d.max(0) as usize).product()
}

fn bad(t: &pb::TensorProto, what: &str) -> Error {
    Error::Graph { reason: format!("tensor `{}`: {what}", t.name) }
}

/// IEEE 754 binary16 bits to f32 (exact).
pub(crate) fn f16_to_f32(h: u16) -> f32 {
    half::f16::from_bits(h).to_f32()
}

/// The values of a float-like tensor (float, float16, double) as f32.
pub(crate) fn read_f32(t: &pb::TensorProto) -> Result<Vec<f32>> {
    let n = numel(t);
    let v: Vec<f32> = match t.data_type {
        dt::FLOAT if !t.raw_data.is_empty() => {
            t.raw_data.chunks_exact(4).map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]])).collect()
        }
        dt::FLOAT => t.float_data.clone(),
        dt::FLOAT16 if !t.raw_data.is_empty() => {
            t.raw_data.chunks_exact(2).map(|b| f16_to_f32(u16::from_le_bytes([b[0], b[1]]))).collect()
        }
        // float16 in int32_data holds one value per entry in the low 16 bits.
        dt::FLOAT16 => t.int32_data.iter().map(|&v| f16_to_f32(v as u16)).collect(),
        dt::DOUBLE if !t.raw_data.is_empty() => t
            .raw_data
            .chunks_exact(8)
            .map(|b| f64::from_le_bytes(b.try_into().unwrap_or([0; 8])) as f32)
            .collect(),
        dt::DOUBLE => t.double_data.iter().map(|&v| v as f32).collect(),
        other => return Err(bad(t, &format!("expected a float tensor, found {}", dtype_name(other)))),
    };
    if v.len() != n {
        return Err(bad(t, &format!("holds {} values for shape {:?}", v.len(), t.dims)));
    }
    Ok(v)
}

/// The values of an integer tensor as i64 (int8, uint8, int32, int64).
pub(crate) fn read_i64(t: &pb::TensorProto) -> Result<Vec<i64>> {
    let n = numel(t);
    let r = &t.raw_data;
    let v: Vec<i64> = match t.data_type {
        dt::INT64 if !r.is_empty() => {
            r.chunks_exact(8).map(|b| i64::from_le_bytes(b.try_into().unwrap_or([0; 8]))).collect()
        }
        dt::INT64 => t.int64_data.clone(),
        dt::INT32 if !r.is_empty() => {
            r.chunks_exact(4).map(|b| i64::from(i32::from_le_bytes([b[0], b[1], b[2], b[3]]))).collect()
        }
        dt::INT8 if !r.is_empty() => r.iter().map(|&b| i64::from(b as i8)).collect(),
        dt::BOOL if !r.is_empty() => r.iter().map(|&b| i64::from(b != 0)).collect(),
        dt::BOOL => t.int32_data.iter().map(|&v| i64::from(v != 0)).collect(),
        dt::UINT8 if !r.is_empty() => r.iter().map(|&b| i64::from(b)).collect(),
        dt::INT32 | dt::INT8 | dt::UINT8 => t.int32_data.iter().map(|&v| i64::from(v)).collect(),
        other => return Err(bad(t, &format!("expected an integer tensor, found {}", dtype_name(other)))),
    };
    if v.len() != n {
        return Err(bad(t, &format!("holds {} values for shape {:?}", v.len(), t.dims)));
    }
    Ok(v)
}

/// A float32 tensor with raw little-endian data.
pub(crate) fn f32_tensor(name: &str, dims: &[i64], values: &[f32]) -> pb::TensorProto {
    let mut raw = Vec::with_capacity(values.len() * 4);
    for v in values {
        raw.extend_from_slice(&v.to_le_bytes());
    }
    pb::TensorProto {
        name: name.to_string(),
        dims: dims.to_vec(),
        data_type: dt::FLOAT,
        raw_data: raw,
        ..Default::default()
    }
}

/// An int64 tensor with raw little-endian data.
pub(crate) fn i64_tensor(name: &str, dims: &[i64], values: &[i64]) -> pb::TensorProto {
    let mut raw = Vec::with_capacity(values.len() * 8);
    for v in values {
        raw.extend_from_slice(&v.to_le_bytes());
    }
    pb::TensorProto {
        name: name.to_string(),
        dims: dims.to_vec(),
        data_type: dt::INT64,
        raw_data: raw,
        ..Default::default()
    }
}

/// The attribute `name` of a node.
pub(crate) fn attr<'a>(n: &'a pb::NodeProto, name: &str) -> Option<&'a pb::AttributeProto> {
    n.attribute.iter().find(|a| a.name == name)
}

pub(crate) fn attr_i(n: &pb::NodeProto, name: &str, default: i64) -> i64 {
    attr(n, name).map(|a| a.i).unwrap_or(default)
}

pub(crate) fn attr_f(n: &pb::NodeProto, name: &str, default: f32) -> f32 {
    attr(n, name).map(|a| a.f).unwrap_or(default)
}

pub(crate) fn attr_ints(n: &pb::NodeProto, name: &str) -> Option<Vec<i64>> {
    attr(n, name).map(|a| a.ints.clone())
}

/// A float attribute.
pub(crate) fn float_attr(name: &str, v: f32) -> pb::AttributeProto {
    pb::AttributeProto { name: name.into(), r#type: 1, f: v, ..Default::default() }
}

/// Constant values of the graph by name, borrowed (weights are never copied): initializers and
/// the `value` tensors of `Constant` nodes, keyed by the node's output.
pub(crate) fn constants(g: &pb::GraphProto) -> HashMap<&str, &pb::TensorProto> {
    let mut m: HashMap<&str, &pb::TensorProto> = g.initializer.iter().map(|t| (t.name.as_str(), t)).collect();
    for n in &g.node {
        if n.op_type == "Constant" {
            if let (Some(out), Some(t)) = (n.output.first(), attr(n, "value").and_then(|a| a.t.as_ref())) {
                m.insert(out.as_str(), t);
            }
        }
    }
    m
}

/// The value of a constant tensor that holds exactly one number, of any numeric type.
pub(crate) fn scalar(t: &pb::TensorProto) -> Option<f64> {
    if numel(t) != 1 {
        return None;
    }
    match t.data_type {
        dt::FLOAT | dt::FLOAT16 | dt::DOUBLE => read_f32(t).ok().map(|v| f64::from(v[0])),
        _ => read_i64(t).ok().map(|v| v[0] as f64),
    }
}

/// How many node inputs and graph outputs read each value.
pub(crate) fn use_counts(g: &pb::GraphProto) -> HashMap<String, usize> {
    let mut m: HashMap<String, usize> = HashMap::new();
    for n in &g.node {
        for i in &n.input {
            if !i.is_empty() {
                *m.entry(i.clone()).or_default() += 1;
            }
        }
    }
    for o in &g.output {
        *m.entry(o.name.clone()).or_default() += 1;
    }
    m
}

/// The index of the node producing each value.
pub(crate) fn producers(g: &pb::GraphProto) -> HashMap<String, usize> {
    let mut m = HashMap::new();
    for (i, n) in g.node.iter().enumerate() {
        for o in &n.output {
            if !o.is_empty() {
                m.insert(o.clone(), i);
            }
        }
    }
    m
}

/// Every name used in the graph, to make fresh ones.
pub(crate) struct Names(HashSet<String>);

impl Names {
    pub(crate) fn of(g: &pb::GraphProto) -> Names {
        let mut s = HashSet::new();
        for t in &g.initializer {
            s.insert(t.name.clone());
        }
        for v in g.input.iter().chain(&g.output).chain(&g.value_info) {
            s.insert(v.name.clone());
        }
        for n in &g.node {
            s.insert(n.name.clone());
            s.extend(n.input.iter().cloned());
            s.extend(n.output.iter().cloned());
        }
        Names(s)
    }

    /// `base`, or `base_2`, `base_3`, ... whichever is free; the name is then taken.
    pub(crate) fn fresh(&mut self, base: &str) -> String {
        let mut name = base.to_string();
        let mut k = 2;
        while self.0.contains(&name) {
            name = format!("{base}_{k}");
            k += 1;
        }
        self.0.insert(name.clone());
        name
    }
}

/// Renames every use of value `from` (node inputs) to `to`.
pub(crate) fn rename_uses(g: &mut pb::GraphProto, from: &str, to: &str) {
    for n in &mut g.node {
        for i in &mut n.input {
            if i == from {
                *i = to.to_string();
            }
        }
    }
}

/// Removes initializers and Constant nodes nobody reads any more; returns how many went.
pub(crate) fn prune_constants(g: &mut pb::GraphProto) -> usize {
    let mut removed: HashSet<String> = HashSet::new();
    let mut count = 0;
    loop {
        let uses = use_counts(g);
        let before = g.initializer.len() + g.node.len();
        g.initializer.retain(|t| {
            let keep = uses.contains_key(&t.name);
            if !keep {
                removed.insert(t.name.clone());
            }
            keep
        });
        g.node.retain(|n| n.op_type != "Constant" || n.output.iter().any(|o| uses.contains_key(o)));
        let after = g.initializer.len() + g.node.len();
        if after == before {
            break;
        }
        count += before - after;
    }
    // Old exporters also list initializers as graph inputs; drop the listing with the tensor.
    g.input.retain(|i| !removed.contains(&i.name));
    count
}

/// Bytes per element of an ONNX tensor data type (`None` for strings and unknown types).
pub(crate) fn elem_size(data_type: i32) -> Option<usize> {
    use pb::tensor_proto::DataType as D;
    Some(match D::try_from(data_type).ok()? {
        D::Float | D::Int32 | D::Uint32 => 4,
        D::Uint8 | D::Int8 | D::Bool => 1,
        D::Uint16 | D::Int16 | D::Float16 | D::Bfloat16 => 2,
        D::Int64 | D::Double | D::Uint64 | D::Complex64 => 8,
        D::Complex128 => 16,
        _ => return None,
    })
}

/// The ONNX name of a tensor data type, lower case (`float`, `int64`, ...).
pub(crate) fn dtype_name(data_type: i32) -> String {
    pb::tensor_proto::DataType::try_from(data_type)
        .map(|d| d.as_str_name().to_ascii_lowercase())
        .unwrap_or_else(|_| format!("type {data_type}"))
}

/// Elements in a tensor from its dims, refusing negative dims and overflow.
pub(crate) fn element_count(t: &pb::TensorProto) -> Result<u64> {
    let mut n: u64 = 1;
    for &d in &t.dims {
        if d < 0 {
            return Err(Error::Graph {
                reason: format!("tensor `{}` has a negative dimension {d} in {:?}", t.name, t.dims),
            });
        }
        n = n.checked_mul(d as u64).ok_or_else(|| Error::Limit {
            limit: format!("the element count of tensor `{}`", t.name),
            actual: u64::MAX,
            max: u64::MAX,
            setting: "Limits::max_parameters".into(),
        })?;
    }
    Ok(n)
}

/// Every tensor stored in the graph, read-only: initializers, Constant nodes' `value`
/// attributes and the same inside subgraphs.
pub(crate) fn for_each_tensor(
    graph: &pb::GraphProto,
    f: &mut dyn FnMut(&pb::TensorProto) -> Result<()>,
) -> Result<()> {
    for t in &graph.initializer {
        f(t)?;
    }
    for n in &graph.node {
        for a in &n.attribute {
            if let Some(t) = a.t.as_ref() {
                f(t)?;
            }
            if let Some(g) = a.g.as_ref() {
                for_each_tensor(g, f)?;
            }
        }
    }
    Ok(())
}

/// Every tensor stored in the graph: initializers and Constant nodes' `value` attributes.
pub(crate) fn for_each_tensor_mut(
    graph: &mut pb::GraphProto,
    f: &mut dyn FnMut(&mut pb::TensorProto) -> Result<()>,
) -> Result<()> {
    for t in &mut graph.initializer {
        f(t)?;
    }
    for n in &mut graph.node {
        for a in &mut n.attribute {
            if let Some(t) = a.t.as_mut() {
                f(t)?;
            }
            if let Some(g) = a.g.as_mut() {
                for_each_tensor_mut(g, f)?;
            }
        }
    }
    Ok(())
}

/// tract's ONNX front end as genloom uses it everywhere: tract's operator register, with
/// `Resize` also accepted in models whose opset predates it (below 10), where the
/// `upsample-to-resize` pass writes it in place of `Upsample`. There it is built with the
/// opset-10 semantics, inputs `(X, scales)` and asymmetric coordinates, which are the semantics
/// of `Upsample` (ONNX operator specification: Resize-10 replaced Upsample-9 unchanged).
pub(crate) fn framework() -> tract_onnx::Onnx {
    let mut onnx = tract_onnx::onnx();
    if let Some(&resize) = onnx.op_register.0.get("Resize") {
        // A fn pointer cannot capture tract's builder; it is the same for every framework.
        let _ = TRACT_RESIZE.set(resize);
        onnx.op_register.insert("Resize", resize_any_opset);
    }
    onnx
}

type OpBuilder = fn(
    &tract_onnx::model::ParsingContext,
    &pb::NodeProto,
) -> tract_onnx::prelude::TractResult<(
    Box<dyn tract_onnx::tract_hir::infer::InferenceOp>,
    Vec<String>,
)>;

static TRACT_RESIZE: std::sync::OnceLock<OpBuilder> = std::sync::OnceLock::new();

fn resize_any_opset(
    ctx: &tract_onnx::model::ParsingContext,
    node: &pb::NodeProto,
) -> tract_onnx::prelude::TractResult<(Box<dyn tract_onnx::tract_hir::infer::InferenceOp>, Vec<String>)> {
    let resize =
        TRACT_RESIZE.get().ok_or_else(|| tract_onnx::prelude::TractError::msg("Resize is not registered"))?;
    if ctx.onnx_operator_set_version >= 10 {
        return resize(ctx, node);
    }
    let ctx10 = tract_onnx::model::ParsingContext {
        onnx_operator_set_version: 10,
        framework: ctx.framework,
        model: ctx.model,
        parent_graphs: ctx.parent_graphs.clone(),
        model_dir: ctx.model_dir,
        template: ctx.template.clone(),
    };
    resize(&ctx10, node)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn element_counts_refuse_negative_dims_and_overflow() {
        let mut t = f32_tensor("t", &[2, 3], &[0.0; 6]);
        assert_eq!(element_count(&t).unwrap(), 6);
        t.dims = vec![2, -3];
        assert!(element_count(&t).unwrap_err().to_string().contains("negative dimension -3"));
        t.dims = vec![1 << 40, 1 << 40];
        assert!(matches!(element_count(&t), Err(Error::Limit { .. })));
        // ONNX TensorProto.DataType: FLOAT 4 bytes, FLOAT16 2, INT64 8, STRING none.
        assert_eq!(
            (elem_size(dt::FLOAT), elem_size(dt::FLOAT16), elem_size(dt::INT64), elem_size(8)),
            (Some(4), Some(2), Some(8), None)
        );
    }

    #[test]
    fn float16_reads_by_ieee_754_binary16() {
        // 0x3C00 is 1.0, 0xC000 is -2.0, 0x7BFF is 65504 (the largest finite), 0x0001 is 2^-24.
        let raw: Vec<u8> = [0x3C00u16, 0xC000, 0x7BFF, 0x0001].iter().flat_map(|h| h.to_le_bytes()).collect();
        let t =
            pb::TensorProto { dims: vec![4], data_type: dt::FLOAT16, raw_data: raw, ..Default::default() };
        assert_eq!(read_f32(&t).unwrap(), vec![1.0, -2.0, 65504.0, 2f32.powi(-24)]);
        let short = pb::TensorProto { dims: vec![5], ..t };
        assert!(read_f32(&short).is_err(), "4 values for shape [5]");
    }

    #[test]
    fn fresh_names_and_pruning() {
        let mut g = pb::GraphProto {
            node: vec![pb::NodeProto {
                op_type: "Relu".into(),
                input: vec!["w".into()],
                output: vec!["y".into()],
                ..Default::default()
            }],
            initializer: vec![f32_tensor("w", &[1], &[1.0]), f32_tensor("unused", &[1], &[2.0])],
            input: vec![pb::ValueInfoProto { name: "unused".into(), ..Default::default() }],
            output: vec![pb::ValueInfoProto { name: "y".into(), ..Default::default() }],
            ..Default::default()
        };
        let mut names = Names::of(&g);
        assert_eq!(names.fresh("w"), "w_2");
        assert_eq!(names.fresh("w"), "w_3");
        assert_eq!(names.fresh("z"), "z");
        assert_eq!(prune_constants(&mut g), 1);
        assert_eq!(g.initializer.len(), 1);
        assert!(g.input.is_empty(), "the unused initializer's input listing goes with it");
        assert_eq!(constants(&g).keys().copied().collect::<Vec<_>>(), vec!["w"]);
    }
}
