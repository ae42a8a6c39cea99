//! `fold-batchnorm`: inference-form BatchNormalization folded into the layer before it.

use super::*;

pub(super) fn fold_batchnorm(g: &mut pb::GraphProto) -> Result<Vec<String>> {
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

#[cfg(test)]
mod tests {
    use super::*;

    fn node(op: &str, inputs: &[&str], output: &str, attrs: Vec<pb::AttributeProto>) -> pb::NodeProto {
        pb::NodeProto {
            name: format!("{op}_0"),
            op_type: op.into(),
            input: inputs.iter().map(|s| s.to_string()).collect(),
            output: vec![output.into()],
            attribute: attrs,
            ..Default::default()
        }
    }

    fn int_attr(name: &str, i: i64) -> pb::AttributeProto {
        pb::AttributeProto { name: name.into(), r#type: 2, i, ..Default::default() }
    }

    /// A layer whose output feeds a BatchNormalization of `c` channels, with statistics chosen
    /// so every channel has its own scale; returns the graph and (scale, shift) per channel by
    /// the formula of the ONNX operator specification, BatchNormalization:
    /// y = gamma (x - mean) / sqrt(var + eps) + beta.
    fn with_bn(
        layer: pb::NodeProto,
        weight: pb::TensorProto,
        c: usize,
    ) -> (pb::GraphProto, Vec<f64>, Vec<f64>) {
        let gamma: Vec<f32> = (0..c).map(|i| 0.5 + i as f32 * 0.25).collect();
        let beta: Vec<f32> = (0..c).map(|i| i as f32 * -0.1).collect();
        let mean: Vec<f32> = (0..c).map(|i| 0.05 * i as f32).collect();
        let var: Vec<f32> = (0..c).map(|i| 1.0 + i as f32).collect();
        let eps = 1e-5f64;
        let scale: Vec<f64> =
            (0..c).map(|i| f64::from(gamma[i]) / (f64::from(var[i]) + eps).sqrt()).collect();
        let shift: Vec<f64> = (0..c).map(|i| f64::from(beta[i]) - f64::from(mean[i]) * scale[i]).collect();
        let cd = [c as i64];
        let g = pb::GraphProto {
            node: vec![
                layer,
                node("BatchNormalization", &["h", "gamma", "beta", "mean", "var"], "y", vec![]),
            ],
            initializer: vec![
                weight,
                onnx::f32_tensor("gamma", &cd, &gamma),
                onnx::f32_tensor("beta", &cd, &beta),
                onnx::f32_tensor("mean", &cd, &mean),
                onnx::f32_tensor("var", &cd, &var),
            ],
            output: vec![pb::ValueInfoProto { name: "y".into(), ..Default::default() }],
            ..Default::default()
        };
        (g, scale, shift)
    }

    fn tensor(g: &pb::GraphProto, name: &str) -> Vec<f32> {
        let t = g.initializer.iter().find(|t| t.name == name).unwrap_or_else(|| panic!("no {name}"));
        onnx::read_f32(t).unwrap()
    }

    fn close(a: f32, b: f64) -> bool {
        (f64::from(a) - b).abs() <= 1e-6 * b.abs().max(1.0)
    }

    #[test]
    fn grouped_conv_transpose_scales_each_output_channel_of_its_group() {
        // ONNX ConvTranspose: W is [C_in, C_out / group, kH, kW]; input channels
        // g*C_in/group .. (g+1)*C_in/group feed output channels g*C_out/group .. (g+1)*C_out/group.
        let (cin, per_group_out, group, k) = (4usize, 3usize, 2usize, 2usize);
        let w: Vec<f32> = (0..cin * per_group_out * k * k).map(|i| 1.0 + i as f32 / 16.0).collect();
        let weight = onnx::f32_tensor("w", &[cin as i64, per_group_out as i64, k as i64, k as i64], &w);
        let layer = node("ConvTranspose", &["x", "w"], "h", vec![int_attr("group", group as i64)]);
        let (mut g, scale, shift) = with_bn(layer, weight, per_group_out * group);
        let changes = fold_batchnorm(&mut g).unwrap();
        assert_eq!(changes.len(), 1, "{changes:?}");
        assert_eq!(g.node.len(), 1);
        assert_eq!(g.node[0].output[0], "y", "the layer writes what the BatchNormalization wrote");
        let folded = tensor(&g, &g.node[0].input[1]);
        for ci in 0..cin {
            for j in 0..per_group_out {
                let out_channel = (ci / (cin / group)) * per_group_out + j;
                for kk in 0..k * k {
                    let at = (ci * per_group_out + j) * k * k + kk;
                    assert!(close(folded[at], f64::from(w[at]) * scale[out_channel]), "W[{ci},{j},{kk}]");
                }
            }
        }
        let bias = tensor(&g, &g.node[0].input[2]);
        for (c, b) in bias.iter().enumerate() {
            assert!(close(*b, shift[c]), "bias {c}: {b} vs {}", shift[c]);
        }
    }

    #[test]
    fn conv_scales_output_channels_and_its_bias() {
        // ONNX Conv: W is [M, C/group, kH, kW]; output channel m owns W[m].
        let w: Vec<f32> = (0..3 * 2).map(|i| i as f32 - 2.5).collect();
        let b = [0.5f32, -1.0, 2.0];
        let mut layer = node("Conv", &["x", "w", "b"], "h", vec![]);
        layer.input = vec!["x".into(), "w".into(), "b".into()];
        let (mut g, scale, shift) = with_bn(layer, onnx::f32_tensor("w", &[3, 2, 1, 1], &w), 3);
        g.initializer.push(onnx::f32_tensor("b", &[3], &b));
        fold_batchnorm(&mut g).unwrap();
        let folded = tensor(&g, &g.node[0].input[1]);
        let bias = tensor(&g, &g.node[0].input[2]);
        for m in 0..3 {
            for i in 0..2 {
                assert!(close(folded[m * 2 + i], f64::from(w[m * 2 + i]) * scale[m]));
            }
            assert!(close(bias[m], f64::from(b[m]) * scale[m] + shift[m]));
        }
    }

    #[test]
    fn gemm_with_transposed_weights_and_mismatches() {
        // Gemm with transB = 1: B is [N, K]; output feature n owns row n.
        let w: Vec<f32> = (0..2 * 3).map(|i| i as f32 * 0.5).collect();
        let layer = node("Gemm", &["x", "w"], "h", vec![int_attr("transB", 1)]);
        let (mut g, scale, _) = with_bn(layer, onnx::f32_tensor("w", &[2, 3], &w), 2);
        fold_batchnorm(&mut g).unwrap();
        let folded = tensor(&g, &g.node[0].input[1]);
        for n in 0..2 {
            for k in 0..3 {
                assert!(close(folded[n * 3 + k], f64::from(w[n * 3 + k]) * scale[n]));
            }
        }
        // A BatchNormalization whose channel count is not the layer's is left alone.
        let layer = node("Conv", &["x", "w"], "h", vec![]);
        let (mut g, _, _) = with_bn(layer, onnx::f32_tensor("w", &[3, 1, 1, 1], &[1.0, 2.0, 3.0]), 4);
        assert!(fold_batchnorm(&mut g).unwrap().is_empty());
        assert_eq!(g.node.len(), 2);
        // So is one in training mode.
        let layer = node("Conv", &["x", "w"], "h", vec![]);
        let (mut g, _, _) = with_bn(layer, onnx::f32_tensor("w", &[3, 1, 1, 1], &[1.0, 2.0, 3.0]), 3);
        g.node[1].attribute.push(int_attr("training_mode", 1));
        assert!(fold_batchnorm(&mut g).unwrap().is_empty());
    }
}
