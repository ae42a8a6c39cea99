//! Writes the bytes the C test program (`tests/c/test_genloom.c`) must reproduce, computed with
//! the Rust API at test time (the demo models may be retrained, so nothing is hard-coded):
//!
//! `cargo run -p genloom-c --example c-test-expected -- OUT_DIR MODELS_DIR`
//!
//! Floats are written as raw native-endian `f32`, pixels as raw bytes; `signature.txt` and
//! `kind-signature.txt` hold the getters' values, space-separated.

use genloom::latent::{lerp, path, slerp};
use genloom::pixels::{to_pixels, PixelFormat};
use genloom::{
    Generator, GeneratorOptions, Interpolation, LoadOptions, Model, PathOptions, Prior, RngMode,
    SampleOptions,
};
use std::path::{Path, PathBuf};

type Result<T> = std::result::Result<T, Box<dyn std::error::Error>>;

fn floats(dir: &Path, name: &str, v: &[f32]) -> Result<()> {
    let bytes: Vec<u8> = v.iter().flat_map(|x| x.to_ne_bytes()).collect();
    std::fs::write(dir.join(name), bytes)?;
    Ok(())
}

fn open(path: &Path, micro_batch: usize, threads: usize) -> Result<Generator> {
    let mut options = GeneratorOptions::default();
    options.micro_batch = micro_batch;
    options.threads = threads;
    Ok(Generator::new(Model::from_path(path, &LoadOptions::default())?, options)?)
}

fn signature(dir: &Path, name: &str, g: &Generator) -> Result<()> {
    let s = g.signature();
    let layout = match s.image.layout {
        genloom::Layout::Nchw => 0,
        genloom::Layout::Nhwc => 1,
    };
    let classes = s.label.as_ref().map_or(0, |l| l.classes);
    let line = format!(
        "{} {} {} {} {} {} {} {}\n",
        s.latent.dim,
        classes,
        s.image.width,
        s.image.height,
        s.image.channels,
        layout,
        s.image.range.lo,
        s.image.range.hi
    );
    std::fs::write(dir.join(name), line)?;
    Ok(())
}

fn sample(g: &Generator, seed: u64, count: usize, edit: impl FnOnce(&mut SampleOptions)) -> Result<Vec<f32>> {
    let mut o = SampleOptions::new(seed, count);
    edit(&mut o);
    Ok(g.sample_latents(&o)?.into_vec())
}

fn main() -> Result<()> {
    let args: Vec<PathBuf> = std::env::args_os().skip(1).map(PathBuf::from).collect();
    let [out, models] = args.as_slice() else {
        return Err("usage: c-test-expected OUT_DIR MODELS_DIR".into());
    };
    std::fs::create_dir_all(out)?;
    let tiles = open(&models.join("tiles.onnx"), 8, 1)?;
    signature(out, "signature.txt", &tiles)?;

    // Latents of seed 7 in each mode.
    let z = sample(&tiles, 7, 16, |_| {})?;
    floats(out, "latents-gaussian.f32", &z)?;
    floats(out, "latents-first5.f32", &sample(&tiles, 7, 3, |o| o.first_index = 5)?)?;
    floats(out, "latents-uniform.f32", &sample(&tiles, 7, 4, |o| o.prior = Prior::Uniform)?)?;
    floats(out, "latents-truncated.f32", &sample(&tiles, 7, 4, |o| o.truncation = Some(1.0))?)?;
    floats(out, "latents-psi.f32", &sample(&tiles, 7, 4, |o| o.psi = Some(0.7))?)?;
    floats(out, "latents-numpy.f32", &sample(&tiles, 7, 4, |o| o.mode = RngMode::NumpyCompatible)?)?;

    // Interpolation: 5 frames from latent 0 to latent 1, and paths through latents 0..3.
    let dim = tiles.signature().latent.dim;
    let (a, b) = (&z[..dim], &z[dim..2 * dim]);
    let (mut l, mut s) = (Vec::new(), Vec::new());
    for j in 0..5 {
        let t = j as f64 / 4.0;
        l.extend(lerp(a, b, t)?);
        s.extend(slerp(a, b, t)?);
    }
    floats(out, "lerp5.f32", &l)?;
    floats(out, "slerp5.f32", &s)?;
    let keys = genloom::Latents::new(dim, z[..3 * dim].to_vec())?;
    for (name, how, looped) in [
        ("path-slerp-looped.f32", Interpolation::Slerp, true),
        ("path-lerp-open.f32", Interpolation::Lerp, false),
    ] {
        let mut o = PathOptions::default();
        o.steps = 4;
        o.interpolation = how;
        o.looped = looped;
        floats(out, name, path(&keys, &o)?.as_slice())?;
    }

    // The 16 tiles of seed 7: floats, RGBA8, and PNG files named as the tiles example names them.
    let latents = genloom::Latents::new(dim, z.clone())?;
    let images = tiles.generate(&latents, None)?;
    floats(out, "images.f32", &images.data)?;
    let mut rgba = Vec::new();
    for i in 0..images.count {
        let (p, _) = to_pixels(&images, i, PixelFormat::Rgba8)?;
        std::fs::write(out.join(format!("tile-{i:02}.png")), p.to_png()?)?;
        rgba.extend_from_slice(&p.data);
    }
    std::fs::write(out.join("images.rgba"), rgba)?;
    // The same with 2 worker threads and micro-batches of 3.
    let threaded = open(&models.join("tiles.onnx"), 3, 2)?;
    floats(out, "images-mb3-t2.f32", &threaded.generate(&latents, None)?.data)?;
    // And with f16 compute (micro-batch 8, 1 thread).
    let mut options = GeneratorOptions::default();
    options.f16_compute = true;
    let half =
        Generator::new(Model::from_path(models.join("tiles.onnx"), &LoadOptions::default())?, options)?;
    floats(out, "images-f16-compute.f32", &half.generate(&latents, None)?.data)?;

    // The conditional model: 8 latents of seed 7, labels 0, 1, 2, ... modulo the classes.
    let kind = open(&models.join("tiles-kind.onnx"), 8, 1)?;
    signature(out, "kind-signature.txt", &kind)?;
    let classes = kind.signature().label.as_ref().map_or(1, |l| l.classes) as i64;
    let kz = sample(&kind, 7, 8, |_| {})?;
    let labels: Vec<i64> = (0..8).map(|i| i % classes).collect();
    let kimages = kind.generate(&genloom::Latents::new(kind.signature().latent.dim, kz)?, Some(&labels))?;
    floats(out, "kind-images.f32", &kimages.data)?;
    Ok(())
}
