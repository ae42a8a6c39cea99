//! The built-in demo model, compiled into the crate so that examples and the `genloom` command
//! work with no model file.
//!
//! `TILES_ONNX` is `tiles`, the unconditional 32x32 terrain-tile generator of `models-demo/`
//! (a DCGAN-style generator trained on our procedural tile set, exported by PyTorch's legacy
//! single-file exporter).

/// The `tiles` demo generator (ONNX bytes).
pub const TILES_ONNX: &[u8] = include_bytes!("../../models-demo/tiles.onnx");

/// The name shown for the built-in model.
pub const TILES_NAME: &str = "built-in demo model `tiles` (32x32 terrain tiles)";
