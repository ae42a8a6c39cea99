//! `structure` and `training-mode`: what can be read from the graph before tract runs it.

use super::{CheckId, Recorder, Status};
use crate::model::{LoadOptions, Model, Raw};
use tract_onnx::pb;

/// Loads a model that passed the pre-scan, recording `structure` either way.
pub(super) fn load(raw: Raw, load: &LoadOptions, r: &mut Recorder) -> Option<Model> {
    match Model::from_raw(raw, load) {
        Ok(m) => {
            let s = m.signature();
            r.add(
                CheckId::Structure,
                Status::Pass,
                format!(
                    "latent `{}` ({}), image `{}` {}x{}x{} {}, range {}",
                    s.latent.name,
                    s.latent.dim,
                    s.image.name,
                    s.image.channels,
                    s.image.height,
                    s.image.width,
                    s.image.layout,
                    s.image.range
                ),
                "a latent input, an image output, supported ops",
                "",
            );
            Some(m)
        }
        Err(e) => {
            r.add(
                CheckId::Structure,
                Status::Fail,
                "the model does not load",
                "loads, with a signature",
                e.to_string(),
            );
            None
        }
    }
}

const RANDOM_OPS: &[&str] =
    &["RandomNormal", "RandomUniform", "RandomNormalLike", "RandomUniformLike", "Multinomial", "Bernoulli"];

fn node_label(n: &pb::NodeProto) -> String {
    if n.name.is_empty() {
        format!("{} (output `{}`)", n.op_type, n.output.first().map(String::as_str).unwrap_or("?"))
    } else {
        format!("{} `{}`", n.op_type, n.name)
    }
}

/// String attributes whose values the ONNX specification enumerates, for ops generators use.
fn attribute_problem(n: &pb::NodeProto) -> Option<String> {
    let s = |name: &str| crate::onnx::attr(n, name).map(|a| String::from_utf8_lossy(&a.s).into_owned());
    let allowed: &[(&str, &[&str])] = match n.op_type.as_str() {
        "Resize" | "Upsample" => &[
            ("mode", &["nearest", "linear", "cubic"]),
            (
                "coordinate_transformation_mode",
                &[
                    "half_pixel",
                    "half_pixel_symmetric",
                    "pytorch_half_pixel",
                    "align_corners",
                    "asymmetric",
                    "tf_crop_and_resize",
                ],
            ),
            ("nearest_mode", &["round_prefer_floor", "round_prefer_ceil", "floor", "ceil"]),
            ("keep_aspect_ratio_policy", &["stretch", "not_larger", "not_smaller"]),
        ],
        "Conv" | "ConvTranspose" | "AveragePool" | "MaxPool" => {
            &[("auto_pad", &["NOTSET", "SAME_UPPER", "SAME_LOWER", "VALID"])]
        }
        "Pad" => &[("mode", &["constant", "reflect", "edge", "wrap"])],
        "DepthToSpace" => &[("mode", &["DCR", "CRD"])],
        _ => &[],
    };
    for (attr, values) in allowed {
        if let Some(v) = s(attr) {
            if !values.contains(&v.as_str()) {
                return Some(format!(
                    "{} has {attr} = \"{v}\", which ONNX does not define (expected one of {})",
                    node_label(n),
                    values.join(", ")
                ));
            }
        }
    }
    if n.op_type == "Resize" {
        // Cubic with exclude_outside or a non-default coefficient, and crop-and-resize, rely on
        // paths a small CPU engine rarely implements: flagged so they are looked at before tract runs.
        if s("mode").as_deref() == Some("cubic")
            && s("coordinate_transformation_mode").as_deref() == Some("tf_crop_and_resize")
        {
            return Some(format!(
                "{} combines mode = \"cubic\" with coordinate_transformation_mode = \"tf_crop_and_resize\", which genloom does not support on tract 0.23.9",
                node_label(n)
            ));
        }
    }
    None
}

/// The static pre-scan: records a failed `structure` and returns false when the graph has a
/// problem that can be named by node.
pub(super) fn prescan(proto: &pb::ModelProto, r: &mut Recorder) -> bool {
    let Some(g) = proto.graph.as_ref() else {
        r.add(CheckId::Structure, Status::Fail, "no graph", "a graph", "the model holds no graph");
        return false;
    };
    // Ask tract's own register (what this build carries), not a copied list.
    let register = crate::onnx::framework();
    // Upsample is written as Resize by the load-time passes, so it runs although tract does not
    // register it.
    let known = |op: &str| register.op_register.0.contains_key(op) || op == "Upsample";
    let mut problems = vec![];
    for n in &g.node {
        let domain_ok = n.domain.is_empty() || n.domain == "ai.onnx";
        if RANDOM_OPS.contains(&n.op_type.as_str()) {
            problems.push(format!(
                "{} draws random numbers at inference (images would change from run to run)",
                node_label(n)
            ));
        } else if !domain_ok {
            problems.push(format!(
                "{} is in domain `{}`, which tract does not implement",
                node_label(n),
                n.domain
            ));
        } else if !known(&n.op_type) {
            problems.push(format!("{} is an operator this build's tract does not register", node_label(n)));
        } else if let Some(p) = attribute_problem(n) {
            problems.push(p);
        }
    }
    let init: std::collections::HashSet<&str> = g.initializer.iter().map(|t| t.name.as_str()).collect();
    let inputs: Vec<&str> = g.input.iter().map(|i| i.name.as_str()).filter(|n| !init.contains(n)).collect();
    if inputs.is_empty() {
        problems.push(
            "the graph has no inputs: the latent was traced away (exported with a constant in its place)"
                .into(),
        );
    }
    if g.output.is_empty() {
        problems.push("the graph has no outputs".into());
    }
    if problems.is_empty() {
        true
    } else {
        r.add(
            CheckId::Structure,
            Status::Fail,
            format!("{} problem(s) in {} nodes", problems.len(), g.node.len()),
            "none",
            problems.join("; "),
        );
        false
    }
}

pub(super) fn training_mode(proto: &pb::ModelProto, r: &mut Recorder) {
    let Some(g) = proto.graph.as_ref() else { return };
    let consts = crate::onnx::constants(g);
    let mut found = vec![];
    let mut unsure = vec![];
    for n in &g.node {
        match n.op_type.as_str() {
            "BatchNormalization" => {
                if crate::onnx::attr_i(n, "training_mode", 0) != 0 {
                    found.push(format!(
                        "{} has training_mode = 1 (statistics of the batch, not the learned ones)",
                        node_label(n)
                    ));
                } else if n.output.iter().skip(1).any(|o| !o.is_empty()) {
                    found.push(format!(
                        "{} has running-statistics outputs (a training-mode export)",
                        node_label(n)
                    ));
                }
            }
            "Dropout" => {
                if let Some(t) = n.input.get(2).filter(|s| !s.is_empty()) {
                    match consts.get(t.as_str()).and_then(|c| crate::onnx::read_i64(c).ok()) {
                        Some(v) if v.first().copied().unwrap_or(0) != 0 => found.push(format!(
                            "{} has training_mode = true (drops values at random)",
                            node_label(n)
                        )),
                        Some(_) => {}
                        None => {
                            unsure.push(format!("{}'s training_mode is computed at run time", node_label(n)))
                        }
                    }
                }
            }
            _ => {}
        }
    }
    if !found.is_empty() {
        r.add(
            CheckId::TrainingMode,
            Status::Fail,
            format!("{} training-mode node(s)", found.len()),
            "none",
            found.join("; "),
        );
    } else if !unsure.is_empty() {
        r.add(
            CheckId::TrainingMode,
            Status::Warn,
            "training mode not constant",
            "constant false",
            unsure.join("; "),
        );
    } else {
        r.add(CheckId::TrainingMode, Status::Pass, "no training-mode nodes", "none", "");
    }
}
