//! Writes what the native runtime produces for the cases the JS tests replay, so that the tests
//! compare the WebAssembly package with native Rust on this machine, with the demo models as
//! they are now (their weights may be retrained: nothing here is committed).
//!
//! `cargo run -p genloom-tests --example wasm-golden -- OUT.json [--bench]` from the repository
//! root (it lives in the root workspace so that the test command reuses the root's build).
//!
//! OUT.json holds, per case, the sampling options, the latents as f32 bit patterns, the RGBA
//! pixels (base64) and the float output (f32 bits, base64) of each demo model; plus the path
//! frames of `latentPath`. With `--bench` it also times generation (per tile, batch 1 and 8,
//! fixed-batch plans, one thread) for the comparison in bindings/wasm/README.md: build it with
//! `--release` for that. `outsideWebSet` is the tiles model with one Relu turned into
//! ThresholdedRelu, an operator native genloom runs and the web build leaves out, so that the
//! JS tests see the web build refuse it by name.

use genloom::pixels::PixelFormat;
use genloom::{
    Generator, GeneratorOptions, Interpolation, Latents, LoadOptions, Model, PathOptions, Prior, RngMode,
    SampleOptions,
};
use prost::Message;
use serde_json::{json, Value};
use std::path::PathBuf;
use std::time::Instant;

/// One sampling case: what the JS test passes to `sampleLatents`.
struct Case {
    name: &'static str,
    seed: u64,
    count: usize,
    truncation: Option<f32>,
    psi: Option<f32>,
    prior: Prior,
    mode: RngMode,
    first_index: u64,
}

impl Case {
    const fn new(name: &'static str, seed: u64, count: usize) -> Case {
        Case {
            name,
            seed,
            count,
            truncation: None,
            psi: None,
            prior: Prior::Gaussian,
            mode: RngMode::Portable,
            first_index: 0,
        }
    }

    fn options(&self) -> SampleOptions {
        let mut o = SampleOptions::new(self.seed, self.count);
        o.truncation = self.truncation;
        o.psi = self.psi;
        o.prior = self.prior;
        o.mode = self.mode;
        o.first_index = self.first_index;
        o
    }

    /// The options as the JS API spells them (seeds as decimal strings, read back as BigInt).
    fn js_options(&self) -> Value {
        let mut o = serde_json::Map::new();
        if let Some(t) = self.truncation {
            o.insert("truncation".into(), json!(t));
        }
        if let Some(p) = self.psi {
            o.insert("psi".into(), json!(p));
        }
        if self.prior == Prior::Uniform {
            o.insert("prior".into(), json!("uniform"));
        }
        if self.mode == RngMode::NumpyCompatible {
            o.insert("mode".into(), json!("numpy"));
        }
        if self.first_index != 0 {
            o.insert("firstIndex".into(), json!(self.first_index.to_string()));
        }
        Value::Object(o)
    }
}

fn cases() -> Vec<Case> {
    let mut v = vec![
        Case::new("page-default", 7, 16),
        Case::new("seed-0", 0, 3),
        Case::new("seed-123", 123, 8),
        Case::new("seed-1", 1, 2),
        Case::new("seed-huge", u64::MAX, 2),
        Case::new("seed-2^63+5", (1 << 63) + 5, 1),
    ];
    let mut c = Case::new("truncation-0.7", 7, 16);
    c.truncation = Some(0.7);
    v.push(c);
    let mut c = Case::new("psi-0.5", 11, 4);
    c.psi = Some(0.5);
    v.push(c);
    let mut c = Case::new("uniform", 5, 2);
    c.prior = Prior::Uniform;
    v.push(c);
    let mut c = Case::new("numpy-42", 42, 3);
    c.mode = RngMode::NumpyCompatible;
    v.push(c);
    let mut c = Case::new("first-index-5", 7, 3);
    c.first_index = 5;
    v.push(c);
    v
}

fn bits(values: &[f32]) -> Vec<u32> {
    values.iter().map(|x| x.to_bits()).collect()
}

fn b64(bytes: &[u8]) -> String {
    const A: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut s = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let n = chunk.iter().enumerate().fold(0u32, |n, (i, &b)| n | u32::from(b) << (16 - 8 * i));
        for i in 0..4 {
            if i <= chunk.len() {
                s.push(A[((n >> (18 - 6 * i)) & 63) as usize] as char);
            } else {
                s.push('=');
            }
        }
    }
    s
}

fn rgba(images: &genloom::Images) -> Result<Vec<u8>, genloom::Error> {
    let mut out = Vec::new();
    for i in 0..images.count {
        out.extend(genloom::pixels::to_pixels(images, i, PixelFormat::Rgba8)?.0.data);
    }
    Ok(out)
}

fn floats_b64(values: &[f32]) -> String {
    b64(&values.iter().flat_map(|x| x.to_le_bytes()).collect::<Vec<u8>>())
}

/// Milliseconds per tile at `batch`: the best of 5 rounds of about `budget_ms / 5` each (other
/// work on the machine only ever adds time), after a warm-up. The JS bench does the same.
fn per_tile_ms(
    g: &Generator,
    batch: usize,
    labels: Option<&[i64]>,
    budget_ms: f64,
) -> Result<f64, genloom::Error> {
    let z = g.sample_latents(&SampleOptions::new(3, batch))?;
    let labels = labels.map(|l| l[..batch].to_vec());
    for _ in 0..3 {
        g.generate(&z, labels.as_deref())?;
    }
    let mut best = f64::INFINITY;
    for _ in 0..5 {
        let (start, mut runs) = (Instant::now(), 0usize);
        while start.elapsed().as_secs_f64() * 1e3 < budget_ms / 5.0 || runs < 3 {
            g.generate(&z, labels.as_deref())?;
            runs += 1;
        }
        best = best.min(start.elapsed().as_secs_f64() * 1e3 / (runs * batch) as f64);
    }
    Ok(best)
}

fn model(root: &std::path::Path, file: &str, bench: bool) -> Result<Value, Box<dyn std::error::Error>> {
    let bytes = std::fs::read(root.join("models-demo").join(file))?;
    let g = Generator::new(Model::from_bytes(&bytes, &LoadOptions::default())?, GeneratorOptions::default())?;
    let sig = g.signature().clone();
    let classes = sig.label.as_ref().map(|l| l.classes);
    let mut out = Vec::new();
    for case in cases() {
        let z = g.sample_latents(&case.options())?;
        let labels: Option<Vec<i64>> =
            classes.map(|k| (0..case.count as i64).map(|i| i % k as i64).collect());
        let images = g.generate(&z, labels.as_deref())?;
        out.push(json!({
            "name": case.name,
            "seed": case.seed.to_string(),
            "count": case.count,
            "options": case.js_options(),
            "labels": labels,
            "latentBits": bits(z.as_slice()),
            "rgba": b64(&rgba(&images)?),
            "floats": floats_b64(&images.data),
        }));
    }
    // A morph as the demo page makes it: seeds 7 and 8, one latent each, a looped slerp path.
    let a = g.sample_latents(&SampleOptions::new(7, 1))?;
    let b = g.sample_latents(&SampleOptions::new(8, 1))?;
    let keys = Latents::new(sig.latent.dim, [a.as_slice(), b.as_slice()].concat())?;
    let mut paths = Vec::new();
    for (interp, looped, steps) in [(Interpolation::Slerp, true, 24), (Interpolation::Lerp, false, 5)] {
        let mut po = PathOptions::default();
        po.steps = steps;
        po.interpolation = interp;
        po.looped = looped;
        let frames = genloom::latent::path(&keys, &po)?;
        paths.push(json!({
            "interpolation": if interp == Interpolation::Slerp { "slerp" } else { "lerp" },
            "looped": looped,
            "steps": steps,
            "keyframeBits": bits(keys.as_slice()),
            "frameBits": bits(frames.as_slice()),
        }));
    }
    let mut doc = json!({
        "file": file,
        "latentDim": sig.latent.dim,
        "labelClasses": classes,
        "width": sig.image.width,
        "height": sig.image.height,
        "channels": sig.image.channels,
        "range": [sig.image.range.lo, sig.image.range.hi],
        "cases": out,
        "paths": paths,
    });
    if bench {
        let labels: Option<Vec<i64>> = classes.map(|k| (0..8).map(|i| i % k as i64).collect());
        doc["nativeMsPerTile"] = json!({
            "batch1": per_tile_ms(&g, 1, labels.as_deref(), 1500.0)?,
            "batch8": per_tile_ms(&g, 8, labels.as_deref(), 1500.0)?,
        });
    }
    Ok(doc)
}

/// The tiles model with its first Relu turned into ThresholdedRelu (ONNX: `x if x > alpha else
/// 0`, alpha 1 by default): still a generator, which native genloom loads.
fn outside_web_set(root: &std::path::Path) -> Result<Value, Box<dyn std::error::Error>> {
    let bytes = std::fs::read(root.join("models-demo").join("tiles.onnx"))?;
    let mut proto = tract_onnx::pb::ModelProto::decode(&bytes[..])?;
    let graph = proto.graph.as_mut().ok_or("tiles.onnx has no graph")?;
    let node = graph.node.iter_mut().find(|n| n.op_type == "Relu").ok_or("tiles.onnx has no Relu")?;
    node.op_type = "ThresholdedRelu".into();
    let name = node.name.clone();
    let edited = proto.encode_to_vec();
    let native = Model::from_bytes(&edited, &LoadOptions::default());
    Ok(json!({
        "bytes": b64(&edited),
        "opType": "ThresholdedRelu",
        "node": name,
        "nativeLoads": native.is_ok(),
    }))
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let out = PathBuf::from(args.next().ok_or("usage: wasm-golden OUT.json [--bench]")?);
    let bench = args.any(|a| a == "--bench");
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..");
    let doc = json!({
        "producer": "native genloom (tests/examples/wasm_golden.rs)",
        "profile": if cfg!(debug_assertions) { "debug" } else { "release" },
        "models": {
            "tiles": model(&root, "tiles.onnx", bench)?,
            "tiles-kind": model(&root, "tiles-kind.onnx", bench)?,
        },
        "outsideWebSet": outside_web_set(&root)?,
    });
    if let Some(dir) = out.parent() {
        std::fs::create_dir_all(dir)?;
    }
    std::fs::write(&out, serde_json::to_vec(&doc)?)?;
    eprintln!("wrote {}", out.display());
    Ok(())
}
