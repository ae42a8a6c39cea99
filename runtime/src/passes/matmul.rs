//! `matmul-vectors`: `MatMul` with a 1-D operand computed at run time, written so that tract
//! (whose MatMul wants matrices) computes what numpy.matmul does, which the ONNX specification
//! adopts: a 1-D first operand is a row whose axis the result drops, a 1-D second operand a
//! column whose axis the result drops. So `a` of shape `[k]` becomes `[1, k]` and the result
//! loses axis -2; `b` of shape `[k]` becomes `[k, 1]` and the result loses axis -1. Which operands
//! are vectors is read from constants, the graph's declared shapes, or tract's shape analysis of
//! the graph as exported. Constant products are folded instead (`fold-constants`).

use super::*;
use crate::guard::guard;
use tract_onnx::prelude::*;
use tract_onnx::tract_hir::infer::Factoid;

/// The rank of every value tract's analysis can tell, by ONNX value name.
pub(super) fn analysed_ranks(model: &pb::ModelProto) -> HashMap<String, usize> {
    let framework = crate::onnx::framework();
    let Ok(parsed) = guard("parse the graph for its ranks", || framework.parse(model, None)) else {
        return HashMap::new();
    };
    let mut m = parsed.model;
    // Errors in the analysis leave some facts unknown; what it did learn still holds.
    let _ = guard("analyse the graph's shapes", || m.analyse(true));
    parsed
        .outlets_by_name
        .iter()
        .filter_map(|(name, outlet)| {
            let fact = m.outlet_fact(*outlet).ok()?;
            let rank = fact.shape.rank().concretize()?;
            usize::try_from(rank).ok().map(|r| (name.clone(), r))
        })
        .collect()
}

/// Whether a graph has a MatMul whose operand rank the graph itself does not state (then
/// [`analysed_ranks`] is worth its parse).
pub(super) fn needs_analysis(g: &pb::GraphProto) -> bool {
    let consts = onnx::constants(g);
    let shapes = value_shapes(g);
    g.node
        .iter()
        .filter(|n| n.op_type == "MatMul")
        .any(|n| n.input.iter().take(2).any(|i| !consts.contains_key(i.as_str()) && !shapes.contains_key(i)))
}

pub(super) fn matmul_vectors(
    g: &mut pb::GraphProto,
    opset: i64,
    analysed: &HashMap<String, usize>,
) -> Result<Vec<String>> {
    let mut changes = vec![];
    let mut names = Names::of(g);
    let (plans, mut initializers) = {
        let consts = onnx::constants(g);
        let shapes = value_shapes(g);
        let rank = |name: &str| -> Option<usize> {
            consts
                .get(name)
                .map(|t| t.dims.len())
                .or_else(|| shapes.get(name).map(Vec::len))
                .or_else(|| analysed.get(name).copied())
        };
        let mut plans = vec![];
        for (i, n) in g.node.iter().enumerate() {
            if n.op_type != "MatMul" || n.input.len() != 2 || n.output.len() != 1 {
                continue;
            }
            let (a, b) = (rank(&n.input[0]), rank(&n.input[1]));
            let both_constant = n.input.iter().all(|x| consts.contains_key(x.as_str()));
            if both_constant || (a != Some(1) && b != Some(1)) {
                continue;
            }
            plans.push((i, a == Some(1), b == Some(1)));
        }
        (plans, Vec::<pb::TensorProto>::new())
    };
    // Rewrite from the last node back, so earlier indices stay valid.
    for (i, a_vec, b_vec) in plans.into_iter().rev() {
        let n = g.node[i].clone();
        let base = if n.name.is_empty() { n.output[0].clone() } else { n.name.clone() };
        let mut new_nodes = vec![];
        let axes_node =
            |op: &str, x: &str, axes: &[i64], names: &mut Names, inits: &mut Vec<pb::TensorProto>| {
                let out = names.fresh(&format!("{base}_{}", op.to_lowercase()));
                let mut node = pb::NodeProto {
                    name: out.clone(),
                    op_type: op.into(),
                    input: vec![x.to_string()],
                    output: vec![out.clone()],
                    ..Default::default()
                };
                if opset >= 13 {
                    let t = names.fresh(&format!("{base}_axes"));
                    inits.push(onnx::i64_tensor(&t, &[axes.len() as i64], axes));
                    node.input.push(t);
                } else {
                    node.attribute.push(pb::AttributeProto {
                        name: "axes".into(),
                        r#type: 7,
                        ints: axes.to_vec(),
                        ..Default::default()
                    });
                }
                (node, out)
            };
        let mut a = n.input[0].clone();
        let mut b = n.input[1].clone();
        if a_vec {
            let (node, out) = axes_node("Unsqueeze", &a, &[0], &mut names, &mut initializers);
            new_nodes.push(node);
            a = out;
        }
        if b_vec {
            let (node, out) = axes_node("Unsqueeze", &b, &[1], &mut names, &mut initializers);
            new_nodes.push(node);
            b = out;
        }
        let product = names.fresh(&format!("{base}_matrix"));
        let mut matmul = n.clone();
        matmul.input = vec![a, b];
        matmul.output = vec![product.clone()];
        new_nodes.push(matmul);
        let drop: Vec<i64> = match (a_vec, b_vec) {
            (true, true) => vec![-2, -1],
            (true, false) => vec![-2],
            _ => vec![-1],
        };
        let (mut squeeze, _) = axes_node("Squeeze", &product, &drop, &mut names, &mut initializers);
        squeeze.output = vec![n.output[0].clone()];
        new_nodes.push(squeeze);
        g.node.splice(i..=i, new_nodes);
        changes.push(format!(
            "MatMul `{}` of a {} written with matrices (numpy.matmul semantics)",
            n.name,
            match (a_vec, b_vec) {
                (true, true) => "vector by a vector",
                (true, false) => "vector by a matrix",
                _ => "matrix by a vector",
            }
        ));
    }
    g.initializer.append(&mut initializers);
    Ok(changes)
}
