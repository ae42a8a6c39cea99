//! The demo generators of models-demo/ against PyTorch and the ONNX reference evaluator.
//!
//! References are made by `models-demo/make_reference.py`: `<name>.torch.npy` are the outputs
//! PyTorch gave in eval mode for `reference/latents.npy` (and `labels.npy`), and
//! `<name>.onnxref.npy` those of `onnx.reference.ReferenceEvaluator` on the exported file.

use genloom::npy::{self, NpyArray, NpyData};
use genloom::{
    Batch, Generator, GeneratorOptions, LabelKind, Latents, Layout, LoadOptions, Model, SampleOptions,
    ValueRange,
};
use genloom_tests::{demo, json, ladder, max_abs_diff};

const EXPORTS: [(&str, bool); 4] =
    [("tiles", false), ("tiles-dynamo", false), ("tiles-kind", true), ("tiles-kind-dynamo", true)];

fn reference(name: &str) -> Vec<f32> {
    match NpyArray::read(&demo(&format!("reference/{name}"))).unwrap().data {
        NpyData::F32(v) => v,
        other => panic!("{name}: {}", other.dtype_name()),
    }
}

#[test]
fn every_export_matches_pytorch_and_the_reference_evaluator() {
    let latents = npy::read_latents(&demo("reference/latents.npy"), 64).unwrap();
    let labels = npy::read_labels(&demo("reference/labels.npy")).unwrap();
    for (name, conditional) in EXPORTS {
        let model = Model::from_path(demo(&format!("{name}.onnx")), &LoadOptions::default())
            .unwrap_or_else(|e| panic!("{name}: {e}"));
        let g = Generator::new(model, GeneratorOptions::default()).unwrap();
        let out = g.generate(&latents, conditional.then_some(labels.as_slice())).unwrap();
        // Source: PyTorch eval-mode outputs.
        let torch = max_abs_diff(&out.data, &reference(&format!("{name}.torch.npy")));
        assert!(torch <= ladder::F32_MAX_ABS, "{name}: max abs error {torch} against PyTorch");
        // Source: onnx.reference.ReferenceEvaluator.
        let onnxref = max_abs_diff(&out.data, &reference(&format!("{name}.onnxref.npy")));
        assert!(
            onnxref <= ladder::F32_MAX_ABS,
            "{name}: max abs error {onnxref} against the ONNX reference evaluator"
        );
    }
}

#[test]
fn signatures_of_both_export_styles() {
    for (name, conditional) in EXPORTS {
        let model = Model::from_path(demo(&format!("{name}.onnx")), &LoadOptions::default()).unwrap();
        let s = model.signature();
        assert_eq!((s.latent.name.as_str(), s.latent.dim), ("z", 64), "{name}");
        assert_eq!(
            (s.image.channels, s.image.height, s.image.width, s.image.layout),
            (3, 32, 32, Layout::Nchw),
            "{name}"
        );
        assert_eq!(s.image.range, ValueRange::TANH, "{name}");
        assert_eq!(s.batch, Batch::Symbolic, "{name}");
        match &s.label {
            Some(l) => {
                assert!(conditional, "{name}");
                assert_eq!((l.name.as_str(), l.kind, l.classes), ("kind", LabelKind::Index, 4), "{name}");
            }
            None => assert!(!conditional, "{name}"),
        }
        let external = !model.info().external_data.is_empty();
        assert_eq!(external, name.ends_with("-dynamo"), "{name}: external data");
    }
}

#[test]
fn the_conditional_model_follows_its_label() {
    // Source: per-kind mean colours of the procedural training set (models-demo/dataset.py).
    let means = json(&demo("reference/kind-means.json"));
    let kinds: Vec<[f32; 3]> = means["mean_rgb"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let v: Vec<f32> = c.as_array().unwrap().iter().map(|x| x.as_f64().unwrap() as f32).collect();
            [v[0], v[1], v[2]]
        })
        .collect();
    for name in ["tiles-kind", "tiles-kind-dynamo"] {
        let g = Generator::new(
            Model::from_path(demo(&format!("{name}.onnx")), &LoadOptions::default()).unwrap(),
            GeneratorOptions::default(),
        )
        .unwrap();
        let latents = Latents::sample(64, &SampleOptions::new(99, 64)).unwrap();
        for (k, _) in kinds.iter().enumerate() {
            let labels = vec![k as i64; 64];
            let out = g.generate(&latents, Some(&labels)).unwrap();
            let mut mean = [0f64; 3];
            for i in 0..64 {
                for (c, m) in mean.iter_mut().enumerate() {
                    let plane = &out.image(i)[c * 1024..(c + 1) * 1024];
                    *m += plane.iter().map(|&v| f64::from(v)).sum::<f64>() / (1024.0 * 64.0);
                }
            }
            let dist = |m: &[f32; 3]| (0..3).map(|c| (f64::from(m[c]) - mean[c]).powi(2)).sum::<f64>();
            let nearest =
                (0..kinds.len()).min_by(|&a, &b| dist(&kinds[a]).total_cmp(&dist(&kinds[b]))).unwrap();
            assert_eq!(
                nearest, k,
                "{name}: tiles of kind {k} have mean colour {mean:?}, nearest to kind {nearest}"
            );
        }
    }
}

#[test]
fn the_built_in_model_is_the_single_file_tiles_export() {
    let file = std::fs::read(demo("tiles.onnx")).unwrap();
    assert!(file == genloom::demo::TILES_ONNX, "the built-in model differs from models-demo/tiles.onnx");
}
