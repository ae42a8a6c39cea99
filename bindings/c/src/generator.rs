//! `genloom_generator`: open a model, read its signature, sample latents and generate images.

use crate::boundary::{arg_ref, arg_slice, boundary, guard, Failure, Out, OutBuf, Outcome};
use crate::options::genloom_options;
use crate::status::genloom_status;
use genloom::{Generator, GeneratorOptions, Images, Latents, LoadOptions, Model, RngMode, SampleOptions};
use std::ffi::{c_char, c_int, c_void, CStr};

/// A loaded model with its optimised inference plans (an opaque handle), made by
/// `genloom_generator_open_path` or `genloom_generator_open_bytes` and released by
/// `genloom_generator_free`.
///
/// Thread safety: every call that takes a `const genloom_generator *` (the getters,
/// `genloom_generator_sample_latents`, `genloom_generator_generate`,
/// `genloom_generator_generate_rgba8`, `genloom_generator_get_output_len`) may run on the same
/// handle from many threads at once; each call has its own inference state. Only
/// `genloom_generator_free` needs exclusive access: no other call may be using the handle then.
#[derive(Debug)]
pub struct genloom_generator {
    pub(crate) inner: Generator,
}

/// A prior latents are drawn from: one of the `GENLOOM_PRIOR_*` values.
pub type genloom_prior = u32;
/// The standard normal N(0, 1) per component (the usual GAN prior).
pub const GENLOOM_PRIOR_GAUSSIAN: genloom_prior = 0;
/// Uniform on [-1, 1) per component.
pub const GENLOOM_PRIOR_UNIFORM: genloom_prior = 1;

/// The memory order of float images: one of the `GENLOOM_LAYOUT_*` values.
pub type genloom_layout = u32;
/// `[count][channels][height][width]` (PyTorch's order).
pub const GENLOOM_LAYOUT_NCHW: genloom_layout = 0;
/// `[count][height][width][channels]`.
pub const GENLOOM_LAYOUT_NHWC: genloom_layout = 1;

/// What an output buffer holds, for `genloom_generator_get_output_len`: one of the
/// `GENLOOM_OUTPUT_*` values.
pub type genloom_output = u32;
/// Latent vectors: `count * latent_dim` floats (`genloom_generator_sample_latents`).
pub const GENLOOM_OUTPUT_LATENTS: genloom_output = 0;
/// Float images in the model's layout and range: `count * channels * height * width` floats
/// (`genloom_generator_generate`).
pub const GENLOOM_OUTPUT_FLOAT: genloom_output = 1;
/// RGBA8 pixels: `count * height * width * 4` bytes, image after image, rows top to bottom
/// (`genloom_generator_generate_rgba8`).
pub const GENLOOM_OUTPUT_RGBA8: genloom_output = 2;

/// A progress callback for the generate calls, or NULL for none.
///
/// It is called on the thread that called the generate function (never on a worker thread),
/// after each micro-batch, with `done` images finished of `total`, and with the `user_data`
/// pointer given to the generate call, untouched. Return nonzero to continue, or 0 to cancel: the
/// call then stops after the current micro-batch and returns `GENLOOM_STATUS_CANCELLED`, writing
/// nothing to the output buffer. The callback must not unwind (C++ exceptions, longjmp) and must
/// not free the generator.
pub type genloom_progress_fn =
    Option<unsafe extern "C" fn(user_data: *mut c_void, done: usize, total: usize) -> c_int>;

/// The options a handle holds, or the defaults for NULL.
///
/// # Safety
/// `options` is NULL or a live options handle.
unsafe fn options_or_default(options: *const genloom_options) -> Outcome<GeneratorOptions> {
    if options.is_null() {
        return Ok(GeneratorOptions::default());
    }
    // SAFETY: non-null, so a live handle by this function's contract.
    Ok(unsafe { arg_ref(options, "options") }?.inner.clone())
}

/// Builds the generator and writes its new handle to `out`.
///
/// # Safety
/// The pointer `out` was made from is valid for a write of one pointer.
unsafe fn open(
    model: Outcome<Model>,
    options: GeneratorOptions,
    out: Out<*mut genloom_generator>,
) -> Outcome {
    let inner = Generator::new(model?, options).map_err(Failure::from)?;
    let handle = Box::into_raw(Box::new(genloom_generator { inner }));
    // SAFETY: `out` was checked in `Out::new` and is writable by this function's contract.
    unsafe { out.write(handle) };
    Ok(())
}

/// Opens an ONNX generator from a file. ONNX external data files are read from the file's
/// folder. `options` may be NULL for the defaults; it is copied.
///
/// On success `*generator` receives a new handle (free it with `genloom_generator_free`); on
/// failure it is not written. Statuses: `GENLOOM_STATUS_IO` (file missing or unreadable),
/// `GENLOOM_STATUS_LOAD_FAILED`, `GENLOOM_STATUS_UNRECOGNIZED_MODEL`, `GENLOOM_STATUS_LIMIT`,
/// `GENLOOM_STATUS_INVALID_ARGUMENT` (a path that is not UTF-8 on Windows).
///
/// # Safety
/// `path` is NULL or a NUL-terminated string (bytes of the platform's path encoding; UTF-8 is
/// always accepted); `options` is NULL or a live options handle; `generator` is NULL or valid for
/// a write of one pointer.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_open_path(
    path: *const c_char,
    options: *const genloom_options,
    generator: *mut *mut genloom_generator,
) -> genloom_status {
    boundary(|| {
        if path.is_null() {
            return Err(Failure::new(genloom_status::NullArgument, "`path` is NULL, expected a file path"));
        }
        // SAFETY: non-null and NUL-terminated by this function's contract.
        let bytes = unsafe { CStr::from_ptr(path) }.to_bytes();
        let out = Out::new(generator, "generator")?;
        // SAFETY: NULL or a live handle by this function's contract.
        let options = unsafe { options_or_default(options) }?;
        let path = path_from_bytes(bytes)?;
        let model = Model::from_path(path, &LoadOptions::default()).map_err(Failure::from);
        // SAFETY: `generator` is writable by this function's contract.
        unsafe { open(model, options, out) }
    })
}

#[cfg(unix)]
fn path_from_bytes(bytes: &[u8]) -> Outcome<std::path::PathBuf> {
    use std::os::unix::ffi::OsStrExt;
    Ok(std::ffi::OsStr::from_bytes(bytes).into())
}

#[cfg(not(unix))]
fn path_from_bytes(bytes: &[u8]) -> Outcome<std::path::PathBuf> {
    match std::str::from_utf8(bytes) {
        Ok(s) => Ok(s.into()),
        Err(e) => Err(Failure::invalid(format!("`path` is not valid UTF-8 ({e}), expected a UTF-8 path"))),
    }
}

/// Opens a single-file ONNX generator from bytes in memory (the bytes are read during the call
/// and may be freed right after). Models that keep weights in external data files need
/// `genloom_generator_open_path`. `options` may be NULL for the defaults.
///
/// Statuses as `genloom_generator_open_path`, without `GENLOOM_STATUS_IO`.
///
/// # Safety
/// `bytes` is valid for reads of `bytes_len` bytes (or NULL with `bytes_len` 0, which gives a
/// load failure: a model is never empty); `options` is NULL or a live options handle;
/// `generator` is NULL or valid for a write of one pointer.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_open_bytes(
    bytes: *const u8,
    bytes_len: usize,
    options: *const genloom_options,
    generator: *mut *mut genloom_generator,
) -> genloom_status {
    boundary(|| {
        // SAFETY: valid for `bytes_len` reads by this function's contract.
        let bytes = unsafe { arg_slice(bytes, bytes_len, "bytes") }?;
        let out = Out::new(generator, "generator")?;
        // SAFETY: NULL or a live handle by this function's contract.
        let options = unsafe { options_or_default(options) }?;
        let model = Model::from_bytes(bytes, &LoadOptions::default()).map_err(Failure::from);
        // SAFETY: `generator` is writable by this function's contract.
        unsafe { open(model, options, out) }
    })
}

/// Frees a generator. NULL is accepted and does nothing.
///
/// # Safety
/// `generator` is NULL or a handle from `genloom_generator_open_*` not yet freed, which no other
/// thread is using; it must not be used after this call.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_free(generator: *mut genloom_generator) {
    guard((), || {
        if !generator.is_null() {
            // SAFETY: a live handle made by `Box::into_raw` in `open`, freed once and not in use
            // elsewhere, by this function's contract.
            drop(unsafe { Box::from_raw(generator) });
        }
    })
}

/// Reads one value of the signature into `*out`.
///
/// # Safety
/// `generator` is NULL or live; `out` is NULL or valid for a write.
unsafe fn get<T>(
    generator: *const genloom_generator,
    out: *mut T,
    value: impl FnOnce(&Generator) -> T,
) -> genloom_status {
    boundary(|| {
        // SAFETY: NULL or live by the caller's contract.
        let generator = unsafe { arg_ref(generator, "generator") }?;
        let out = Out::new(out, "out")?;
        let v = value(&generator.inner);
        // SAFETY: checked in `Out::new`, writable by the caller's contract.
        unsafe { out.write(v) };
        Ok(())
    })
}

/// Writes the number of values in one latent vector (the model's latent size).
///
/// # Safety
/// `generator` is NULL or a live handle; `out` is NULL or valid for a write of one `size_t`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_get_latent_dim(
    generator: *const genloom_generator,
    out: *mut usize,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { get(generator, out, |g| g.signature().latent.dim) }
}

/// Writes the number of classes of a conditional model's label input, or 0 for an
/// unconditional model (which takes no labels).
///
/// # Safety
/// As `genloom_generator_get_latent_dim`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_get_label_classes(
    generator: *const genloom_generator,
    out: *mut usize,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { get(generator, out, |g| g.signature().label.as_ref().map_or(0, |l| l.classes)) }
}

/// Writes the width of the generated images in pixels.
///
/// # Safety
/// As `genloom_generator_get_latent_dim`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_get_width(
    generator: *const genloom_generator,
    out: *mut usize,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { get(generator, out, |g| g.signature().image.width) }
}

/// Writes the height of the generated images in pixels.
///
/// # Safety
/// As `genloom_generator_get_latent_dim`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_get_height(
    generator: *const genloom_generator,
    out: *mut usize,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { get(generator, out, |g| g.signature().image.height) }
}

/// Writes the channels of the float images: 1 (gray), 3 (RGB) or 4 (RGBA).
///
/// # Safety
/// As `genloom_generator_get_latent_dim`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_get_channels(
    generator: *const genloom_generator,
    out: *mut usize,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe { get(generator, out, |g| g.signature().image.channels) }
}

/// Writes the memory order of the float images, a `GENLOOM_LAYOUT_*` value.
///
/// # Safety
/// `generator` is NULL or a live handle; `out` is NULL or valid for a write of one
/// `genloom_layout`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_get_layout(
    generator: *const genloom_generator,
    out: *mut genloom_layout,
) -> genloom_status {
    // SAFETY: forwarded contract.
    unsafe {
        get(generator, out, |g| match g.signature().image.layout {
            genloom::Layout::Nchw => GENLOOM_LAYOUT_NCHW,
            genloom::Layout::Nhwc => GENLOOM_LAYOUT_NHWC,
        })
    }
}

/// Writes the value range of the float images: `lo` maps to pixel value 0 and `hi` to 255
/// (e.g. -1 and 1 for a Tanh output).
///
/// # Safety
/// `generator` is NULL or a live handle; `lo` and `hi` are NULL or each valid for a write of one
/// `float`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_get_range(
    generator: *const genloom_generator,
    lo: *mut f32,
    hi: *mut f32,
) -> genloom_status {
    boundary(|| {
        // SAFETY: NULL or live by this function's contract.
        let generator = unsafe { arg_ref(generator, "generator") }?;
        let (lo, hi) = (Out::new(lo, "lo")?, Out::new(hi, "hi")?);
        let range = generator.inner.signature().image.range;
        // SAFETY: both checked in `Out::new`, writable by this function's contract.
        unsafe {
            lo.write(range.lo);
            hi.write(range.hi);
        }
        Ok(())
    })
}

fn too_large(what: &str) -> Failure {
    Failure::new(genloom_status::Limit, format!("{what} does not fit in a size_t"))
}

fn output_len(g: &Generator, count: usize, kind: genloom_output) -> Outcome<usize> {
    let sig = g.signature();
    let per = match kind {
        GENLOOM_OUTPUT_LATENTS => sig.latent.dim,
        GENLOOM_OUTPUT_FLOAT => sig.image.values_per_image(),
        GENLOOM_OUTPUT_RGBA8 => sig.image.width * sig.image.height * 4,
        other => {
            return Err(Failure::invalid(format!(
                "`kind` is {other}, expected GENLOOM_OUTPUT_LATENTS (0), GENLOOM_OUTPUT_FLOAT (1) or \
                 GENLOOM_OUTPUT_RGBA8 (2)"
            )))
        }
    };
    count.checked_mul(per).ok_or_else(|| too_large("the output for this many images"))
}

/// Writes how many elements (floats for `GENLOOM_OUTPUT_LATENTS` and `GENLOOM_OUTPUT_FLOAT`,
/// bytes for `GENLOOM_OUTPUT_RGBA8`) the output buffer for `count` latents or images must hold.
///
/// Every call with an output buffer also answers this itself: give a buffer of length 0 (the
/// pointer may then be NULL) and it returns `GENLOOM_STATUS_BUFFER_TOO_SMALL` with the size in
/// `*needed`, doing no work.
///
/// # Safety
/// `generator` is NULL or a live handle; `out_len` is NULL or valid for a write of one `size_t`.
#[no_mangle]
pub unsafe extern "C" fn genloom_generator_get_output_len(
    generator: *const genloom_generator,
    count: usize,
    kind: genloom_output,
    out_len: *mut usize,
) -> genloom_status {
    boundary(|| {
        // SAFETY: NULL or live by this function's contract.
        let generator = unsafe { arg_ref(generator, "generator") }?;
        let out = Out::new(out_len, "out_len")?;
        let n = output_len(&generator.inner, count, kind)?;
        // SAFETY: checked in `Out::new`, writable by this function's contract.
        unsafe { out.write(n) };
        Ok(())
    })
}

/// Deprecated: use `genloom_sample_options` with `genloom_generator_sample`, which has no sentinel
/// values (here `psi` 0 silently collapses every latent to the centre, and `truncation <= 0` and
/// `psi < 0` mean "none"). Kept, with the same behaviour, for one more release.
///
/// Draws `count` latent vectors (rows `first_index .. first_index + count` of `seed`'s stream)
/// into `latents`, row after row: `count * latent_dim` floats.
///
/// - `prior`: `GENLOOM_PRIOR_GAUSSIAN` or `GENLOOM_PRIOR_UNIFORM`.
/// - `truncation`: resample Gaussian components beyond `±truncation` (at least 0.05); `<= 0`
///   means no truncation.
/// - `psi`: shrink each latent toward zero, `z * psi`, with `psi` in [0, 1]; `< 0` means none.
/// - `numpy_compatible`: `false` for the portable counter-based generator (row `i` depends only
///   on `seed` and `i`, identical in Rust, C and JS); `true` to reproduce
///   `numpy.random.RandomState(seed).standard_normal((count, dim)).astype(numpy.float32)`
///   (or `.uniform(-1, 1, ...)`) bit for bit; `seed` must then be below 2^32.
///
/// A `latents_len` below the size needed gives `GENLOOM_STATUS_BUFFER_TOO_SMALL` with the size
/// in `*needed` and draws nothing. On success `*needed` (if not NULL) receives the floats written.
///
/// # Safety
/// `generator` is NULL or a live handle; `latents` is valid for writes of `latents_len` floats
/// (or NULL with `latents_len` 0); `needed` is NULL or valid for a write of one `size_t`.
#[no_mangle]
#[allow(clippy::too_many_arguments)]
pub unsafe extern "C" fn genloom_generator_sample_latents(
    generator: *const genloom_generator,
    seed: u64,
    first_index: u64,
    count: usize,
    prior: genloom_prior,
    truncation: f32,
    psi: f32,
    numpy_compatible: bool,
    latents: *mut f32,
    latents_len: usize,
    needed: *mut usize,
) -> genloom_status {
    boundary(|| {
        // SAFETY: NULL or live by this function's contract.
        let generator = unsafe { arg_ref(generator, "generator") }?;
        let out = OutBuf::new(latents, latents_len, needed, "latents", "floats")?;
        let mut options = SampleOptions::new(seed, count);
        options.first_index = first_index;
        options.prior = crate::sample::prior_of(prior)?;
        // NaN is neither <= 0 nor < 0: it is passed on and refused by the runtime with its message.
        options.truncation = if truncation <= 0.0 { None } else { Some(truncation) };
        options.psi = if psi < 0.0 { None } else { Some(psi) };
        options.mode = if numpy_compatible { RngMode::NumpyCompatible } else { RngMode::Portable };
        // SAFETY: the buffer and `needed` are writable by this function's contract.
        unsafe { draw_latents(&generator.inner, &options, out) }
    })
}

/// Draws the latents `options` describe into `out`.
///
/// # Safety
/// `out`'s buffer and `needed` pointer are writable for their lengths (the sampling calls'
/// contracts).
pub(crate) unsafe fn draw_latents(g: &Generator, options: &SampleOptions, out: OutBuf<f32>) -> Outcome {
    let n = output_len(g, options.count, GENLOOM_OUTPUT_LATENTS)?;
    // SAFETY: as this function's contract.
    unsafe { out.reserve(n) }?;
    let drawn = g.sample_latents(options)?;
    // SAFETY: as this function's contract; `drawn` is ours.
    unsafe { out.fill(drawn.as_slice()) }
}

/// The latents and labels of a generate call, checked, and the run itself.
struct Request<'a> {
    generator: &'a Generator,
    latents: Latents,
    labels: Option<&'a [i64]>,
    progress: genloom_progress_fn,
    user_data: *mut c_void,
}

impl<'a> Request<'a> {
    /// # Safety
    /// As the generate calls: `generator` NULL or live; `latents` and `labels` valid for reads of
    /// their lengths (or NULL with length 0).
    unsafe fn new(
        generator: *const genloom_generator,
        latents: *const f32,
        latents_len: usize,
        labels: *const i64,
        labels_len: usize,
        progress: genloom_progress_fn,
        user_data: *mut c_void,
    ) -> Outcome<Request<'a>> {
        // SAFETY: NULL or live by the caller's contract.
        let generator = &unsafe { arg_ref(generator, "generator") }?.inner;
        // SAFETY: valid for `latents_len` reads by the caller's contract.
        let values = unsafe { arg_slice(latents, latents_len, "latents") }?;
        // SAFETY: valid for `labels_len` reads by the caller's contract.
        let labels = unsafe { arg_slice(labels, labels_len, "labels") }?;
        let dim = generator.signature().latent.dim;
        if values.is_empty() || !values.len().is_multiple_of(dim) {
            return Err(Failure::invalid(format!(
                "`latents_len` is {}, expected a non-zero multiple of the latent size {dim} \
                 (latent vectors one after another)",
                values.len()
            )));
        }
        let latents = Latents::new(dim, values.to_vec())?;
        let labels = if labels.is_empty() { None } else { Some(labels) };
        Ok(Request { generator, latents, labels, progress, user_data })
    }

    fn count(&self) -> usize {
        self.latents.count()
    }

    fn run(&self) -> Outcome<Images> {
        let (progress, user_data) = (self.progress, self.user_data);
        let mut report = |p: genloom::Progress| match progress {
            // SAFETY: the caller gave a valid callback and promised it does not unwind; `user_data`
            // is passed back untouched, as documented.
            Some(callback) => (unsafe { callback(user_data, p.done, p.total) }) != 0,
            None => true,
        };
        Ok(self.generator.generate_with(&self.latents, self.labels, &mut report)?)
    }
}

/// Generates one image per latent vector as floats, in the model's layout
/// (`genloom_generator_get_layout`) and value range (`genloom_generator_get_range`), image
/// after image: `count * channels * height * width` floats, where `count = latents_len /
/// latent_dim`.
///
/// - `latents`: `count` latent vectors one after another (`latents_len` a non-zero multiple of
///   the latent size); NaN or infinity gives `GENLOOM_STATUS_INVALID_ARGUMENT`.
/// - `labels`: for a conditional model, one class in `0 .. label_classes - 1` per latent
///   (`labels_len == count`); for an unconditional model, none (`labels_len` 0; `labels` may
///   then be NULL).
/// - `progress`, `user_data`: an optional progress callback (see `genloom_progress_fn`), NULL
///   for none.
///
/// Image `i` depends only on latent `i` (and label `i`). A short `images` buffer gives
/// `GENLOOM_STATUS_BUFFER_TOO_SMALL` and the size in `*needed`, before any inference. Nothing is
/// written to `images` unless the call succeeds. May run concurrently with other generate calls on
/// the same handle.
///
/// # Safety
/// `generator` is NULL or a live handle; `latents` is valid for reads of `latents_len` floats
/// and `labels` for reads of `labels_len` int64 values (each may be NULL with length 0);
/// `images` is valid for writes of `images_len` floats (or NULL with `images_len` 0) and overlaps
/// no input; `needed` is NULL or valid for a write of one `size_t`; `progress` is NULL or a
/// function following `genloom_progress_fn`'s contract.
#[no_mangle]
#[allow(clippy::too_many_arguments)]
pub unsafe extern "C" fn genloom_generator_generate(
    generator: *const genloom_generator,
    latents: *const f32,
    latents_len: usize,
    labels: *const i64,
    labels_len: usize,
    progress: genloom_progress_fn,
    user_data: *mut c_void,
    images: *mut f32,
    images_len: usize,
    needed: *mut usize,
) -> genloom_status {
    boundary(|| {
        let out = OutBuf::new(images, images_len, needed, "images", "floats")?;
        // SAFETY: forwarded contract.
        let request = unsafe {
            Request::new(generator, latents, latents_len, labels, labels_len, progress, user_data)
        }?;
        let n = output_len(request.generator, request.count(), GENLOOM_OUTPUT_FLOAT)?;
        // SAFETY: `needed` is NULL or writable by this function's contract.
        unsafe { out.reserve(n) }?;
        let images = request.run()?;
        // SAFETY: the buffer and `needed` are writable by this function's contract; `images` is ours.
        unsafe { out.fill(&images.data) }
    })
}

/// As `genloom_generator_generate`, but writes 8-bit RGBA pixels: `count * height * width * 4`
/// bytes, image after image, rows top to bottom, 4 bytes (red, green, blue, alpha) per pixel.
///
/// Each float `x` becomes `floor(clamp((x - lo) / (hi - lo), 0, 1) * 255 + 0.5)` (NaN becomes 0);
/// a gray output is replicated into red, green and blue; alpha is 255 unless the model has a
/// fourth channel.
///
/// # Safety
/// As `genloom_generator_generate`, with `pixels` valid for writes of `pixels_len` bytes.
#[no_mangle]
#[allow(clippy::too_many_arguments)]
pub unsafe extern "C" fn genloom_generator_generate_rgba8(
    generator: *const genloom_generator,
    latents: *const f32,
    latents_len: usize,
    labels: *const i64,
    labels_len: usize,
    progress: genloom_progress_fn,
    user_data: *mut c_void,
    pixels: *mut u8,
    pixels_len: usize,
    needed: *mut usize,
) -> genloom_status {
    boundary(|| {
        let out = OutBuf::new(pixels, pixels_len, needed, "pixels", "bytes")?;
        // SAFETY: forwarded contract.
        let request = unsafe {
            Request::new(generator, latents, latents_len, labels, labels_len, progress, user_data)
        }?;
        let n = output_len(request.generator, request.count(), GENLOOM_OUTPUT_RGBA8)?;
        // SAFETY: `needed` is NULL or writable by this function's contract.
        unsafe { out.reserve(n) }?;
        let images = request.run()?;
        let bytes = genloom::pixels::rgba8(&images)?;
        // SAFETY: the buffer and `needed` are writable by this function's contract; `bytes` is ours.
        unsafe { out.fill(&bytes) }
    })
}
