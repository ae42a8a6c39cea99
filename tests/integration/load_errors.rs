//! Malformed models and bad inputs: each gives a clear error of the right kind, never a panic.

use genloom::{Error, Limits, LoadOptions, Model};
use genloom_tests::golden;
use prost::Message;

fn load_bytes(b: &[u8]) -> Error {
    Model::from_bytes(b, &LoadOptions::default()).expect_err("should be refused")
}

fn good_bytes() -> Vec<u8> {
    std::fs::read(golden("models/nchw-tanh.onnx")).unwrap()
}

#[test]
fn sniffing_names_what_the_bytes_are() {
    assert!(matches!(load_bytes(b""), Error::EmptyModel { .. }));
    let e = load_bytes(b"<!DOCTYPE html><html><body>404 Not Found</body></html>");
    assert!(matches!(e, Error::HtmlPage { .. }), "{e}");
    let lfs = b"version https://git-lfs.github.com/spec/v1\noid sha256:4d7a214614ab2935c943f9e0ff69d22eadbb8f32b1258daaa5e2ca24d17e2393\nsize 12345\n";
    let e = load_bytes(lfs);
    assert!(matches!(e, Error::LfsPointer { .. }), "{e}");
    assert!(e.to_string().contains("git lfs pull"), "{e}");
    let e = load_bytes(b"name,value\nweights,1\n");
    assert!(matches!(e, Error::NotOnnx { .. }) && e.to_string().contains("plain text"), "{e}");
    // Random bytes (a fixed xorshift stream, so the test is repeatable).
    let mut x = 0x9e3779b97f4a7c15u64;
    let noise: Vec<u8> = (0..4096)
        .map(|_| {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x as u8
        })
        .collect();
    assert!(matches!(
        load_bytes(&noise),
        Error::NotOnnx { .. } | Error::Graph { .. } | Error::Signature { .. }
    ));
}

#[test]
fn truncated_models_are_refused_cleanly() {
    let good = good_bytes();
    for frac in [0.01, 0.1, 0.25, 0.5, 0.75, 0.9, 0.99] {
        let cut = ((good.len() as f64) * frac) as usize;
        let e = load_bytes(&good[..cut]);
        // Every cut point gives an error of a load kind, never a panic; a decoding error names
        // what was read and why.
        assert_eq!(e.kind(), genloom::ErrorKind::Load, "cut at {cut}: {e:?}");
        if let Error::NotOnnx { what, reason } = &e {
            assert_eq!(what, "the model bytes");
            assert!(
                reason.contains("does not decode as an ONNX ModelProto") || reason.contains("holds no graph"),
                "cut at {cut}: {e}"
            );
        }
        assert!(
            matches!(
                e,
                Error::NotOnnx { .. } | Error::TensorSize { .. } | Error::Graph { .. } | Error::Tract { .. }
            ),
            "cut at {cut}: {e:?}"
        );
    }
}

#[test]
fn external_data_rules() {
    // From a path, the data file beside the model is read.
    let m = Model::from_path(golden("models/external.onnx"), &LoadOptions::default()).unwrap();
    assert_eq!(m.info().external_data, vec!["external.onnx.data".to_string()]);
    // From bytes, the error says so and names the way out.
    let bytes = std::fs::read(golden("models/external.onnx")).unwrap();
    let e = load_bytes(&bytes);
    assert!(matches!(e, Error::ExternalDataNeedsPath { .. }), "{e}");
    assert!(e.to_string().contains("genloom convert"), "{e}");
    let e = Model::from_path(golden("models/external-escape.onnx"), &LoadOptions::default()).unwrap_err();
    assert!(
        matches!(e, Error::ExternalDataLocation { .. }) && e.to_string().contains("`../escape.bin`"),
        "{e}"
    );
    let e = Model::from_path(golden("models/external-absolute.onnx"), &LoadOptions::default()).unwrap_err();
    assert!(matches!(e, Error::ExternalDataLocation { .. }) && e.to_string().contains("absolute"), "{e}");
    let e = Model::from_path(golden("models/external-missing.onnx"), &LoadOptions::default()).unwrap_err();
    assert!(
        matches!(e, Error::ExternalDataMissing { .. }) && e.to_string().contains("missing.onnx.data"),
        "{e}"
    );
}

#[cfg(unix)]
#[test]
fn external_data_through_a_link_outside_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let inner = dir.path().join("model");
    std::fs::create_dir(&inner).unwrap();
    std::fs::copy(golden("models/external.onnx"), inner.join("external.onnx")).unwrap();
    std::fs::copy(golden("models/external.onnx.data"), dir.path().join("outside.data")).unwrap();
    std::os::unix::fs::symlink(dir.path().join("outside.data"), inner.join("external.onnx.data")).unwrap();
    let e = Model::from_path(inner.join("external.onnx"), &LoadOptions::default()).unwrap_err();
    assert!(e.to_string().contains("outside the model's folder"), "{e}");
}

fn edit(f: impl FnOnce(&mut tract_onnx::pb::ModelProto)) -> Vec<u8> {
    let mut p = tract_onnx::pb::ModelProto::decode(&good_bytes()[..]).unwrap();
    f(&mut p);
    p.encode_to_vec()
}

#[test]
fn malformed_graphs() {
    // An initializer whose declared shape disagrees with its data.
    let b = edit(|p| {
        let t = &mut p.graph.as_mut().unwrap().initializer[0];
        t.dims[0] += 1;
    });
    let e = load_bytes(&b);
    assert!(matches!(e, Error::TensorSize { .. }), "{e}");
    assert!(e.to_string().contains("declares"), "{e}");
    // A node input that nothing provides.
    let b = edit(|p| p.graph.as_mut().unwrap().node[0].input[0] = "nowhere".into());
    let e = load_bytes(&b);
    assert!(matches!(e, Error::Graph { .. }) && e.to_string().contains("`nowhere`"), "{e}");
    // A cycle: the first node reads the last node's output.
    let b = edit(|p| {
        let g = p.graph.as_mut().unwrap();
        let last = g.node.last().unwrap().output[0].clone();
        g.node[0].input[0] = last;
    });
    let e = load_bytes(&b);
    assert!(matches!(e, Error::Graph { .. }) && e.to_string().contains("cycle"), "{e}");
    // No graph at all.
    let b = edit(|p| p.graph = None);
    assert!(matches!(load_bytes(&b), Error::NotOnnx { .. }));
}

#[test]
fn an_operator_tract_does_not_know_is_named() {
    // "Frobnicate" is in no ONNX operator set (ONNX operator specification, Operators.md), so
    // tract has no builder for it: the load stops before tract parses, naming node and operator.
    let b = edit(|p| {
        let g = p.graph.as_mut().unwrap();
        let last = g.node.len() - 1;
        g.node[last].op_type = "Frobnicate".into();
        g.node[last].name = "finish".into();
    });
    let e = load_bytes(&b);
    assert!(matches!(e, Error::UnsupportedOperator { .. }), "{e:?}");
    assert_eq!(e.kind(), genloom::ErrorKind::Load);
    assert_eq!(
        e.to_string(),
        "node `finish` is the ONNX operator `Frobnicate`, which this build of genloom does not carry"
    );
    // A node without a name is named by its position.
    let b = edit(|p| {
        let g = p.graph.as_mut().unwrap();
        g.node[0].op_type = "Frobnicate".into();
        g.node[0].name.clear();
    });
    assert!(load_bytes(&b).to_string().starts_with("node `#0` is the ONNX operator `Frobnicate`"));
}

#[test]
fn wrong_latent_dtype_is_named() {
    let e = Model::from_path(golden("models/z-int.onnx"), &LoadOptions::default()).unwrap_err();
    assert!(matches!(e, Error::Signature { .. }), "{e}");
    assert!(e.to_string().contains("`z` has the shape of a latent but is int32, expected float32"), "{e}");
}

#[test]
fn limits_stop_large_requests_before_work() {
    let mut o = LoadOptions::default();
    let mut l = Limits::default();
    l.max_model_bytes = 1000;
    o.limits = l;
    let e = Model::from_path(golden("models/nchw-tanh.onnx"), &o).unwrap_err();
    assert!(matches!(e, Error::Limit { .. }) && e.to_string().contains("max_model_bytes"), "{e}");
    let mut l = Limits::default();
    l.max_output_pixels = 63;
    o.limits = l;
    let e = Model::from_path(golden("models/nchw-tanh.onnx"), &o).unwrap_err();
    assert!(e.to_string().contains("pixels per image is 64, over the limit of 63"), "{e}");
    let mut l = Limits::default();
    l.max_parameters = 100;
    o.limits = l;
    let e = Model::from_path(golden("models/nchw-tanh.onnx"), &o).unwrap_err();
    assert!(e.to_string().contains("parameter count"), "{e}");
}

#[test]
fn missing_files_and_folders() {
    let e = Model::from_path("no/such/model.onnx", &LoadOptions::default()).unwrap_err();
    assert!(matches!(e, Error::Io { .. }) && e.to_string().contains("no/such/model.onnx"), "{e}");
    let e = Model::from_path(golden("models"), &LoadOptions::default()).unwrap_err();
    assert!(e.to_string().contains("it is a folder"), "{e}");
}
