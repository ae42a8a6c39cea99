//! `genloom_options`: how a generator is built and runs.

use crate::boundary::{arg_mut, boundary, guard, Out};
use crate::status::genloom_status;
use genloom::GeneratorOptions;

/// How a generator is built and runs (an opaque handle). Create it with `genloom_options_new`,
/// change it with the `genloom_options_set_*` calls, pass it to `genloom_generator_open_*` (which
/// copies it: the options may be freed or changed right after), free it with
/// `genloom_options_free`.
///
/// Not thread-safe to change: a setter must not run while another thread uses the same options.
/// Opening generators from several threads with the same (unchanging) options is fine.
#[derive(Debug, Clone, Default)]
pub struct genloom_options {
    pub(crate) inner: GeneratorOptions,
}

/// Creates options with the defaults: micro-batch 8, 1 thread, warm-up on, f32 compute.
///
/// # Safety
/// `options` is NULL (giving `GENLOOM_STATUS_NULL_ARGUMENT`) or valid for a write of one pointer.
#[no_mangle]
pub unsafe extern "C" fn genloom_options_new(options: *mut *mut genloom_options) -> genloom_status {
    boundary(|| {
        let out = Out::new(options, "options")?;
        let handle = Box::into_raw(Box::new(genloom_options::default()));
        // SAFETY: `out` was checked and is writable by this function's contract.
        unsafe { out.write(handle) };
        Ok(())
    })
}

/// Frees options made by `genloom_options_new`. NULL is accepted and does nothing.
///
/// # Safety
/// `options` is NULL or a handle from `genloom_options_new` not yet freed; it must not be used
/// after this call.
#[no_mangle]
pub unsafe extern "C" fn genloom_options_free(options: *mut genloom_options) {
    guard((), || {
        if !options.is_null() {
            // SAFETY: a live handle from `genloom_options_new` (`Box::into_raw`), freed only once by
            // this function's contract.
            drop(unsafe { Box::from_raw(options) });
        }
    })
}

/// Applies `change` to a copy, validates it, and keeps it only if valid.
///
/// # Safety
/// As the setters: `options` is NULL or a live handle with no concurrent use.
unsafe fn set(options: *mut genloom_options, change: impl FnOnce(&mut GeneratorOptions)) -> genloom_status {
    boundary(|| {
        // SAFETY: NULL or a live, unshared handle by the caller's contract.
        let options = unsafe { arg_mut(options, "options") }?;
        let mut next = options.inner.clone();
        change(&mut next);
        next.validate()?;
        options.inner = next;
        Ok(())
    })
}

/// Sets the worker threads one generation request is spread over (1 to 256; default 1, which
/// runs on the calling thread). Out-of-range values give `GENLOOM_STATUS_INVALID_ARGUMENT` and
/// leave the options unchanged.
///
/// # Safety
/// `options` is NULL or a live handle from `genloom_options_new`, not used by another thread
/// during the call.
#[no_mangle]
pub unsafe extern "C" fn genloom_options_set_threads(
    options: *mut genloom_options,
    threads: usize,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { set(options, |o| o.threads = threads) }
}

/// Sets the images per inference call (1 to 4096; default 8). Models with a fixed batch size
/// always use their own. Out-of-range values give `GENLOOM_STATUS_INVALID_ARGUMENT` and leave the
/// options unchanged.
///
/// # Safety
/// As `genloom_options_set_threads`.
#[no_mangle]
pub unsafe extern "C" fn genloom_options_set_micro_batch(
    options: *mut genloom_options,
    micro_batch: usize,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { set(options, |o| o.micro_batch = micro_batch) }
}

/// Whether opening builds the inference plans at once (`true`, the default: the first
/// generation is then as fast as the rest) or on first use (`false`: faster open).
///
/// # Safety
/// As `genloom_options_set_threads`.
#[no_mangle]
pub unsafe extern "C" fn genloom_options_set_warm_up(
    options: *mut genloom_options,
    warm_up: bool,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { set(options, |o| o.warm_up = warm_up) }
}

/// Turns half-precision (IEEE 754 binary16) compute on or off. Off by default. With it on,
/// everything but Conv runs in f16 (Conv stays f32: its f16 kernel is far slower): the plans
/// take less memory (on the demo model: steady heap -14%, heap while generating -47%), generation
/// is slower on CPUs without native f16 arithmetic (about 3x on x86-64 here), and pixels move by
/// at most about one 8-bit level. Takes effect for generators opened with these options.
///
/// # Safety
/// As `genloom_options_set_threads`.
#[no_mangle]
pub unsafe extern "C" fn genloom_options_set_f16_compute(
    options: *mut genloom_options,
    enabled: bool,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { set(options, |o| o.f16_compute = enabled) }
}
