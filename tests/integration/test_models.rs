//! The small ONNX test generators of tests/golden/models: signature discovery against the
//! manifest, and outputs against `onnx.reference.ReferenceEvaluator`.

use genloom::npy::{self, NpyArray, NpyData};
use genloom::{Batch, Generator, GeneratorOptions, LabelKind, Latents, LoadOptions, Model};
use genloom_tests::{golden, json, ladder, max_abs_diff};

fn manifest() -> Vec<serde_json::Value> {
    json(&golden("models/manifest.json"))["models"].as_array().unwrap().clone()
}

fn ok_models() -> Vec<serde_json::Value> {
    manifest()
        .into_iter()
        .filter(|m| m["expect"] == "ok" || m["expect"].as_str().unwrap_or("").starts_with("refuse-or-trust"))
        .collect()
}

fn generator(m: &Model, micro_batch: usize, threads: usize) -> Generator {
    let mut o = GeneratorOptions::default();
    o.micro_batch = micro_batch;
    o.threads = threads;
    Generator::new(m.clone(), o).unwrap()
}

fn labels_of(m: &serde_json::Value) -> Option<Vec<i64>> {
    let file = m["labels"].as_str()?;
    let a = NpyArray::read(&golden(&format!("models/{file}"))).unwrap();
    Some(match a.data {
        NpyData::I64(v) => v,
        // One-hot rows: the class is the index of the 1.
        NpyData::F32(v) => {
            let k = a.shape[1];
            v.chunks(k).map(|r| r.iter().position(|&x| x == 1.0).unwrap() as i64).collect()
        }
        other => panic!("labels {other:?}"),
    })
}

#[test]
fn signatures_match_the_manifest() {
    for m in ok_models() {
        let name = m["name"].as_str().unwrap();
        let model = Model::from_path(
            golden(&format!("models/{}", m["file"].as_str().unwrap())),
            &LoadOptions::default(),
        )
        .unwrap_or_else(|e| panic!("{name}: {e}"));
        let sig = model.signature();
        assert_eq!(sig.latent.dim as u64, m["latent_dim"].as_u64().unwrap(), "{name}");
        assert_eq!(sig.latent.name, m["inputs"][0]["name"].as_str().unwrap(), "{name}");
        let out = &m["output"];
        assert_eq!(sig.image.name, out["name"].as_str().unwrap(), "{name}");
        assert_eq!(sig.image.layout.to_string(), out["layout"].as_str().unwrap(), "{name}");
        // True shape (the wrong-declared-output model declares 16x16; tract infers 8x8).
        let shape: Vec<u64> =
            out["shape"].as_array().unwrap()[1..].iter().map(|v| v.as_u64().unwrap()).collect();
        let (c, h, w) = match sig.image.layout {
            genloom::Layout::Nchw => (shape[0], shape[1], shape[2]),
            genloom::Layout::Nhwc => (shape[2], shape[0], shape[1]),
        };
        assert_eq!(
            (sig.image.channels as u64, sig.image.height as u64, sig.image.width as u64),
            (c, h, w),
            "{name}"
        );
        let range = match out["range"].as_str().unwrap() {
            "[-1,1]" => genloom::ValueRange::TANH,
            "[0,1]" => genloom::ValueRange::SIGMOID,
            "[0,255]" => genloom::ValueRange::BYTE,
            other => panic!("{other}"),
        };
        assert_eq!(sig.image.range, range, "{name}");
        let fixed = m["inputs"][0]["shape"][0].as_u64();
        assert_eq!(sig.batch, fixed.map_or(Batch::Symbolic, |n| Batch::Fixed(n as usize)), "{name}");
        match (m["conditioning"].as_str(), &sig.label) {
            (None, None) => {}
            (Some("index"), Some(l)) => assert_eq!(
                (l.kind, l.classes as u64),
                (LabelKind::Index, m["classes"].as_u64().unwrap()),
                "{name}"
            ),
            (Some("onehot"), Some(l)) => assert_eq!(
                (l.kind, l.classes as u64),
                (LabelKind::OneHot, m["classes"].as_u64().unwrap()),
                "{name}"
            ),
            (c, l) => panic!("{name}: conditioning {c:?} vs {l:?}"),
        }
        let info = model.info();
        let stored = m["param_count"].as_u64().unwrap() + m["constant_node_elements"].as_u64().unwrap();
        assert_eq!(info.parameters, stored, "{name}: parameters (initializers + Constant nodes)");
        assert_eq!(info.macs_per_sample, m["macs_per_sample"].as_u64(), "{name}");
        assert_eq!(info.opset, m["opset"].as_i64().unwrap(), "{name}");
    }
}

#[test]
fn outputs_match_the_onnx_reference_evaluator() {
    // Source: `onnx.reference.ReferenceEvaluator` outputs (models/*.onnxref.npy), tolerance
    // 1e-4 relative to the value's magnitude (1e-4 absolute for [-1,1] and [0,1] outputs).
    let mut checked = 0;
    for m in ok_models() {
        let Some(refname) = m["onnxref"].as_str() else { continue };
        let name = m["name"].as_str().unwrap();
        let model = Model::from_path(
            golden(&format!("models/{}", m["file"].as_str().unwrap())),
            &LoadOptions::default(),
        )
        .unwrap();
        let dim = model.signature().latent.dim;
        let latents =
            npy::read_latents(&golden(&format!("models/{}", m["latents"].as_str().unwrap())), dim).unwrap();
        let labels = labels_of(&m);
        let want = NpyArray::read(&golden(&format!("models/{refname}"))).unwrap();
        let NpyData::F32(want) = want.data else { panic!("{name}: reference is not f32") };
        for (mb, threads) in [(1, 1), (2, 2), (8, 1)] {
            let g = generator(&model, mb, threads);
            let images = g.generate(&latents, labels.as_deref()).unwrap();
            assert_eq!(images.data.len(), want.len(), "{name}");
            for (i, (a, b)) in images.data.iter().zip(&want).enumerate() {
                assert!(
                    (a - b).abs() <= ladder::F32_MAX_ABS * b.abs().max(1.0),
                    "{name} mb {mb}: value {i}: {a} vs reference {b}"
                );
            }
        }
        checked += 1;
    }
    assert!(checked >= 7, "only {checked} models checked");
}

#[test]
fn image_i_does_not_depend_on_the_rest_of_the_request() {
    for m in ok_models() {
        let name = m["name"].as_str().unwrap();
        let model = Model::from_path(
            golden(&format!("models/{}", m["file"].as_str().unwrap())),
            &LoadOptions::default(),
        )
        .unwrap();
        let sig = model.signature().clone();
        let latents = Latents::sample(sig.latent.dim, &genloom::SampleOptions::new(5, 11)).unwrap();
        let labels: Option<Vec<i64>> =
            sig.label.as_ref().map(|l| (0..11).map(|i| (i % l.classes) as i64).collect());
        let whole = generator(&model, 11, 1).generate(&latents, labels.as_deref()).unwrap();
        for mb in [1, 3, 4] {
            let part = generator(&model, mb, 2).generate(&latents, labels.as_deref()).unwrap();
            let d = max_abs_diff(&whole.data, &part.data);
            assert!(d <= ladder::EXACT_MAX_ABS, "{name}: micro-batch {mb} differs by {d}");
        }
        // Image 4 alone equals image 4 of the request.
        let one = latents.slice(4..5).unwrap();
        let l1 = labels.as_ref().map(|l| vec![l[4]]);
        let alone = generator(&model, 1, 1).generate(&one, l1.as_deref()).unwrap();
        assert!(max_abs_diff(alone.image(0), whole.image(4)) <= ladder::EXACT_MAX_ABS, "{name}");
    }
}

#[test]
fn bad_requests_are_named() {
    let model = Model::from_path(golden("models/cond-index.onnx"), &LoadOptions::default()).unwrap();
    let g = generator(&model, 4, 1);
    let l = Latents::sample(16, &genloom::SampleOptions::new(1, 3)).unwrap();
    let e = g.generate(&l, Some(&[0, 5, 1])).unwrap_err().to_string();
    assert_eq!(e, "label 1 is 5, the model has classes 0..5 (0 to 4)");
    let e = g.generate(&l, None).unwrap_err().to_string();
    assert!(e.contains("input `label` needs one class"), "{e}");
    let e = g.generate(&l, Some(&[0])).unwrap_err().to_string();
    assert!(e.contains("1 labels for 3 latents"), "{e}");
    let wrong = Latents::sample(8, &genloom::SampleOptions::new(1, 3)).unwrap();
    let e = g.generate(&wrong, Some(&[0, 1, 2])).unwrap_err().to_string();
    assert_eq!(e, "latent input `z` has 8 values per sample, the model expects 16");
    let plain = Model::from_path(golden("models/nchw-tanh.onnx"), &LoadOptions::default()).unwrap();
    let e = generator(&plain, 1, 1).generate(&l, Some(&[0, 0, 0])).unwrap_err().to_string();
    assert!(e.contains("unconditional"), "{e}");
}

#[test]
fn fixed_batch_models_serve_any_count() {
    let model = Model::from_path(golden("models/fixed-batch.onnx"), &LoadOptions::default()).unwrap();
    assert_eq!(model.signature().batch, Batch::Fixed(4));
    let g = generator(&model, 8, 1);
    assert_eq!(g.options().micro_batch, 4);
    let l = Latents::sample(16, &genloom::SampleOptions::new(8, 9)).unwrap();
    let all = g.generate(&l, None).unwrap();
    assert_eq!(all.count, 9);
    for i in [0, 4, 8] {
        let one = g.generate(&l.slice(i..i + 1).unwrap(), None).unwrap();
        assert!(max_abs_diff(one.image(0), all.image(i)) <= ladder::EXACT_MAX_ABS);
    }
}

#[test]
fn progress_and_cancellation() {
    let model = Model::from_path(golden("models/nchw-tanh.onnx"), &LoadOptions::default()).unwrap();
    let g = generator(&model, 2, 1);
    let l = Latents::sample(16, &genloom::SampleOptions::new(8, 7)).unwrap();
    let mut seen = vec![];
    g.generate_with(&l, None, &mut |p| {
        seen.push((p.done, p.total));
        true
    })
    .unwrap();
    assert_eq!(seen, vec![(2, 7), (4, 7), (6, 7), (7, 7)]);
    let e = g.generate_with(&l, None, &mut |p| p.done < 4).unwrap_err();
    assert!(matches!(e, genloom::Error::Cancelled { done: 4, total: 7 }), "{e}");
    let g2 = generator(&model, 1, 2);
    let e = g2.generate_with(&l, None, &mut |p| p.done < 2).unwrap_err();
    assert!(matches!(e, genloom::Error::Cancelled { .. }), "{e}");
}

#[test]
fn one_generator_serves_many_threads() {
    let model = Model::from_path(golden("models/nchw-tanh.onnx"), &LoadOptions::default()).unwrap();
    let g = std::sync::Arc::new(generator(&model, 4, 1));
    let l = Latents::sample(16, &genloom::SampleOptions::new(3, 6)).unwrap();
    let serial = g.generate(&l, None).unwrap();
    let handles: Vec<_> = (0..4)
        .map(|_| {
            let (g, l) = (g.clone(), l.clone());
            std::thread::spawn(move || (0..20).map(|_| g.generate(&l, None).unwrap()).collect::<Vec<_>>())
        })
        .collect();
    for h in handles {
        for r in h.join().unwrap() {
            assert_eq!(r.data, serial.data);
        }
    }
}

#[test]
fn f16_compute_stays_near_the_onnx_reference_evaluator() {
    // Source: `onnx.reference.ReferenceEvaluator` outputs in f32 (models/*.onnxref.npy). IEEE 754
    // binary16 keeps 11 significant bits (unit roundoff 2^-11, about 4.9e-4), so a few layers of
    // rounded products and sums land a few roundoffs off: measured 0.7e-3 to 1.3e-3 of the range
    // width here. The bound, 4e-3, is about one 8-bit level (1/255 = 3.9e-3). Every model must
    // also differ from its f32 output somewhere, which shows the f16 path really ran.
    let mut checked = 0;
    for m in ok_models() {
        let Some(refname) = m["onnxref"].as_str() else { continue };
        let name = m["name"].as_str().unwrap();
        let model = Model::from_path(
            golden(&format!("models/{}", m["file"].as_str().unwrap())),
            &LoadOptions::default(),
        )
        .unwrap();
        let dim = model.signature().latent.dim;
        let range = model.signature().image.range;
        let width = range.hi - range.lo;
        let latents =
            npy::read_latents(&golden(&format!("models/{}", m["latents"].as_str().unwrap())), dim).unwrap();
        let labels = labels_of(&m);
        let want = NpyArray::read(&golden(&format!("models/{refname}"))).unwrap();
        let NpyData::F32(want) = want.data else { panic!("{name}: reference is not f32") };
        let mut o = GeneratorOptions::default();
        o.f16_compute = true;
        o.micro_batch = 2;
        let g = Generator::new(model.clone(), o).unwrap();
        let images = g.generate(&latents, labels.as_deref()).unwrap();
        assert_eq!(images.data.len(), want.len(), "{name}");
        let worst = max_abs_diff(&images.data, &want) / width;
        eprintln!("{name}: f16 compute max abs error {worst:.2e} of the range width");
        assert!(
            worst <= ladder::F16_COMPUTE_MAX_ABS_OF_RANGE,
            "{name}: f16 compute is {worst} of the range width off the reference"
        );
        let f32_images = generator(&model, 2, 1).generate(&latents, labels.as_deref()).unwrap();
        assert_ne!(images.data, f32_images.data, "{name}: f16 compute gave the f32 result bit for bit");
        checked += 1;
    }
    assert!(checked >= 7, "only {checked} models checked");
}
