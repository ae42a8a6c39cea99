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
