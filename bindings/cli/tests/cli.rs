//! The `genloom` command as its users run it: outputs, JSON, exit codes, messages.
#![allow(clippy::unwrap_used)] // tests panic on failure by design

use std::path::Path;
use std::process::{Command, Output};

fn genloom(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_genloom")).args(args).current_dir(dir).output().expect("run genloom")
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

fn demo(rel: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../../models-demo").join(rel).display().to_string()
}

fn golden(rel: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/golden").join(rel).display().to_string()
}

#[test]
fn inspect_describes_the_built_in_model() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(&["inspect"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    let s = text(&o.stdout);
    for want in [
        "`z` float32 [N, 64]",
        "32 x 32 RGB, NCHW layout",
        "[-1, 1] (from the graph: Tanh)",
        "any (symbolic)",
        "multiply-accumulates",
    ] {
        assert!(s.contains(want), "missing {want:?} in\n{s}");
    }
    let o = genloom(&["inspect", "--json"], d.path());
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["signature"]["latent"]["dim"], 64);
    assert_eq!(v["signature"]["image"]["layout"], "NCHW");
    assert_eq!(v["info"]["opset"], 17);
}

#[test]
fn inspect_reads_external_data_and_test_models() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(&["inspect", &demo("tiles-kind-dynamo.onnx")], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    let s = text(&o.stdout);
    assert!(s.contains("`kind` int64 [N], 4 classes"), "{s}");
    assert!(s.contains("external data: tiles-kind-dynamo.onnx.data"), "{s}");
    let o = genloom(&["inspect", &golden("models/nhwc-255-rgba.onnx")], d.path());
    let s = text(&o.stdout);
    assert!(s.contains("6 x 6 RGBA, NHWC layout") && s.contains("[0, 255]"), "{s}");
}

#[test]
fn sample_writes_the_grid_the_library_computes() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(&["sample", "--count", "16", "--out", "tiles.png"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    assert!(text(&o.stdout).contains("wrote 16 images of 32x32 to tiles.png"));
    let png = image::open(d.path().join("tiles.png")).unwrap().to_rgb8();
    // 4 x 4 tiles of 32 with 2-pixel margins.
    assert_eq!(png.dimensions(), (4 * 32 + 5 * 2, 4 * 32 + 5 * 2));
    // The same pixels as the library's own grid for seed 0.
    let g = genloom::Generator::new(
        genloom::Model::from_bytes(genloom::demo::TILES_ONNX, &Default::default()).unwrap(),
        Default::default(),
    )
    .unwrap();
    let l = g.sample_latents(&genloom::SampleOptions::new(0, 16)).unwrap();
    let imgs = g.generate(&l, None).unwrap();
    let (tiles, _) = genloom::pixels::all_pixels(&imgs, genloom::pixels::PixelFormat::Rgb8).unwrap();
    let grid = genloom::pixels::grid(&tiles, &Default::default()).unwrap();
    assert_eq!(png.as_raw(), &grid.data);
}

#[test]
fn sample_folder_latents_round_trip_and_json() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(
        &["sample", "-n", "3", "--seed", "5", "--out", "each", "--latents-out", "z.npy", "--json"],
        d.path(),
    );
    assert!(o.status.success(), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["files"].as_array().unwrap().len(), 3);
    let first = image::open(d.path().join("each/sample-0000.png")).unwrap().to_rgb8();
    let o = genloom(&["sample", "--latents-in", "z.npy", "--out", "again"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    // The same pixels (the provenance text differs: seed and index, or the NPY file and row).
    assert_eq!(image::open(d.path().join("again/sample-0000.png")).unwrap().to_rgb8(), first);
}

#[test]
fn sample_conditional_numpy_and_truncation() {
    let d = tempfile::tempdir().unwrap();
    let m = demo("tiles-kind.onnx");
    let o = genloom(
        &[
            "sample",
            &m,
            "-n",
            "8",
            "--label",
            "cycle",
            "--numpy",
            "--truncation",
            "1.0",
            "--out",
            "k.png",
            "--json",
        ],
        d.path(),
    );
    assert!(o.status.success(), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["labels"], serde_json::json!([0, 1, 2, 3, 0, 1, 2, 3]));
    // The latents themselves, judged by NumPy: --numpy draws exactly what
    // numpy.random.RandomState(seed).standard_normal((count, dim)).astype(float32) draws, and
    // --truncation 1.0 leaves no component beyond 1.
    for (extra, file) in [(None, "z.npy"), (Some("1.0"), "zt.npy")] {
        let mut args =
            vec!["sample", &m, "-n", "8", "--seed", "42", "--numpy", "--out", "n.png", "--latents-out", file];
        if let Some(t) = extra {
            args.extend(["--truncation", t]);
        }
        let o = genloom(&args, d.path());
        assert!(o.status.success(), "{}", text(&o.stderr));
    }
    let python = std::env::var("GENLOOM_PYTHON").unwrap_or_else(|_| "python3".into());
    let judge = "import numpy as np\n\
        z = np.load('z.npy'); zt = np.load('zt.npy')\n\
        want = np.random.RandomState(42).standard_normal((8, 64)).astype(np.float32)\n\
        assert z.dtype == np.float32 and np.array_equal(z, want), 'numpy stream differs'\n\
        assert zt.shape == (8, 64) and np.abs(zt).max() <= 1.0, np.abs(zt).max()\n\
        assert not np.array_equal(zt, z)\n";
    let o = Command::new(python).arg("-c").arg(judge).current_dir(d.path()).output().unwrap();
    assert!(o.status.success(), "{}{}", text(&o.stdout), text(&o.stderr));
}

#[test]
fn morph_writes_a_gif_and_a_strip() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(&["morph", "--seeds", "1,2", "--steps", "4", "--loop", "--out", "m.gif"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    assert!(text(&o.stdout).contains("wrote 8 frames"), "{}", text(&o.stdout));
    let gif = std::fs::read(d.path().join("m.gif")).unwrap();
    assert!(gif.starts_with(b"GIF89a"));
    let o = genloom(
        &[
            "morph",
            "--seeds",
            "1,2,3",
            "--steps",
            "2",
            "--interp",
            "lerp",
            "--scale",
            "1",
            "--out",
            "strip.png",
        ],
        d.path(),
    );
    assert!(o.status.success(), "{}", text(&o.stderr));
    let strip = image::open(d.path().join("strip.png")).unwrap();
    // 5 frames (open path: (3 - 1) * 2 + 1) in one row.
    assert_eq!(strip.width(), 5 * 32 + 6 * 2);
}

#[test]
fn bad_input_exits_2_with_one_line() {
    let d = tempfile::tempdir().unwrap();
    let cases: &[(&[&str], &str)] = &[
        (&["inspect", "no-such.onnx"], "no-such.onnx"),
        (&["sample", "--prior", "cauchy"], "invalid value 'cauchy' for '--prior <PRIOR>'"),
        (&["sample", "--latents-in", "z.npy", "--seed", "3"], "cannot be used with"),
        (&["morph", "--keyframes", "k.npy", "--seeds", "1,2"], "cannot be used with"),
        (&["convert", "--to", "int4"], "[possible values: f32, f16, int8]"),
        (&["bench", "--threads", "0"], "thread counts is [0], expected a list of counts of at least 1"),
        (&["bench", "--profile-runs", "0"], "--profile-runs must be at least 1"),
        (&["sample", "--count", "0"], "count is 0, expected at least 1"),
        (&["sample", "--psi", "2"], "psi is 2"),
        (&["sample", "--label", "1"], "unconditional"),
        (&["sample", "--out", "tiles.jpg"], "expected a .png file or a folder"),
        (&["morph", "--seeds", "a,b"], "--seeds is `a,b`"),
        (&["morph", "--out", "m.mp4"], "expected a .gif animation or a .png strip"),
        (&["morph", "--label", "2"], "unconditional"),
        (&["sample", "--range", "wide"], "range is `wide`"),
        (&["frobnicate"], "unrecognized subcommand"),
    ];
    for (args, want) in cases {
        let o = genloom(args, d.path());
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", text(&o.stderr));
        let err = text(&o.stderr);
        assert!(err.contains(want), "{args:?}: {err}");
        assert!(!err.contains("panicked"), "{args:?}: {err}");
    }
    // Labels out of range on a conditional model.
    let o = genloom(&["sample", &demo("tiles-kind.onnx"), "--label", "7"], d.path());
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("label 0 is 7, the model has classes 0..4"), "{}", text(&o.stderr));
    // A text file given as a model.
    std::fs::write(d.path().join("notes.onnx"), "this is not a model\n").unwrap();
    let o = genloom(&["inspect", "notes.onnx"], d.path());
    assert_eq!(o.status.code(), Some(2));
    assert_eq!(text(&o.stderr).lines().count(), 1, "{}", text(&o.stderr));
}

#[test]
fn failed_writes_exit_1_and_leave_no_partial_file() {
    let d = tempfile::tempdir().unwrap();
    std::fs::write(d.path().join("blocker"), "a file where a folder should be").unwrap();
    let o = genloom(&["sample", "-n", "2", "--out", "blocker/x.png"], d.path());
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stderr));
    let leftovers: Vec<_> = std::fs::read_dir(d.path()).unwrap().map(|e| e.unwrap().file_name()).collect();
    assert_eq!(leftovers.len(), 1, "{leftovers:?}");
}

#[cfg(unix)]
#[test]
fn a_closed_pipe_is_a_quiet_exit() {
    let d = tempfile::tempdir().unwrap();
    let script = format!("set -o pipefail; '{}' inspect --json | true", env!("CARGO_BIN_EXE_genloom"));
    let o = Command::new("bash").arg("-c").arg(script).current_dir(d.path()).output().unwrap();
    assert!(o.status.success(), "{}", text(&o.stderr));
    assert!(text(&o.stderr).is_empty(), "{}", text(&o.stderr));
}

#[test]
fn convert_writes_exports_and_refuses_short_fidelity() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(
        &[
            "convert",
            &demo("tiles-dynamo.onnx"),
            "--to",
            "int8",
            "--out",
            "t8.onnx",
            "--report",
            "r.json",
            "--count",
            "8",
        ],
        d.path(),
    );
    assert!(o.status.success(), "{}", text(&o.stderr));
    let s = text(&o.stdout);
    assert!(s.contains("wrote t8.onnx (int8)") && s.contains("PSNR") && s.contains("size vs source"), "{s}");
    let r: serde_json::Value =
        serde_json::from_slice(&std::fs::read(d.path().join("r.json")).unwrap()).unwrap();
    assert_eq!(r["precision"], "int8");
    assert_eq!(r["eval_count"], 8);
    // The export inspects as int8 and samples.
    let o = genloom(&["sample", "t8.onnx", "-n", "4", "--out", "x.png"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    // An impossible fidelity bar: exit 1, nothing written.
    let o = genloom(
        &[
            "convert",
            &demo("tiles.onnx"),
            "--to",
            "int8",
            "--out",
            "bad.onnx",
            "--min-psnr",
            "200",
            "--count",
            "4",
        ],
        d.path(),
    );
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stderr));
    assert!(text(&o.stderr).contains("below --min-psnr 200"), "{}", text(&o.stderr));
    assert!(!d.path().join("bad.onnx").exists());
    // A conversion that fails half-way, after the export is made, while writing its report (the
    // report target is a folder): the earlier file under the export's name is left as it was,
    // and no temporary file stays behind.
    std::fs::write(d.path().join("kept.onnx"), "an earlier export").unwrap();
    std::fs::create_dir(d.path().join("a-folder")).unwrap();
    let before: Vec<_> = std::fs::read_dir(d.path()).unwrap().map(|e| e.unwrap().file_name()).collect();
    let o = genloom(
        &[
            "convert",
            &demo("tiles.onnx"),
            "--to",
            "f16",
            "--out",
            "kept.onnx",
            "--report",
            "a-folder",
            "--count",
            "2",
        ],
        d.path(),
    );
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stderr));
    assert!(text(&o.stderr).contains("a-folder"), "{}", text(&o.stderr));
    assert_eq!(std::fs::read_to_string(d.path().join("kept.onnx")).unwrap(), "an earlier export");
    let after: Vec<_> = std::fs::read_dir(d.path()).unwrap().map(|e| e.unwrap().file_name()).collect();
    assert_eq!(before.len(), after.len(), "{after:?}");
    // Converting an export again is refused (exit 2).
    let o = genloom(&["convert", "t8.onnx", "--to", "f16", "--out", "again.onnx"], d.path());
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stderr));
    assert!(text(&o.stderr).contains("already converted to int8"), "{}", text(&o.stderr));
    let o = genloom(&["convert", "--to", "int4"], d.path());
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn check_exit_codes_and_json_schema() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(&["check", "--json", "--sheet", "sheet.png"], d.path());
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["schema"], "genloom.check/1");
    assert_eq!(v["failed"], 0);
    let checks = v["checks"].as_array().unwrap();
    assert_eq!(checks.len(), 12);
    for c in checks {
        for key in ["id", "status", "measured", "threshold", "detail"] {
            assert!(c.get(key).is_some(), "{key} missing in {c}");
        }
    }
    let sheet = image::open(d.path().join("sheet.png")).unwrap();
    assert_eq!(sheet.width(), 8 * 64 + 9 * 2);
    // A defect: exit 1, and the failing check is named on its line.
    let o = genloom(&["check", &golden("defects/batch-stats.onnx")], d.path());
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stderr));
    assert!(text(&o.stdout).contains("FAIL  batch-independence"), "{}", text(&o.stdout));
    assert!(text(&o.stdout).contains("do not ship"), "{}", text(&o.stdout));
    // Unreadable: exit 2.
    let o = genloom(&["check", "missing.onnx"], d.path());
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stderr));
}

#[test]
fn check_report_identifies_what_was_checked_and_honours_strict_and_skip() {
    let d = tempfile::tempdir().unwrap();
    let model = demo("tiles.onnx");
    let o = genloom(&["check", &model, "--json", "--seed", "7", "--skip", "diversity"], d.path());
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    // The file's SHA-256 (FIPS 180-4) as coreutils' sha256sum computes it.
    let sum = Command::new("sha256sum").arg(&model).output().unwrap();
    let digest = text(&sum.stdout).split_whitespace().next().unwrap().to_string();
    assert_eq!(v["model_sha256"], digest);
    assert_eq!(v["genloom_version"], env!("CARGO_PKG_VERSION"));
    assert_eq!(v["seed"], 7);
    let thresholds = v["thresholds"].as_array().unwrap();
    assert!(thresholds.len() >= 10);
    assert!(thresholds.iter().all(|t| !t["source"].as_str().unwrap().is_empty()));
    let skipped = v["checks"].as_array().unwrap().iter().find(|c| c["id"] == "diversity").unwrap();
    assert_eq!(skipped["status"], "skip");
    assert_eq!(skipped["detail"], "skipped on request");
    assert!(v["activations"]["nodes"].as_array().unwrap().len() >= 4);
    // A warning passes, unless --strict: 3.58% of the test generator's 8-bit values saturate
    // (its Tanh reaches the extremes), past a 1% warning share.
    let small = golden("models/nchw-tanh.onnx");
    let o = genloom(&["check", &small, "--max-saturated", "0.01"], d.path());
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    assert!(text(&o.stdout).contains("WARN  range"), "{}", text(&o.stdout));
    let o = genloom(&["check", &small, "--max-saturated", "0.01", "--strict"], d.path());
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stdout));
    assert!(text(&o.stdout).contains("strict"), "{}", text(&o.stdout));
    // Bad values are refused, not clamped.
    for bad in [["--max-batch", "1"], ["--max-batch", "100000"], ["--count", "3"], ["--max-duplicates", "2"]]
    {
        let o = genloom(&["check", &model, bad[0], bad[1]], d.path());
        assert_eq!(o.status.code(), Some(2), "{bad:?}: {}", text(&o.stderr));
    }
    let o = genloom(&["check", &model, "--skip", "structure"], d.path());
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stderr));
}

#[test]
fn bench_reports_every_column() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(
        &[
            "bench",
            "--micro-batch",
            "1,4",
            "--iters",
            "5",
            "--count",
            "16",
            "--threads",
            "1",
            "--profile",
            "--profile-runs",
            "3",
            "--json",
        ],
        d.path(),
    );
    assert!(o.status.success(), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["schema"], "genloom.bench/1");
    let row = &v["rows"][0];
    for key in [
        "file_bytes",
        "load_ms",
        "prepare_ms",
        "batch1_p50_ms",
        "best_micro_batch",
        "throughput",
        "peak_heap_load_bytes",
        "steady_heap_bytes",
    ] {
        assert!(row.get(key).is_some(), "{key} missing");
    }
    assert!(
        row["peak_heap_load_bytes"].as_u64().unwrap() > 1 << 20,
        "the model's weights pass through the heap"
    );
    // The profile: the demo model's transposed convolutions take most of the time, the shares
    // add up to the whole, and the costliest nodes come first.
    let p = &row["profile"];
    assert_eq!((p["batch"].as_u64(), p["runs"].as_u64()), (Some(1), Some(3)));
    let by_op = p["by_op"].as_array().unwrap();
    let share: f64 = by_op.iter().map(|o| o["share"].as_f64().unwrap()).sum();
    assert!((share - 1.0).abs() < 1e-9, "shares add up to {share}");
    let costliest = p["costliest"].as_array().unwrap();
    assert!(!costliest.is_empty() && costliest.len() <= 10);
    let ms: Vec<f64> = costliest.iter().map(|n| n["ms"].as_f64().unwrap()).collect();
    assert!(ms.windows(2).all(|w| w[0] >= w[1]), "{ms:?}");
    assert!(costliest.iter().any(|n| n["node"].as_str().unwrap().contains("ConvTranspose")), "{costliest:?}");
}

#[test]
fn f16_compute_draws_nearly_the_same_tiles() {
    let d = tempfile::tempdir().unwrap();
    let o = genloom(&["sample", "-n", "4", "--seed", "3", "--out", "f32.png"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    let o = genloom(&["sample", "-n", "4", "--seed", "3", "--f16-compute", "--out", "f16.png"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    let a = image::open(d.path().join("f32.png")).unwrap().to_rgb8();
    let b = image::open(d.path().join("f16.png")).unwrap().to_rgb8();
    assert_eq!(a.dimensions(), b.dimensions());
    // IEEE 754 binary16 compute: each pixel within a few 8-bit levels, and not all identical.
    let worst = a.as_raw().iter().zip(b.as_raw()).map(|(x, y)| x.abs_diff(*y)).max().unwrap();
    assert!(worst <= 2, "a pixel moved by {worst} levels");
    assert_ne!(a.as_raw(), b.as_raw(), "--f16-compute changed nothing");
    // bench --f16-compute reports the PSNR of f16 against f32 compute in its first row.
    let o = genloom(
        &[
            "bench",
            "--micro-batch",
            "1",
            "--iters",
            "3",
            "--count",
            "8",
            "--threads",
            "1",
            "--f16-compute",
            "--json",
        ],
        d.path(),
    );
    assert!(o.status.success(), "{}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let psnr = v["rows"][0]["psnr_vs_first_db"].as_f64().expect("a PSNR for f16 compute");
    assert!(
        psnr >= genloom_tests::ladder::F16_COMPUTE_MIN_PSNR_DB && psnr.is_finite(),
        "f16 compute PSNR {psnr}"
    );
}

/// Pillow (tests/py/verify.py `png-text`) reads the PNG's text chunks back: every chunk's CRC
/// checks out (PNG specification, Annex D) and the provenance keywords hold what was asked.
fn pillow_text(file: &Path, expect: serde_json::Value) {
    let dir = tempfile::tempdir().unwrap();
    let exp = dir.path().join("expect.json");
    std::fs::write(&exp, serde_json::to_vec(&serde_json::json!({ "text": expect })).unwrap()).unwrap();
    let python = std::env::var("GENLOOM_PYTHON").unwrap_or_else(|_| "python3".into());
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/py/verify.py");
    let o = Command::new(python).arg(script).arg("png-text").arg(file).arg(&exp).output().unwrap();
    assert!(o.status.success(), "{}{}", text(&o.stdout), text(&o.stderr));
}

#[test]
fn pngs_carry_their_provenance_unless_asked_not_to() {
    let d = tempfile::tempdir().unwrap();
    let model = demo("tiles.onnx");
    let sum = Command::new("sha256sum").arg(&model).output().unwrap();
    let digest = text(&sum.stdout).split_whitespace().next().unwrap().to_string();
    let o = genloom(&["sample", &model, "--count", "3", "--seed", "9", "--out", "one/"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    pillow_text(
        &d.path().join("one/sample-0002.png"),
        serde_json::json!({
            "genloom:synthetic": "true",
            "genloom:model-sha256": digest,
            "genloom:origin": "seed 9, index 2",
            "Software": format!("genloom {}", env!("CARGO_PKG_VERSION")),
        }),
    );
    let o = genloom(&["sample", &model, "--count", "4", "--seed", "9", "--out", "grid.png"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    pillow_text(
        &d.path().join("grid.png"),
        serde_json::json!({"genloom:origin": "seed 9, indices 0 to 3 in reading order"}),
    );
    let o = genloom(&["sample", &model, "--count", "4", "--out", "plain.png", "--no-provenance"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    pillow_text(&d.path().join("plain.png"), serde_json::json!({}));
    let o = genloom(&["morph", &model, "--seeds", "1,2", "--steps", "3", "--out", "strip.png"], d.path());
    assert!(o.status.success(), "{}", text(&o.stderr));
    pillow_text(&d.path().join("strip.png"), serde_json::json!({"genloom:synthetic": "true"}));
}

/// Times vary from run to run: every number directly before `ms` (and every number in a table
/// row of milliseconds) becomes `<ms>`, and runs of spaces become one, so the rest of a sample
/// output is compared exactly.
fn steady(text: &str) -> String {
    let is_number = |w: &str| {
        let w = w.trim_start_matches('(');
        !w.is_empty() && w.chars().all(|c| c.is_ascii_digit() || c == '.')
    };
    text.lines()
        .map(|line| {
            let timing_row = line.contains("ms per image (batch") || line.trim_start().starts_with("load ms");
            let words: Vec<&str> = line.split_whitespace().collect();
            let mut out: Vec<String> = vec![];
            for (i, w) in words.iter().enumerate() {
                let next = words.get(i + 1).copied().unwrap_or("");
                let timed = next.starts_with("ms") || timing_row;
                if is_number(w) && timed {
                    out.push(if w.starts_with('(') { "(<ms>".into() } else { "<ms>".into() });
                } else {
                    out.push((*w).to_string());
                }
            }
            out.join(" ")
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// The README's sample outputs are what the commands print: each ```text block of the README
/// whose lines start with `$ genloom` is run here, in a scratch folder beside the demo models,
/// and compared after [`steady`]. `GENLOOM_BLESS_README=1` writes the current outputs into the
/// README instead (the script that makes the samples).
#[test]
fn readme_samples_are_what_the_commands_print() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
    let readme_path = root.join("README.md");
    let readme = std::fs::read_to_string(&readme_path).unwrap();
    let d = tempfile::tempdir().unwrap();
    #[cfg(unix)]
    std::os::unix::fs::symlink(
        root.join("models-demo").canonicalize().unwrap(),
        d.path().join("models-demo"),
    )
    .unwrap();
    let mut out = String::new();
    let mut rest = readme.as_str();
    let mut blocks = 0;
    let mut differences = vec![];
    while let Some(start) = rest.find("```text\n$ genloom ") {
        let body_start = start + "```text\n".len();
        let end = body_start + rest[body_start..].find("```").unwrap();
        out.push_str(&rest[..body_start]);
        let shown = &rest[body_start..end];
        let mut fresh = String::new();
        for line in shown.lines().filter(|l| l.starts_with("$ genloom ")) {
            let args: Vec<&str> = line["$ genloom ".len()..].split_whitespace().collect();
            let o = genloom(&args, d.path());
            assert!(o.status.success(), "{line}: {}", text(&o.stderr));
            fresh.push_str(line);
            fresh.push('\n');
            fresh.push_str(&text(&o.stdout));
        }
        if steady(shown) != steady(&fresh) {
            differences.push(format!("README shows:\n{shown}\nthe commands print:\n{fresh}"));
        }
        out.push_str(&fresh);
        rest = &rest[end..];
        blocks += 1;
    }
    out.push_str(rest);
    assert!(blocks >= 5, "only {blocks} sample blocks found in the README");
    if std::env::var_os("GENLOOM_BLESS_README").is_some() {
        std::fs::write(&readme_path, out).unwrap();
        return;
    }
    assert!(
        differences.is_empty(),
        "{}\n(GENLOOM_BLESS_README=1 cargo test -p genloom-cli --test cli readme_samples writes them)",
        differences.join("\n---\n")
    );
}

#[test]
fn steady_blanks_only_timings() {
    assert_eq!(steady("wrote t.onnx (int8) in 726 ms"), "wrote t.onnx (int8) in <ms> ms");
    assert_eq!(
        steady("  ms per image (batch 8)          0.457          0.436"),
        "ms per image (batch 8) <ms> <ms>"
    );
    assert_eq!(steady("  load ms   193.6   56.3"), "load ms <ms> <ms>");
    assert_eq!(
        steady("  load 235.8 ms, plans 425.7 ms, generate 19.1 ms (1.195 ms per image)"),
        "load <ms> ms, plans <ms> ms, generate <ms> ms (<ms> ms per image)"
    );
    assert_eq!(steady("ship: 9 passed (1073 ms, seed 0)"), "ship: 9 passed (<ms> ms, seed 0)");
    assert_eq!(steady("PSNR 52.61 dB"), "PSNR 52.61 dB");
}
