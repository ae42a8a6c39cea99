//! Any bytes through the C ABI, called from Rust as a C program would: open a generator from
//! memory, read its shape, query and then fill a latent buffer, render one RGBA8 image into a
//! buffer of exactly the size asked for, and free everything. An error status is fine;
//! `GENLOOM_STATUS_PANIC` (a panic genloom caught at its boundary, documented as a bug in genloom),
//! an escaped panic, a memory error (AddressSanitizer), a hang or an allocation past the RSS limit
//! is a bug.
#![no_main]

use genloom_c::*;
use libfuzzer_sys::fuzz_target;
use std::ffi::CStr;
use std::ptr;

/// Images larger than this are not rendered (the C ABI loads with the default limits, which
/// allow 4096 x 4096): a fuzz iteration must stay well under libFuzzer's timeout.
const MAX_RENDERED_PIXELS: usize = 256 * 256;

fuzz_target!(|data: &[u8]| {
    genloom_fuzz::install_panic_hook();
    genloom_fuzz::guarded(|| {
        // SAFETY: every pointer passed below is valid for the documented reads and writes.
        unsafe { run(data) }
    });
});

/// Fails the iteration when genloom reports that it caught a panic of its own.
fn checked(status: genloom_status, call: &str) -> genloom_status {
    if status == genloom_status::Panic {
        // SAFETY: the message is a static or thread-local NUL-terminated string, read at once.
        let message = unsafe { CStr::from_ptr(genloom_last_error_message()) }.to_string_lossy().into_owned();
        panic!(
            "{call} returned GENLOOM_STATUS_PANIC: {message}\n(last panic: {})",
            genloom_fuzz::last_panic().unwrap_or_default()
        );
    }
    status
}

unsafe fn run(data: &[u8]) {
    let mut options = ptr::null_mut();
    assert_eq!(checked(genloom_options_new(&mut options), "genloom_options_new"), genloom_status::Ok);
    assert_eq!(checked(genloom_options_set_warm_up(options, false), "set_warm_up"), genloom_status::Ok);
    let mut generator = ptr::null_mut();
    let status = checked(
        genloom_generator_open_bytes(data.as_ptr(), data.len(), options, &mut generator),
        "genloom_generator_open_bytes",
    );
    genloom_options_free(options);
    if status != genloom_status::Ok {
        assert!(generator.is_null(), "a failed open wrote the handle");
        assert!(
            !CStr::from_ptr(genloom_last_error_message()).to_bytes().is_empty(),
            "a failed open left no error message"
        );
        return;
    }
    assert!(!generator.is_null(), "a successful open wrote no handle");
    use_generator(generator);
    genloom_generator_free(generator);
}

unsafe fn use_generator(generator: *mut genloom_generator) {
    let get = |f: unsafe extern "C" fn(*const genloom_generator, *mut usize) -> genloom_status, what: &str| {
        let mut out = 0usize;
        assert_eq!(checked(f(generator, &mut out), what), genloom_status::Ok, "{what} failed on a live handle");
        out
    };
    let dim = get(genloom_generator_get_latent_dim, "get_latent_dim");
    let classes = get(genloom_generator_get_label_classes, "get_label_classes");
    let width = get(genloom_generator_get_width, "get_width");
    let height = get(genloom_generator_get_height, "get_height");
    let channels = get(genloom_generator_get_channels, "get_channels");
    assert!(dim > 0 && width > 0 && height > 0, "an open generator of size {dim} -> {width}x{height}");
    assert!(matches!(channels, 1 | 3 | 4), "{channels} channels");
    let (mut lo, mut hi) = (0f32, 0f32);
    assert_eq!(checked(genloom_generator_get_range(generator, &mut lo, &mut hi), "get_range"), genloom_status::Ok);

    // Ask for the latent buffer's size with an empty buffer, then fill one of exactly that size.
    let mut needed = 0usize;
    let status = checked(
        genloom_generator_sample_latents(
            generator,
            0,
            0,
            1,
            GENLOOM_PRIOR_GAUSSIAN,
            0.0,
            -1.0,
            false,
            ptr::null_mut(),
            0,
            &mut needed,
        ),
        "sample_latents (size query)",
    );
    assert_eq!(status, genloom_status::BufferTooSmall);
    assert_eq!(needed, dim, "one latent needs {needed} floats, the latent size is {dim}");
    let mut latents = vec![0f32; needed];
    let status = checked(
        genloom_generator_sample_latents(
            generator,
            0,
            0,
            1,
            GENLOOM_PRIOR_GAUSSIAN,
            0.0,
            -1.0,
            false,
            latents.as_mut_ptr(),
            latents.len(),
            &mut needed,
        ),
        "sample_latents",
    );
    assert_eq!(status, genloom_status::Ok, "sampling one latent failed");

    if width.saturating_mul(height) > MAX_RENDERED_PIXELS {
        return;
    }
    let mut len = 0usize;
    let status = checked(
        genloom_generator_get_output_len(generator, 1, GENLOOM_OUTPUT_RGBA8, &mut len),
        "get_output_len",
    );
    assert_eq!(status, genloom_status::Ok);
    assert_eq!(len, width * height * 4, "the RGBA8 size of one {width}x{height} image");
    let labels = [0i64];
    let labels_len = if classes > 0 { 1 } else { 0 };
    let mut pixels = vec![0u8; len];
    let status = checked(
        genloom_generator_generate_rgba8(
            generator,
            latents.as_ptr(),
            latents.len(),
            if classes > 0 { labels.as_ptr() } else { ptr::null() },
            labels_len,
            None,
            ptr::null_mut(),
            pixels.as_mut_ptr(),
            pixels.len(),
            &mut needed,
        ),
        "generate_rgba8",
    );
    if status == genloom_status::Ok {
        assert_eq!(needed, len, "generate_rgba8 wrote {needed} bytes of {len}");
        if channels != 4 {
            assert!(pixels.chunks(4).all(|p| p[3] == 255), "alpha is not 255 for {channels} channels");
        }
    }
}
