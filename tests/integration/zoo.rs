//! The model zoo (`tests/zoo/`, written by `tests/zoo/make_zoo.py` from seeded PyTorch models
//! with both exporters): every family loads, matches PyTorch's outputs and the ONNX reference
//! evaluator's within 1e-4 of its output range's width, and passes the release gate. The
//! pattern graphs (`tests/zoo/patterns/`) judge each load-time pass against the reference
//! evaluator, including the forms a pass must leave alone.

use genloom::check::{check_path, CheckOptions, FrameworkReference};
use genloom::conformance::run_graph;
use genloom::npy::{self, NpyArray, NpyData};
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, PassOptions, ValueRange};
use genloom_tests::{json, max_abs_diff, root};
use std::path::PathBuf;

fn zoo(rel: &str) -> PathBuf {
    root().join("tests/zoo").join(rel)
}

fn floats(path: &std::path::Path) -> Vec<f32> {
    match NpyArray::read(path).unwrap().data {
        NpyData::F32(v) => v,
        other => panic!("{}: {other:?}", path.display()),
    }
}

/// 1e-4 of the output range's width: the promise of the zoo (issue: real generators).
const SHARE_OF_WIDTH: f64 = 1e-4;

#[test]
fn every_zoo_model_matches_pytorch_and_the_reference_evaluator_and_passes_the_gate() {
    let manifest = json(&zoo("manifest.json"));
    let files = manifest["files"].as_object().unwrap();
    assert!(files.len() >= 16, "only {} zoo files", files.len());
    let mut families = std::collections::BTreeSet::new();
    let mut report = vec![];
    for (file, entry) in files {
        let family = entry["family"].as_str().unwrap();
        families.insert(family.to_string());
        let path = zoo(file);
        // A model with no output activation (stylegen) has no range to discover: its user
        // declares one, as the manifest's `check_range` does (it holds the outputs, with room).
        let mut load = LoadOptions::default();
        let range = entry["check_range"].as_array().unwrap_or_else(|| panic!("{file}: no range")).clone();
        let (lo, hi) = (range[0].as_f64().unwrap(), range[1].as_f64().unwrap());
        if entry["declared_range"].is_null() {
            load.overrides.range = Some(ValueRange::new(lo as f32, hi as f32).unwrap());
        }
        let width = hi - lo;
        let model = Model::from_path(&path, &load).unwrap_or_else(|e| panic!("{file}: {e}"));
        assert!(model.info().macs_per_sample.is_some_and(|m| m > 0), "{file}: compute unknown");
        assert!(!model.info().ops.is_empty());
        let latents =
            npy::read_latents(&zoo(&format!("{family}.latents.npy")), model.signature().latent.dim).unwrap();
        let labels = model
            .signature()
            .label
            .as_ref()
            .map(|_| npy::read_labels(&zoo(&format!("{family}.labels.npy"))).unwrap());
        let g = Generator::new(model.clone(), GeneratorOptions::default()).unwrap();
        let out = g.generate(&latents, labels.as_deref()).unwrap().data;
        // The ONNX reference evaluator on this very file.
        let onnxref = floats(&zoo(entry["reference"].as_str().unwrap()));
        let d_ref = f64::from(max_abs_diff(&out, &onnxref));
        assert!(d_ref <= SHARE_OF_WIDTH * width, "{file}: {d_ref:e} from the reference evaluator");
        // PyTorch eager, except where the export itself changes the function: an opset-9
        // bilinear Upsample has asymmetric coordinates where PyTorch samples at pixel centres
        // (the manifest records that difference between PyTorch and the reference evaluator).
        let torch = floats(&zoo(&format!("{family}.torch.npy")));
        let exporter_differs =
            entry["max_abs_diff_torch_vs_onnxref"].as_f64().unwrap() > SHARE_OF_WIDTH * width;
        let d_torch = f64::from(max_abs_diff(&out, &torch));
        if exporter_differs {
            assert!(
                file.ends_with("-op9.onnx") && family == "upconv-bilinear",
                "{file}: the export differs from PyTorch"
            );
        } else {
            assert!(d_torch <= SHARE_OF_WIDTH * width, "{file}: {d_torch:e} from PyTorch");
        }
        // The release gate, with PyTorch's (or, where the export changes the function, the
        // reference evaluator's) outputs as the framework reference.
        let mut o = CheckOptions::default();
        o.reference = Some(FrameworkReference {
            latents: latents.clone(),
            labels: labels.clone(),
            outputs: if exporter_differs { onnxref.clone() } else { torch.clone() },
        });
        let r = check_path(&path, &load, &o).unwrap();
        assert!(r.ok() && r.failed == 0 && r.warned == 0, "{file}: the gate says\n{r}");
        report.push(format!(
            "{file}: reference evaluator {d_ref:.1e}, PyTorch {d_torch:.1e}, gate {:.0} ms",
            r.elapsed_ms
        ));
    }
    for want in [
        "dcgan64",
        "dcgan128",
        "resgen",
        "stylegen",
        "subpixel",
        "upconv-nearest",
        "upconv-bilinear",
        "clipgen",
    ] {
        assert!(families.contains(want), "family {want} missing from the zoo");
    }
    eprintln!("{}", report.join("\n"));
}

/// A pattern graph's inputs, in the order its graph declares them.
fn pattern_inputs(entry: &serde_json::Value) -> Vec<NpyArray> {
    entry["input_decl"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| {
            let input = &entry["inputs"][d["name"].as_str().unwrap()];
            NpyArray::read(&zoo(&format!("patterns/{}", input["file"].as_str().unwrap()))).unwrap()
        })
        .collect()
}

#[test]
fn passes_fire_on_the_forms_exporters_write_and_agree_with_the_reference_evaluator() {
    let manifest = json(&zoo("manifest.json"));
    let patterns = manifest["patterns"].as_object().unwrap();
    let mut seen = vec![];
    for (name, entry) in patterns {
        let bytes = std::fs::read(root().join("tests/zoo").join(entry["file"].as_str().unwrap())).unwrap();
        let inputs = pattern_inputs(entry);
        let want = floats(&zoo(&format!("patterns/{}", entry["output"]["file"].as_str().unwrap())));
        // Which pass must rewrite the pattern, or none for the forms left alone.
        let expected: Option<&str> = if name.starts_with("einsum-ii") {
            None
        } else if name.starts_with("einsum-") {
            Some("einsum")
        } else if name.starts_with("upsample-") {
            Some("upsample-to-resize")
        } else if name == "const-matmul-1d" {
            Some("fold-constants")
        } else if name == "matmul-1d-runtime" {
            Some("matmul-vectors")
        } else {
            None
        };
        let run = match run_graph(&bytes, &inputs, &PassOptions::default()) {
            Ok(run) => run,
            Err(e) if expected.is_none() => {
                // A form left alone may be one tract does not run either: it must then be a
                // clear error naming tract, never a panic.
                let msg = e.to_string();
                assert!(msg.contains("tract"), "{name}: {msg}");
                seen.push(format!("{name}: left alone; tract: {msg}"));
                continue;
            }
            Err(e) => panic!("{name}: {e}"),
        };
        let fired: Vec<&str> = run.passes.iter().map(|p| p.pass.as_str()).collect();
        match expected {
            Some(pass) => assert!(fired.contains(&pass), "{name}: {pass} did not fire ({fired:?})"),
            None if name.starts_with("einsum-") => assert!(!fired.contains(&"einsum"), "{name}: rewritten"),
            None => {}
        }
        if name == "const-matmul-1d" {
            let changes = &run.passes.iter().find(|p| p.pass == "fold-constants").unwrap().changes;
            assert!(changes.iter().filter(|c| c.starts_with("MatMul")).count() >= 2, "{changes:?}");
        }
        let got = match &run.outputs[0].data {
            NpyData::F32(v) => v.clone(),
            other => panic!("{name}: {other:?}"),
        };
        assert_eq!(got.len(), want.len(), "{name}");
        // numpy.testing.assert_allclose's rule with atol 1e-5 and rtol 1e-5: only the order of
        // float additions differs between a rewrite and the reference evaluator.
        for (i, (&a, &d)) in got.iter().zip(&want).enumerate() {
            let allowed = 1e-5 + 1e-5 * f64::from(d).abs();
            assert!((f64::from(a) - f64::from(d)).abs() <= allowed, "{name}[{i}]: {a} vs {d}");
        }
        seen.push(format!("{name}: {fired:?}, max abs {:.1e}", max_abs_diff(&got, &want)));
    }
    assert!(seen.len() >= 10, "{seen:?}");
    eprintln!("{}", seen.join("\n"));
}

#[test]
fn the_passes_change_nothing_they_should_not() {
    // The same pattern graphs with every pass off agree with the passes' results too, where
    // tract can run them as exported (so the passes are not hiding a tract difference).
    let manifest = json(&zoo("manifest.json"));
    for name in ["einsum-bchw_bc-to-bchw", "einsum-bij_bjk-to-bik", "einsum-oihw_bi-to-boihw"] {
        let entry = &manifest["patterns"][name];
        let bytes = std::fs::read(root().join("tests/zoo").join(entry["file"].as_str().unwrap())).unwrap();
        let inputs = pattern_inputs(entry);
        let off = run_graph(&bytes, &inputs, &PassOptions::none()).unwrap();
        let on = run_graph(&bytes, &inputs, &PassOptions::default()).unwrap();
        let (NpyData::F32(a), NpyData::F32(b)) = (&off.outputs[0].data, &on.outputs[0].data) else {
            panic!()
        };
        assert!(max_abs_diff(a, b) <= 1e-5, "{name}");
        assert!(off.passes.is_empty());
    }
    // Without the passes, tract refuses a product of vectors computed at run time: the
    // matmul-vectors pass is what makes it run.
    let entry = &manifest["patterns"]["matmul-1d-runtime"];
    let bytes = std::fs::read(root().join("tests/zoo").join(entry["file"].as_str().unwrap())).unwrap();
    let x = NpyArray::read(&zoo("patterns/matmul-1d-runtime.x.npy")).unwrap();
    let e = run_graph(&bytes, &[x], &PassOptions::none()).unwrap_err();
    assert!(e.chain().contains("MatMul"), "{}", e.chain());
}
