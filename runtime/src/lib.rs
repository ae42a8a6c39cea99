//! genloom: ship a trained image generator (the generator half of a GAN, exported to ONNX) on a
//! CPU.
//!
//! The pipeline is visible in the types:
//! bytes or a path -> [`Model`] (checked, with its [`Signature`] and [`ModelInfo`]; cheap) ->
//! [`Generator`] (optimised plans; `Send + Sync`; reusable) -> [`Images`] (floats) ->
//! [`pixels::Pixels`] (8-bit) -> PNG or GIF.
//!
//! ```
//! use genloom::{Generator, GeneratorOptions, LoadOptions, Model, SampleOptions};
//! # fn main() -> Result<(), genloom::Error> {
//! let model = Model::from_bytes(genloom::demo::TILES_ONNX, &LoadOptions::default())?;
//! assert_eq!(model.signature().latent.dim, 64);
//! let generator = Generator::new(model, GeneratorOptions::default())?;
//! let latents = generator.sample_latents(&SampleOptions::new(7, 4))?;
//! let images = generator.generate(&latents, None)?;
//! let (tile, _) = genloom::pixels::to_pixels(&images, 0, genloom::pixels::PixelFormat::Rgb8)?;
//! assert_eq!((tile.width, tile.height), (32, 32));
//! let png = tile.to_png()?;
//! assert!(png.starts_with(b"\x89PNG"));
//! # Ok(()) }
//! ```
#![forbid(unsafe_code)]

#[cfg(not(target_arch = "wasm32"))]
pub mod bench;
pub mod check;
#[cfg(not(target_arch = "wasm32"))]
pub mod conformance;
pub mod convert;
pub mod demo;
pub mod error;
pub mod files;
pub mod generate;
mod guard;
pub mod latent;
pub mod metrics;
pub mod model;
pub mod npy;
mod onnx;
pub mod passes;
pub mod pixels;
mod plan;
pub mod probe;
mod rules;
pub mod signature;

pub use convert::{ConvertOptions, ConvertReport, Export, Precision};
pub use error::{Error, ErrorKind, Result, TractStage};
pub use generate::{Generator, GeneratorOptions, Images, Progress};
pub use latent::{Interpolation, Latents, PathOptions, Prior, RngMode, SampleOptions};
pub use model::{Limits, LoadOptions, Model, ModelInfo};
pub use passes::PassOptions;
pub use signature::{Batch, LabelKind, Layout, Signature, SignatureOverrides, ValueRange};

/// The seed every tool of genloom uses when none is given (sampling, the gate, a conversion's
/// fidelity report, the bench), so that one seed means the same latents everywhere.
pub const DEFAULT_SEED: u64 = 0;

/// The version of this crate.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
