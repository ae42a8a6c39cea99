//! `drop-identity`: Identity, inference-form Dropout and no-op Reshape nodes removed.

use super::*;

pub(super) fn drop_identity(g: &mut pb::GraphProto) -> Result<Vec<String>> {
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
