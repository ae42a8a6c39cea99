//! Hostile input and heavy use: absurd shapes stopped by limits before any allocation, a shared
//! generator under many threads, memory limits per micro-batch.

use genloom::{Error, Generator, GeneratorOptions, Latents, Limits, LoadOptions, Model, SampleOptions};
use genloom_tests::golden;
use prost::Message;
use std::sync::{mpsc, Arc};
use std::time::Duration;

fn good() -> tract_onnx::pb::ModelProto {
    tract_onnx::pb::ModelProto::decode(&std::fs::read(golden("models/nchw-tanh.onnx")).unwrap()[..]).unwrap()
}

#[test]
fn a_100000_pixel_wide_output_is_refused_by_limits() {
    // ConvTranspose with stride 33333: (4 - 1) * 33333 - 2 + 4 = 100001 pixels a side.
    let mut p = good();
    let g = p.graph.as_mut().unwrap();
    let ct = g.node.iter_mut().find(|n| n.op_type == "ConvTranspose").unwrap();
    for a in &mut ct.attribute {
        if a.name == "strides" {
            a.ints = vec![33333, 33333];
        }
    }
    let t = std::time::Instant::now();
    let e = Model::from_bytes(&p.encode_to_vec(), &LoadOptions::default()).unwrap_err();
    assert!(matches!(e, Error::Limit { .. }), "{e}");
    assert!(e.to_string().contains("pixels per image is 10000200001"), "{e}");
    // Refused from shapes alone: no 40 GB buffer was ever made.
    assert!(t.elapsed() < Duration::from_secs(20));
}

#[test]
fn memory_per_micro_batch_and_image_counts_are_limited() {
    let mut o = LoadOptions::default();
    let mut l = Limits::default();
    l.max_micro_batch_bytes = 3 * 8 * 8 * 4 * 2; // two images
    l.max_images = 10;
    o.limits = l;
    let m = Model::from_path(golden("models/nchw-tanh.onnx"), &o).unwrap();
    let mut go = GeneratorOptions::default();
    go.micro_batch = 3;
    let e = Generator::new(m.clone(), go).unwrap_err();
    assert!(
        e.to_string().contains("one micro-batch's output in bytes is 2304, over the limit of 1536"),
        "{e}"
    );
    let mut go = GeneratorOptions::default();
    go.micro_batch = 2;
    let g = Generator::new(m, go).unwrap();
    let e = g.sample_latents(&SampleOptions::new(1, 11)).unwrap_err();
    assert!(e.to_string().contains("image count is 11, over the limit of 10"), "{e}");
    let many = Latents::sample(16, &SampleOptions::new(1, 11)).unwrap();
    assert!(matches!(g.generate(&many, None), Err(Error::Limit { .. })));
}

#[test]
fn eight_threads_share_one_generator() {
    let m = Model::from_path(golden("models/nchw-tanh.onnx"), &LoadOptions::default()).unwrap();
    let mut o = GeneratorOptions::default();
    o.micro_batch = 2;
    let g = Arc::new(Generator::new(m, o).unwrap());
    let latents: Vec<Latents> =
        (0..8).map(|t| Latents::sample(16, &SampleOptions::new(t, 3)).unwrap()).collect();
    let serial: Vec<Vec<f32>> = latents.iter().map(|l| g.generate(l, None).unwrap().data).collect();
    let (tx, rx) = mpsc::channel();
    for t in 0..8 {
        let (g, l, want, tx) = (g.clone(), latents[t].clone(), serial[t].clone(), tx.clone());
        std::thread::spawn(move || {
            let ok = (0..200).all(|_| g.generate(&l, None).map(|r| r.data == want).unwrap_or(false));
            let _ = tx.send((t, ok));
        });
    }
    drop(tx);
    for _ in 0..8 {
        // A deadlock would stop the results from coming: bounded wait.
        let (t, ok) = rx.recv_timeout(Duration::from_secs(120)).expect("a thread did not finish in 120 s");
        assert!(ok, "thread {t} saw a result that differs from the serial one");
    }
}

/// Model bytes run as the `model_bytes` fuzz target runs them (its small limits; load, build
/// without warm-up, one image of class 0): `Err` when a panic escaped the genloom API.
fn as_the_fuzz_target_runs(bytes: &[u8]) -> std::thread::Result<genloom::Result<()>> {
    let mut options = LoadOptions::default();
    options.limits.max_model_bytes = 4 << 20;
    options.limits.max_output_pixels = 256 * 256;
    options.limits.max_parameters = 4_000_000;
    options.limits.max_micro_batch_bytes = 16 << 20;
    std::panic::catch_unwind(|| {
        let model = Model::from_bytes(bytes, &options)?;
        let mut o = GeneratorOptions::default();
        o.warm_up = false;
        let g = Generator::new(model, o)?;
        let z = g.sample_latents(&SampleOptions::new(0, 1))?;
        let labels = g.signature().label.as_ref().map(|_| vec![0i64]);
        g.generate(&z, labels.as_deref()).map(|_| ())
    })
}

/// A fuzz find (`model_bytes`, about 1.0 million executions): tract's ConvTranspose padding
/// arithmetic overflowed while the fixed-batch plan was built, outside the panic guard, so the
/// panic escaped `Generator::generate`. Run as the fuzz target runs it: it must end in an error,
/// never in a panic. Since the attribute rules run before tract, the load itself names the node
/// and its zero stride (ONNX operator specification, ConvTranspose: strides are positive), so
/// tract never sees the model.
#[test]
fn fuzz_find_convtranspose_padding_overflow_is_an_error() {
    let bytes = std::fs::read(
        genloom_tests::root().join("fuzz/corpus/model_bytes/regress-convtranspose-padding-overflow"),
    )
    .unwrap();
    let outcome = as_the_fuzz_target_runs(&bytes);
    match outcome {
        Err(_) => panic!("a tract panic escaped the genloom API"),
        Ok(Ok(())) => panic!("the fuzz find loaded and generated; expected its zero stride to be refused"),
        Ok(Err(e)) => {
            assert!(matches!(e, genloom::Error::Attribute { .. }), "{e:?}");
            assert_eq!(
                e.to_string(),
                "node `up2` (ConvTranspose): strides holds 0 in [0, 2]; expected values from 1 to 2147483647"
            );
        }
    }
}

/// Every regression seed of the `model_bytes` fuzz target (`fuzz/corpus/model_bytes/regress-*`,
/// each an input that once made a panic escape the genloom API) now ends in an error or in
/// images, run as the fuzz target runs it. `regress-reshape-volume-overflow`: a Reshape whose
/// constant shape multiplied past i64 in the constant folder.
#[test]
fn every_fuzz_regression_seed_ends_without_a_panic() {
    let dir = genloom_tests::root().join("fuzz/corpus/model_bytes");
    let mut seeds: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.file_name().unwrap().to_string_lossy().starts_with("regress-"))
        .collect();
    seeds.sort();
    assert!(seeds.len() >= 2, "{seeds:?}");
    for seed in seeds {
        let bytes = std::fs::read(&seed).unwrap();
        let outcome = as_the_fuzz_target_runs(&bytes);
        assert!(outcome.is_ok(), "{}: a panic escaped the genloom API", seed.display());
    }
}

/// Padding larger than a transposed convolution's output (ONNX ConvTranspose: output =
/// stride (in - 1) + kernel - pads, here 2 * 3 + 4 - 18 = -8) is named from tract's shape
/// analysis, before typing, where tract would assert (a panic; fatal in the web build).
#[test]
fn padding_that_leaves_a_negative_size_is_named_before_tract_types_the_model() {
    let mut p = good();
    let g = p.graph.as_mut().unwrap();
    let ct = g.node.iter_mut().find(|n| n.op_type == "ConvTranspose").unwrap();
    for a in &mut ct.attribute {
        if a.name == "pads" {
            a.ints = vec![9, 9, 9, 9];
        }
    }
    let e = Model::from_bytes(&p.encode_to_vec(), &LoadOptions::default()).unwrap_err();
    assert!(matches!(e, Error::Attribute { .. }), "{e:?}");
    let msg = e.to_string();
    assert!(
        msg.starts_with(
            "node `up` (ConvTranspose): pads is [9, 9, 9, 9], which leaves spatial axis 0 -8 pixels"
        ),
        "{msg}"
    );
}

/// The two tract panics a replay of the long fuzz run's corpus still reached, now named before
/// tract: a raw tensor of an element type tract's loader does not read (bfloat16, ONNX data
/// type 16), and a ConvTranspose `output_shape` smaller than its input makes (tract derives a
/// negative output padding from it).
#[test]
fn raw_tensors_tract_cannot_read_and_unreachable_output_shapes_are_named() {
    let mut p = good();
    let g = p.graph.as_mut().unwrap();
    let bias = g.initializer.iter_mut().find(|t| t.name == "up.bias").unwrap();
    bias.data_type = 16;
    bias.raw_data = vec![0; 3 * 2];
    bias.float_data.clear();
    let e = Model::from_bytes(&p.encode_to_vec(), &LoadOptions::default()).unwrap_err();
    assert!(e.to_string().contains("tensor `up.bias` stores bfloat16 as raw bytes"), "{e}");

    let mut p = good();
    let g = p.graph.as_mut().unwrap();
    let ct = g.node.iter_mut().find(|n| n.op_type == "ConvTranspose").unwrap();
    ct.attribute.push(tract_onnx::pb::AttributeProto {
        name: "output_shape".into(),
        r#type: 7,
        ints: vec![2, 2],
        ..Default::default()
    });
    let e = Model::from_bytes(&p.encode_to_vec(), &LoadOptions::default()).unwrap_err();
    assert!(matches!(e, Error::Attribute { .. }), "{e:?}");
    assert!(e.to_string().contains("output_shape asks for 2 on spatial axis 0"), "{e}");
}
