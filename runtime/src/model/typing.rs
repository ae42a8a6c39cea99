//! tract parsing and typing with the discovered inputs, and the multiply-accumulate count.

use super::*;

pub(super) type Built = (TypedModel, BatchAxis, Vec<InputRole>, usize, Vec<TDim>, Option<u64>);

/// Parses with tract, fixes the input facts from the discovered inputs, and types the model.
pub(super) fn build_typed(proto: &pb::ModelProto, found: &signature::FoundInputs) -> Result<Built> {
    let onnx = crate::onnx::framework().with_ignore_output_shapes(true).with_ignore_value_info(true);
    check_before_tract(proto)?;
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
    // Shapes first, in tract's inference form, where a dimension is a symbolic integer that can
    // go negative without harm: a negative or huge one (a padding larger than the picture, a
    // hostile Reshape) is named here, because typing turns it into an assertion inside tract.
    guard("analyse the model's shapes", || model.analyse(false))?;
    check_dimensions(&model)?;
    check_transposed_convolutions(proto, &model)?;
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

/// Every dimension tract's shape analysis could settle is between 0 and [`super::MAX_DIM`].
fn check_dimensions(model: &InferenceModel) -> Result<()> {
    use tract_onnx::tract_hir::infer::Factoid;
    for node in model.nodes() {
        for (slot, output) in node.outputs.iter().enumerate() {
            let Some(dims) = output.fact.shape.concretize() else { continue };
            for d in dims.iter() {
                let Ok(v) = d.to_i64() else { continue };
                if !(0..=super::MAX_DIM).contains(&v) {
                    return Err(Error::Graph {
                        reason: format!(
                            "node `{}` ({}) would make output {slot} of shape {:?}: a dimension of {v}, \
                             outside 0 to {}; its attributes or shape inputs do not fit its input",
                            node.name,
                            node.op.name(),
                            dims,
                            super::MAX_DIM
                        ),
                    });
                }
            }
        }
    }
    Ok(())
}

/// Each ConvTranspose makes an output of at least one pixel a side (and, given `output_shape`,
/// one its padding can reach),
/// by the ONNX operator specification's formula: `stride (in - 1) + output_padding +
/// (kernel - 1) dilation + 1 - pad_begin - pad_end`, with `in` from tract's shape analysis.
fn check_transposed_convolutions(proto: &pb::ModelProto, model: &InferenceModel) -> Result<()> {
    use tract_onnx::tract_hir::infer::Factoid;
    let Some(graph) = proto.graph.as_ref() else { return Ok(()) };
    let consts = crate::onnx::constants(graph);
    for n in graph.node.iter().filter(|n| n.op_type == "ConvTranspose") {
        let auto_pad = crate::onnx::attr(n, "auto_pad").map(|a| String::from_utf8_lossy(&a.s).into_owned());
        if auto_pad.is_some_and(|p| p != "NOTSET" && !p.is_empty()) {
            continue;
        }
        let output_shape = crate::onnx::attr_ints(n, "output_shape");
        let Some(w) = n.input.get(1).and_then(|w| consts.get(w.as_str())) else { continue };
        let Ok(node) = model.node_by_name(&n.name) else { continue };
        let Some(input) = node.inputs.first() else { continue };
        let Ok(fact) = model.outlet_fact(*input) else { continue };
        let Some(shape) = fact.shape.concretize() else { continue };
        let rank = w.dims.len().saturating_sub(2);
        if shape.len() != rank + 2 {
            continue;
        }
        let ints = |name: &str, default: i64, len: usize| {
            crate::onnx::attr_ints(n, name).filter(|v| v.len() == len).unwrap_or_else(|| vec![default; len])
        };
        let (strides, dilations, pads, adjust) = (
            ints("strides", 1, rank),
            ints("dilations", 1, rank),
            ints("pads", 0, 2 * rank),
            ints("output_padding", 0, rank),
        );
        for axis in 0..rank {
            let Ok(input) = shape[axis + 2].to_i64() else { continue };
            let field = (w.dims[axis + 2] - 1).saturating_mul(dilations[axis]).saturating_add(1);
            let out = strides[axis]
                .saturating_mul(input - 1)
                .saturating_add(adjust[axis])
                .saturating_add(field)
                .saturating_sub(pads[axis])
                .saturating_sub(pads[axis + rank]);
            if let Some(&wanted) = output_shape.as_ref().and_then(|o| o.get(axis)) {
                // With output_shape, tract derives the output padding from it:
                // output_shape + pads - stride (in - 1) - window, which must not be negative.
                let needed = strides[axis].saturating_mul(input - 1).saturating_add(field);
                if wanted.saturating_add(pads[axis]).saturating_add(pads[axis + rank]) < needed {
                    return Err(Error::Attribute {
                        node: n.name.clone(),
                        op_type: n.op_type.clone(),
                        attribute: "output_shape".into(),
                        reason: format!(
                            "asks for {wanted} on spatial axis {axis}, fewer than the {needed} pixels \
                             stride {} (in - 1) + window {field} makes of an input of {input} (less the pads {:?})",
                            strides[axis], pads
                        ),
                    });
                }
                continue;
            }
            if out < 1 {
                return Err(Error::Attribute {
                    node: n.name.clone(),
                    op_type: n.op_type.clone(),
                    attribute: "pads".into(),
                    reason: format!(
                        "is {pads:?}, which leaves spatial axis {axis} {out} pixels for an input of {input} \
                         (stride {} (in - 1) + output_padding {} + window {field} - pads); expected at least 1",
                        strides[axis], adjust[axis]
                    ),
                });
            }
        }
    }
    Ok(())
}

/// A product that is `None` on overflow (a hostile shape), so the count is unknown rather than
/// wrong or a panic.
fn mul(v: &[u64]) -> Option<u64> {
    v.iter().try_fold(1u64, |a, &b| a.checked_mul(b))
}

fn vol(dims: &[u64]) -> Option<u64> {
    mul(dims)
}

pub(super) fn count_macs(proto: &pb::ModelProto, typed: &TypedModel, batch: &BatchAxis) -> Option<u64> {
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
                mul(&[vol(y.get(1..)?)?, vol(w.get(1..)?)?])?
            }
            "ConvTranspose" => {
                // Each input element meets C_out/group * kH * kW weights.
                let x = shape_of(n.input.first()?)?;
                let w = shape_of(n.input.get(1)?)?;
                mul(&[vol(x.get(1..)?)?, vol(w.get(1..)?)?])?
            }
            "Gemm" | "MatMul" => {
                let a = shape_of(n.input.first()?)?;
                let y = shape_of(n.output.first()?)?;
                let k = if n.op_type == "Gemm" && n.attribute.iter().any(|a| a.name == "transA" && a.i == 1) {
                    *a.first()?
                } else {
                    *a.last()?
                };
                mul(&[vol(y.get(1..)?)?, k])?
            }
            _ => 0,
        };
        total = total.checked_add(macs)?;
    }
    Some(total)
}
