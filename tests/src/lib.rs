//! Shared helpers for the integration tests: repository paths, golden files, hex-encoded
//! numbers, and running the outside-reference verifier (`tests/py/verify.py`, NumPy + Pillow).

use std::path::{Path, PathBuf};
use std::process::Command;

/// The repository root.
pub fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).parent().expect("tests/ sits in the repository").to_path_buf()
}

/// A path under `tests/golden/`.
pub fn golden(rel: &str) -> PathBuf {
    root().join("tests").join("golden").join(rel)
}

/// A path under `models-demo/`.
pub fn demo(rel: &str) -> PathBuf {
    root().join("models-demo").join(rel)
}

/// Reads and parses a JSON file.
pub fn json(path: &Path) -> serde_json::Value {
    let text =
        std::fs::read_to_string(path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{} is not JSON: {e}", path.display()))
}

/// A u64 from 16 hex digits.
pub fn hex_u64(v: &serde_json::Value) -> u64 {
    u64::from_str_radix(v.as_str().expect("hex string"), 16).expect("hex u64")
}

/// An f64 from the hex of its IEEE 754 bits.
pub fn hex_f64(v: &serde_json::Value) -> f64 {
    f64::from_bits(hex_u64(v))
}

/// An f32 from the hex of its IEEE 754 bits.
pub fn hex_f32(v: &serde_json::Value) -> f32 {
    f32::from_bits(u32::from_str_radix(v.as_str().expect("hex string"), 16).expect("hex u32"))
}

/// A list of hex f64 values.
pub fn hex_f64s(v: &serde_json::Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(hex_f64).collect()
}

/// A list of hex f32 values.
pub fn hex_f32s(v: &serde_json::Value) -> Vec<f32> {
    v.as_array().expect("array").iter().map(hex_f32).collect()
}

/// The Python interpreter for outside references (`GENLOOM_PYTHON`, else `python3`).
pub fn python() -> String {
    std::env::var("GENLOOM_PYTHON").unwrap_or_else(|_| "python3".into())
}

/// Asks `tests/py/verify.py KIND FILE EXPECT` (NumPy / Pillow) whether a file we wrote holds
/// what we expect; panics with its message when it does not.
pub fn verify_with_python(kind: &str, file: &Path, expect: &serde_json::Value) {
    let dir = tempfile::tempdir().expect("temp dir");
    let exp = dir.path().join("expect.json");
    std::fs::write(&exp, serde_json::to_vec(expect).expect("json")).expect("write expect");
    let script = root().join("tests").join("py").join("verify.py");
    let out =
        Command::new(python()).arg(&script).arg(kind).arg(file).arg(&exp).output().unwrap_or_else(|e| {
            panic!("cannot run {} (install Python 3 with tests/requirements.txt): {e}", python())
        });
    assert!(
        out.status.success(),
        "{kind} verification of {} failed ({}): {}{}",
        file.display(),
        out.status,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Max absolute difference of two equally long slices.
pub fn max_abs_diff(a: &[f32], b: &[f32]) -> f32 {
    assert_eq!(a.len(), b.len(), "length differs");
    a.iter().zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f32::max)
}

/// Runs `tests/py/onnx_judge.py` with arguments; panics with its message unless it agrees.
pub fn judge(args: &[&std::ffi::OsStr]) {
    let script = root().join("tests").join("py").join("onnx_judge.py");
    let out = Command::new(python())
        .arg(&script)
        .args(args)
        .output()
        .unwrap_or_else(|e| panic!("cannot run {} (install tests/requirements.txt): {e}", python()));
    assert!(
        out.status.success(),
        "onnx_judge {:?} failed ({}): {}{}",
        args,
        out.status,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}
