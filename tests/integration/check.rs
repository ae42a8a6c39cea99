//! The release gate: each defective model (tests/golden/defects, made with the `onnx` package)
//! fails exactly the check that names its defect; the demo models pass every check.

use genloom::check::{self, CheckOptions, Status};
use genloom::LoadOptions;
use genloom_tests::{demo, golden, json};

fn failed(report: &check::CheckReport) -> Vec<String> {
    report.checks.iter().filter(|c| c.status == Status::Fail).map(|c| c.id.clone()).collect()
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
                let c = report.checks.iter().find(|c| c.id == expected).unwrap();
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
    let s = r.checks.iter().find(|c| c.id == "structure").unwrap();
    assert!(s.detail.contains("RandomNormalLike") && s.detail.contains("random"), "{}", s.detail);
    let r = check::check_path(
        &golden("defects/unsupported-attr.onnx"),
        &LoadOptions::default(),
        &CheckOptions::default(),
    )
    .unwrap();
    let s = r.checks.iter().find(|c| c.id == "structure").unwrap();
    assert!(s.detail.contains("LpPool"), "{}", s.detail);
    let r = check::check_path(
        &golden("defects/dead-half.onnx"),
        &LoadOptions::default(),
        &CheckOptions::default(),
    )
    .unwrap();
    let s = r.checks.iter().find(|c| c.id == "sensitivity").unwrap();
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
        let parity = r.checks.iter().find(|c| c.id == "parity-framework").unwrap();
        assert_eq!(parity.status, Status::Pass, "{name}");
        if conditional {
            assert_eq!(r.checks.iter().find(|c| c.id == "labels").unwrap().status, Status::Pass);
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
    assert_eq!(r.checks.iter().find(|c| c.id == "parity-export").unwrap().status, Status::Pass);
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
