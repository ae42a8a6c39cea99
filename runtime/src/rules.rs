//! Attribute rules checked before tract sees a node.
//!
//! tract trusts several things the ONNX operator specification requires of a valid model: that a
//! convolution's attribute lists have one entry per spatial axis, that a permutation stays within
//! the rank, that shape values are not negative. A model that breaks them can make tract index
//! past a list or overflow, which is a panic: caught natively by [`super::guard`], but fatal in a
//! build compiled with `panic = "abort"` (the WebAssembly package). So each rule is checked here
//! first, from the ONNX operator specification (onnx.ai/onnx/operators, the pages of `Conv`,
//! `ConvTranspose`, `MaxPool`, `AveragePool`, `Transpose`, `Reshape`, `Expand`, `Tile`,
//! `ConstantOfShape`, `Resize`), and a violation becomes [`Error::Attribute`] naming the node.
//!
//! The same place names attribute values that tract does not implement (a `Resize` mode it lacks),
//! so a user learns which node and what is supported instead of reading tract's parser error.

use crate::error::{Error, Result};
use crate::onnx::{attr, constants, read_f32, read_i64};
use std::collections::HashMap;
use tract_onnx::pb;

/// The largest dimension a shape value may hold: 2^31 - 1. No image generator comes near it, and
/// it keeps tract's products of dimensions inside `i64`.
pub(crate) const MAX_DIM: i64 = i32::MAX as i64;

/// Which `Resize` modes tract 0.23 implements (its `Interpolator::parse`).
const RESIZE_MODES: &[&str] = &["nearest", "linear", "cubic"];
/// Which coordinate transformations tract 0.23 implements (its `CoordTransformer::parse`).
const RESIZE_COORDINATES: &[&str] = &[
    "half_pixel",
    "align_corners",
    "asymmetric",
    "pytorch_half_pixel",
    "half_pixel_symmetric",
    "tf_half_pixel_for_nn",
];
/// Which rounding of nearest neighbours tract 0.23 implements (its `Nearest::parse`).
const RESIZE_NEAREST: &[&str] = &["floor", "round_prefer_ceil"];

/// Checks every node of the graph (not into subgraphs, which tract parses the same way when it
/// reaches them) against the rules of this module.
pub(crate) fn check_attributes(graph: &pb::GraphProto) -> Result<()> {
    let consts = constants(graph);
    for (ix, n) in graph.node.iter().enumerate() {
        let node = || if n.name.is_empty() { format!("#{ix}") } else { n.name.clone() };
        let fail = |attribute: &str, reason: String| Error::Attribute {
            node: node(),
            op_type: n.op_type.clone(),
            attribute: attribute.to_string(),
            reason,
        };
        match n.op_type.as_str() {
            "Conv" | "ConvTranspose" | "ConvInteger" | "MaxPool" | "AveragePool" | "LpPool" => {
                check_window(n, &consts, &fail)?
            }
            "Transpose" => {
                if let Some(a) = attr(n, "perm") {
                    check_permutation(&a.ints).map_err(|r| fail("perm", r))?;
                }
            }
            "Reshape" => check_shape_input(n, 1, -1, &consts).map_err(|r| fail("shape (input 1)", r))?,
            "Expand" => check_shape_input(n, 1, 0, &consts).map_err(|r| fail("shape (input 1)", r))?,
            "Tile" => check_shape_input(n, 1, 0, &consts).map_err(|r| fail("repeats (input 1)", r))?,
            "ConstantOfShape" => {
                check_shape_input(n, 0, 0, &consts).map_err(|r| fail("input (the shape)", r))?
            }
            "Resize" | "Upsample" => check_resize(n, &consts, &fail)?,
            // ONNX Swish is x * sigmoid(alpha x); tract 0.23 builds it as x * sigmoid(x) and
            // never reads alpha (found by the operator conformance run, docs/conformance.md).
            "Swish" => {
                if let Some(a) = attr(n, "alpha").filter(|a| a.f != 1.0) {
                    return Err(fail("alpha", format!("is {}, which genloom cannot run; supported: 1", a.f)));
                }
            }
            _ => {}
        }
    }
    Ok(())
}

/// `perm` must hold each of `0..perm.len()` once.
pub(crate) fn check_permutation(perm: &[i64]) -> std::result::Result<(), String> {
    let mut seen = vec![false; perm.len()];
    for &p in perm {
        match usize::try_from(p).ok().filter(|&p| p < perm.len()) {
            Some(p) if !seen[p] => seen[p] = true,
            _ => {
                return Err(format!(
                    "is {perm:?}; expected each axis 0 to {} exactly once",
                    perm.len().saturating_sub(1)
                ))
            }
        }
    }
    Ok(())
}

/// A constant shape-like input: every value between `min` and [`MAX_DIM`].
fn check_shape_input(
    n: &pb::NodeProto,
    input: usize,
    min: i64,
    consts: &HashMap<&str, &pb::TensorProto>,
) -> std::result::Result<(), String> {
    let Some(t) = n.input.get(input).and_then(|name| consts.get(name.as_str())) else { return Ok(()) };
    let Ok(values) = read_i64(t) else { return Ok(()) };
    match values.iter().find(|&&v| v < min || v > MAX_DIM) {
        Some(v) => Err(format!("holds {v} in {values:?}; expected values from {min} to {MAX_DIM}")),
        None => Ok(()),
    }
}

/// Convolution and pooling windows: one entry per spatial axis in every list, positive kernel,
/// stride and dilation, non-negative padding, a known `auto_pad`, a positive `group`.
fn check_window(
    n: &pb::NodeProto,
    consts: &HashMap<&str, &pb::TensorProto>,
    fail: &dyn Fn(&str, String) -> Error,
) -> Result<()> {
    let is_conv = n.op_type.starts_with("Conv");
    // The spatial rank: from a constant weight ([M, C/group, k1 .. kn]), else from kernel_shape.
    let weight = if is_conv { n.input.get(1).and_then(|w| consts.get(w.as_str())) } else { None };
    let kernel_attr = attr(n, "kernel_shape").map(|a| a.ints.clone());
    let rank = match (weight, &kernel_attr) {
        (Some(w), _) => {
            if w.dims.len() < 3 || w.dims.iter().any(|&d| d < 1) {
                return Err(fail(
                    "W (input 1)",
                    format!(
                        "has shape {:?}; expected [M, C/group, k1, ...], at least 3 axes, none empty",
                        w.dims
                    ),
                ));
            }
            Some(w.dims.len() - 2)
        }
        (None, Some(k)) => Some(k.len()),
        (None, None) if !is_conv => {
            return Err(fail("kernel_shape", "is missing; the operator requires it".into()));
        }
        (None, None) => None,
    };
    // With a non-constant weight and no kernel_shape, the lists must at least agree.
    let rank = rank
        .or_else(|| {
            ["strides", "dilations", "output_padding"].iter().find_map(|a| attr(n, a).map(|a| a.ints.len()))
        })
        .or_else(|| attr(n, "pads").map(|a| a.ints.len() / 2));
    let Some(rank) = rank else { return Ok(()) };
    if rank == 0 || rank > 3 {
        return Err(fail("kernel_shape", format!("gives {rank} spatial axes; expected 1, 2 or 3")));
    }
    let list = |name: &str, len: usize, min: i64| -> Result<Option<Vec<i64>>> {
        let Some(a) = attr(n, name) else { return Ok(None) };
        if a.ints.len() != len {
            return Err(fail(
                name,
                format!("has {} values {:?}; expected {len} for {rank} spatial axes", a.ints.len(), a.ints),
            ));
        }
        if let Some(v) = a.ints.iter().find(|&&v| v < min || v > MAX_DIM) {
            return Err(fail(
                name,
                format!("holds {v} in {:?}; expected values from {min} to {MAX_DIM}", a.ints),
            ));
        }
        Ok(Some(a.ints.clone()))
    };
    let kernel = list("kernel_shape", rank, 1)?;
    if let (Some(k), Some(w)) = (&kernel, weight) {
        if k[..] != w.dims[2..] {
            return Err(fail(
                "kernel_shape",
                format!("is {k:?} but the weight's window is {:?}", &w.dims[2..]),
            ));
        }
    }
    list("strides", rank, 1)?;
    list("dilations", rank, 1)?;
    list("pads", 2 * rank, 0)?;
    list("output_padding", rank, 0)?;
    list("output_shape", rank, 1)?;
    if let Some(a) = attr(n, "auto_pad") {
        let v = String::from_utf8_lossy(&a.s);
        if !["NOTSET", "SAME_UPPER", "SAME_LOWER", "VALID", ""].contains(&v.as_ref()) {
            return Err(fail(
                "auto_pad",
                format!("is `{v}`; expected NOTSET, SAME_UPPER, SAME_LOWER or VALID"),
            ));
        }
    }
    if let Some(a) = attr(n, "group") {
        if a.i < 1 || a.i > MAX_DIM {
            return Err(fail("group", format!("is {}; expected a positive count", a.i)));
        }
        if let Some(w) = weight.filter(|_| n.op_type == "Conv") {
            // Conv: W is [M, C/group, ...] and M must be a multiple of group.
            if w.dims[0] % a.i != 0 {
                return Err(fail(
                    "group",
                    format!("is {} but the weight has {} output channels", a.i, w.dims[0]),
                ));
            }
        }
        if let Some(w) = weight.filter(|_| n.op_type == "ConvTranspose") {
            // ConvTranspose: W is [C, M/group, ...] and C must be a multiple of group.
            if w.dims[0] % a.i != 0 {
                return Err(fail(
                    "group",
                    format!("is {} but the weight has {} input channels", a.i, w.dims[0]),
                ));
            }
        }
    }
    Ok(())
}

/// `Resize` (and the older `Upsample`): modes tract implements, finite positive scales, sizes in
/// range.
fn check_resize(
    n: &pb::NodeProto,
    consts: &HashMap<&str, &pb::TensorProto>,
    fail: &dyn Fn(&str, String) -> Error,
) -> Result<()> {
    let text = |name: &str| attr(n, name).map(|a| String::from_utf8_lossy(&a.s).into_owned());
    let one_of = |name: &str, value: &str, allowed: &[&str]| -> Result<()> {
        if allowed.contains(&value) {
            Ok(())
        } else {
            Err(fail(
                name,
                format!("is `{value}`, which genloom cannot run; supported: {}", allowed.join(", ")),
            ))
        }
    };
    let mode = text("mode").unwrap_or_else(|| "nearest".into());
    if n.op_type == "Upsample" {
        // Upsample (opsets 7 to 9) knows `nearest` and `linear` only.
        one_of("mode", &mode, &["nearest", "linear"])?;
    } else {
        one_of("mode", &mode, RESIZE_MODES)?;
        if let Some(c) = text("coordinate_transformation_mode") {
            one_of("coordinate_transformation_mode", &c, RESIZE_COORDINATES)?;
        }
        // tract parses nearest_mode whatever the mode, and its ONNX default, round_prefer_floor,
        // is not among what it implements. The `resize-modes` pass writes `floor` into
        // non-nearest Resize nodes (where the value is unused), so only nearest Resize nodes
        // without a supported rounding stop here.
        let nearest = text("nearest_mode").unwrap_or_else(|| "round_prefer_floor".into());
        one_of("nearest_mode", &nearest, RESIZE_NEAREST)?;
    }
    let scales_input = if n.op_type == "Upsample" { 1 } else { 2 };
    let scales =
        attr(n, "scales").filter(|_| n.op_type == "Upsample").map(|a| a.floats.clone()).or_else(|| {
            n.input.get(scales_input).and_then(|s| consts.get(s.as_str())).and_then(|t| read_f32(t).ok())
        });
    if let Some(s) = scales {
        if let Some(v) = s.iter().find(|v| !v.is_finite() || **v <= 0.0 || **v > 65536.0) {
            return Err(fail(
                "scales",
                format!("holds {v} in {s:?}; expected finite factors above 0 and at most 65536"),
            ));
        }
    }
    if n.op_type == "Resize" {
        check_shape_input(n, 3, 0, consts).map_err(|r| fail("sizes (input 3)", r))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::onnx::{f32_tensor, i64_tensor};

    fn ints(name: &str, v: &[i64]) -> pb::AttributeProto {
        pb::AttributeProto { name: name.into(), r#type: 7, ints: v.to_vec(), ..Default::default() }
    }

    fn text(name: &str, v: &str) -> pb::AttributeProto {
        pb::AttributeProto { name: name.into(), r#type: 3, s: v.as_bytes().to_vec(), ..Default::default() }
    }

    fn graph(
        op: &str,
        inputs: &[&str],
        attrs: Vec<pb::AttributeProto>,
        inits: Vec<pb::TensorProto>,
    ) -> pb::GraphProto {
        pb::GraphProto {
            node: vec![pb::NodeProto {
                name: "n0".into(),
                op_type: op.into(),
                input: inputs.iter().map(|s| s.to_string()).collect(),
                output: vec!["y".into()],
                attribute: attrs,
                ..Default::default()
            }],
            initializer: inits,
            ..Default::default()
        }
    }

    fn weight(dims: &[i64]) -> pb::TensorProto {
        let n = dims.iter().product::<i64>() as usize;
        f32_tensor("w", dims, &vec![0.5; n])
    }

    fn attribute_of(e: Error) -> String {
        match e {
            Error::Attribute { attribute, .. } => attribute,
            other => panic!("expected an attribute error, got {other}"),
        }
    }

    #[test]
    fn lists_must_have_one_entry_per_spatial_axis() {
        // The shapes of the fuzz finds: strides and pads shorter than the weight's two spatial axes.
        let g = graph("ConvTranspose", &["x", "w"], vec![ints("strides", &[2])], vec![weight(&[4, 2, 3, 3])]);
        assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), "strides");
        let g = graph("Conv", &["x", "w"], vec![ints("pads", &[1, 1])], vec![weight(&[4, 2, 3, 3])]);
        let e = check_attributes(&g).unwrap_err();
        assert!(e.to_string().contains("expected 4 for 2 spatial axes"), "{e}");
        let ok = graph(
            "Conv",
            &["x", "w"],
            vec![ints("pads", &[1, 1, 1, 1]), ints("strides", &[1, 2]), ints("dilations", &[1, 1])],
            vec![weight(&[4, 2, 3, 3])],
        );
        check_attributes(&ok).unwrap();
    }

    #[test]
    fn values_must_be_in_range() {
        let w = || vec![weight(&[4, 2, 3, 3])];
        for (name, v) in [("strides", [0, 1]), ("dilations", [1, -1]), ("kernel_shape", [3, 2])] {
            let g = graph("Conv", &["x", "w"], vec![ints(name, &v)], w());
            assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), name, "{name} {v:?}");
        }
        let g = graph("Conv", &["x", "w"], vec![ints("pads", &[0, -1, 0, 0])], w());
        assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), "pads");
        let g = graph("ConvTranspose", &["x", "w"], vec![ints("pads", &[1, 1, 1, 1])], w());
        check_attributes(&g).unwrap();
        let g = graph(
            "Conv",
            &["x", "w"],
            vec![pb::AttributeProto { name: "group".into(), i: 3, r#type: 2, ..Default::default() }],
            w(),
        );
        assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), "group");
        let g = graph("MaxPool", &["x"], vec![], vec![]);
        assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), "kernel_shape");
        let g = graph("Conv", &["x", "w"], vec![], vec![weight(&[4, 2])]);
        assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), "W (input 1)");
    }

    #[test]
    fn permutations_and_shapes() {
        assert!(check_permutation(&[0, 2, 1]).is_ok());
        assert!(check_permutation(&[]).is_ok());
        for bad in [&[0, 3, 1][..], &[0, 0, 1], &[-1, 0]] {
            assert!(check_permutation(bad).unwrap_err().contains("exactly once"), "{bad:?}");
        }
        let g = graph("Reshape", &["x", "s"], vec![], vec![i64_tensor("s", &[2], &[-1, 4])]);
        check_attributes(&g).unwrap();
        let g = graph("Reshape", &["x", "s"], vec![], vec![i64_tensor("s", &[2], &[-2, 4])]);
        assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), "shape (input 1)");
        let g = graph("ConstantOfShape", &["s"], vec![], vec![i64_tensor("s", &[2], &[1 << 40, 4])]);
        assert!(check_attributes(&g).unwrap_err().to_string().contains("2147483647"));
    }

    #[test]
    fn resize_modes_tract_lacks_are_named() {
        let g = graph(
            "Resize",
            &["x", "", "sc"],
            vec![text("mode", "nearest")],
            vec![f32_tensor("sc", &[4], &[1.0, 1.0, 2.0, 2.0])],
        );
        let e = check_attributes(&g).unwrap_err();
        assert!(
            e.to_string().contains("round_prefer_floor")
                && e.to_string().contains("floor, round_prefer_ceil"),
            "{e}"
        );
        let g = graph(
            "Resize",
            &["x", "", "sc"],
            vec![
                text("mode", "nearest"),
                text("nearest_mode", "floor"),
                text("coordinate_transformation_mode", "asymmetric"),
            ],
            vec![f32_tensor("sc", &[4], &[1.0, 1.0, 2.0, 2.0])],
        );
        check_attributes(&g).unwrap();
        let g = graph(
            "Resize",
            &["x", "", "sc"],
            vec![text("mode", "linear"), text("nearest_mode", "floor")],
            vec![f32_tensor("sc", &[4], &[1.0, 1.0, f32::NAN, 2.0])],
        );
        assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), "scales");
        let g = graph("Resize", &["x"], vec![text("mode", "area")], vec![]);
        assert_eq!(attribute_of(check_attributes(&g).unwrap_err()), "mode");
        let alpha =
            |v: f32| pb::AttributeProto { name: "alpha".into(), r#type: 1, f: v, ..Default::default() };
        assert_eq!(
            attribute_of(check_attributes(&graph("Swish", &["x"], vec![alpha(0.5)], vec![])).unwrap_err()),
            "alpha"
        );
        check_attributes(&graph("Swish", &["x"], vec![alpha(1.0)], vec![])).unwrap();
    }
}
