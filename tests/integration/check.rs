//! The release gate: each defective model (tests/golden/defects, made with the `onnx` package)
//! fails exactly the check that names its defect; the demo models pass every check.

use genloom::check::{self, CheckId, CheckOptions, Status};
use genloom::LoadOptions;
use genloom_tests::{demo, golden, json};

fn failed(report: &check::CheckReport) -> Vec<String> {
    report.checks.iter().filter(|c| c.status == Status::Fail).map(|c| c.id.as_str().to_string()).collect()
}

#[test]
fn each_defect_fails_the_check_that_names_it() {
    let manifest = json(&golden("defects/manifest.json"));
    let mut seen = 0;
    for m in manifest["models"].as_array().unwrap() {
        let file = m["file"].as_str().unwrap();
        let report = check::check_path(
            &golden(&format!("defects/{file}")),
            &LoadOptions::default(),
            &CheckOptions::default(),
        )
        .unwrap_or_else(|e| panic!("{file}: {e}"));
        let fails = failed(&report);
        match m["fails"].as_str() {
            None => assert!(fails.is_empty(), "{file} should pass, failed {fails:?}"),
            Some(expected) => {
                assert!(
                    fails.iter().any(|f| f == expected),
                    "{file}: expected `{expected}` to fail, failed {fails:?}"
                );
                let also: Vec<&str> = m["also_fails"]
                    .as_array()
                    .map(|a| a.iter().filter_map(|v| v.as_str()).collect())
                    .unwrap_or_default();
                for f in &fails {
                    assert!(
                        f == expected || also.contains(&f.as_str()),
                        "{file}: `{f}` failed too ({fails:?})"
                    );
                }
                let c = report.checks.iter().find(|c| c.id.as_str() == expected).unwrap();
                assert!(
                    !c.detail.is_empty() || !c.measured.is_empty(),
                    "{file}: the failure gives no figure or reason"
                );
            }
        }
        assert_eq!(report.checks.len(), 12, "{file}: every check is reported");
        seen += 1;
    }
    assert!(seen >= 9, "only {seen} defect models");
}

#[test]
fn defects_are_named_by_node() {
    let r = check::check_path(
        &golden("defects/random-op.onnx"),
        &LoadOptions::default(),
        &CheckOptions::default(),
    )
    .unwrap();
    let s = r.checks.iter().find(|c| c.id == CheckId::Structure).unwrap();
    assert!(s.detail.contains("RandomNormalLike") && s.detail.contains("random"), "{}", s.detail);
    let r = check::check_path(
        &golden("defects/unsupported-attr.onnx"),
        &LoadOptions::default(),
        &CheckOptions::default(),
    )
    .unwrap();
    let s = r.checks.iter().find(|c| c.id == CheckId::Structure).unwrap();
    assert!(s.detail.contains("LpPool"), "{}", s.detail);
    let r = check::check_path(
        &golden("defects/dead-half.onnx"),
        &LoadOptions::default(),
        &CheckOptions::default(),
    )
    .unwrap();
    let s = r.checks.iter().find(|c| c.id == CheckId::Sensitivity).unwrap();
    assert!(s.detail.contains("8 of 16 latent dimensions") && s.detail.contains("8, 9, 10"), "{}", s.detail);
}

#[test]
fn demo_models_pass_every_check_with_their_references() {
    let latents = genloom::npy::read_latents(&demo("reference/latents.npy"), 64).unwrap();
    let labels = genloom::npy::read_labels(&demo("reference/labels.npy")).unwrap();
    for name in ["tiles", "tiles-dynamo", "tiles-kind", "tiles-kind-dynamo"] {
        let outputs =
            match genloom::npy::NpyArray::read(&demo(&format!("reference/{name}.torch.npy"))).unwrap().data {
                genloom::npy::NpyData::F32(v) => v,
                other => panic!("{other:?}"),
            };
        let conditional = name.starts_with("tiles-kind");
        let mut o = CheckOptions::default();
        o.reference = Some(check::FrameworkReference {
            latents: latents.clone(),
            labels: conditional.then(|| labels.clone()),
            outputs,
        });
        let r = check::check_path(&demo(&format!("{name}.onnx")), &LoadOptions::default(), &o).unwrap();
        assert!(r.ok(), "{name} failed {:?}: {:#?}", failed(&r), r.checks);
        let parity = r.checks.iter().find(|c| c.id == CheckId::ParityFramework).unwrap();
        assert_eq!(parity.status, Status::Pass, "{name}");
        if conditional {
            assert_eq!(r.checks.iter().find(|c| c.id == CheckId::Labels).unwrap().status, Status::Pass);
        }
    }
}

#[test]
fn an_export_is_held_to_its_source() {
    let src = genloom::Model::from_path(demo("tiles.onnx"), &LoadOptions::default()).unwrap();
    let mut co = genloom::ConvertOptions::new(genloom::Precision::Int8);
    co.eval_count = 8;
    let export = genloom::convert::convert(&src, &co).unwrap();
    let mut o = CheckOptions::default();
    o.against = Some(src.clone());
    let r = check::check_bytes(&export.bytes, "int8 export", &LoadOptions::default(), &o).unwrap();
    assert_eq!(r.checks.iter().find(|c| c.id == CheckId::ParityExport).unwrap().status, Status::Pass);
    // Against another generator's source it fails.
    let mut o = CheckOptions::default();
    o.against =
        Some(genloom::Model::from_path(golden("models/nchw-tanh.onnx"), &LoadOptions::default()).unwrap());
    let r = check::check_bytes(&export.bytes, "int8 export", &LoadOptions::default(), &o).unwrap();
    assert!(!r.ok());
}

#[test]
fn unreadable_models_are_errors_not_reports() {
    assert!(check::check_bytes(b"", "empty", &LoadOptions::default(), &CheckOptions::default()).is_err());
    assert!(check::check_path(
        std::path::Path::new("no/such.onnx"),
        &LoadOptions::default(),
        &CheckOptions::default()
    )
    .is_err());
}

fn check_default(rel: &str) -> check::CheckReport {
    check::check_path(&golden(rel), &LoadOptions::default(), &CheckOptions::default())
        .unwrap_or_else(|e| panic!("{rel}: {e}"))
}

fn float_npy(rel: &str) -> Vec<f32> {
    match genloom::npy::NpyArray::read(&golden(rel)).unwrap().data {
        genloom::npy::NpyData::F32(v) => v,
        other => panic!("{rel}: {other:?}"),
    }
}

/// The ONNX reference evaluator returns NaN in every image for latents at 3x their norm
/// (make_defects.py proves it and records it in the manifest); tract's Relu maps the NaN to 0,
/// so genloom's own images look finite. The gate must still fail and name the node and scale.
#[test]
fn nan_for_large_latents_fails_and_names_the_node_and_the_scale() {
    let g = genloom::Generator::from_path(golden("defects/nan-large-latent.onnx")).unwrap();
    let z = genloom::Latents::sample(16, &genloom::SampleOptions::new(3, 8)).unwrap();
    let big = genloom::Latents::new(16, z.as_slice().iter().map(|v| v * 3.0).collect()).unwrap();
    let images = g.generate(&big, None).unwrap();
    assert!(images.data.iter().all(|v| v.is_finite()), "tract no longer hides the NaN: update the docs");
    let r = check_default("defects/nan-large-latent.onnx");
    let c = r.get(CheckId::Finiteness).unwrap();
    assert_eq!(c.status, Status::Fail, "{c:?}");
    assert!(c.detail.contains("`renorm_sqrt`") && c.detail.contains("3x norm"), "{}", c.detail);
    assert!(c.detail.contains("hides"), "{}", c.detail);
    let act = r.activations.as_ref().unwrap();
    assert!(act.non_finite.iter().all(|n| !n.scale.ordinary()), "{:?}", act.non_finite);
}

/// NaN made mid-graph and swallowed by Relu, Max, Clip, or a final Clip: the ONNX reference
/// evaluator propagates it to the image (ONNX operators are element-wise IEEE 754 arithmetic;
/// make_defects.py records the NaN shares it measured); the gate fails at the Sqrt that made it.
#[test]
fn nan_hidden_by_relu_max_clip_and_a_final_clamp_fails() {
    for file in ["nan-relu", "nan-max", "nan-clip", "nan-final-clamp"] {
        let r = check_default(&format!("defects/{file}.onnx"));
        let c = r.get(CheckId::Finiteness).unwrap();
        assert_eq!(c.status, Status::Fail, "{file}: {c:?}");
        assert!(
            c.detail.contains("`nan_sqrt`") && c.detail.contains("typical latents"),
            "{file}: {}",
            c.detail
        );
    }
}

/// A [0, 255] NHWC export matches its float64 reference-evaluator outputs within the
/// range-scaled tolerance (the rule of numpy.testing.assert_allclose with atol a share of the
/// range); the same reference off by half an 8-bit level in one image fails.
#[test]
fn parity_scales_with_the_output_range() {
    let latents = genloom::npy::read_latents(&golden("defects/range255-z.npy"), 16).unwrap();
    let run = |outputs: Vec<f32>| {
        let mut o = CheckOptions::default();
        o.reference = Some(check::FrameworkReference { latents: latents.clone(), labels: None, outputs });
        check::check_path(&golden("defects/range255-nhwc.onnx"), &LoadOptions::default(), &o).unwrap()
    };
    let r = run(float_npy("defects/range255-out.npy"));
    assert!(r.ok(), "{r}");
    let sig = r.signature.as_ref().unwrap();
    assert_eq!((sig.image.range.lo, sig.image.range.hi), (0.0, 255.0));
    assert_eq!(r.get(CheckId::ParityFramework).unwrap().status, Status::Pass);
    let r = run(float_npy("defects/range255-off.npy"));
    let c = r.get(CheckId::ParityFramework).unwrap();
    assert_eq!(c.status, Status::Fail, "{c:?}");
    assert!(c.detail.contains("past the tolerance"), "{}", c.detail);
}

/// An activation past binary16's largest finite value (65504, IEEE 754): the f32 gate passes
/// and reports it; f16 compute refuses naming the node; an f16 export warns naming it. The
/// reference evaluator's float16 run of the model overflows (make_defects.py).
#[test]
fn f16_overflowing_activation_is_named() {
    let path = golden("defects/f16-overflow.onnx");
    let r = check_default("defects/f16-overflow.onnx");
    assert!(r.ok(), "{r}");
    let tight = r.activations.as_ref().unwrap().tightest().unwrap();
    assert_eq!(tight.node, "amplify");
    assert!(tight.max_abs > genloom::probe::F16_MAX && tight.f16_headroom < 1.0, "{tight:?}");
    let model = genloom::Model::from_path(&path, &LoadOptions::default()).unwrap();
    let mut o = genloom::GeneratorOptions::default();
    o.f16_compute = true;
    match genloom::Generator::new(model.clone(), o) {
        Err(genloom::Error::F16Overflow { node, max_abs, .. }) => {
            assert_eq!(node, "amplify");
            assert!(max_abs > 65504.0);
        }
        other => panic!("f16 compute should refuse: {:?}", other.map(|_| ())),
    }
    let export =
        genloom::convert::convert(&model, &genloom::ConvertOptions::new(genloom::Precision::F16)).unwrap();
    assert_eq!(export.report.f16_tightest.as_ref().unwrap().node, "amplify");
    assert!(export.report.warnings.iter().any(|w| w.contains("`amplify`") && w.contains("65504")));
    // The demo model has room: no warning, and f16 compute is allowed.
    let demo_model = genloom::Model::from_path(demo("tiles.onnx"), &LoadOptions::default()).unwrap();
    let mut co = genloom::ConvertOptions::new(genloom::Precision::F16);
    co.eval_count = 8;
    let export = genloom::convert::convert(&demo_model, &co).unwrap();
    assert!(export.report.warnings.is_empty(), "{:?}", export.report.warnings);
    assert!(export.report.f16_tightest.unwrap().f16_headroom > 4.0);
}

#[test]
fn the_label_check_depends_on_the_model_and_mismatches_are_named() {
    // A conditional demo model: every class distinct.
    let r = check::check_path(&demo("tiles-kind.onnx"), &LoadOptions::default(), &CheckOptions::default())
        .unwrap();
    let c = r.get(CheckId::Labels).unwrap();
    assert_eq!(c.status, Status::Pass, "{c:?}");
    assert!(c.measured.contains("4 classes") && c.measured.contains("closest pair"), "{}", c.measured);
    // --against a model of another signature: the difference is named, not "inference failed".
    let mut o = CheckOptions::default();
    o.against = Some(genloom::Model::from_path(demo("tiles.onnx"), &LoadOptions::default()).unwrap());
    let r = check::check_path(&golden("models/nchw-tanh.onnx"), &LoadOptions::default(), &o).unwrap();
    let c = r.get(CheckId::ParityExport).unwrap();
    assert_eq!(c.status, Status::Fail);
    assert!(
        c.measured.contains("signatures differ") && c.detail.contains("latent size 16 in the export, 64"),
        "{c:?}"
    );
    // The text report is the runtime's: every check on its own line, the verdict last.
    let text = r.to_string();
    assert!(text.lines().count() >= 13 && text.lines().last().unwrap().starts_with("do not ship"), "{text}");
}
