//! Interpolation between latents and paths through keyframes (no generator needed).

use crate::boundary::{arg_slice, boundary, Failure, OutBuf, Outcome};
use crate::status::genloom_status;
use genloom::latent::path;
use genloom::{Interpolation, Latents, PathOptions};

/// How to move between two latents: one of the `GENLOOM_INTERPOLATION_*` values.
pub type genloom_interpolation = u32;
/// A straight line, `(1 - t) a + t b`.
pub const GENLOOM_INTERPOLATION_LERP: genloom_interpolation = 0;
/// A great-circle arc (spherical interpolation), which keeps Gaussian latents at a typical norm.
pub const GENLOOM_INTERPOLATION_SLERP: genloom_interpolation = 1;

fn interpolation(value: genloom_interpolation) -> Outcome<Interpolation> {
    match value {
        GENLOOM_INTERPOLATION_LERP => Ok(Interpolation::Lerp),
        GENLOOM_INTERPOLATION_SLERP => Ok(Interpolation::Slerp),
        other => Err(Failure::invalid(format!(
            "`interpolation` is {other}, expected GENLOOM_INTERPOLATION_LERP (0) or GENLOOM_INTERPOLATION_SLERP (1)"
        ))),
    }
}

fn path_options(steps: usize, interpolation: Interpolation, looped: bool) -> PathOptions {
    let mut options = PathOptions::default();
    options.steps = steps;
    options.interpolation = interpolation;
    options.looped = looped;
    options
}

/// Writes `frame_count` frames from latent `a` to latent `b`, both included: frame `j` is at
/// `t = j / (frame_count - 1)`, so the first frame is `a` and the last is `b`. `frames` receives
/// `frame_count * a_len` floats, frame after frame. (This is a frame count, ends included; the
/// `steps` of `genloom_latent_interpolate_path` are the steps of one segment, so
/// `frame_count = steps + 1` draws the same frames as a two-keyframe open path.)
///
/// `a_len` and `b_len` must be equal and non-zero, `frame_count` at least 2. A short buffer gives
/// `GENLOOM_STATUS_BUFFER_TOO_SMALL` with the size in `*needed`.
///
/// # Safety
/// `a` and `b` are valid for reads of `a_len` and `b_len` floats; `frames` is valid for writes of
/// `frames_len` floats (or NULL with `frames_len` 0) and overlaps neither input; `needed` is NULL
/// or valid for a write of one `size_t`.
#[no_mangle]
#[allow(clippy::too_many_arguments)]
pub unsafe extern "C" fn genloom_latent_interpolate(
    a: *const f32,
    a_len: usize,
    b: *const f32,
    b_len: usize,
    interpolation: genloom_interpolation,
    frame_count: usize,
    frames: *mut f32,
    frames_len: usize,
    needed: *mut usize,
) -> genloom_status {
    boundary(|| {
        // SAFETY: valid for `a_len` reads by this function's contract.
        let a = unsafe { arg_slice(a, a_len, "a") }?;
        // SAFETY: valid for `b_len` reads by this function's contract.
        let b = unsafe { arg_slice(b, b_len, "b") }?;
        let out = OutBuf::new(frames, frames_len, needed, "frames", "floats")?;
        let how = self::interpolation(interpolation)?;
        if a.is_empty() || a.len() != b.len() {
            return Err(Failure::invalid(format!(
                "`a_len` is {} and `b_len` is {}, expected two latents of the same non-zero size",
                a.len(),
                b.len()
            )));
        }
        if frame_count < 2 {
            return Err(Failure::invalid(format!(
                "`frame_count` is {frame_count}, expected at least 2 frames (the first is `a`, the last `b`)"
            )));
        }
        let n = frame_count
            .checked_mul(a.len())
            .ok_or_else(|| Failure::invalid("`frame_count * a_len` overflows"))?;
        // SAFETY: `needed` is NULL or writable by this function's contract.
        unsafe { out.reserve(n) }?;
        let keys = Latents::new(a.len(), [a, b].concat())?;
        let frames = path(&keys, &path_options(frame_count - 1, how, false))?;
        // SAFETY: the buffer and `needed` are writable by this function's contract; `frames` is ours.
        unsafe { out.fill(frames.as_slice()) }
    })
}

/// Writes the frames of a path through `K = keyframes_len / dim` keyframe latents, `steps`
/// steps per segment (as `genloom morph --steps` and the runtime's `PathOptions::steps`): an open path has `(K - 1) * steps + 1` frames and ends on the last
/// keyframe; a looped path (`looped` true) has `K * steps` frames and its last segment leads back
/// toward the first keyframe. Within a segment frame `j` is at `t = j / steps`. `frames` receives
/// `frame count * dim` floats.
///
/// `keyframes_len` must be a multiple of `dim` with at least 2 keyframes; `steps` at least 1.
///
/// # Safety
/// `keyframes` is valid for reads of `keyframes_len` floats; `frames` is valid for writes of
/// `frames_len` floats (or NULL with `frames_len` 0) and does not overlap `keyframes`; `needed` is
/// NULL or valid for a write of one `size_t`.
#[no_mangle]
#[allow(clippy::too_many_arguments)]
pub unsafe extern "C" fn genloom_latent_interpolate_path(
    keyframes: *const f32,
    keyframes_len: usize,
    dim: usize,
    interpolation: genloom_interpolation,
    steps: usize,
    looped: bool,
    frames: *mut f32,
    frames_len: usize,
    needed: *mut usize,
) -> genloom_status {
    boundary(|| {
        // SAFETY: valid for `keyframes_len` reads by this function's contract.
        let keys = unsafe { arg_slice(keyframes, keyframes_len, "keyframes") }?;
        let out = OutBuf::new(frames, frames_len, needed, "frames", "floats")?;
        let how = self::interpolation(interpolation)?;
        if dim == 0 || keys.is_empty() || !keys.len().is_multiple_of(dim) {
            return Err(Failure::invalid(format!(
                "`keyframes_len` is {} with `dim` {dim}, expected a non-zero multiple of a non-zero `dim`",
                keys.len()
            )));
        }
        let keys = Latents::new(dim, keys.to_vec())?;
        let frames = path(&keys, &path_options(steps, how, looped))?;
        // SAFETY: the buffer and `needed` are writable by this function's contract; `frames` is ours.
        unsafe { out.fill(frames.as_slice()) }
    })
}
