//! Every call gives what the Rust API gives for the same inputs.

use genloom::pixels::{to_pixels, PixelFormat};
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, Prior, RngMode, SampleOptions};
use genloom_c::*;
use std::ffi::c_void;
use std::ptr;

pub(crate) fn last_error() -> String {
    // SAFETY: genloom_last_error_message returns a valid NUL-terminated string, read at once.
    unsafe { std::ffi::CStr::from_ptr(genloom_last_error_message()) }.to_string_lossy().into_owned()
}

pub(crate) fn open_demo(options: *const genloom_options) -> *mut genloom_generator {
    let bytes = genloom::demo::TILES_ONNX;
    let mut g = ptr::null_mut();
    // SAFETY: the bytes are valid for their length and `g` is a valid out-param.
    let s = unsafe { genloom_generator_open_bytes(bytes.as_ptr(), bytes.len(), options, &mut g) };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    assert!(!g.is_null());
    g
}

fn rust_demo() -> Generator {
    let model =
        Model::from_bytes(genloom::demo::TILES_ONNX, &LoadOptions::default()).expect("the demo model loads");
    Generator::new(model, GeneratorOptions::default()).expect("the demo generator builds")
}

fn sample(g: *const genloom_generator, seed: u64, count: usize) -> Vec<f32> {
    let mut dim = 0;
    // SAFETY: `g` is live; `dim` is a valid out-param.
    assert_eq!(unsafe { genloom_generator_get_latent_dim(g, &mut dim) }, genloom_status::Ok);
    let mut z = vec![0f32; dim * count];
    let mut needed = 0;
    // SAFETY: `g` is live; `z` holds its length of floats; `needed` is valid.
    let s = unsafe {
        genloom_generator_sample_latents(
            g,
            seed,
            0,
            count,
            GENLOOM_PRIOR_GAUSSIAN,
            0.0,
            -1.0,
            false,
            z.as_mut_ptr(),
            z.len(),
            &mut needed,
        )
    };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    assert_eq!(needed, z.len());
    z
}

#[test]
fn signature_getters_match_the_rust_signature() {
    let g = open_demo(ptr::null());
    let sig = rust_demo().signature().clone();
    let (mut dim, mut classes, mut w, mut h, mut c, mut layout) = (0, 9, 0, 0, 0, 9);
    let (mut lo, mut hi) = (0f32, 0f32);
    // SAFETY: `g` is live and every out-param is a valid local.
    unsafe {
        assert_eq!(genloom_generator_get_latent_dim(g, &mut dim), genloom_status::Ok);
        assert_eq!(genloom_generator_get_label_classes(g, &mut classes), genloom_status::Ok);
        assert_eq!(genloom_generator_get_width(g, &mut w), genloom_status::Ok);
        assert_eq!(genloom_generator_get_height(g, &mut h), genloom_status::Ok);
        assert_eq!(genloom_generator_get_channels(g, &mut c), genloom_status::Ok);
        assert_eq!(genloom_generator_get_layout(g, &mut layout), genloom_status::Ok);
        assert_eq!(genloom_generator_get_range(g, &mut lo, &mut hi), genloom_status::Ok);
    }
    assert_eq!(
        (dim, classes, w, h, c),
        (sig.latent.dim, 0, sig.image.width, sig.image.height, sig.image.channels)
    );
    assert_eq!(
        layout,
        if sig.image.layout == genloom::Layout::Nchw { GENLOOM_LAYOUT_NCHW } else { GENLOOM_LAYOUT_NHWC }
    );
    assert_eq!((lo, hi), (sig.image.range.lo, sig.image.range.hi));
    let mut n = 0;
    for (kind, per) in
        [(GENLOOM_OUTPUT_LATENTS, dim), (GENLOOM_OUTPUT_FLOAT, c * h * w), (GENLOOM_OUTPUT_RGBA8, h * w * 4)]
    {
        // SAFETY: `g` is live; `n` is a valid out-param.
        assert_eq!(unsafe { genloom_generator_get_output_len(g, 5, kind, &mut n) }, genloom_status::Ok);
        assert_eq!(n, 5 * per);
    }
    // SAFETY: `g` is live and freed once.
    unsafe { genloom_generator_free(g) };
}

#[test]
fn sampling_matches_the_rust_api_in_every_mode() {
    let g = open_demo(ptr::null());
    let rust = rust_demo();
    let cases: Vec<(u64, u64, usize, u32, f32, f32, bool)> = vec![
        (7, 0, 16, GENLOOM_PRIOR_GAUSSIAN, 0.0, -1.0, false),
        (7, 5, 3, GENLOOM_PRIOR_GAUSSIAN, 0.0, -1.0, false),
        (7, 0, 4, GENLOOM_PRIOR_UNIFORM, -1.0, -1.0, false),
        (7, 0, 4, GENLOOM_PRIOR_GAUSSIAN, 1.0, -1.0, false),
        (7, 0, 4, GENLOOM_PRIOR_GAUSSIAN, 0.0, 0.7, false),
        (7, 2, 4, GENLOOM_PRIOR_GAUSSIAN, 0.0, -1.0, true),
        (u64::MAX, 0, 2, GENLOOM_PRIOR_GAUSSIAN, 0.0, -1.0, false),
    ];
    for (seed, first, count, prior, trunc, psi, numpy) in cases {
        let mut o = SampleOptions::new(seed, count);
        o.first_index = first;
        o.prior = if prior == GENLOOM_PRIOR_UNIFORM { Prior::Uniform } else { Prior::Gaussian };
        o.truncation = (trunc > 0.0).then_some(trunc);
        o.psi = (psi >= 0.0).then_some(psi);
        o.mode = if numpy { RngMode::NumpyCompatible } else { RngMode::Portable };
        let want = rust.sample_latents(&o).unwrap();
        let mut got = vec![f32::NAN; want.as_slice().len()];
        let mut needed = 0;
        // SAFETY: `g` is live; `got` holds its length of floats; `needed` is valid.
        let s = unsafe {
            genloom_generator_sample_latents(
                g,
                seed,
                first,
                count,
                prior,
                trunc,
                psi,
                numpy,
                got.as_mut_ptr(),
                got.len(),
                &mut needed,
            )
        };
        assert_eq!(s, genloom_status::Ok, "{}", last_error());
        assert_eq!(needed, got.len());
        assert_eq!(
            bits(&got),
            bits(want.as_slice()),
            "seed {seed} first {first} prior {prior} numpy {numpy}"
        );
        // The options handle draws the same bits, each value set by name (no sentinels).
        let mut so = ptr::null_mut();
        // SAFETY: `so` is a valid out-param; every setter gets the live handle; freed once below.
        unsafe {
            assert_eq!(genloom_sample_options_new(&mut so), genloom_status::Ok);
            assert_eq!(genloom_sample_options_set_seed(so, seed), genloom_status::Ok);
            assert_eq!(genloom_sample_options_set_first_index(so, first), genloom_status::Ok);
            assert_eq!(genloom_sample_options_set_prior(so, prior), genloom_status::Ok);
            if trunc > 0.0 {
                assert_eq!(genloom_sample_options_set_truncation(so, trunc), genloom_status::Ok);
            }
            if psi >= 0.0 {
                assert_eq!(genloom_sample_options_set_psi(so, psi), genloom_status::Ok);
            }
            assert_eq!(genloom_sample_options_set_numpy_compatible(so, numpy), genloom_status::Ok);
        }
        let mut again = vec![f32::NAN; got.len()];
        // SAFETY: `g` and `so` are live; `again` holds its length of floats; `needed` is valid.
        let s =
            unsafe { genloom_generator_sample(g, so, count, again.as_mut_ptr(), again.len(), &mut needed) };
        assert_eq!(s, genloom_status::Ok, "{}", last_error());
        assert_eq!(bits(&again), bits(&got), "options handle, seed {seed} first {first}");
        // SAFETY: `so` is live and freed once.
        unsafe { genloom_sample_options_free(so) };
    }
    // NULL options are the defaults: seed 0, first index 0, Gaussian, portable.
    let want = rust.sample_latents(&SampleOptions::new(0, 2)).unwrap();
    let mut got = vec![f32::NAN; want.as_slice().len()];
    // SAFETY: `g` is live; NULL options are allowed; `got` holds its length; `needed` may be NULL.
    let s =
        unsafe { genloom_generator_sample(g, ptr::null(), 2, got.as_mut_ptr(), got.len(), ptr::null_mut()) };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    assert_eq!(bits(&got), bits(want.as_slice()));
    // SAFETY: `g` is live and freed once.
    unsafe { genloom_generator_free(g) };
}

#[test]
fn sample_options_refuse_bad_values_and_keep_the_last_good_ones() {
    let mut so = ptr::null_mut();
    // SAFETY: `so` is a valid out-param, then a live handle for every call, freed once.
    unsafe {
        assert_eq!(genloom_sample_options_new(&mut so), genloom_status::Ok);
        assert_eq!(genloom_sample_options_set_psi(so, 0.5), genloom_status::Ok);
        assert_eq!(genloom_sample_options_set_psi(so, 1.5), genloom_status::InvalidArgument);
        assert!(last_error().contains("psi is 1.5"), "{}", last_error());
        assert_eq!(genloom_sample_options_set_truncation(so, 0.01), genloom_status::InvalidArgument);
        assert_eq!(genloom_sample_options_set_truncation(so, f32::NAN), genloom_status::InvalidArgument);
        assert_eq!(genloom_sample_options_set_prior(so, 7), genloom_status::InvalidArgument);
        assert!(last_error().contains("`prior` is 7"), "{}", last_error());
        // Truncation with the uniform prior is refused whichever is set second.
        assert_eq!(genloom_sample_options_set_truncation(so, 1.0), genloom_status::Ok);
        assert_eq!(
            genloom_sample_options_set_prior(so, GENLOOM_PRIOR_UNIFORM),
            genloom_status::InvalidArgument
        );
        assert_eq!(genloom_sample_options_clear_truncation(so), genloom_status::Ok);
        assert_eq!(genloom_sample_options_set_prior(so, GENLOOM_PRIOR_UNIFORM), genloom_status::Ok);
        // psi 0 is a value, set on purpose: every latent is the centre.
        assert_eq!(genloom_sample_options_set_psi(so, 0.0), genloom_status::Ok);
        let g = open_demo(ptr::null());
        let mut z = vec![f32::NAN; 64 * 2];
        assert_eq!(
            genloom_generator_sample(g, so, 2, z.as_mut_ptr(), z.len(), ptr::null_mut()),
            genloom_status::Ok
        );
        assert!(z.iter().all(|&v| v == 0.0));
        assert_eq!(genloom_sample_options_clear_psi(so), genloom_status::Ok);
        assert_eq!(
            genloom_generator_sample(g, so, 2, z.as_mut_ptr(), z.len(), ptr::null_mut()),
            genloom_status::Ok
        );
        assert!(z.iter().any(|&v| v != 0.0));
        assert_eq!(genloom_sample_options_set_seed(ptr::null_mut(), 1), genloom_status::NullArgument);
        genloom_sample_options_free(so);
        genloom_sample_options_free(ptr::null_mut());
        genloom_generator_free(g);
    }
}

fn bits(v: &[f32]) -> Vec<u32> {
    v.iter().map(|x| x.to_bits()).collect()
}

/// Generates floats for unconditional latents through the C call, into a buffer of `len`
/// values; asserts the call succeeded and returns the values and the size it reported.
fn generate_floats(g: *const genloom_generator, z: &[f32], len: usize) -> (Vec<f32>, usize) {
    let mut floats = vec![0f32; len];
    let mut needed = 0;
    // SAFETY: `g` is live; the buffers hold their lengths; no labels (length 0, NULL).
    let s = unsafe {
        genloom_generator_generate(
            g,
            z.as_ptr(),
            z.len(),
            ptr::null(),
            0,
            None,
            ptr::null_mut(),
            floats.as_mut_ptr(),
            floats.len(),
            &mut needed,
        )
    };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    (floats, needed)
}

#[test]
fn generation_matches_the_rust_api_as_floats_and_pixels() {
    let g = open_demo(ptr::null());
    let rust = rust_demo();
    let z = sample(g, 7, 6);
    let latents = genloom::Latents::new(64, z.clone()).unwrap();
    let want = rust.generate(&latents, None).unwrap();
    let (floats, mut needed) = generate_floats(g, &z, want.data.len());
    assert_eq!(needed, floats.len());
    assert_eq!(bits(&floats), bits(&want.data));

    let mut rgba = vec![0u8; 6 * 32 * 32 * 4];
    // SAFETY: as above.
    let s = unsafe {
        genloom_generator_generate_rgba8(
            g,
            z.as_ptr(),
            z.len(),
            ptr::null(),
            0,
            None,
            ptr::null_mut(),
            rgba.as_mut_ptr(),
            rgba.len(),
            &mut needed,
        )
    };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    let mut expected = Vec::new();
    for i in 0..6 {
        expected.extend_from_slice(&to_pixels(&want, i, PixelFormat::Rgba8).unwrap().0.data);
    }
    assert!(rgba == expected, "RGBA pixels differ from the Rust API's");

    // PNG of tile 0: size query, then the bytes, equal to Pixels::to_png.
    let tile = &rgba[..32 * 32 * 4];
    let want_png = to_pixels(&want, 0, PixelFormat::Rgba8).unwrap().0.to_png().unwrap();
    // SAFETY: `tile` holds its length; NULL with 0 is the size query.
    let s = unsafe {
        genloom_pixels_encode_png(tile.as_ptr(), tile.len(), 32, 32, ptr::null_mut(), 0, &mut needed)
    };
    assert_eq!(s, genloom_status::BufferTooSmall);
    assert_eq!(needed, want_png.len());
    let mut png = vec![0u8; needed];
    // SAFETY: `png` holds `needed` bytes.
    let s = unsafe {
        genloom_pixels_encode_png(tile.as_ptr(), tile.len(), 32, 32, png.as_mut_ptr(), png.len(), &mut needed)
    };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    assert_eq!(png, want_png);
    // SAFETY: `g` is live and freed once.
    unsafe { genloom_generator_free(g) };
}

#[test]
fn f16_compute_matches_the_rust_api_and_differs_from_f32() {
    let mut options = ptr::null_mut();
    // SAFETY: `options` is a valid out-param, then a live handle.
    unsafe {
        assert_eq!(genloom_options_new(&mut options), genloom_status::Ok);
        assert_eq!(genloom_options_set_f16_compute(options, true), genloom_status::Ok);
    }
    let g = open_demo(options);
    // SAFETY: the options were copied by the open call and are freed once.
    unsafe { genloom_options_free(options) };
    let model = Model::from_bytes(genloom::demo::TILES_ONNX, &LoadOptions::default()).unwrap();
    let mut o = GeneratorOptions::default();
    o.f16_compute = true;
    let rust = Generator::new(model, o).unwrap();
    let z = sample(g, 7, 4);
    let latents = genloom::Latents::new(64, z.clone()).unwrap();
    let want = rust.generate(&latents, None).unwrap();
    let f32_result = rust_demo().generate(&latents, None).unwrap();
    let (floats, _) = generate_floats(g, &z, want.data.len());
    assert_eq!(bits(&floats), bits(&want.data), "the C handle's f16 compute differs from the Rust API's");
    assert_ne!(bits(&floats), bits(&f32_result.data), "f16 compute gave the f32 result bit for bit");
    // SAFETY: `g` is live and freed once.
    unsafe { genloom_generator_free(g) };
}

#[test]
fn interpolation_matches_the_rust_api() {
    let rust = rust_demo();
    let keys = rust.sample_latents(&SampleOptions::new(7, 3)).unwrap();
    let (a, b) = (keys.row(0), keys.row(1));
    for (how, kind) in [
        (GENLOOM_INTERPOLATION_LERP, genloom::Interpolation::Lerp),
        (GENLOOM_INTERPOLATION_SLERP, genloom::Interpolation::Slerp),
    ] {
        let mut frames = vec![0f32; 5 * 64];
        let mut needed = 0;
        // SAFETY: the inputs and the output hold their lengths.
        let s = unsafe {
            genloom_latent_interpolate(
                a.as_ptr(),
                64,
                b.as_ptr(),
                64,
                how,
                5,
                frames.as_mut_ptr(),
                frames.len(),
                &mut needed,
            )
        };
        assert_eq!(s, genloom_status::Ok, "{}", last_error());
        assert_eq!(needed, 5 * 64);
        assert_eq!(&frames[..64], a, "the first frame is a");
        assert_eq!(&frames[4 * 64..], b, "the last frame is b");
        for j in 0..5 {
            let t = j as f64 / 4.0;
            let want = match kind {
                genloom::Interpolation::Lerp => genloom::latent::lerp(a, b, t).unwrap(),
                genloom::Interpolation::Slerp => genloom::latent::slerp(a, b, t).unwrap(),
            };
            assert_eq!(bits(&frames[j * 64..(j + 1) * 64]), bits(&want), "frame {j}");
        }
        for looped in [false, true] {
            let mut o = genloom::PathOptions::default();
            o.steps = 4;
            o.interpolation = kind;
            o.looped = looped;
            let want = genloom::latent::path(&keys, &o).unwrap();
            let mut frames = vec![0f32; want.as_slice().len()];
            // SAFETY: the inputs and the output hold their lengths.
            let s = unsafe {
                genloom_latent_interpolate_path(
                    keys.as_slice().as_ptr(),
                    keys.as_slice().len(),
                    64,
                    how,
                    4,
                    looped,
                    frames.as_mut_ptr(),
                    frames.len(),
                    &mut needed,
                )
            };
            assert_eq!(s, genloom_status::Ok, "{}", last_error());
            assert_eq!(bits(&frames), bits(want.as_slice()));
        }
    }
}

struct Seen {
    calls: Vec<(usize, usize)>,
    stop_after: usize,
}

unsafe extern "C" fn record(user_data: *mut c_void, done: usize, total: usize) -> std::ffi::c_int {
    // SAFETY: the tests pass a `*mut Seen` that outlives the call, used by this thread only.
    let seen = unsafe { &mut *user_data.cast::<Seen>() };
    seen.calls.push((done, total));
    std::ffi::c_int::from(seen.calls.len() < seen.stop_after)
}

#[test]
fn progress_reports_each_micro_batch_and_cancels() {
    let mut options = ptr::null_mut();
    // SAFETY: `options` is a valid out-param, then a live handle.
    unsafe {
        assert_eq!(genloom_options_new(&mut options), genloom_status::Ok);
        assert_eq!(genloom_options_set_micro_batch(options, 4), genloom_status::Ok);
        assert_eq!(genloom_options_set_f16_compute(options, false), genloom_status::Ok);
    }
    let g = open_demo(options);
    // SAFETY: the options were copied by the open call and are freed once.
    unsafe { genloom_options_free(options) };
    let z = sample(g, 3, 10);
    let mut out = vec![7f32; 10 * 3 * 32 * 32];
    let mut seen = Seen { calls: vec![], stop_after: usize::MAX };
    let mut needed = 0;
    // SAFETY: live handle, buffers of their lengths, `seen` outlives the call.
    let s = unsafe {
        genloom_generator_generate(
            g,
            z.as_ptr(),
            z.len(),
            ptr::null(),
            0,
            Some(record),
            (&mut seen as *mut Seen).cast(),
            out.as_mut_ptr(),
            out.len(),
            &mut needed,
        )
    };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    assert_eq!(seen.calls, vec![(4, 10), (8, 10), (10, 10)]);

    let mut out = vec![7f32; 10 * 3 * 32 * 32];
    let mut seen = Seen { calls: vec![], stop_after: 1 };
    needed = 12345;
    // SAFETY: as above.
    let s = unsafe {
        genloom_generator_generate(
            g,
            z.as_ptr(),
            z.len(),
            ptr::null(),
            0,
            Some(record),
            (&mut seen as *mut Seen).cast(),
            out.as_mut_ptr(),
            out.len(),
            &mut needed,
        )
    };
    assert_eq!(s, genloom_status::Cancelled);
    assert!(last_error().contains("cancelled after 4 of 10"), "{}", last_error());
    assert_eq!(seen.calls, vec![(4, 10)]);
    assert!(out.iter().all(|&v| v == 7.0), "a cancelled call writes nothing");
    assert_eq!(needed, 12345, "a cancelled call writes no out-param");
    // SAFETY: `g` is live and freed once.
    unsafe { genloom_generator_free(g) };
}

#[test]
fn a_conditional_model_takes_labels() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/../../models-demo/tiles-kind.onnx\0");
    let mut g = ptr::null_mut();
    // SAFETY: `path` is NUL-terminated; `g` is a valid out-param.
    let s = unsafe { genloom_generator_open_path(path.as_ptr().cast(), ptr::null(), &mut g) };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    let rust = Generator::from_path(path.trim_end_matches('\0')).unwrap();
    let mut classes = 0;
    // SAFETY: live handle, valid out-param.
    assert_eq!(unsafe { genloom_generator_get_label_classes(g, &mut classes) }, genloom_status::Ok);
    assert_eq!(classes, rust.signature().label.as_ref().unwrap().classes);
    let z = sample(g, 7, 4);
    let labels: Vec<i64> = (0..4).map(|i| i % classes as i64).collect();
    let want = rust.generate(&genloom::Latents::new(z.len() / 4, z.clone()).unwrap(), Some(&labels)).unwrap();
    let mut out = vec![0f32; want.data.len()];
    let mut needed = 0;
    // SAFETY: live handle, buffers of their lengths.
    let s = unsafe {
        genloom_generator_generate(
            g,
            z.as_ptr(),
            z.len(),
            labels.as_ptr(),
            labels.len(),
            None,
            ptr::null_mut(),
            out.as_mut_ptr(),
            out.len(),
            &mut needed,
        )
    };
    assert_eq!(s, genloom_status::Ok, "{}", last_error());
    assert_eq!(bits(&out), bits(&want.data));
    // No labels for a conditional model, and a label out of range.
    // SAFETY: as above.
    let s = unsafe {
        genloom_generator_generate(
            g,
            z.as_ptr(),
            z.len(),
            ptr::null(),
            0,
            None,
            ptr::null_mut(),
            out.as_mut_ptr(),
            out.len(),
            &mut needed,
        )
    };
    assert_eq!(s, genloom_status::InvalidArgument);
    assert!(last_error().contains("conditional"), "{}", last_error());
    let bad = [0i64, 1, 2, 99];
    // SAFETY: as above.
    let s = unsafe {
        genloom_generator_generate(
            g,
            z.as_ptr(),
            z.len(),
            bad.as_ptr(),
            4,
            None,
            ptr::null_mut(),
            out.as_mut_ptr(),
            out.len(),
            &mut needed,
        )
    };
    assert_eq!(s, genloom_status::InvalidArgument);
    assert!(last_error().contains("label 3 is 99"), "{}", last_error());
    // SAFETY: `g` is live and freed once.
    unsafe { genloom_generator_free(g) };
}

#[test]
fn threads_share_one_handle() {
    struct Shared(*mut genloom_generator);
    // SAFETY: the ABI documents generation on one const handle from many threads as allowed.
    unsafe impl Sync for Shared {}
    impl Shared {
        fn ptr(&self) -> *const genloom_generator {
            self.0
        }
    }
    let g = Shared(open_demo(ptr::null()));
    let z = sample(g.0, 11, 3);
    let serial = {
        let mut out = vec![0f32; 3 * 3 * 32 * 32];
        // SAFETY: live handle, buffers of their lengths.
        let s = unsafe {
            genloom_generator_generate(
                g.0,
                z.as_ptr(),
                z.len(),
                ptr::null(),
                0,
                None,
                ptr::null_mut(),
                out.as_mut_ptr(),
                out.len(),
                ptr::null_mut(),
            )
        };
        assert_eq!(s, genloom_status::Ok);
        out
    };
    std::thread::scope(|scope| {
        for _ in 0..4 {
            scope.spawn(|| {
                for _ in 0..10 {
                    let mut out = vec![0f32; serial.len()];
                    // SAFETY: the handle outlives the scope; buffers of their lengths.
                    let s = unsafe {
                        genloom_generator_generate(
                            g.ptr(),
                            z.as_ptr(),
                            z.len(),
                            ptr::null(),
                            0,
                            None,
                            ptr::null_mut(),
                            out.as_mut_ptr(),
                            out.len(),
                            ptr::null_mut(),
                        )
                    };
                    assert_eq!(s, genloom_status::Ok, "{}", last_error());
                    assert!(out == serial);
                }
            });
        }
    });
    // SAFETY: all threads have joined; `g` is freed once.
    unsafe { genloom_generator_free(g.0) };
}
