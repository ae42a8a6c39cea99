//! The operator conformance run: the `onnx` package's node test cases of the web build's
//! operators, as `tests/conformance/write_cases.py` wrote them, each run through
//! [`genloom::conformance::run_graph`] twice, with genloom's load-time passes and without them
//! ([`PassOptions::none`]), and compared with the outputs of the ONNX reference.
//!
//! `cargo run -p genloom-tests --example conformance -- FOLDER [OUT.json]` from the repository
//! root; `tests/conformance/run.sh` runs the whole chain (write the cases, this, the table in
//! `docs/conformance.md`). OUT.json defaults to `target/conformance-results.json`.
//!
//! The comparison is numpy.testing.assert_allclose's rule, `|actual - expected| <= atol + rtol
//! |expected|` with [`RTOL`] and [`ATOL`], for floats (NaN equal to NaN, an infinity equal to
//! the same infinity), and exact equality for integers; shapes and element types must match
//! exactly (the expected types are those `write_cases.py` saved: bool as uint8, float16 as
//! float32, as run_graph returns them). A case never stops the run: run_graph guards tract
//! itself, and anything that still panics is caught here and recorded as `panic`.
//!
//! Per case the results hold the status with passes on (`pass`, `fail` with the largest
//! absolute difference, `error` with the message, `panic`, or `skipped` with the reason
//! write_cases.py gave), the same with passes off, the passes that changed the graph, and
//! whether the two runs differ: in status (a pass/fail divergence, which would be genloom's
//! bug) or in any output value. A case that does not load or run is run again, both ways, in
//! the form exporters write, with its operands (axes, shapes, scales, pads, parameters) as
//! initializers instead of graph inputs (`as_initializers`): tract needs many of them constant,
//! and the second run tells an operator tract computes wrongly from one it cannot type with a
//! run-time operand.

use genloom::conformance::{run_graph, GraphRun};
use genloom::npy::{NpyArray, NpyData};
use genloom::PassOptions;
use prost::Message;
use serde_json::{json, Value};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::time::{Instant, SystemTime, UNIX_EPOCH};
use tract_onnx::pb;

/// Relative tolerance for float outputs (numpy.testing.assert_allclose's `rtol`).
pub const RTOL: f64 = 1e-4;
/// Absolute tolerance for float outputs (numpy.testing.assert_allclose's `atol`).
pub const ATOL: f64 = 1e-5;

type BoxError = Box<dyn std::error::Error>;

/// The last panic's message and place, kept by the quiet panic hook for the `panic` status.
static LAST_PANIC: Mutex<Option<String>> = Mutex::new(None);

/// What one run of one case gave.
#[derive(Debug, Clone)]
enum Outcome {
    /// Every output within tolerance; the largest absolute difference.
    Pass { max_abs: f64 },
    /// An output outside tolerance, or of another shape or type.
    Fail { reason: String, max_abs: Option<f64> },
    /// run_graph returned an error.
    Error(String),
    /// Something panicked through run_graph's guard.
    Panic(String),
}

impl Outcome {
    fn status(&self) -> &'static str {
        match self {
            Outcome::Pass { .. } => "pass",
            Outcome::Fail { .. } => "fail",
            Outcome::Error(_) => "error",
            Outcome::Panic(_) => "panic",
        }
    }

    fn detail(&self) -> Option<String> {
        match self {
            Outcome::Pass { .. } => None,
            Outcome::Fail { reason, .. } => Some(reason.clone()),
            Outcome::Error(m) | Outcome::Panic(m) => Some(m.clone()),
        }
    }

    fn max_abs(&self) -> Option<f64> {
        match self {
            Outcome::Pass { max_abs } => Some(*max_abs),
            Outcome::Fail { max_abs, .. } => *max_abs,
            _ => None,
        }
    }

    fn to_json(&self) -> Value {
        json!({
            "status": self.status(),
            "detail": self.detail(),
            "max_abs_diff": self.max_abs().map(number),
        })
    }
}

/// A float for JSON: a number when finite, else its name ("inf", "nan").
fn number(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        json!(x.to_string())
    }
}

/// Values of an array as one of two kinds, for comparing.
enum Values {
    Float(Vec<f64>),
    Int(Vec<i128>),
}

fn values(data: &NpyData) -> Option<Values> {
    Some(match data {
        NpyData::F32(v) => Values::Float(v.iter().map(|&x| f64::from(x)).collect()),
        NpyData::F64(v) => Values::Float(v.clone()),
        NpyData::I64(v) => Values::Int(v.iter().map(|&x| i128::from(x)).collect()),
        NpyData::I32(v) => Values::Int(v.iter().map(|&x| i128::from(x)).collect()),
        NpyData::U8(v) => Values::Int(v.iter().map(|&x| i128::from(x)).collect()),
        _ => return None,
    })
}

/// A float as text: plain for ordinary magnitudes, in exponent form for huge and tiny ones.
fn show(x: f64) -> String {
    if x != 0.0 && x.is_finite() && !(1e-4..1e6).contains(&x.abs()) {
        format!("{x:e}")
    } else {
        x.to_string()
    }
}

/// The distance of two floats: 0 for NaN against NaN and for equal infinities, infinite for
/// NaN against a number.
fn float_distance(a: f64, e: f64) -> f64 {
    match (a.is_nan(), e.is_nan()) {
        (true, true) => 0.0,
        (false, false) if a == e => 0.0,
        (false, false) => (a - e).abs(),
        _ => f64::INFINITY,
    }
}

/// How `actual` compares with `expected`: `Ok(max abs diff)` within tolerance, else
/// `Err((reason, max abs diff))`.
fn compare(actual: &NpyArray, expected: &NpyArray) -> Result<f64, (String, Option<f64>)> {
    if actual.shape != expected.shape {
        return Err((format!("shape {:?}, expected {:?}", actual.shape, expected.shape), None));
    }
    if actual.data.dtype_name() != expected.data.dtype_name() {
        return Err((
            format!("element type {}, expected {}", actual.data.dtype_name(), expected.data.dtype_name()),
            None,
        ));
    }
    let (Some(actual_values), Some(expected_values)) = (values(&actual.data), values(&expected.data)) else {
        return Err((
            format!("element type {}, which this run cannot compare", actual.data.dtype_name()),
            None,
        ));
    };
    // The largest difference, where it is (got, expected), and how many elements are outside.
    let (worst, at, bad, total) = match (actual_values, expected_values) {
        (Values::Float(a), Values::Float(e)) => {
            let (mut worst, mut at, mut bad) = (0f64, None, 0usize);
            for (i, (&x, &y)) in a.iter().zip(&e).enumerate() {
                let d = float_distance(x, y);
                if d > worst || (at.is_none() && d > 0.0) {
                    (worst, at) = (d, Some((i, show(x), show(y))));
                }
                // An infinite distance (NaN or an infinity against a number) never passes,
                // not even against an infinite tolerance.
                if d.is_infinite() || d > ATOL + RTOL * y.abs() {
                    bad += 1;
                }
            }
            (worst, at, bad, a.len())
        }
        (Values::Int(a), Values::Int(e)) => {
            let (mut worst, mut at, mut bad) = (0u128, None, 0usize);
            for (i, (&x, &y)) in a.iter().zip(&e).enumerate() {
                let d = (x - y).unsigned_abs();
                if d > worst {
                    (worst, at) = (d, Some((i, x.to_string(), y.to_string())));
                }
                bad += usize::from(d != 0);
            }
            (worst as f64, at, bad, a.len())
        }
        _ => return Err(("a float compared with an integer".into(), None)),
    };
    if bad == 0 {
        return Ok(worst);
    }
    let place =
        at.map(|(i, x, y)| format!("; largest at element {i}: {x}, expected {y}")).unwrap_or_default();
    Err((format!("max abs diff {worst:e} ({bad} of {total} elements outside tolerance{place})"), Some(worst)))
}

/// The message of an error with its sources, as "outer: inner: innermost".
fn chain(e: &dyn std::error::Error) -> String {
    let mut text = e.to_string();
    let mut source = e.source();
    while let Some(s) = source {
        let part = s.to_string();
        if !text.contains(&part) {
            text.push_str(": ");
            text.push_str(&part);
        }
        source = s.source();
    }
    text
}

/// One run of a case, never panicking: the outcome and, when it ran, what run_graph returned.
fn run_once(
    model: &[u8],
    inputs: &[NpyArray],
    expected: &[NpyArray],
    options: &PassOptions,
) -> (Outcome, Option<GraphRun>) {
    let result = catch_unwind(AssertUnwindSafe(|| run_graph(model, inputs, options)));
    let run = match result {
        Ok(Ok(run)) => run,
        Ok(Err(e)) => return (Outcome::Error(format!("[{}] {}", e.kind().as_str(), chain(&e))), None),
        Err(_) => {
            let msg = LAST_PANIC.lock().map(|m| m.clone()).unwrap_or_default();
            return (Outcome::Panic(msg.unwrap_or_else(|| "a panic without a message".into())), None);
        }
    };
    if run.outputs.len() != expected.len() {
        let reason = format!("{} outputs, expected {}", run.outputs.len(), expected.len());
        return (Outcome::Fail { reason, max_abs: None }, Some(run));
    }
    let mut max_abs = 0f64;
    for (k, (a, e)) in run.outputs.iter().zip(expected).enumerate() {
        match compare(a, e) {
            Ok(d) => max_abs = max_abs.max(d),
            Err((reason, d)) => {
                let reason = format!("output {k}: {reason}");
                return (Outcome::Fail { reason, max_abs: d }, Some(run));
            }
        }
    }
    (Outcome::Pass { max_abs }, Some(run))
}

/// How the passes-on run differs from the passes-off run: `None` when it does not, else a
/// description and whether it is a divergence of status (pass, fail, error).
fn difference(on: &(Outcome, Option<GraphRun>), off: &(Outcome, Option<GraphRun>)) -> Option<(String, bool)> {
    if on.0.status() != off.0.status() {
        let side = |o: &Outcome| match o.detail() {
            Some(d) => format!("{} ({d})", o.status()),
            None => o.status().to_string(),
        };
        return Some((format!("passes on: {}; passes off: {}", side(&on.0), side(&off.0)), true));
    }
    let (Some(a), Some(b)) = (&on.1, &off.1) else { return None };
    for (k, (x, y)) in a.outputs.iter().zip(&b.outputs).enumerate() {
        let what = if x.shape != y.shape {
            format!("shape {:?} against {:?}", x.shape, y.shape)
        } else if x.data.dtype_name() != y.data.dtype_name() {
            format!("type {} against {}", x.data.dtype_name(), y.data.dtype_name())
        } else {
            match compare(x, y) {
                // NaN against NaN, with whatever bits, is no difference.
                Ok(0.0) => continue,
                Ok(d) | Err((_, Some(d))) => format!("max abs diff {d:e}"),
                Err((r, None)) => r,
            }
        };
        return Some((format!("output {k} differs between passes on and off: {what}"), false));
    }
    None
}

/// Reads a case's arrays, named `{stem}_{k}.npy` for k in 0..count.
fn arrays(folder: &Path, stem: &str, count: usize) -> Result<Vec<NpyArray>, BoxError> {
    (0..count).map(|k| Ok(NpyArray::read(&folder.join(format!("{stem}_{k}.npy")))?)).collect()
}

fn count_of(case: &Value, key: &str) -> usize {
    case[key].as_array().map_or(0, Vec::len)
}

/// An ONNX tensor holding `a`, named `name`.
fn initializer(name: &str, a: &NpyArray) -> Option<pb::TensorProto> {
    let (data_type, raw_data): (i32, Vec<u8>) = match &a.data {
        NpyData::F32(v) => (1, v.iter().flat_map(|x| x.to_le_bytes()).collect()),
        NpyData::U8(v) => (2, v.clone()),
        NpyData::I32(v) => (6, v.iter().flat_map(|x| x.to_le_bytes()).collect()),
        NpyData::I64(v) => (7, v.iter().flat_map(|x| x.to_le_bytes()).collect()),
        NpyData::F64(v) => (11, v.iter().flat_map(|x| x.to_le_bytes()).collect()),
        _ => return None,
    };
    let dims = a.shape.iter().map(|&d| i64::try_from(d).ok()).collect::<Option<_>>()?;
    Some(pb::TensorProto { name: name.into(), dims, data_type, raw_data, ..Default::default() })
}

/// How many leading graph inputs stay inputs in the `as_initializers` form: the first (the
/// data operand), or none when the only input is an integer tensor (a shape, as
/// ConstantOfShape takes).
fn kept_inputs(inputs: &[NpyArray]) -> usize {
    match inputs {
        [only] if matches!(only.data, NpyData::I64(_) | NpyData::I32(_)) => 0,
        _ => 1,
    }
}

/// The case's model with the graph inputs after the first [`kept_inputs`] turned into
/// initializers holding the case's values: the form exporters write (axes, shapes, scales,
/// pads and parameters are initializers in an exported model), which tract needs for many
/// operands.
fn with_initializers(model: &[u8], inputs: &[NpyArray], kept: usize) -> Result<Vec<u8>, BoxError> {
    let mut proto = pb::ModelProto::decode(model)?;
    let graph = proto.graph.as_mut().ok_or("the model has no graph")?;
    for (value, a) in graph.input.split_off(kept).iter().zip(&inputs[kept..]) {
        graph.initializer.push(initializer(&value.name, a).ok_or("an input of an unknown type")?);
    }
    Ok(proto.encode_to_vec())
}

/// Both runs of one form of a case: the passes-on outcome, the passes-off outcome, the passes
/// that changed the graph, and how the two runs differ.
struct Pair {
    on: Outcome,
    off: Outcome,
    passes: Vec<String>,
    difference: Option<(String, bool)>,
}

impl Pair {
    fn run(model: &[u8], inputs: &[NpyArray], expected: &[NpyArray]) -> Pair {
        let on = run_once(model, inputs, expected, &PassOptions::default());
        let off = run_once(model, inputs, expected, &PassOptions::none());
        let passes =
            on.1.as_ref().map(|r| r.passes.iter().map(|p| p.pass.clone()).collect()).unwrap_or_default();
        let difference = difference(&on, &off);
        Pair { on: on.0, off: off.0, passes, difference }
    }

    /// The fields of a result entry (the status is the passes-on run's).
    fn fields(&self) -> serde_json::Map<String, Value> {
        let v = json!({
            "status": self.on.status(),
            "detail": self.on.detail(),
            "max_abs_diff": self.on.max_abs().map(number),
            "passes_off": self.off.to_json(),
            "passes_changed": self.passes,
            "differs": self.difference.is_some(),
            "status_divergence": self.difference.as_ref().is_some_and(|d| d.1),
            "difference": self.difference.as_ref().map(|d| &d.0),
        });
        match v {
            Value::Object(m) => m,
            _ => serde_json::Map::new(),
        }
    }
}

/// Runs one written case both ways and returns its result entry. When the passes-on run
/// fails to load or run, the case is run again (both ways) in the form exporters write, with
/// its operands as initializers ([`with_initializers`]; `as_initializers` in the entry): it
/// tells an operator tract computes wrongly from an operand tract only takes as a constant.
fn run_case(folder: &Path, case: &Value) -> Result<Value, BoxError> {
    let name = case["name"].as_str().ok_or("a case without a name")?;
    let dir = folder.join(name);
    let model = std::fs::read(dir.join("model.onnx"))?;
    let inputs = arrays(&dir, "input", count_of(case, "inputs"))?;
    let expected = arrays(&dir, "output", count_of(case, "outputs"))?;
    let started = Instant::now();
    let pair = Pair::run(&model, &inputs, &expected);
    let kept = kept_inputs(&inputs);
    let retry = matches!(pair.on, Outcome::Error(_) | Outcome::Panic(_)) && inputs.len() > kept;
    let mut entry = serde_json::Map::new();
    entry.insert("name".into(), json!(name));
    for key in ["op", "op_types", "opset"] {
        entry.insert(key.into(), case[key].clone());
    }
    entry.extend(pair.fields());
    if retry {
        let constant = with_initializers(&model, &inputs, kept)?;
        let pair = Pair::run(&constant, &inputs[..kept], &expected);
        entry.insert("as_initializers".into(), Value::Object(pair.fields()));
    }
    entry.insert("seconds".into(), json!(started.elapsed().as_secs_f64()));
    Ok(Value::Object(entry))
}

fn main() -> Result<(), BoxError> {
    let mut args = std::env::args().skip(1);
    let usage = "usage: conformance FOLDER [OUT.json] (FOLDER written by tests/conformance/write_cases.py)";
    let folder = PathBuf::from(args.next().ok_or(usage)?);
    let out = args
        .next()
        .map_or_else(|| genloom_tests::root().join("target/conformance-results.json"), PathBuf::from);
    let index: Value = serde_json::from_slice(&std::fs::read(folder.join("index.json"))?)?;
    std::panic::set_hook(Box::new(|info| {
        if let Ok(mut last) = LAST_PANIC.lock() {
            *last = Some(info.to_string());
        }
    }));
    let cases = index["cases"].as_array().ok_or("index.json has no `cases`")?;
    let started = Instant::now();
    let when = SystemTime::now().duration_since(UNIX_EPOCH)?.as_secs();
    let mut results = vec![];
    let mut tally = std::collections::BTreeMap::<String, usize>::new();
    for (i, case) in cases.iter().enumerate() {
        let entry = match run_case(&folder, case) {
            Ok(v) => v,
            Err(e) => json!({
                "name": case["name"], "op": case["op"], "op_types": case["op_types"],
                "opset": case["opset"], "status": "error", "detail": format!("reading the case: {e}"),
                "differs": false, "status_divergence": false,
            }),
        };
        *tally.entry(entry["status"].as_str().unwrap_or("error").to_string()).or_default() += 1;
        if entry["differs"] == json!(true) || entry["as_initializers"]["differs"] == json!(true) {
            *tally.entry("differs".into()).or_default() += 1;
        }
        results.push(entry);
        if (i + 1) % 100 == 0 || i + 1 == cases.len() {
            println!(
                "conformance: {}/{} cases, {:.0} s: {}",
                i + 1,
                cases.len(),
                started.elapsed().as_secs_f64(),
                tally.iter().map(|(k, v)| format!("{k} {v}")).collect::<Vec<_>>().join(", ")
            );
        }
    }
    let skipped = index["skipped"].as_array().cloned().unwrap_or_default();
    for s in &skipped {
        results.push(json!({
            "name": s["name"], "op": s["op"], "op_types": s["op_types"], "opset": s["opset"],
            "status": "skipped", "detail": format!("{}: {}", s["reason"].as_str().unwrap_or("?"),
                s["detail"].as_str().unwrap_or("")),
            "skip_reason": s["reason"], "differs": false, "status_divergence": false,
        }));
    }
    let doc = json!({
        "producer": "tests/examples/conformance.rs",
        "profile": if cfg!(debug_assertions) { "dev" } else { "release" },
        "started_unix": when,
        "elapsed_seconds": started.elapsed().as_secs_f64(),
        "onnx_version": index["onnx_version"],
        "rtol": RTOL,
        "atol": ATOL,
        "total_cases": index["total_cases"],
        "outside_web_set": index["outside_web_set"],
        "cases": results,
    });
    if let Some(dir) = out.parent() {
        std::fs::create_dir_all(dir)?;
    }
    genloom::files::write_atomic(&out, &serde_json::to_vec_pretty(&doc)?)?;
    println!("conformance: wrote {}", out.display());
    Ok(())
}
