//! `genloom sample` and `genloom morph`.

use crate::common::{
    ensure_parent, is_folder_target, out, out_json, parse_labels, usage, Bar, CliResult, ModelArgs, RunArgs,
};
use anyhow::Context;
use clap::Args;
use genloom::pixels::{self, GifOptions, GridOptions, PixelFormat, PixelStats, Pixels, Provenance};
use genloom::{Generator, Images, Interpolation, Latents, PathOptions, Prior, RngMode, SampleOptions};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// `--prior` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum PriorArg {
    /// The standard normal distribution N(0, I).
    Gaussian,
    /// Uniform on [-1, 1].
    Uniform,
}

/// `--interp` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum InterpArg {
    /// Spherical linear interpolation (Shoemake 1985): keeps latents at the prior's norm.
    Slerp,
    /// Straight-line interpolation.
    Lerp,
}

/// How latents are drawn (shared by sample and morph).
#[derive(Debug, Args, Clone)]
pub struct LatentArgs {
    /// Prior the latents are drawn from.
    #[arg(long, value_enum, default_value_t = PriorArg::Gaussian, value_name = "PRIOR")]
    pub prior: PriorArg,
    /// Resample latent components beyond this threshold (truncation trick), e.g. 1.0.
    #[arg(long, value_name = "C")]
    pub truncation: Option<f32>,
    /// Shrink latents toward the centre by PSI in [0, 1] (1 = no change).
    #[arg(long, value_name = "PSI")]
    pub psi: Option<f32>,
    /// Draw latents as numpy.random.RandomState(seed).standard_normal((count, dim)) does.
    #[arg(long)]
    pub numpy: bool,
}

impl LatentArgs {
    fn options(&self, seed: u64, count: usize) -> CliResult<SampleOptions> {
        let mut o = SampleOptions::new(seed, count);
        o.prior = match self.prior {
            PriorArg::Gaussian => Prior::Gaussian,
            PriorArg::Uniform => Prior::Uniform,
        };
        o.truncation = self.truncation;
        o.psi = self.psi;
        o.mode = if self.numpy { RngMode::NumpyCompatible } else { RngMode::Portable };
        Ok(o)
    }
}

/// Arguments of `sample`.
#[derive(Debug, Args)]
pub struct SampleArgs {
    #[command(flatten)]
    pub model: ModelArgs,
    /// Number of images.
    #[arg(long, short = 'n', default_value_t = 16, conflicts_with = "latents_in")]
    pub count: usize,
    /// Seed of the latents (image i of seed s is the same whatever the count).
    #[arg(long, short = 's', default_value_t = genloom::DEFAULT_SEED, conflicts_with = "latents_in")]
    pub seed: u64,
    #[command(flatten)]
    pub latent: LatentArgs,
    /// Class labels of a conditional model: `cycle`, one class, or a list `0,1,2,...`.
    #[arg(long, value_name = "LABELS")]
    pub label: Option<String>,
    /// Read latents from an NPY file ((N, Z) float32 or float64) instead of drawing them.
    #[arg(long, value_name = "FILE")]
    pub latents_in: Option<PathBuf>,
    /// Read class labels from an NPY file ((N,) integers).
    #[arg(long, value_name = "FILE")]
    pub labels_in: Option<PathBuf>,
    /// Save the latents used as an NPY file.
    #[arg(long, value_name = "FILE")]
    pub latents_out: Option<PathBuf>,
    /// Where to write: a .png file for one grid, or a folder for one PNG per image.
    #[arg(long, short = 'o', default_value = "samples.png")]
    pub out: PathBuf,
    /// Grid columns (default: a square-ish grid).
    #[arg(long)]
    pub columns: Option<usize>,
    /// Nearest-neighbour scale factor for the pictures.
    #[arg(long, default_value_t = 1)]
    pub scale: usize,
    /// Pixels between grid tiles.
    #[arg(long, default_value_t = 2)]
    pub margin: usize,
    #[command(flatten)]
    pub run: RunArgs,
    /// Leave the provenance text (model, its sha256, seed and index, "synthetic") out of the PNGs.
    #[arg(long)]
    pub no_provenance: bool,
    /// Print a JSON report instead of text.
    #[arg(long)]
    pub json: bool,
}

#[derive(serde::Serialize)]
struct SampleReport {
    model: String,
    count: usize,
    seed: Option<u64>,
    latents_from: Option<String>,
    labels: Option<Vec<i64>>,
    files: Vec<String>,
    latents_out: Option<String>,
    width: usize,
    height: usize,
    load_ms: f64,
    plan_ms: f64,
    generate_ms: f64,
    per_image_ms: f64,
    corrections: PixelStats,
}

fn run_with_bar(
    g: &Generator,
    latents: &Latents,
    labels: Option<&[i64]>,
    json: bool,
) -> CliResult<(Images, f64)> {
    let mut bar = Bar::new("generating", !json && std::io::stderr().is_terminal());
    let t = Instant::now();
    let images = g.generate_with(latents, labels, &mut |p| {
        bar.update(p.done, p.total);
        true
    })?;
    bar.finish();
    Ok((images, t.elapsed().as_secs_f64() * 1e3))
}

fn labels_for(
    g: &Generator,
    spec: Option<&str>,
    file: Option<&Path>,
    count: usize,
) -> CliResult<Option<Vec<i64>>> {
    match (&g.signature().label, spec, file) {
        (None, None, None) => Ok(None),
        (None, _, _) => {
            Err(usage("this model is unconditional (it has no label input): drop --label / --labels-in"))
        }
        (Some(_), Some(_), Some(_)) => Err(usage("give --label or --labels-in, not both")),
        (Some(l), spec, None) => Ok(Some(parse_labels(spec.unwrap_or("cycle"), count, l.classes)?)),
        (Some(_), None, Some(f)) => {
            let labels = genloom::npy::read_labels(f)?;
            if labels.len() != count {
                return Err(usage(format!(
                    "{} holds {} labels for {count} images, expected one per image",
                    f.display(),
                    labels.len()
                )));
            }
            Ok(Some(labels))
        }
    }
}

/// What the PNGs say about their origin: the model, its sha256, and (per picture, or for the
/// whole grid when `None`) where the picture came from.
struct Origin<'a> {
    model: String,
    sha256: String,
    describe: &'a dyn Fn(Option<usize>) -> String,
}

impl Origin<'_> {
    fn of(&self, index: Option<usize>) -> Provenance {
        Provenance {
            model: self.model.clone(),
            model_sha256: self.sha256.clone(),
            origin: (self.describe)(index),
        }
    }
}

fn write_outputs(
    out_path: &Path,
    tiles: &[Pixels],
    grid: &GridOptions,
    prefix: &str,
    origin: Option<&Origin<'_>>,
) -> CliResult<Vec<String>> {
    let mut files = vec![];
    if is_folder_target(out_path) {
        std::fs::create_dir_all(out_path)
            .with_context(|| format!("cannot create folder {}", out_path.display()))?;
        for (i, t) in tiles.iter().enumerate() {
            let p = out_path.join(format!("{prefix}-{i:04}.png"));
            t.upscale(grid.scale).write_png_with(&p, origin.map(|o| o.of(Some(i))).as_ref())?;
            files.push(p.display().to_string());
        }
    } else {
        match out_path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase).as_deref() {
            Some("png") => {}
            _ => {
                return Err(usage(format!(
                    "--out is {}, expected a .png file or a folder",
                    out_path.display()
                )))
            }
        }
        ensure_parent(out_path)?;
        pixels::grid(tiles, grid)?.write_png_with(out_path, origin.map(|o| o.of(None)).as_ref())?;
        files.push(out_path.display().to_string());
    }
    Ok(files)
}

pub fn sample(a: &SampleArgs) -> CliResult {
    let (model, load_ms) = a.model.load()?;
    let dim = model.signature().latent.dim;
    let (latents, latents_from) = match &a.latents_in {
        Some(f) => (genloom::npy::read_latents(f, dim)?, Some(f.display().to_string())),
        None => (Latents::sample(dim, &a.latent.options(a.seed, a.count)?)?, None),
    };
    if a.latents_in.is_some() && (a.latent.truncation.is_some() || a.latent.psi.is_some()) {
        return Err(usage("--truncation and --psi apply to drawn latents, not to --latents-in"));
    }
    let count = latents.count();
    let sha256 = model.info().sha256.clone();
    let (g, plan_ms) = a.run.generator(model)?;
    let labels = labels_for(&g, a.label.as_deref(), a.labels_in.as_deref(), count)?;
    let (images, generate_ms) = run_with_bar(&g, &latents, labels.as_deref(), a.json)?;
    let format = PixelFormat::natural(images.channels);
    let (tiles, corrections) = pixels::all_pixels(&images, format)?;
    let mut grid = GridOptions::default();
    grid.columns = a.columns;
    grid.scale = a.scale;
    grid.margin = a.margin;
    let mode = if a.latent.numpy { " (NumPy-compatible)" } else { "" };
    let label_of = |i: usize| labels.as_ref().map(|l| format!(", label {}", l[i])).unwrap_or_default();
    let describe = |index: Option<usize>| match (index, &a.latents_in) {
        (Some(i), Some(f)) => format!("latents from {}, row {i}{}", f.display(), label_of(i)),
        (Some(i), None) => format!("seed {}, index {i}{mode}{}", a.seed, label_of(i)),
        (None, Some(f)) => format!("latents from {}, rows 0 to {} in reading order", f.display(), count - 1),
        (None, None) => format!("seed {}, indices 0 to {} in reading order{mode}", a.seed, count - 1),
    };
    let origin = Origin { model: a.model.display_name(), sha256, describe: &describe };
    let files = write_outputs(&a.out, &tiles, &grid, "sample", (!a.no_provenance).then_some(&origin))?;
    if let Some(p) = &a.latents_out {
        ensure_parent(p)?;
        genloom::npy::write_latents(p, &latents)?;
    }
    let report = SampleReport {
        model: a.model.display_name(),
        count,
        seed: if a.latents_in.is_some() { None } else { Some(a.seed) },
        latents_from,
        labels,
        files: files.clone(),
        latents_out: a.latents_out.as_ref().map(|p| p.display().to_string()),
        width: images.width,
        height: images.height,
        load_ms,
        plan_ms,
        generate_ms,
        per_image_ms: generate_ms / count as f64,
        corrections,
    };
    if a.json {
        return out_json(&report);
    }
    let target = if files.len() == 1 {
        files[0].clone()
    } else {
        format!("{} files in {}", files.len(), a.out.display())
    };
    let mut s = format!(
        "wrote {count} images of {}x{} to {target}\n  load {load_ms:.1} ms, plans {plan_ms:.1} ms, generate {generate_ms:.1} ms ({:.3} ms per image)\n",
        images.width,
        images.height,
        generate_ms / count as f64
    );
    if corrections.nan + corrections.below + corrections.above > 0 {
        s.push_str(&format!(
            "  note: {} NaN values written as 0, {} values below and {} above the range clamped\n",
            corrections.nan, corrections.below, corrections.above
        ));
    }
    if let Some(p) = &a.latents_out {
        s.push_str(&format!("  latents saved to {}\n", p.display()));
    }
    out(&s);
    Ok(())
}

/// Arguments of `morph`.
#[derive(Debug, Args)]
pub struct MorphArgs {
    #[command(flatten)]
    pub model: ModelArgs,
    /// Keyframe seeds, comma-separated (each seed's first latent).
    #[arg(long, value_name = "SEEDS", default_value = "1,2,3", conflicts_with = "keyframes")]
    pub seeds: String,
    /// Keyframes from an NPY file ((K, Z)) instead of seeds.
    #[arg(long, value_name = "FILE")]
    pub keyframes: Option<PathBuf>,
    #[command(flatten)]
    pub latent: LatentArgs,
    /// Frames from one keyframe to the next.
    #[arg(long, default_value_t = 16)]
    pub steps: usize,
    /// Interpolation between keyframes.
    #[arg(long, value_enum, default_value_t = InterpArg::Slerp)]
    pub interp: InterpArg,
    /// Return to the first keyframe for a seamless loop.
    #[arg(long = "loop")]
    pub looped: bool,
    /// Class labels of a conditional model, as `sample --label` takes them: `cycle`, one class
    /// (default 0) for the whole path, or a list of one class per frame.
    #[arg(long, value_name = "LABELS")]
    pub label: Option<String>,
    /// Output: a .gif animation or a .png strip of frames.
    #[arg(long, short = 'o', default_value = "morph.gif")]
    pub out: PathBuf,
    /// Milliseconds per GIF frame.
    #[arg(long, default_value_t = 80)]
    pub frame_ms: u32,
    /// Nearest-neighbour scale factor.
    #[arg(long, default_value_t = 4)]
    pub scale: usize,
    /// Frames per row of a strip PNG (default: all in one row).
    #[arg(long)]
    pub columns: Option<usize>,
    /// Save the path's latents as an NPY file.
    #[arg(long, value_name = "FILE")]
    pub latents_out: Option<PathBuf>,
    #[command(flatten)]
    pub run: RunArgs,
    /// Leave the provenance text (model, its sha256, keyframes, "synthetic") out of a .png strip.
    #[arg(long)]
    pub no_provenance: bool,
    /// Print a JSON report instead of text.
    #[arg(long)]
    pub json: bool,
}

#[derive(serde::Serialize)]
struct MorphReport {
    model: String,
    keyframes: usize,
    seeds: Option<Vec<u64>>,
    frames: usize,
    interpolation: Interpolation,
    looped: bool,
    file: String,
    latents_out: Option<String>,
    generate_ms: f64,
    corrections: PixelStats,
}

pub fn morph(a: &MorphArgs) -> CliResult {
    let ext = a.out.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase);
    if !matches!(ext.as_deref(), Some("gif") | Some("png")) {
        return Err(usage(format!(
            "--out is {}, expected a .gif animation or a .png strip",
            a.out.display()
        )));
    }
    let interpolation = match a.interp {
        InterpArg::Slerp => Interpolation::Slerp,
        InterpArg::Lerp => Interpolation::Lerp,
    };
    let (model, _) = a.model.load()?;
    let dim = model.signature().latent.dim;
    let (keys, seeds) = match &a.keyframes {
        Some(f) => (genloom::npy::read_latents(f, dim)?, None),
        None => {
            let seeds: Result<Vec<u64>, _> = a.seeds.split(',').map(|s| s.trim().parse::<u64>()).collect();
            let seeds = seeds.map_err(|_| {
                usage(format!("--seeds is `{}`, expected comma-separated seeds like 1,2,3", a.seeds))
            })?;
            let mut data = Vec::with_capacity(seeds.len() * dim);
            for &s in &seeds {
                data.extend(Latents::sample(dim, &a.latent.options(s, 1)?)?.into_vec());
            }
            (Latents::new(dim, data)?, Some(seeds))
        }
    };
    let mut po = PathOptions::default();
    po.steps = a.steps;
    po.interpolation = interpolation;
    po.looped = a.looped;
    let frames = genloom::latent::path(&keys, &po)?;
    let sha256 = model.info().sha256.clone();
    let (g, _) = a.run.generator(model)?;
    // A conditional model draws the whole path in class 0 unless told otherwise.
    let spec = match (&g.signature().label, a.label.as_deref()) {
        (Some(_), None) => Some("0"),
        (_, spec) => spec,
    };
    let labels = labels_for(&g, spec, None, frames.count())?;
    let (images, generate_ms) = run_with_bar(&g, &frames, labels.as_deref(), a.json)?;
    let (tiles, corrections) = pixels::all_pixels(&images, PixelFormat::natural(images.channels))?;
    ensure_parent(&a.out)?;
    if ext.as_deref() == Some("gif") {
        let mut o = GifOptions::default();
        o.frame_ms = a.frame_ms;
        o.scale = a.scale;
        o.repeat = true;
        pixels::write_gif(&a.out, &tiles, &o)?;
    } else {
        let mut o = GridOptions::default();
        o.columns = Some(a.columns.unwrap_or(tiles.len()));
        o.scale = a.scale;
        let keyframes = match (&seeds, &a.keyframes) {
            (Some(s), _) => format!("seeds {s:?}"),
            (None, Some(f)) => format!("keyframes from {}", f.display()),
            (None, None) => String::new(),
        };
        let provenance = Provenance {
            model: a.model.display_name(),
            model_sha256: sha256,
            origin: format!("{} frames of a {interpolation:?} path through {keyframes}", frames.count()),
        };
        pixels::grid(&tiles, &o)?.write_png_with(&a.out, (!a.no_provenance).then_some(&provenance))?;
    }
    if let Some(p) = &a.latents_out {
        ensure_parent(p)?;
        genloom::npy::write_latents(p, &frames)?;
    }
    let report = MorphReport {
        model: a.model.display_name(),
        keyframes: keys.count(),
        seeds,
        frames: frames.count(),
        interpolation,
        looped: a.looped,
        file: a.out.display().to_string(),
        latents_out: a.latents_out.as_ref().map(|p| p.display().to_string()),
        generate_ms,
        corrections,
    };
    if a.json {
        return out_json(&report);
    }
    out(&format!(
        "wrote {} frames ({} keyframes, {:?}{}) to {}\n  generate {generate_ms:.1} ms\n",
        report.frames,
        report.keyframes,
        interpolation,
        if a.looped { ", looped" } else { "" },
        report.file
    ));
    Ok(())
}
