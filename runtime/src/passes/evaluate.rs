//! Evaluating one constant node of any operator: `MatMul` of vectors here (numpy.matmul
//! semantics, which the ONNX specification adopts and which tract's MatMul does not cover when
//! both operands are 1-D), everything else by running the node alone in tract, inside the panic
//! guard. What a node would grow to is bounded first, so a hostile shape cannot allocate without
//! limit.

use super::*;
use crate::guard::guard;
use tract_onnx::prelude::*;

/// The most elements a folded constant may hold: 64 Mi (256 MiB of f32). Larger results stay in
/// the graph, for tract to compute (or refuse) under the generator's own limits.
pub(super) const MAX_FOLDED_ELEMENTS: u64 = 64 << 20;

/// Operators never folded: they draw random numbers, hold subgraphs, or read state.
const NEVER: &[&str] = &[
    "RandomNormal",
    "RandomUniform",
    "RandomNormalLike",
    "RandomUniformLike",
    "Multinomial",
    "Bernoulli",
    "If",
    "Loop",
    "Scan",
    "Constant",
];

/// Operators whose output can be far larger than their inputs, folded only when a bound from
/// their constant inputs is computed here (the rest stay for tract).
fn growth_bound(n: &pb::NodeProto, inputs: &[Option<&pb::TensorProto>]) -> Option<u64> {
    let values = |i: usize| inputs.get(i).copied().flatten().and_then(|t| onnx::read_i64(t).ok());
    let volume = |dims: &[i64]| -> Option<u64> {
        dims.iter().try_fold(1u64, |acc, &d| u64::try_from(d).ok().and_then(|d| acc.checked_mul(d)))
    };
    match n.op_type.as_str() {
        "ConstantOfShape" => volume(&values(0)?),
        "Expand" => {
            let x = inputs.first().copied().flatten()?;
            let shape = values(1)?;
            let rank = x.dims.len().max(shape.len());
            let pad = |v: &[i64]| -> Vec<i64> {
                std::iter::repeat_n(1, rank - v.len()).chain(v.iter().copied()).collect()
            };
            let (a, b) = (pad(&x.dims), pad(&shape));
            volume(&a.iter().zip(&b).map(|(&p, &q)| p.max(q)).collect::<Vec<_>>())
        }
        "Tile" => {
            let x = inputs.first().copied().flatten()?;
            let reps = values(1)?;
            (reps.len() == x.dims.len()).then_some(())?;
            volume(&x.dims.iter().zip(&reps).map(|(&d, &r)| d.saturating_mul(r)).collect::<Vec<_>>())
        }
        "Range" | "Resize" | "Upsample" | "Pad" | "OneHot" | "EyeLike" => None,
        // Elementwise broadcasting, reductions, MatMul and the rest: at most the product of
        // the largest extent on each axis.
        _ => {
            let rank = inputs.iter().flatten().map(|t| t.dims.len()).max().unwrap_or(0);
            let mut extent = vec![1i64; rank];
            for t in inputs.iter().flatten() {
                for (i, &d) in t.dims.iter().rev().enumerate() {
                    let e = &mut extent[rank - 1 - i];
                    *e = (*e).max(d);
                }
            }
            let total: u64 = inputs.iter().flatten().map(|t| onnx::numel(t) as u64).sum();
            Some(volume(&extent)?.max(total))
        }
    }
}

/// Evaluates a constant node that [`super::fold`]'s own evaluator does not cover. `Ok(None)`
/// leaves it in the graph: not foldable, too large, or not evaluable by tract alone.
pub(super) fn evaluate(
    n: &pb::NodeProto,
    inputs: &[Option<&pb::TensorProto>],
    opsets: &[pb::OperatorSetIdProto],
) -> Result<Option<Vec<pb::TensorProto>>> {
    if NEVER.contains(&n.op_type.as_str())
        || n.attribute.iter().any(|a| a.g.is_some() || !a.graphs.is_empty())
    {
        return Ok(None);
    }
    if !n.domain.is_empty() && n.domain != "ai.onnx" {
        return Ok(None);
    }
    // A transposed convolution's output size depends on attributes tract does not check against
    // its input: left for the load's shape checks, which name the node.
    if n.op_type == "ConvTranspose" {
        return Ok(None);
    }
    match growth_bound(n, inputs) {
        Some(b) if b <= MAX_FOLDED_ELEMENTS => {}
        _ => return Ok(None),
    }
    if n.op_type == "MatMul" {
        if let Some(t) = matmul_vectors(n, inputs)? {
            return Ok(Some(vec![t]));
        }
    }
    // The node alone, its constant inputs as initializers, every output declared.
    let mut initializer = vec![];
    for (name, t) in n.input.iter().zip(inputs) {
        if let Some(t) = t {
            if !initializer.iter().any(|i: &pb::TensorProto| &i.name == name) {
                initializer.push(pb::TensorProto { name: name.clone(), ..(*t).clone() });
            }
        }
    }
    let outputs: Vec<String> = n.output.iter().filter(|o| !o.is_empty()).cloned().collect();
    let graph = pb::GraphProto {
        node: vec![n.clone()],
        initializer,
        output: outputs
            .iter()
            .map(|o| pb::ValueInfoProto { name: o.clone(), ..Default::default() })
            .collect(),
        ..Default::default()
    };
    // It must meet the attribute rules before tract sees it (tract trusts them).
    if crate::rules::check_attributes(&graph).is_err() {
        return Ok(None);
    }
    let proto = pb::ModelProto {
        ir_version: 8,
        opset_import: opsets.to_vec(),
        graph: Some(graph),
        ..Default::default()
    };
    let framework = onnx::framework().with_ignore_output_shapes(true).with_ignore_value_info(true);
    let run = guard("evaluate a constant node", || {
        let model = framework.model_for_proto_model(&proto)?.into_typed()?.into_runnable()?;
        model.run(tvec![])
    });
    let Ok(values) = run else { return Ok(None) };
    let mut out = vec![];
    for (name, v) in outputs.iter().zip(values.iter()) {
        match to_proto(name, v) {
            Some(t) if onnx::numel(&t) as u64 <= MAX_FOLDED_ELEMENTS => out.push(t),
            _ => return Ok(None),
        }
    }
    Ok((out.len() == outputs.len()).then_some(out))
}

/// A tract tensor as an ONNX initializer, for the element types a weight subgraph yields.
fn to_proto(name: &str, v: &Tensor) -> Option<pb::TensorProto> {
    let data_type = match v.datum_type() {
        DatumType::F32 => dt::FLOAT,
        DatumType::F64 => dt::DOUBLE,
        DatumType::F16 => dt::FLOAT16,
        DatumType::I64 => dt::INT64,
        DatumType::I32 => dt::INT32,
        DatumType::I8 => dt::INT8,
        DatumType::U8 => dt::UINT8,
        DatumType::Bool => dt::BOOL,
        _ => return None,
    };
    Some(pb::TensorProto {
        name: name.to_string(),
        dims: v.shape().iter().map(|&d| d as i64).collect(),
        data_type,
        raw_data: v.as_bytes().to_vec(),
        ..Default::default()
    })
}

/// `MatMul` of float constants where an operand is a vector, by numpy.matmul's rules: a 1-D
/// first operand is a row (its axis dropped from the result), a 1-D second operand a column.
/// Sums run in f64 and round once.
fn matmul_vectors(n: &pb::NodeProto, inputs: &[Option<&pb::TensorProto>]) -> Result<Option<pb::TensorProto>> {
    let (Some(Some(a)), Some(Some(b))) = (inputs.first(), inputs.get(1)) else { return Ok(None) };
    let (ra, rb) = (a.dims.len(), b.dims.len());
    if !(ra == 1 || rb == 1) || ra > 2 || rb > 2 || ![a, b].iter().all(|t| t.data_type == dt::FLOAT) {
        return Ok(None);
    }
    let (m, k) = if ra == 1 { (1, a.dims[0]) } else { (a.dims[0], a.dims[1]) };
    let (k2, p) = if rb == 1 { (b.dims[0], 1) } else { (b.dims[0], b.dims[1]) };
    if k != k2 {
        return Err(Error::Graph {
            reason: format!(
                "MatMul `{}` multiplies shapes {:?} and {:?}, whose inner sizes differ",
                n.name, a.dims, b.dims
            ),
        });
    }
    let (av, bv) = (onnx::read_f32(a)?, onnx::read_f32(b)?);
    let (m, k, p) = (m as usize, k as usize, p as usize);
    let mut out = Vec::with_capacity(m * p);
    for i in 0..m {
        for j in 0..p {
            let s: f64 = (0..k).map(|l| f64::from(av[i * k + l]) * f64::from(bv[l * p + j])).sum();
            out.push(s as f32);
        }
    }
    let mut dims = vec![];
    if ra == 2 {
        dims.push(m as i64);
    }
    if rb == 2 {
        dims.push(p as i64);
    }
    Ok(Some(onnx::f32_tensor(&n.output[0], &dims, &out)))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn node(op: &str, inputs: &[&str], outputs: &[&str]) -> pb::NodeProto {
        pb::NodeProto {
            name: "n".into(),
            op_type: op.into(),
            input: inputs.iter().map(|s| s.to_string()).collect(),
            output: outputs.iter().map(|s| s.to_string()).collect(),
            ..Default::default()
        }
    }

    fn opset() -> Vec<pb::OperatorSetIdProto> {
        vec![pb::OperatorSetIdProto { domain: String::new(), version: 17 }]
    }

    #[test]
    fn vectors_multiply_as_numpy_matmul_does() {
        // numpy.matmul([1, 2, 3], [4, 5, 6]) == 32, a 0-D result.
        let a = onnx::f32_tensor("a", &[3], &[1.0, 2.0, 3.0]);
        let b = onnx::f32_tensor("b", &[3], &[4.0, 5.0, 6.0]);
        let t =
            evaluate(&node("MatMul", &["a", "b"], &["y"]), &[Some(&a), Some(&b)], &opset()).unwrap().unwrap();
        assert_eq!((t[0].dims.clone(), onnx::read_f32(&t[0]).unwrap()), (vec![], vec![32.0]));
        // numpy.matmul([[1, 2, 3], [0, 1, 0]], [4, 5, 6]) == [32, 5], shape (2,).
        let m = onnx::f32_tensor("m", &[2, 3], &[1.0, 2.0, 3.0, 0.0, 1.0, 0.0]);
        let t =
            evaluate(&node("MatMul", &["m", "b"], &["y"]), &[Some(&m), Some(&b)], &opset()).unwrap().unwrap();
        assert_eq!((t[0].dims.clone(), onnx::read_f32(&t[0]).unwrap()), (vec![2], vec![32.0, 5.0]));
        // numpy.matmul([1, 2], [[1, 2, 3], [0, 1, 0]]) == [1, 4, 3], shape (3,).
        let v = onnx::f32_tensor("v", &[2], &[1.0, 2.0]);
        let t =
            evaluate(&node("MatMul", &["v", "m"], &["y"]), &[Some(&v), Some(&m)], &opset()).unwrap().unwrap();
        assert_eq!((t[0].dims.clone(), onnx::read_f32(&t[0]).unwrap()), (vec![3], vec![1.0, 4.0, 3.0]));
        let bad = onnx::f32_tensor("c", &[2], &[1.0, 2.0]);
        assert!(evaluate(&node("MatMul", &["a", "c"], &["y"]), &[Some(&a), Some(&bad)], &opset()).is_err());
    }

    #[test]
    fn other_operators_run_in_tract() {
        // ReduceL2 over [3, 4] is 5 (the spectral-norm power iteration normalises this way).
        let x = onnx::f32_tensor("x", &[2], &[3.0, 4.0]);
        let mut n = node("ReduceL2", &["x"], &["y"]);
        n.attribute.push(pb::AttributeProto {
            name: "keepdims".into(),
            r#type: 2,
            i: 0,
            ..Default::default()
        });
        let t = evaluate(&n, &[Some(&x)], &opset()).unwrap().unwrap();
        assert_eq!(onnx::read_f32(&t[0]).unwrap(), vec![5.0]);
        let s = onnx::f32_tensor("s", &[2], &[2.0, 8.0]);
        let t =
            evaluate(&node("Div", &["x", "s"], &["y"]), &[Some(&x), Some(&s)], &opset()).unwrap().unwrap();
        assert_eq!(onnx::read_f32(&t[0]).unwrap(), vec![1.5, 0.5]);
    }

    #[test]
    fn random_and_unbounded_nodes_stay() {
        assert!(evaluate(&node("RandomNormal", &[], &["y"]), &[], &opset()).unwrap().is_none());
        let shape = onnx::i64_tensor("s", &[3], &[1 << 20, 1 << 20, 4]);
        assert!(evaluate(&node("ConstantOfShape", &["s"], &["y"]), &[Some(&shape)], &opset())
            .unwrap()
            .is_none());
        let small = onnx::i64_tensor("s", &[2], &[2, 3]);
        let t =
            evaluate(&node("ConstantOfShape", &["s"], &["y"]), &[Some(&small)], &opset()).unwrap().unwrap();
        assert_eq!(t[0].dims, vec![2, 3]);
    }
}
