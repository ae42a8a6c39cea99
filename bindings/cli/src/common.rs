//! What every subcommand shares: the model argument, signature overrides, run options, labels,
//! output helpers, progress bars and the mapping from errors to exit codes.

use anyhow::Context;
use clap::Args;
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, SignatureOverrides};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Exit code for a job that failed (inference, writing).
pub const EXIT_FAILED: i32 = 1;
/// Exit code for bad usage or unreadable input.
pub const EXIT_USAGE: i32 = 2;

/// An error with the exit code it maps to.
#[derive(Debug)]
pub struct Failure {
    pub code: i32,
    pub error: anyhow::Error,
}

impl<E: Into<anyhow::Error>> From<E> for Failure {
    fn from(e: E) -> Failure {
        let error: anyhow::Error = e.into();
        let code = error
            .chain()
            .find_map(|c| c.downcast_ref::<genloom::Error>())
            .map(exit_code)
            .unwrap_or(EXIT_FAILED);
        Failure { code, error }
    }
}

/// Bad input or an impossible request: 2. Work that failed: 1. One arm per error kind; a file
/// that cannot be read is bad input, one that cannot be written is failed work.
pub fn exit_code(e: &genloom::Error) -> i32 {
    use genloom::ErrorKind as K;
    match e.kind() {
        K::Io if matches!(e, genloom::Error::Io { action, .. } if action == "read" || action == "open the folder") => {
            EXIT_USAGE
        }
        K::Io | K::Inference | K::Cancelled => EXIT_FAILED,
        _ => EXIT_USAGE,
    }
}

/// A usage error (exit 2) with a message.
pub fn usage(msg: impl std::fmt::Display) -> Failure {
    Failure { code: EXIT_USAGE, error: anyhow::anyhow!("{msg}") }
}

pub type CliResult<T = ()> = Result<T, Failure>;

/// The model and how to read its signature.
#[derive(Debug, Args, Clone)]
pub struct ModelArgs {
    /// The ONNX model (with its external data file beside it, if any). Default: the built-in demo
    /// model `tiles`.
    pub model: Option<PathBuf>,
    #[command(flatten)]
    pub signature: SignatureArgs,
}

/// How to read a model's signature where discovery cannot tell (every command that loads a
/// model takes these).
#[derive(Debug, Args, Clone, Default)]
pub struct SignatureArgs {
    /// Name of the latent input, when discovery cannot tell.
    #[arg(long, value_name = "NAME")]
    pub latent_input: Option<String>,
    /// Name of the class-label input, when discovery cannot tell.
    #[arg(long, value_name = "NAME")]
    pub label_input: Option<String>,
    /// Number of classes of an integer label input, when the graph does not show it.
    #[arg(long, value_name = "K")]
    pub label_classes: Option<usize>,
    /// Name of the image output, when the model has several.
    #[arg(long, value_name = "NAME")]
    pub image_output: Option<String>,
    /// Memory order of the image output.
    #[arg(long, value_enum, value_name = "ORDER")]
    pub layout: Option<LayoutArg>,
    /// Value range of the image output: tanh ([-1,1]), sigmoid ([0,1]), byte ([0,255]) or LO,HI.
    #[arg(long, value_name = "RANGE", allow_hyphen_values = true)]
    pub range: Option<String>,
}

/// `--layout` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum LayoutArg {
    /// Channels first: [N, C, H, W].
    Nchw,
    /// Channels last: [N, H, W, C].
    Nhwc,
}

impl SignatureArgs {
    pub fn overrides(&self) -> CliResult<SignatureOverrides> {
        let mut o = SignatureOverrides::default();
        o.latent_input = self.latent_input.clone();
        o.label_input = self.label_input.clone();
        o.label_classes = self.label_classes;
        o.image_output = self.image_output.clone();
        o.layout = self.layout.map(|l| match l {
            LayoutArg::Nchw => genloom::Layout::Nchw,
            LayoutArg::Nhwc => genloom::Layout::Nhwc,
        });
        o.range = self.range.as_deref().map(str::parse).transpose()?;
        Ok(o)
    }
}

impl ModelArgs {
    pub fn overrides(&self) -> CliResult<SignatureOverrides> {
        self.signature.overrides()
    }

    /// What to call the model in messages.
    pub fn display_name(&self) -> String {
        match &self.model {
            Some(p) => p.display().to_string(),
            None => genloom::demo::TILES_NAME.to_string(),
        }
    }

    /// Loads the model, timing it.
    pub fn load(&self) -> CliResult<(Model, f64)> {
        let options = LoadOptions::with_overrides(self.overrides()?);
        let t = Instant::now();
        let model = match &self.model {
            Some(p) => Model::from_path(p, &options),
            None => Model::from_bytes(genloom::demo::TILES_ONNX, &options),
        }
        .map_err(|e| Failure {
            code: exit_code(&e),
            error: anyhow::Error::new(e).context(format!("cannot load {}", self.display_name())),
        })?;
        Ok((model, t.elapsed().as_secs_f64() * 1e3))
    }
}

/// How to run generation.
#[derive(Debug, Args, Clone)]
pub struct RunArgs {
    /// Worker threads for generation.
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub threads: usize,
    /// Images per inference call, or `auto` to measure 1, 2, 4, 8 and 16 and keep the fastest.
    #[arg(long, default_value = "auto", value_name = "N")]
    pub micro_batch: String,
    /// Compute in f16 (convolutions stay f32): less memory, slower on most x86-64 CPUs, and
    /// slightly different pictures.
    #[arg(long)]
    pub f16_compute: bool,
}

impl RunArgs {
    pub fn generator(&self, model: Model) -> CliResult<(Generator, f64)> {
        let mut o = GeneratorOptions::default();
        o.threads = self.threads;
        o.f16_compute = self.f16_compute;
        if self.micro_batch == "auto" {
            o.tune = true;
        } else {
            o.micro_batch = self.micro_batch.parse().map_err(|_| {
                usage(format!(
                    "--micro-batch is `{}`, expected `auto` or a number of images",
                    self.micro_batch
                ))
            })?;
        }
        let t = Instant::now();
        let g = Generator::new(model, o)?;
        Ok((g, t.elapsed().as_secs_f64() * 1e3))
    }
}

/// Labels for `count` images: `cycle` (0, 1, 2, ... modulo the classes), one class for all,
/// or a comma-separated list of `count` classes.
pub fn parse_labels(spec: &str, count: usize, classes: usize) -> CliResult<Vec<i64>> {
    if spec == "cycle" {
        return Ok((0..count).map(|i| (i % classes) as i64).collect());
    }
    let parts: Result<Vec<i64>, _> = spec.split(',').map(|p| p.trim().parse::<i64>()).collect();
    let parts = parts.map_err(|_| {
        usage(format!(
            "--label is `{spec}`, expected `cycle`, a class number, or a comma-separated list of classes"
        ))
    })?;
    match parts.len() {
        1 => Ok(vec![parts[0]; count]),
        n if n == count => Ok(parts),
        n => Err(usage(format!("--label lists {n} classes for {count} images, expected 1 or {count}"))),
    }
}

/// Writes to stdout; a closed pipe ends the program quietly.
pub fn out(text: &str) {
    let mut stdout = std::io::stdout().lock();
    if let Err(e) = stdout.write_all(text.as_bytes()).and_then(|_| stdout.flush()) {
        if e.kind() == std::io::ErrorKind::BrokenPipe {
            std::process::exit(0);
        }
        eprintln!("error: cannot write to standard output: {e}");
        std::process::exit(EXIT_FAILED);
    }
}

/// Prints a value as pretty JSON.
pub fn out_json<T: serde::Serialize>(value: &T) -> CliResult {
    let mut s = serde_json::to_string_pretty(value).context("cannot encode the report as JSON")?;
    s.push('\n');
    out(&s);
    Ok(())
}

/// A progress bar on stderr that appears only when work has taken over a second and stderr is a
/// terminal.
pub struct Bar {
    start: Instant,
    bar: Option<indicatif::ProgressBar>,
    label: &'static str,
    enabled: bool,
}

impl Bar {
    pub fn new(label: &'static str, enabled: bool) -> Bar {
        Bar { start: Instant::now(), bar: None, label, enabled }
    }

    pub fn update(&mut self, done: usize, total: usize) {
        if !self.enabled {
            return;
        }
        if self.bar.is_none() && self.start.elapsed().as_secs_f64() > 1.0 && done < total {
            let b = indicatif::ProgressBar::with_draw_target(
                Some(total as u64),
                indicatif::ProgressDrawTarget::stderr(),
            );
            if let Ok(style) =
                indicatif::ProgressStyle::with_template("{msg} [{bar:30}] {pos}/{len} ({eta} left)")
            {
                b.set_style(style.progress_chars("=> "));
            }
            b.set_message(self.label);
            self.bar = Some(b);
        }
        if let Some(b) = &self.bar {
            b.set_position(done as u64);
        }
    }

    pub fn finish(self) {
        if let Some(b) = self.bar {
            b.finish_and_clear();
        }
    }
}

/// Whether a path names a folder to fill (no `.png`/`.gif` extension, or an existing folder).
pub fn is_folder_target(p: &Path) -> bool {
    p.is_dir() || p.extension().is_none() || p.to_string_lossy().ends_with('/')
}

/// Creates the parent folder of an output file when missing.
pub fn ensure_parent(p: &Path) -> CliResult {
    if let Some(parent) = p.parent() {
        if !parent.as_os_str().is_empty() && !parent.exists() {
            std::fs::create_dir_all(parent)
                .with_context(|| format!("cannot create folder {}", parent.display()))?;
        }
    }
    Ok(())
}
