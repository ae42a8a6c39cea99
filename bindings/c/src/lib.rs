//! The C ABI of genloom: embed a trained GAN image generator in any app that can call C.
//!
//! This crate is a thin adapter over the `genloom` runtime: it converts C pointers and lengths
//! into Rust types, calls the runtime, and maps the runtime's errors to [`genloom_status`] codes
//! with a thread-local message. All logic lives in the runtime.
//!
//! The header `include/genloom.h` is written from this crate by cbindgen (see `README.md` for
//! how to regenerate it); a test fails when the committed header drifts from the source.
//!
//! # The rules every export follows
//! - Opaque handles ([`genloom_options`], [`genloom_generator`]) are created by `_new`/`_open`
//!   calls and released by `_free` calls, which accept NULL.
//! - Every fallible call returns a [`genloom_status`]; the detail is in
//!   [`genloom_last_error_message`], a thread-local string.
//! - Arguments come object first, then inputs, then outputs; a buffer pointer is followed by
//!   its length in elements; out-params are written only on success (the `needed` size of a
//!   too-small buffer is the one documented exception).
//! - Each body runs inside one boundary helper that catches panics, checks pointers and maps
//!   errors, so no Rust panic crosses into C.

// This is the one crate of the workspace that needs `unsafe`: a C ABI must dereference the raw
// pointers C hands it. The workspace lint denies `unsafe_code`; it is allowed here, and every
// unsafe block must carry a `// SAFETY:` comment (enforced by the clippy lint below).
#![allow(unsafe_code)]
#![warn(clippy::undocumented_unsafe_blocks)]
// The exported names are C names (`genloom_generator`, `genloom_status`), spelled as C users see them.
#![allow(non_camel_case_types)]

mod boundary;
mod errors;
mod generator;
mod latent;
#[cfg(test)]
mod miri_checks;
mod options;
mod pixels;
mod sample;
mod status;

pub use errors::{genloom_last_error_copy, genloom_last_error_message, genloom_status_name, genloom_version};
pub use generator::{
    genloom_generator, genloom_generator_free, genloom_generator_generate, genloom_generator_generate_rgba8,
    genloom_generator_get_channels, genloom_generator_get_height, genloom_generator_get_label_classes,
    genloom_generator_get_latent_dim, genloom_generator_get_layout, genloom_generator_get_output_len,
    genloom_generator_get_range, genloom_generator_get_width, genloom_generator_open_bytes,
    genloom_generator_open_path, genloom_generator_sample_latents, genloom_layout, genloom_output,
    genloom_prior, genloom_progress_fn, GENLOOM_LAYOUT_NCHW, GENLOOM_LAYOUT_NHWC, GENLOOM_OUTPUT_FLOAT,
    GENLOOM_OUTPUT_LATENTS, GENLOOM_OUTPUT_RGBA8, GENLOOM_PRIOR_GAUSSIAN, GENLOOM_PRIOR_UNIFORM,
};
pub use latent::{
    genloom_interpolation, genloom_latent_interpolate, genloom_latent_interpolate_path,
    GENLOOM_INTERPOLATION_LERP, GENLOOM_INTERPOLATION_SLERP,
};
pub use options::{
    genloom_options, genloom_options_free, genloom_options_new, genloom_options_set_f16_compute,
    genloom_options_set_micro_batch, genloom_options_set_threads, genloom_options_set_warm_up,
};
pub use pixels::genloom_pixels_encode_png;
pub use sample::{
    genloom_generator_sample, genloom_sample_options, genloom_sample_options_clear_psi,
    genloom_sample_options_clear_truncation, genloom_sample_options_free, genloom_sample_options_new,
    genloom_sample_options_set_first_index, genloom_sample_options_set_numpy_compatible,
    genloom_sample_options_set_prior, genloom_sample_options_set_psi, genloom_sample_options_set_seed,
    genloom_sample_options_set_truncation,
};
pub use status::genloom_status;
