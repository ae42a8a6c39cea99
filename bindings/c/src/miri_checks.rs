//! Boundary tests that touch no tract code, so that Miri can run them: handle lifecycles, NULL
//! and short-buffer handling, the thread-local error, latent interpolation and PNG encoding.
//! Run with `cargo +nightly miri test -p genloom-c --lib miri_`.

use crate::*;
use std::ptr;

#[test]
fn miri_options_lifecycle_and_nulls() {
    let mut o: *mut genloom_options = ptr::null_mut();
    // SAFETY: `o` is a valid out-pointer; the handle is freed once below.
    unsafe {
        assert_eq!(genloom_options_new(&mut o), genloom_status::Ok);
        assert!(!o.is_null());
        assert_eq!(genloom_options_set_threads(o, 2), genloom_status::Ok);
        assert_eq!(genloom_options_set_threads(o, 0), genloom_status::InvalidArgument);
        assert_eq!(genloom_options_set_micro_batch(ptr::null_mut(), 4), genloom_status::NullArgument);
        assert_eq!(genloom_options_set_f16_compute(o, true), genloom_status::Ok);
        assert_eq!(genloom_options_set_f16_compute(ptr::null_mut(), true), genloom_status::NullArgument);
        genloom_options_free(o);
        genloom_options_free(ptr::null_mut());
        assert_eq!(genloom_options_new(ptr::null_mut()), genloom_status::NullArgument);
    }
}

#[test]
fn miri_errors_and_names() {
    // SAFETY: the returned strings are static or thread-local and read before the next call.
    unsafe {
        let name = std::ffi::CStr::from_ptr(genloom_status_name(3));
        assert_eq!(name.to_str().unwrap(), "GENLOOM_STATUS_BUFFER_TOO_SMALL");
        assert!(!genloom_version().is_null());
        assert_eq!(genloom_options_set_micro_batch(ptr::null_mut(), 4), genloom_status::NullArgument);
        let mut needed = 0usize;
        let mut small = [0i8; 4];
        let st = genloom_last_error_copy(small.as_mut_ptr().cast(), small.len(), &mut needed);
        assert_eq!(st, genloom_status::BufferTooSmall);
        assert!(needed > 4);
        let mut buf = vec![0i8; needed];
        assert_eq!(
            genloom_last_error_copy(buf.as_mut_ptr().cast(), buf.len(), &mut needed),
            genloom_status::Ok
        );
        assert!(!genloom_last_error_message().is_null());
    }
}

#[test]
fn miri_interpolation_buffers() {
    let a = [1.0f32, 0.0, 0.0];
    let b = [0.0f32, 1.0, 0.0];
    let mut needed = 0usize;
    let mut frames = [0f32; 9];
    // SAFETY: every pointer is valid for the length passed with it.
    unsafe {
        let st = genloom_latent_interpolate(
            a.as_ptr(),
            3,
            b.as_ptr(),
            3,
            1,
            3,
            frames.as_mut_ptr(),
            2,
            &mut needed,
        );
        assert_eq!(st, genloom_status::BufferTooSmall);
        assert_eq!(needed, 9);
        let st = genloom_latent_interpolate(
            a.as_ptr(),
            3,
            b.as_ptr(),
            3,
            1,
            3,
            frames.as_mut_ptr(),
            9,
            &mut needed,
        );
        assert_eq!(st, genloom_status::Ok);
        assert_eq!(&frames[..3], &a);
        assert_eq!(&frames[6..], &b);
        let st = genloom_latent_interpolate(
            a.as_ptr(),
            3,
            b.as_ptr(),
            2,
            1,
            3,
            frames.as_mut_ptr(),
            9,
            &mut needed,
        );
        assert_eq!(st, genloom_status::InvalidArgument);
        let st = genloom_latent_interpolate(
            a.as_ptr(),
            3,
            b.as_ptr(),
            3,
            77,
            3,
            frames.as_mut_ptr(),
            9,
            &mut needed,
        );
        assert_eq!(st, genloom_status::InvalidArgument);
        let st = genloom_latent_interpolate(
            ptr::null(),
            3,
            b.as_ptr(),
            3,
            1,
            3,
            frames.as_mut_ptr(),
            9,
            &mut needed,
        );
        assert_eq!(st, genloom_status::NullArgument);
    }
}

#[test]
fn miri_png_into_a_caller_buffer() {
    let rgba = [10u8, 20, 30, 255, 40, 50, 60, 255];
    let mut needed = 0usize;
    // SAFETY: NULL with length 0 is the documented size query; then a buffer of that size.
    unsafe {
        let st = genloom_pixels_encode_png(rgba.as_ptr(), rgba.len(), 2, 1, ptr::null_mut(), 0, &mut needed);
        assert_eq!(st, genloom_status::BufferTooSmall);
        let mut png = vec![0u8; needed];
        let st = genloom_pixels_encode_png(
            rgba.as_ptr(),
            rgba.len(),
            2,
            1,
            png.as_mut_ptr(),
            png.len(),
            &mut needed,
        );
        assert_eq!(st, genloom_status::Ok);
        assert!(png.starts_with(b"\x89PNG"));
        let st = genloom_pixels_encode_png(rgba.as_ptr(), 7, 2, 1, png.as_mut_ptr(), png.len(), &mut needed);
        assert_eq!(st, genloom_status::InvalidArgument);
    }
}
