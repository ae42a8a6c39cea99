//! `fold-constants`: nodes whose inputs are all constant, evaluated into initializers.

use super::evaluate::evaluate;
use super::*;
use std::collections::HashSet;

/// The element count of a shape: `None` for a negative dimension (a bad or unresolved shape)
/// or an overflow, so a hostile shape value leaves the node to the attribute checks.
fn volume(dims: &[i64]) -> Option<i64> {
    dims.iter().try_fold(1i64, |acc, &d| if d < 0 { None } else { acc.checked_mul(d) })
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
                        let rest: Vec<i64> = target.iter().copied().filter(|&d| d != -1).collect();
                        let Some(known) = volume(&rest) else { return Ok(None) };
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
            if volume(&dims) != Some(onnx::numel(first) as i64) {
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

pub(super) fn fold_constants(
    g: &mut pb::GraphProto,
    opsets: &[pb::OperatorSetIdProto],
) -> Result<Vec<String>> {
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
    // Every node whose inputs are all constant, in graph order, until nothing more folds: by
    // genloom's own evaluator where it covers the node, else by tract on the node alone.
    let mut failed: HashSet<usize> = HashSet::new();
    loop {
        let mut folded: HashMap<String, pb::TensorProto> = HashMap::new();
        let mut done: Vec<usize> = vec![];
        {
            let consts = onnx::constants(g);
            for (i, n) in g.node.iter().enumerate() {
                if failed.contains(&i)
                    || n.input.is_empty()
                    || n.output.is_empty()
                    || n.output.iter().any(|o| is_graph_io(g, o))
                {
                    continue;
                }
                let out = {
                    let inputs: Vec<Option<&pb::TensorProto>> = n
                        .input
                        .iter()
                        .map(|s| {
                            if s.is_empty() {
                                None
                            } else {
                                folded.get(s).or_else(|| consts.get(s.as_str()).copied())
                            }
                        })
                        .collect();
                    let all_const = n.input.iter().zip(&inputs).all(|(s, t)| s.is_empty() || t.is_some());
                    if !all_const {
                        continue;
                    }
                    let own =
                        if n.output.len() == 1 { eval_const(n, &inputs)?.map(|t| vec![t]) } else { None };
                    match own {
                        Some(t) => Some(t),
                        None => evaluate(n, &inputs, opsets)?,
                    }
                };
                let Some(out) = out else {
                    failed.insert(i);
                    continue;
                };
                let shapes: Vec<Vec<i64>> = out.iter().map(|t| t.dims.clone()).collect();
                let shapes =
                    if shapes.len() == 1 { format!("{:?}", shapes[0]) } else { format!("{shapes:?}") };
                changes.push(format!("{} `{}` evaluated into a {shapes} constant", n.op_type, n.name));
                for t in out {
                    folded.insert(t.name.clone(), t);
                }
                done.push(i);
            }
        }
        if done.is_empty() {
            break;
        }
        // Indices shift as nodes go: forget the failures (few) and retry them once more.
        failed.clear();
        for &i in done.iter().rev() {
            g.node.remove(i);
        }
        g.initializer.extend(folded.into_values());
    }
    Ok(changes)
}
