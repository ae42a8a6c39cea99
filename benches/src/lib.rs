//! Shared set-up for the benches: the demo model and its exports, made in memory.

use genloom::convert::{self, ConvertOptions, Precision};
use genloom::{LoadOptions, Model};

/// The demo model (`tiles`, single file) as shipped in the `genloom` command.
pub fn demo_model() -> Model {
    Model::from_bytes(genloom::demo::TILES_ONNX, &LoadOptions::default()).expect("the built-in model loads")
}

/// `(name, ONNX bytes)` of the f32, f16 and int8 exports of the demo model.
pub fn exports() -> Vec<(&'static str, Vec<u8>)> {
    let src = demo_model();
    [("f32", Precision::F32), ("f16", Precision::F16), ("int8", Precision::Int8)]
        .into_iter()
        .map(|(name, p)| {
            let mut o = ConvertOptions::new(p);
            o.eval_count = 4;
            (name, convert::convert(&src, &o).expect("the demo model converts").bytes)
        })
        .collect()
}

/// A generator with one weight over tract's 4 MiB constant-folding budget, as ONNX bytes:
/// latent `z` [N, 128] -> Gemm (weight 128 x 16384, 8 MiB in f32) -> Reshape [N, 256, 8, 8] ->
/// Relu -> ConvTranspose (256 -> 3, kernel 4, stride 2, pad 1) -> Tanh -> `image` [N, 3, 16, 16].
/// Weights are fixed pseudo-random values (a 64-bit LCG), so every run measures the same model.
pub fn wide_model() -> Vec<u8> {
    use prost::Message;
    use tract_onnx::pb::{self, attribute_proto::AttributeType, tensor_proto::DataType};
    let mut state = 0x9e37_79b9_7f4a_7c15u64;
    let mut weights = |n: usize, scale: f32| -> Vec<f32> {
        (0..n)
            .map(|_| {
                state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                ((state >> 40) as f32 / (1u64 << 24) as f32 - 0.5) * 2.0 * scale
            })
            .collect()
    };
    let tensor = |name: &str, dims: &[i64], data: Vec<f32>| pb::TensorProto {
        name: name.into(),
        dims: dims.to_vec(),
        data_type: DataType::Float as i32,
        float_data: data,
        ..Default::default()
    };
    let value = |name: &str, dims: &[Option<i64>]| pb::ValueInfoProto {
        name: name.into(),
        r#type: Some(pb::TypeProto {
            value: Some(pb::type_proto::Value::TensorType(pb::type_proto::Tensor {
                elem_type: DataType::Float as i32,
                shape: Some(pb::TensorShapeProto {
                    dim: dims
                        .iter()
                        .map(|d| pb::tensor_shape_proto::Dimension {
                            value: Some(match d {
                                Some(v) => pb::tensor_shape_proto::dimension::Value::DimValue(*v),
                                None => pb::tensor_shape_proto::dimension::Value::DimParam("N".into()),
                            }),
                            ..Default::default()
                        })
                        .collect(),
                }),
            })),
            ..Default::default()
        }),
        ..Default::default()
    };
    let ints = |name: &str, v: &[i64]| pb::AttributeProto {
        name: name.into(),
        r#type: AttributeType::Ints as i32,
        ints: v.to_vec(),
        ..Default::default()
    };
    let node = |op: &str, inputs: &[&str], output: &str, attribute: Vec<pb::AttributeProto>| pb::NodeProto {
        name: format!("/{output}"),
        op_type: op.into(),
        input: inputs.iter().map(|s| s.to_string()).collect(),
        output: vec![output.into()],
        attribute,
        ..Default::default()
    };
    let features = 256 * 8 * 8;
    let shape = pb::TensorProto {
        name: "shape".into(),
        dims: vec![4],
        data_type: DataType::Int64 as i32,
        int64_data: vec![-1, 256, 8, 8],
        ..Default::default()
    };
    let graph = pb::GraphProto {
        name: "wide".into(),
        node: vec![
            node("Gemm", &["z", "fc.weight", "fc.bias"], "fc", vec![]),
            node("Reshape", &["fc", "shape"], "grid", vec![]),
            node("Relu", &["grid"], "act", vec![]),
            node(
                "ConvTranspose",
                &["act", "up.weight", "up.bias"],
                "up",
                vec![ints("kernel_shape", &[4, 4]), ints("strides", &[2, 2]), ints("pads", &[1, 1, 1, 1])],
            ),
            node("Tanh", &["up"], "image", vec![]),
        ],
        initializer: vec![
            tensor("fc.weight", &[128, features], weights(128 * features as usize, 0.09)),
            tensor("fc.bias", &[features], weights(features as usize, 0.01)),
            shape,
            tensor("up.weight", &[256, 3, 4, 4], weights(256 * 3 * 16, 0.06)),
            tensor("up.bias", &[3], vec![0.0; 3]),
        ],
        input: vec![value("z", &[None, Some(128)])],
        output: vec![value("image", &[None, Some(3), Some(16), Some(16)])],
        ..Default::default()
    };
    pb::ModelProto {
        ir_version: 8,
        opset_import: vec![pb::OperatorSetIdProto { domain: String::new(), version: 17 }],
        producer_name: "genloom-benches".into(),
        graph: Some(graph),
        ..Default::default()
    }
    .encode_to_vec()
}

/// `(name, ONNX bytes)` of the f32, f16 and int8 (every layer quantized, per channel) exports of
/// [`wide_model`].
pub fn wide_exports() -> Vec<(&'static str, Vec<u8>)> {
    let src = Model::from_bytes(&wide_model(), &LoadOptions::default()).expect("the wide model loads");
    [("f32", Precision::F32), ("f16", Precision::F16), ("int8", Precision::Int8)]
        .into_iter()
        .map(|(name, p)| {
            let mut o = ConvertOptions::new(p);
            o.eval_count = 4;
            o.keep_float = convert::KeepFloat::Nodes(vec![]);
            (name, convert::convert(&src, &o).expect("the wide model converts").bytes)
        })
        .collect()
}
