//! `genloom_sample_options`: how latents are drawn, set one named value at a time (no sentinel
//! values), and `genloom_generator_sample`, which draws with them.

use crate::boundary::{arg_mut, arg_ref, boundary, guard, Failure, Out, OutBuf};
use crate::generator::{genloom_generator, genloom_prior, GENLOOM_PRIOR_GAUSSIAN, GENLOOM_PRIOR_UNIFORM};
use crate::status::genloom_status;
use genloom::{Prior, RngMode, SampleOptions};

/// How latents are drawn (an opaque handle): seed, first index, prior, truncation, psi and the
/// random-number stream. Create it with `genloom_sample_options_new` (seed 0, first index 0,
/// Gaussian prior, no truncation, no psi, the portable stream), change it with the
/// `genloom_sample_options_set_*` and `_clear_*` calls, pass it to `genloom_generator_sample`
/// (which only reads it), free it with `genloom_sample_options_free`.
///
/// Not thread-safe to change: a setter must not run while another thread uses the same options.
/// Sampling from several threads with the same (unchanging) options is fine.
#[derive(Debug, Clone)]
pub struct genloom_sample_options {
    inner: SampleOptions,
}

/// Creates sample options with the defaults.
///
/// # Safety
/// `options` is NULL (giving `GENLOOM_STATUS_NULL_ARGUMENT`) or valid for a write of one pointer.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_new(
    options: *mut *mut genloom_sample_options,
) -> genloom_status {
    boundary(|| {
        let out = Out::new(options, "options")?;
        let handle = Box::into_raw(Box::new(genloom_sample_options {
            inner: SampleOptions::new(genloom::DEFAULT_SEED, 1),
        }));
        // SAFETY: `out` was checked and is writable by this function's contract.
        unsafe { out.write(handle) };
        Ok(())
    })
}

/// Frees sample options made by `genloom_sample_options_new`. NULL is accepted and does nothing.
///
/// # Safety
/// `options` is NULL or a handle from `genloom_sample_options_new` not yet freed; it must not be
/// used after this call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_free(options: *mut genloom_sample_options) {
    guard((), || {
        if !options.is_null() {
            // SAFETY: a live handle from `genloom_sample_options_new` (`Box::into_raw`), freed only
            // once by this function's contract.
            drop(unsafe { Box::from_raw(options) });
        }
    })
}

/// Applies `change` to a copy, validates it, and keeps it only if valid.
///
/// # Safety
/// As the setters: `options` is NULL or a live handle with no concurrent use.
unsafe fn set(
    options: *mut genloom_sample_options,
    change: impl FnOnce(&mut SampleOptions) -> Result<(), Failure>,
) -> genloom_status {
    boundary(|| {
        // SAFETY: NULL or a live, unshared handle by the caller's contract.
        let options = unsafe { arg_mut(options, "options") }?;
        let mut next = options.inner.clone();
        change(&mut next)?;
        // The latent size is not known yet: 1 stands in; the draw checks against the model's.
        next.validate(1)?;
        options.inner = next;
        Ok(())
    })
}

/// Sets the seed (default 0). With `numpy_compatible`, seeds must be below 2^32, which the draw
/// checks.
///
/// # Safety
/// `options` is NULL or a live handle, not used by another thread during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_set_seed(
    options: *mut genloom_sample_options,
    seed: u64,
) -> genloom_status {
    // SAFETY: forwarded under this function's contract.
    unsafe {
        set(options, |o| {
            o.seed = seed;
            Ok(())
        })
    }
}

/// Sets the first row of the seed's stream to draw (default 0): row `i` is the same latent
/// whatever the count.
///
/// # Safety
/// `options` is NULL or a live handle, not used by another thread during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_set_first_index(
    options: *mut genloom_sample_options,
    first_index: u64,
) -> genloom_status {
    // SAFETY: forwarded under this function's contract.
    unsafe {
        set(options, |o| {
            o.first_index = first_index;
            Ok(())
        })
    }
}

/// Sets the prior: `GENLOOM_PRIOR_GAUSSIAN` (default) or `GENLOOM_PRIOR_UNIFORM` (truncation must
/// be cleared first).
///
/// # Safety
/// `options` is NULL or a live handle, not used by another thread during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_set_prior(
    options: *mut genloom_sample_options,
    prior: genloom_prior,
) -> genloom_status {
    // SAFETY: forwarded under this function's contract.
    unsafe {
        set(options, |o| {
            o.prior = prior_of(prior)?;
            Ok(())
        })
    }
}

/// Resamples Gaussian components beyond `±threshold` (the truncation trick; at least 0.05, common
/// practice 0.5 to 2). A bad value gives `GENLOOM_STATUS_INVALID_ARGUMENT` and leaves the options
/// unchanged.
///
/// # Safety
/// `options` is NULL or a live handle, not used by another thread during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_set_truncation(
    options: *mut genloom_sample_options,
    threshold: f32,
) -> genloom_status {
    // SAFETY: forwarded under this function's contract.
    unsafe {
        set(options, |o| {
            o.truncation = Some(threshold);
            Ok(())
        })
    }
}

/// Turns truncation off (the default).
///
/// # Safety
/// `options` is NULL or a live handle, not used by another thread during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_clear_truncation(
    options: *mut genloom_sample_options,
) -> genloom_status {
    // SAFETY: forwarded under this function's contract.
    unsafe {
        set(options, |o| {
            o.truncation = None;
            Ok(())
        })
    }
}

/// Shrinks each latent toward zero, `z * psi`, with `psi` in [0, 1] (0 collapses every latent to
/// the centre; 1 changes nothing).
///
/// # Safety
/// `options` is NULL or a live handle, not used by another thread during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_set_psi(
    options: *mut genloom_sample_options,
    psi: f32,
) -> genloom_status {
    // SAFETY: forwarded under this function's contract.
    unsafe {
        set(options, |o| {
            o.psi = Some(psi);
            Ok(())
        })
    }
}

/// Turns psi off (the default).
///
/// # Safety
/// `options` is NULL or a live handle, not used by another thread during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_clear_psi(
    options: *mut genloom_sample_options,
) -> genloom_status {
    // SAFETY: forwarded under this function's contract.
    unsafe {
        set(options, |o| {
            o.psi = None;
            Ok(())
        })
    }
}

/// `false` (default): the portable counter-based stream, identical in Rust, C and JS. `true`:
/// reproduce `numpy.random.RandomState(seed).standard_normal((count, dim)).astype(numpy.float32)`
/// (or `.uniform(-1, 1, ...)`) bit for bit.
///
/// # Safety
/// `options` is NULL or a live handle, not used by another thread during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_sample_options_set_numpy_compatible(
    options: *mut genloom_sample_options,
    numpy_compatible: bool,
) -> genloom_status {
    // SAFETY: forwarded under this function's contract.
    unsafe {
        set(options, |o| {
            o.mode = if numpy_compatible { RngMode::NumpyCompatible } else { RngMode::Portable };
            Ok(())
        })
    }
}

/// The runtime's prior for a C prior value.
pub(crate) fn prior_of(prior: genloom_prior) -> Result<Prior, Failure> {
    match prior {
        GENLOOM_PRIOR_GAUSSIAN => Ok(Prior::Gaussian),
        GENLOOM_PRIOR_UNIFORM => Ok(Prior::Uniform),
        other => Err(Failure::invalid(format!(
            "`prior` is {other}, expected GENLOOM_PRIOR_GAUSSIAN (0) or GENLOOM_PRIOR_UNIFORM (1)"
        ))),
    }
}

/// Draws `count` latent vectors as `options` say (rows `first_index .. first_index + count` of
/// the seed's stream) into `latents`, row after row: `count * latent_dim` floats. `options` may be
/// NULL for the defaults.
///
/// A `latents_len` below the size needed gives `GENLOOM_STATUS_BUFFER_TOO_SMALL` with the size in
/// `*needed` and draws nothing. On success `*needed` (if not NULL) receives the floats written.
///
/// # Safety
/// `generator` is NULL or a live handle; `options` is NULL or a live handle not changed during
/// the call; `latents` is valid for writes of `latents_len` floats (or NULL with `latents_len`
/// 0); `needed` is NULL or valid for a write of one `size_t`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_sample(
    generator: *const genloom_generator,
    options: *const genloom_sample_options,
    count: usize,
    latents: *mut f32,
    latents_len: usize,
    needed: *mut usize,
) -> genloom_status {
    boundary(|| {
        // SAFETY: NULL or live by this function's contract.
        let generator = unsafe { arg_ref(generator, "generator") }?;
        let mut o = if options.is_null() {
            SampleOptions::new(genloom::DEFAULT_SEED, count)
        } else {
            // SAFETY: a live handle by this function's contract (NULL handled above).
            unsafe { arg_ref(options, "options") }?.inner.clone()
        };
        o.count = count;
        let out = OutBuf::new(latents, latents_len, needed, "latents", "floats")?;
        crate::generator::draw_latents(&generator.inner, &o, out)
    })
}
