//! Misuse gives a status and a message, never a crash: NULL arguments, short buffers, unknown
//! enum values, freeing NULL, models that fail to load.

use crate::calls::{last_error, open_demo};
use genloom_c::*;
use std::ffi::{c_int, CStr};
use std::ptr;

fn name(status: c_int) -> String {
    // SAFETY: genloom_status_name returns a static NUL-terminated string for any input.
    unsafe { CStr::from_ptr(genloom_status_name(status)) }
        .to_str()
        .expect("status names are ASCII")
        .to_string()
}

fn expect(status: genloom_status, want: genloom_status, message_has: &str) {
    assert_eq!(status, want, "message: {}", last_error());
    assert!(last_error().contains(message_has), "message `{}` lacks `{message_has}`", last_error());
}

#[test]
fn status_codes_are_stable_and_named() {
    let want = [
        (0, "GENLOOM_STATUS_OK"),
        (1, "GENLOOM_STATUS_NULL_ARGUMENT"),
        (2, "GENLOOM_STATUS_INVALID_ARGUMENT"),
        (3, "GENLOOM_STATUS_BUFFER_TOO_SMALL"),
        (4, "GENLOOM_STATUS_LOAD_FAILED"),
        (5, "GENLOOM_STATUS_UNRECOGNIZED_MODEL"),
        (6, "GENLOOM_STATUS_INFERENCE_FAILED"),
        (7, "GENLOOM_STATUS_CANCELLED"),
        (8, "GENLOOM_STATUS_LIMIT"),
        (9, "GENLOOM_STATUS_IO"),
        (10, "GENLOOM_STATUS_UNSUPPORTED"),
        (11, "GENLOOM_STATUS_PANIC"),
        (12, "GENLOOM_STATUS_INTERNAL"),
    ];
    for (code, n) in want {
        assert_eq!(genloom_status::from_code(code).map(|s| s as c_int), Some(code));
        assert_eq!(name(code), n);
    }
    assert_eq!(genloom_status::from_code(want.len() as c_int), None, "a new status needs a line here");
    for code in [-1, 13, 1000, c_int::MAX, c_int::MIN] {
        assert_eq!(name(code), "GENLOOM_STATUS_UNKNOWN");
    }
}

#[test]
fn null_arguments_give_null_argument() {
    let g = open_demo(ptr::null());
    let mut n = 0usize;
    let mut lo = 0f32;
    // SAFETY: every pointer is NULL or valid; the calls must check the NULLs.
    unsafe {
        expect(genloom_options_new(ptr::null_mut()), genloom_status::NullArgument, "`options` is NULL");
        expect(
            genloom_options_set_threads(ptr::null_mut(), 2),
            genloom_status::NullArgument,
            "`options` is NULL",
        );
        expect(
            genloom_options_set_micro_batch(ptr::null_mut(), 2),
            genloom_status::NullArgument,
            "`options`",
        );
        expect(genloom_options_set_warm_up(ptr::null_mut(), true), genloom_status::NullArgument, "`options`");
        expect(
            genloom_options_set_f16_compute(ptr::null_mut(), false),
            genloom_status::NullArgument,
            "`options`",
        );
        let mut out = ptr::null_mut();
        expect(
            genloom_generator_open_path(ptr::null(), ptr::null(), &mut out),
            genloom_status::NullArgument,
            "`path`",
        );
        expect(
            genloom_generator_open_path(c"x.onnx".as_ptr(), ptr::null(), ptr::null_mut()),
            genloom_status::NullArgument,
            "`generator`",
        );
        expect(
            genloom_generator_open_bytes(ptr::null(), 10, ptr::null(), &mut out),
            genloom_status::NullArgument,
            "`bytes`",
        );
        let b = [0u8; 4];
        expect(
            genloom_generator_open_bytes(b.as_ptr(), 4, ptr::null(), ptr::null_mut()),
            genloom_status::NullArgument,
            "`generator`",
        );
        assert!(out.is_null(), "a failed open writes no handle");
        expect(
            genloom_generator_get_latent_dim(ptr::null(), &mut n),
            genloom_status::NullArgument,
            "`generator`",
        );
        expect(genloom_generator_get_latent_dim(g, ptr::null_mut()), genloom_status::NullArgument, "`out`");
        expect(
            genloom_generator_get_label_classes(g, ptr::null_mut()),
            genloom_status::NullArgument,
            "`out`",
        );
        expect(genloom_generator_get_width(g, ptr::null_mut()), genloom_status::NullArgument, "`out`");
        expect(genloom_generator_get_height(g, ptr::null_mut()), genloom_status::NullArgument, "`out`");
        expect(genloom_generator_get_channels(g, ptr::null_mut()), genloom_status::NullArgument, "`out`");
        expect(genloom_generator_get_layout(g, ptr::null_mut()), genloom_status::NullArgument, "`out`");
        expect(
            genloom_generator_get_range(g, &mut lo, ptr::null_mut()),
            genloom_status::NullArgument,
            "`hi`",
        );
        expect(
            genloom_generator_get_output_len(g, 1, GENLOOM_OUTPUT_FLOAT, ptr::null_mut()),
            genloom_status::NullArgument,
            "`out_len`",
        );
        expect(
            genloom_generator_sample_latents(g, 1, 0, 1, 0, 0.0, -1.0, false, ptr::null_mut(), 64, &mut n),
            genloom_status::NullArgument,
            "`latents` is NULL but its length is 64",
        );
        let mut out = [0f32; 3 * 32 * 32];
        expect(
            genloom_generator_generate(
                g,
                ptr::null(),
                64,
                ptr::null(),
                0,
                None,
                ptr::null_mut(),
                out.as_mut_ptr(),
                out.len(),
                &mut n,
            ),
            genloom_status::NullArgument,
            "`latents`",
        );
        let z = [0f32; 64];
        expect(
            genloom_generator_generate(
                g,
                z.as_ptr(),
                64,
                ptr::null(),
                1,
                None,
                ptr::null_mut(),
                out.as_mut_ptr(),
                out.len(),
                &mut n,
            ),
            genloom_status::NullArgument,
            "`labels`",
        );
        expect(
            genloom_latent_interpolate(
                ptr::null(),
                64,
                z.as_ptr(),
                64,
                0,
                2,
                out.as_mut_ptr(),
                out.len(),
                &mut n,
            ),
            genloom_status::NullArgument,
            "`a`",
        );
        expect(
            genloom_pixels_encode_png(ptr::null(), 4, 1, 1, out.as_mut_ptr().cast(), 100, &mut n),
            genloom_status::NullArgument,
            "`rgba`",
        );
        // The copy call reports NULL without touching the message it copies.
        assert_eq!(
            genloom_last_error_copy(ptr::null_mut(), 5, ptr::null_mut()),
            genloom_status::NullArgument
        );
        assert!(last_error().contains("`rgba`"));
        // Freeing NULL (twice) is a no-op.
        genloom_generator_free(ptr::null_mut());
        genloom_generator_free(ptr::null_mut());
        genloom_options_free(ptr::null_mut());
        genloom_options_free(ptr::null_mut());
        genloom_generator_free(g);
    }
}

#[test]
fn short_buffers_give_the_size_needed() {
    let g = open_demo(ptr::null());
    let z = [0.5f32; 2 * 64];
    let mut small = [9f32; 10];
    let mut needed = 0;
    // SAFETY: live handle; every buffer holds the length given.
    unsafe {
        expect(
            genloom_generator_sample_latents(
                g,
                1,
                0,
                3,
                0,
                0.0,
                -1.0,
                false,
                small.as_mut_ptr(),
                small.len(),
                &mut needed,
            ),
            genloom_status::BufferTooSmall,
            "holds 10 floats, 192 are needed",
        );
        assert_eq!(needed, 192);
        needed = 0;
        expect(
            genloom_generator_sample_latents(
                g,
                1,
                0,
                3,
                0,
                0.0,
                -1.0,
                false,
                ptr::null_mut(),
                0,
                &mut needed,
            ),
            genloom_status::BufferTooSmall,
            "192 are needed",
        );
        assert_eq!(needed, 192);
        expect(
            genloom_generator_generate(
                g,
                z.as_ptr(),
                z.len(),
                ptr::null(),
                0,
                None,
                ptr::null_mut(),
                small.as_mut_ptr(),
                small.len(),
                &mut needed,
            ),
            genloom_status::BufferTooSmall,
            "6144 are needed",
        );
        assert_eq!(needed, 2 * 3 * 32 * 32);
        let mut bytes = [0u8; 7];
        expect(
            genloom_generator_generate_rgba8(
                g,
                z.as_ptr(),
                z.len(),
                ptr::null(),
                0,
                None,
                ptr::null_mut(),
                bytes.as_mut_ptr(),
                bytes.len(),
                &mut needed,
            ),
            genloom_status::BufferTooSmall,
            "holds 7 bytes",
        );
        assert_eq!(needed, 2 * 32 * 32 * 4);
        expect(
            genloom_latent_interpolate(
                z.as_ptr(),
                64,
                z[64..].as_ptr(),
                64,
                1,
                3,
                small.as_mut_ptr(),
                small.len(),
                &mut needed,
            ),
            genloom_status::BufferTooSmall,
            "192 are needed",
        );
        expect(
            genloom_latent_interpolate_path(
                z.as_ptr(),
                z.len(),
                64,
                1,
                4,
                true,
                small.as_mut_ptr(),
                small.len(),
                &mut needed,
            ),
            genloom_status::BufferTooSmall,
            "512 are needed",
        );
        assert_eq!(needed, 2 * 4 * 64);
        let rgba = [128u8; 4 * 4 * 4];
        expect(
            genloom_pixels_encode_png(
                rgba.as_ptr(),
                rgba.len(),
                4,
                4,
                bytes.as_mut_ptr(),
                bytes.len(),
                &mut needed,
            ),
            genloom_status::BufferTooSmall,
            "holds 7 bytes",
        );
        assert!(needed > 7);
        // `needed` may be NULL.
        expect(
            genloom_generator_sample_latents(
                g,
                1,
                0,
                3,
                0,
                0.0,
                -1.0,
                false,
                small.as_mut_ptr(),
                small.len(),
                ptr::null_mut(),
            ),
            genloom_status::BufferTooSmall,
            "192",
        );
        assert!(small.iter().all(|&v| v == 9.0), "a short buffer is left untouched");

        // The message copy: size query, short, exact.
        let msg = last_error();
        let mut len = 0;
        assert_eq!(genloom_last_error_copy(ptr::null_mut(), 0, &mut len), genloom_status::BufferTooSmall);
        assert_eq!(len, msg.len() + 1);
        let mut buf = vec![1 as std::ffi::c_char; len];
        assert_eq!(genloom_last_error_copy(buf.as_mut_ptr(), 3, &mut len), genloom_status::BufferTooSmall);
        assert_eq!(buf[0], 1, "nothing written to a short buffer");
        assert_eq!(genloom_last_error_copy(buf.as_mut_ptr(), buf.len(), &mut len), genloom_status::Ok);
        assert_eq!(CStr::from_ptr(buf.as_ptr()).to_str().unwrap(), msg);
        genloom_generator_free(g);
    }
}

fn sample(
    g: *const genloom_generator,
    prior: u32,
    count: usize,
    trunc: f32,
    psi: f32,
    numpy: bool,
    seed: u64,
) -> genloom_status {
    let mut out = vec![0f32; 4 * 64];
    let mut n = 0;
    // SAFETY: `g` is live (the callers' handle); `out` holds its length.
    unsafe {
        genloom_generator_sample_latents(
            g,
            seed,
            0,
            count,
            prior,
            trunc,
            psi,
            numpy,
            out.as_mut_ptr(),
            out.len(),
            &mut n,
        )
    }
}

fn gen(g: *const genloom_generator, z: *const f32, len: usize) -> genloom_status {
    let mut out = vec![0f32; 4 * 3 * 32 * 32];
    let mut n = 0;
    // SAFETY: `g` is live; callers pass `z` valid for `len` reads (or misaligned, which is refused
    // before any read); `out` holds its length.
    unsafe {
        genloom_generator_generate(
            g,
            z,
            len,
            ptr::null(),
            0,
            None,
            ptr::null_mut(),
            out.as_mut_ptr(),
            out.len(),
            &mut n,
        )
    }
}

#[test]
fn bad_values_give_invalid_argument() {
    let g = open_demo(ptr::null());
    let mut out = vec![0f32; 4 * 3 * 32 * 32];
    let mut n = 0;
    let z = [0.25f32; 128];
    expect(sample(g, 2, 1, 0.0, -1.0, false, 1), genloom_status::InvalidArgument, "`prior` is 2");
    expect(
        sample(g, u32::MAX, 1, 0.0, -1.0, false, 1),
        genloom_status::InvalidArgument,
        "`prior` is 4294967295",
    );
    expect(sample(g, 0, 0, 0.0, -1.0, false, 1), genloom_status::InvalidArgument, "count is 0");
    expect(sample(g, 0, 1, 0.01, -1.0, false, 1), genloom_status::InvalidArgument, "truncation is 0.01");
    expect(sample(g, 0, 1, f32::NAN, -1.0, false, 1), genloom_status::InvalidArgument, "truncation is NaN");
    expect(sample(g, 1, 1, 1.0, -1.0, false, 1), genloom_status::InvalidArgument, "uniform prior");
    expect(sample(g, 0, 1, 0.0, 1.5, false, 1), genloom_status::InvalidArgument, "psi is 1.5");
    expect(sample(g, 0, 1, 0.0, -1.0, true, 1 << 40), genloom_status::InvalidArgument, "NumPy");
    expect(gen(g, z.as_ptr(), 100), genloom_status::InvalidArgument, "`latents_len` is 100");
    expect(gen(g, ptr::null(), 0), genloom_status::InvalidArgument, "`latents_len` is 0");
    let mut nan = z;
    nan[70] = f32::NAN;
    expect(
        gen(g, nan.as_ptr(), nan.len()),
        genloom_status::InvalidArgument,
        "latent 1 has a non-finite value (NaN) at component 6",
    );
    // A misaligned float buffer is refused, not read.
    let raw = [0u8; 64 * 4 + 4];
    let misaligned =
        raw.as_ptr().wrapping_add(if raw.as_ptr().align_offset(4) == 0 { 1 } else { 0 }).cast::<f32>();
    expect(gen(g, misaligned, 64), genloom_status::InvalidArgument, "not aligned");
    // SAFETY: live handle; every buffer holds the length given.
    unsafe {
        expect(
            genloom_generator_get_output_len(g, 1, 3, &mut n),
            genloom_status::InvalidArgument,
            "`kind` is 3",
        );
        expect(
            genloom_generator_get_output_len(g, usize::MAX, GENLOOM_OUTPUT_FLOAT, &mut n),
            genloom_status::Limit,
            "does not fit",
        );
        let labels = [0i64, 1];
        expect(
            genloom_generator_generate(
                g,
                z.as_ptr(),
                z.len(),
                labels.as_ptr(),
                2,
                None,
                ptr::null_mut(),
                out.as_mut_ptr(),
                out.len(),
                &mut n,
            ),
            genloom_status::InvalidArgument,
            "unconditional",
        );
        let mut frames = [0f32; 64 * 4];
        expect(
            genloom_latent_interpolate(
                z.as_ptr(),
                64,
                z.as_ptr(),
                64,
                7,
                2,
                frames.as_mut_ptr(),
                frames.len(),
                &mut n,
            ),
            genloom_status::InvalidArgument,
            "`interpolation` is 7",
        );
        expect(
            genloom_latent_interpolate(
                z.as_ptr(),
                64,
                z.as_ptr(),
                63,
                0,
                2,
                frames.as_mut_ptr(),
                frames.len(),
                &mut n,
            ),
            genloom_status::InvalidArgument,
            "`b_len` is 63",
        );
        expect(
            genloom_latent_interpolate(
                z.as_ptr(),
                64,
                z.as_ptr(),
                64,
                0,
                1,
                frames.as_mut_ptr(),
                frames.len(),
                &mut n,
            ),
            genloom_status::InvalidArgument,
            "`frame_count` is 1",
        );
        expect(
            genloom_latent_interpolate_path(
                z.as_ptr(),
                64,
                64,
                0,
                2,
                false,
                frames.as_mut_ptr(),
                frames.len(),
                &mut n,
            ),
            genloom_status::InvalidArgument,
            "keyframes is 1",
        );
        expect(
            genloom_latent_interpolate_path(
                z.as_ptr(),
                128,
                0,
                0,
                2,
                false,
                frames.as_mut_ptr(),
                frames.len(),
                &mut n,
            ),
            genloom_status::InvalidArgument,
            "`dim` 0",
        );
        expect(
            genloom_latent_interpolate_path(
                z.as_ptr(),
                128,
                64,
                0,
                0,
                false,
                frames.as_mut_ptr(),
                frames.len(),
                &mut n,
            ),
            genloom_status::InvalidArgument,
            "steps is 0",
        );
        let rgba = [0u8; 15];
        let mut png = [0u8; 100];
        expect(
            genloom_pixels_encode_png(rgba.as_ptr(), rgba.len(), 2, 2, png.as_mut_ptr(), png.len(), &mut n),
            genloom_status::InvalidArgument,
            "`rgba_len` is 15 for a 2x2 image",
        );
        genloom_generator_free(g);
    }
}

#[test]
fn options_are_checked_and_f16_compute_refuses_overflowing_models() {
    let mut o = ptr::null_mut();
    // SAFETY: `o` is a valid out-param, then a live handle freed once.
    unsafe {
        assert_eq!(genloom_options_new(&mut o), genloom_status::Ok);
        expect(
            genloom_options_set_threads(o, 0),
            genloom_status::InvalidArgument,
            "threads is 0, expected 1 to 256",
        );
        expect(genloom_options_set_threads(o, 257), genloom_status::InvalidArgument, "threads is 257");
        expect(genloom_options_set_micro_batch(o, 0), genloom_status::InvalidArgument, "micro-batch is 0");
        assert_eq!(genloom_options_set_threads(o, 2), genloom_status::Ok);
        assert_eq!(last_error(), "", "a success clears the message");
        assert_eq!(genloom_options_set_warm_up(o, false), genloom_status::Ok);
        let g = open_demo(o);
        genloom_generator_free(g);
        // f16 compute on a model whose activation passes binary16's 65504 (node `amplify`, made
        // by tests/golden/defects/make_defects.py): refused at open, naming the node.
        assert_eq!(genloom_options_set_f16_compute(o, true), genloom_status::Ok);
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("../../tests/golden/defects/f16-overflow.onnx");
        let c = std::ffi::CString::new(path.to_str().unwrap()).unwrap();
        let mut g = ptr::null_mut();
        expect(
            genloom_generator_open_path(c.as_ptr(), o, &mut g),
            genloom_status::InvalidArgument,
            "node `amplify`",
        );
        assert!(g.is_null());
        // The demo model has room: f16 compute opens.
        let g = open_demo(o);
        genloom_generator_free(g);
        genloom_options_free(o);
    }
}

#[test]
fn models_that_fail_to_load_give_their_status() {
    let mut g = ptr::null_mut();
    let garbage = b"this is not an onnx model at all, just words";
    // SAFETY: buffers of their lengths; `g` is a valid out-param.
    unsafe {
        expect(
            genloom_generator_open_bytes(garbage.as_ptr(), garbage.len(), ptr::null(), &mut g),
            genloom_status::LoadFailed,
            "not an ONNX model",
        );
        expect(
            genloom_generator_open_bytes(ptr::null(), 0, ptr::null(), &mut g),
            genloom_status::LoadFailed,
            "empty",
        );
        let html = b"<!DOCTYPE html><html><body>404</body></html>";
        expect(
            genloom_generator_open_bytes(html.as_ptr(), html.len(), ptr::null(), &mut g),
            genloom_status::LoadFailed,
            "HTML page",
        );
        expect(
            genloom_generator_open_path(c"no/such/model.onnx".as_ptr(), ptr::null(), &mut g),
            genloom_status::Io,
            "could not read no/such/model.onnx",
        );
        let dir = tempfile::tempdir().unwrap();
        let bad = dir.path().join("bad.onnx");
        std::fs::write(&bad, &genloom::demo::TILES_ONNX[..1000]).unwrap();
        let c = std::ffi::CString::new(bad.to_str().unwrap()).unwrap();
        let s = genloom_generator_open_path(c.as_ptr(), ptr::null(), &mut g);
        assert_eq!(s, genloom_status::LoadFailed, "{}", last_error());
        assert!(
            last_error().contains("bad.onnx") || last_error().contains("not an ONNX model"),
            "{}",
            last_error()
        );
    }
    assert!(g.is_null(), "a failed open writes no handle");
}
