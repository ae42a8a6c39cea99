//! `upsample-to-resize` and `resize-modes`: the resampling operators in the form tract runs.
//!
//! `Upsample` (opsets 7 to 9; deprecated in 10) scales each axis by a factor, in `nearest` or
//! `linear` mode, with asymmetric coordinates: output index `x` reads input coordinate `x / s`
//! (ONNX operator specification, Upsample and Resize-10, which replaced it with the same
//! semantics). PyTorch wrote it for `nn.Upsample` and `F.interpolate` in opset-9 exports. It
//! becomes a `Resize` with `coordinate_transformation_mode = "asymmetric"` and, for nearest,
//! `nearest_mode = "floor"` (the index `floor(x / s)`); opset 7 and 8 keep the scales in an
//! attribute, which becomes an initializer.
//!
//! `Resize` nodes that do not interpolate by nearest neighbour get `nearest_mode = "floor"`
//! when they state none: the ONNX default (`round_prefer_floor`) is one tract's parser refuses
//! although such a node never reads it, so the rewrite is exact.

use super::*;

/// The text attribute `name` = `value`.
fn text_attr(name: &str, value: &str) -> pb::AttributeProto {
    pb::AttributeProto { name: name.into(), r#type: 3, s: value.as_bytes().to_vec(), ..Default::default() }
}

fn text(n: &pb::NodeProto, name: &str) -> Option<String> {
    onnx::attr(n, name).map(|a| String::from_utf8_lossy(&a.s).into_owned())
}

fn set_text(n: &mut pb::NodeProto, name: &str, value: &str) {
    n.attribute.retain(|a| a.name != name);
    n.attribute.push(text_attr(name, value));
}

pub(super) fn upsample_to_resize(g: &mut pb::GraphProto, opset: i64) -> Result<Vec<String>> {
    let mut changes = vec![];
    let mut names = Names::of(g);
    for i in 0..g.node.len() {
        if g.node[i].op_type != "Upsample" || !(g.node[i].domain.is_empty() || g.node[i].domain == "ai.onnx")
        {
            continue;
        }
        let n = &g.node[i];
        let Some(x) = n.input.first().cloned() else { continue };
        let mode = text(n, "mode").unwrap_or_else(|| "nearest".into());
        if !matches!(mode.as_str(), "nearest" | "linear") {
            continue; // named by the attribute check, before tract
        }
        let scales = match (n.input.get(1).filter(|s| !s.is_empty()), onnx::attr(n, "scales")) {
            (Some(s), _) => s.clone(),
            (None, Some(a)) if !a.floats.is_empty() => {
                let name =
                    names.fresh(&format!("{}_scales", if n.name.is_empty() { "upsample" } else { &n.name }));
                let t = onnx::f32_tensor(&name, &[a.floats.len() as i64], &a.floats);
                g.initializer.push(t);
                name
            }
            _ => continue,
        };
        let n = &mut g.node[i];
        n.op_type = "Resize".into();
        // Resize-10 reads (X, scales); from opset 11 on, (X, roi, scales).
        n.input = if opset >= 11 { vec![x, String::new(), scales] } else { vec![x, scales] };
        n.attribute.retain(|a| a.name == "mode");
        set_text(n, "mode", &mode);
        set_text(n, "coordinate_transformation_mode", "asymmetric");
        set_text(n, "nearest_mode", "floor");
        changes.push(format!("Upsample `{}` ({mode}) written as Resize with asymmetric coordinates", n.name));
    }
    Ok(changes)
}

pub(super) fn resize_modes(g: &mut pb::GraphProto) -> Result<Vec<String>> {
    let mut changes = vec![];
    for n in g.node.iter_mut().filter(|n| n.op_type == "Resize") {
        let mode = text(n, "mode").unwrap_or_else(|| "nearest".into());
        if mode != "nearest" && onnx::attr(n, "nearest_mode").is_none() {
            set_text(n, "nearest_mode", "floor");
            changes.push(format!("Resize `{}` ({mode}) given the unused nearest_mode \"floor\"", n.name));
        }
    }
    Ok(changes)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn upsample(inputs: &[&str], attrs: Vec<pb::AttributeProto>) -> pb::GraphProto {
        pb::GraphProto {
            node: vec![pb::NodeProto {
                name: "up".into(),
                op_type: "Upsample".into(),
                input: inputs.iter().map(|s| s.to_string()).collect(),
                output: vec!["y".into()],
                attribute: attrs,
                ..Default::default()
            }],
            initializer: vec![onnx::f32_tensor("s", &[4], &[1.0, 1.0, 2.0, 2.0])],
            ..Default::default()
        }
    }

    #[test]
    fn opset9_upsample_becomes_resize10() {
        let mut g = upsample(&["x", "s"], vec![text_attr("mode", "linear")]);
        let changes = upsample_to_resize(&mut g, 9).unwrap();
        assert_eq!(changes.len(), 1);
        let n = &g.node[0];
        assert_eq!((n.op_type.as_str(), n.input.clone()), ("Resize", vec!["x".to_string(), "s".to_string()]));
        assert_eq!(text(n, "mode").as_deref(), Some("linear"));
        assert_eq!(text(n, "coordinate_transformation_mode").as_deref(), Some("asymmetric"));
        assert_eq!(text(n, "nearest_mode").as_deref(), Some("floor"));
    }

    #[test]
    fn opset7_scales_attribute_becomes_an_initializer() {
        let scales = pb::AttributeProto {
            name: "scales".into(),
            r#type: 6,
            floats: vec![1.0, 1.0, 3.0, 3.0],
            ..Default::default()
        };
        let mut g = upsample(&["x"], vec![scales]);
        upsample_to_resize(&mut g, 7).unwrap();
        let n = &g.node[0];
        assert_eq!(n.input.len(), 2);
        let t = g.initializer.iter().find(|t| t.name == n.input[1]).expect("the scales initializer");
        assert_eq!(onnx::read_f32(t).unwrap(), vec![1.0, 1.0, 3.0, 3.0]);
        assert!(onnx::attr(n, "scales").is_none());
        assert_eq!(text(n, "mode").as_deref(), Some("nearest"), "nearest is Upsample's default");
    }

    #[test]
    fn opset11_form_has_an_empty_roi_and_other_modes_are_left() {
        let mut g = upsample(&["x", "s"], vec![]);
        upsample_to_resize(&mut g, 11).unwrap();
        assert_eq!(g.node[0].input, vec!["x".to_string(), String::new(), "s".to_string()]);
        let mut g = upsample(&["x", "s"], vec![text_attr("mode", "cubic")]);
        assert!(upsample_to_resize(&mut g, 9).unwrap().is_empty());
        assert_eq!(g.node[0].op_type, "Upsample");
    }

    #[test]
    fn resize_modes_touches_only_non_nearest_nodes_without_a_rounding() {
        let mut g = upsample(&["x", "s"], vec![]);
        g.node[0].op_type = "Resize".into();
        let mut linear = g.node[0].clone();
        linear.attribute = vec![text_attr("mode", "linear")];
        let mut stated = linear.clone();
        stated.attribute.push(text_attr("nearest_mode", "round_prefer_ceil"));
        g.node = vec![g.node[0].clone(), linear, stated];
        let changes = resize_modes(&mut g).unwrap();
        assert_eq!(changes.len(), 1);
        assert!(onnx::attr(&g.node[0], "nearest_mode").is_none(), "nearest keeps its (default) rounding");
        assert_eq!(text(&g.node[1], "nearest_mode").as_deref(), Some("floor"));
        assert_eq!(text(&g.node[2], "nearest_mode").as_deref(), Some("round_prefer_ceil"));
    }
}
