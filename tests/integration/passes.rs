//! The load-time passes are exact: the model after them agrees with the ONNX reference
//! evaluator's outputs for the original file (models/*.onnxref.npy, demo references).

use genloom::npy::{self, NpyArray, NpyData};
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, PassOptions};
use genloom_tests::{demo, golden, ladder, max_abs_diff};
use prost::Message;
use tract_onnx::pb;

fn onnxref(path: &std::path::Path) -> Vec<f32> {
    match NpyArray::read(path).unwrap().data {
        NpyData::F32(v) => v,
        other => panic!("{other:?}"),
    }
}

fn run(bytes: &[u8], passes: PassOptions, latents_file: &std::path::Path) -> (Vec<f32>, Model) {
    let mut o = LoadOptions::default();
    o.passes = passes;
    let m = Model::from_bytes(bytes, &o).unwrap();
    let l = npy::read_latents(latents_file, m.signature().latent.dim).unwrap();
    let g = Generator::new(m.clone(), GeneratorOptions::default()).unwrap();
    (g.generate(&l, None).unwrap().data, m)
}

fn decode(path: &std::path::Path) -> pb::ModelProto {
    pb::ModelProto::decode(&std::fs::read(path).unwrap()[..]).unwrap()
}

#[test]
fn batchnorm_folding_is_exact() {
    // Judge: onnx.reference.ReferenceEvaluator on the original file.
    for (file, latents, reference) in [
        (
            golden("models/z11-sigmoid-gray.onnx"),
            golden("models/z11-sigmoid-gray.latents.npy"),
            golden("models/z11-sigmoid-gray.onnxref.npy"),
        ),
        (demo("tiles.onnx"), demo("reference/latents.npy"), demo("reference/tiles.onnxref.npy")),
    ] {
        let bytes = std::fs::read(&file).unwrap();
        let want = onnxref(&reference);
        let (off, m_off) = run(&bytes, PassOptions::none(), &latents);
        let (on, m_on) = run(&bytes, PassOptions::default(), &latents);
        assert!(m_off.info().passes.is_empty());
        let folded = m_on.info().passes.iter().find(|p| p.pass == "fold-batchnorm").expect("a BN fold");
        assert!(!folded.changes.is_empty());
        assert!(max_abs_diff(&off, &want) <= ladder::EXACT_MAX_ABS, "{}: unfolded", file.display());
        assert!(
            max_abs_diff(&on, &want) <= ladder::EXACT_MAX_ABS,
            "{}: folded differs by {}",
            file.display(),
            max_abs_diff(&on, &want)
        );
        assert!(m_on.info().nodes_after_passes < m_on.info().nodes);
    }
}

/// Wraps the nchw-tanh test model's ops with identity-like nodes and constant subgraphs that
/// change nothing, so its reference outputs still judge it.
fn padded_model() -> Vec<u8> {
    let mut p = decode(&golden("models/nchw-tanh.onnx"));
    let g = p.graph.as_mut().unwrap();
    // Identity on the latent, Dropout (inference form) after the Gemm.
    let first = g.node[0].input[0].clone();
    g.node[0].input[0] = "z_id".into();
    let gemm_out = g.node[0].output[0].clone();
    g.node[0].output[0] = "gemm_raw".into();
    g.node.insert(
        0,
        pb::NodeProto {
            name: "id".into(),
            op_type: "Identity".into(),
            input: vec![first],
            output: vec!["z_id".into()],
            ..Default::default()
        },
    );
    g.node.insert(
        2,
        pb::NodeProto {
            name: "drop".into(),
            op_type: "Dropout".into(),
            input: vec!["gemm_raw".into()],
            output: vec![gemm_out],
            ..Default::default()
        },
    );
    // The Gemm's weight as float16 behind a Cast (what an fp16 export does), when it is exact.
    let wname = g.node[1].input[1].clone();
    let w = g.initializer.iter_mut().find(|t| t.name == wname).unwrap();
    let vals: Vec<f32> = w.raw_data.chunks(4).map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]])).collect();
    let halfs: Vec<u8> = vals.iter().flat_map(|&v| half::f16::from_f32(v).to_bits().to_le_bytes()).collect();
    w.data_type = 10;
    w.raw_data = halfs;
    w.name = "w16".into();
    g.node.insert(
        0,
        pb::NodeProto {
            name: "cast".into(),
            op_type: "Cast".into(),
            input: vec!["w16".into()],
            output: vec![wname],
            attribute: vec![pb::AttributeProto { name: "to".into(), r#type: 2, i: 1, ..Default::default() }],
            ..Default::default()
        },
    );
    p.encode_to_vec()
}

#[test]
fn identity_and_constant_passes_are_exact() {
    let bytes = padded_model();
    let latents = golden("models/nchw-tanh.latents.npy");
    let (off, _) = run(&bytes, PassOptions::none(), &latents);
    let (on, m) = run(&bytes, PassOptions::default(), &latents);
    let passes: Vec<&str> = m.info().passes.iter().map(|p| p.pass.as_str()).collect();
    assert!(passes.contains(&"drop-identity") && passes.contains(&"fold-constants"), "{passes:?}");
    let dropped = &m.info().passes.iter().find(|p| p.pass == "drop-identity").unwrap().changes;
    assert!(
        dropped.iter().any(|c| c.contains("Identity `id`"))
            && dropped.iter().any(|c| c.contains("Dropout `drop`")),
        "{dropped:?}"
    );
    // The fp16 weights differ from the original f32 ones by their rounding, so judge the passes
    // by the unpassed run of the same file: exact up to float rounding.
    assert!(
        max_abs_diff(&on, &off) <= ladder::BITWISE_CLOSE_MAX_ABS,
        "passes changed the output by {}",
        max_abs_diff(&on, &off)
    );
    assert_eq!(m.info().nodes_after_passes, 5, "only the original five ops remain");
}

fn bn_node(name: &str, input: &str, output: &str, c: usize, g: &mut pb::GraphProto) -> pb::NodeProto {
    // Deterministic, non-trivial parameters.
    let vals = |k: f32| (0..c).map(|i| k + (i % 7) as f32 * 0.1).collect::<Vec<f32>>();
    for (suffix, v) in [("scale", vals(0.8)), ("bias", vals(-0.2)), ("mean", vals(0.05)), ("var", vals(0.5))]
    {
        let raw: Vec<u8> = v.iter().flat_map(|x| x.to_le_bytes()).collect();
        g.initializer.push(pb::TensorProto {
            name: format!("{name}.{suffix}"),
            dims: vec![c as i64],
            data_type: 1,
            raw_data: raw,
            ..Default::default()
        });
    }
    pb::NodeProto {
        name: name.into(),
        op_type: "BatchNormalization".into(),
        input: vec![
            input.into(),
            format!("{name}.scale"),
            format!("{name}.bias"),
            format!("{name}.mean"),
            format!("{name}.var"),
        ],
        output: vec![output.into()],
        ..Default::default()
    }
}

#[test]
fn legacy_demo_model_has_no_batchnorm_left() {
    let m = Model::from_path(demo("tiles.onnx"), &LoadOptions::default()).unwrap();
    let g = m.onnx().graph.as_ref().unwrap();
    assert!(
        g.node.iter().all(|n| n.op_type != "BatchNormalization"),
        "BatchNormalization left after the passes"
    );
    assert_eq!(m.info().ops.get("BatchNormalization"), Some(&3), "the stored graph had three");
}

#[test]
fn batchnorm_after_gemm_folds_and_after_relu_stays() {
    // Judge: the same file run by tract with the passes off (BatchNormalization evaluated as is).
    let latents = golden("models/nchw-tanh.latents.npy");
    // 1. BN right after the Gemm ([N, 512]): folds into the Gemm, bias rewritten.
    let mut p = decode(&golden("models/nchw-tanh.onnx"));
    let g = p.graph.as_mut().unwrap();
    let gemm_out = g.node[0].output[0].clone();
    g.node[0].output[0] = "gemm_raw".into();
    let bn = bn_node("bn_gemm", "gemm_raw", &gemm_out, 512, g);
    g.node.insert(1, bn);
    let bytes = p.encode_to_vec();
    let (off, _) = run(&bytes, PassOptions::none(), &latents);
    let (on, m) = run(&bytes, PassOptions::default(), &latents);
    assert!(m.onnx().graph.as_ref().unwrap().node.iter().all(|n| n.op_type != "BatchNormalization"));
    assert!(
        max_abs_diff(&on, &off) <= ladder::EXACT_MAX_ABS,
        "Gemm fold differs by {}",
        max_abs_diff(&on, &off)
    );
    // 2. BN after the Relu: nothing to fold into, so it stays and the output is unchanged.
    let mut p = decode(&golden("models/nchw-tanh.onnx"));
    let g = p.graph.as_mut().unwrap();
    let relu = g.node.iter().position(|n| n.op_type == "Relu").unwrap();
    let relu_out = g.node[relu].output[0].clone();
    g.node[relu].output[0] = "relu_raw".into();
    let bn = bn_node("bn_relu", "relu_raw", &relu_out, 32, g);
    g.node.insert(relu + 1, bn);
    let bytes = p.encode_to_vec();
    let (off, _) = run(&bytes, PassOptions::none(), &latents);
    let (on, m) = run(&bytes, PassOptions::default(), &latents);
    assert_eq!(
        m.onnx().graph.as_ref().unwrap().node.iter().filter(|n| n.op_type == "BatchNormalization").count(),
        1
    );
    assert!(max_abs_diff(&on, &off) <= ladder::BITWISE_CLOSE_MAX_ABS);
}
