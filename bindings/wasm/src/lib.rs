//! genloom-wasm: the genloom runtime as a WebAssembly package, for a web page (a game that makes
//! its own terrain tiles on the player's device) or for Node.
//!
//! The JS API is one class and a few functions; this crate only converts types at the edge and
//! leaves every piece of logic to the runtime:
//!
//! ```js
//! const gen = new Generator(new Uint8Array(await (await fetch("tiles.onnx")).arrayBuffer()));
//! gen.latentDim;                                   // 64; also labelClasses, width, height, channels, range
//! const z = gen.sampleLatents(7n, 16, { truncation: 0.7 }); // Float32Array 16 x 64, same as Rust
//! const rgba = gen.generateRgba(z);                 // Uint8ClampedArray 16 x 32 x 32 x 4
//! ctx.putImageData(new ImageData(rgba.subarray(0, 4096), 32, 32), 0, 0);
//! const frames = latentPath(gen.sampleLatents(1n, 2), 64, { steps: 24, looped: true });
//! const png = gen.generatePng(z, null, { columns: 4, scale: 4 }); // Uint8Array of a PNG
//! gen.free();
//! ```
//!
//! Errors are thrown as JS `Error`s carrying the runtime's message; no argument, however wrong,
//! makes the module trap. Compute is synchronous (run it in a Worker for long batches).
//! Built for `wasm32-unknown-unknown` with `simd128` by `bindings/wasm/build.sh`.

pub mod js;
pub mod render;

use genloom::{
    GeneratorOptions, Interpolation, Latents, LoadOptions, Model, PathOptions, RngMode, SampleOptions,
};
use wasm_bindgen::prelude::*;
use wasm_bindgen::Clamped;

/// Most images one call may draw or generate in the web build: the runtime's
/// `Limits::max_images`, set lower than its native default because a page's memory is smaller.
pub const MAX_IMAGES: u64 = 65_536;

/// A thrown `Error` with the runtime's message (its cause chain included), `name`
/// `"GenloomError"` and `kind`, the runtime's error kind (`load`, `signature`, `argument`,
/// `npy`, `inference`, `cancelled`, `limits` or `io`).
fn err(e: genloom::Error) -> JsValue {
    thrown(&e.chain(), e.kind().as_str())
}

fn thrown(message: &str, kind: &str) -> JsValue {
    let error = js_sys::Error::new(message);
    error.set_name("GenloomError");
    // Setting a property on a fresh Error object cannot fail.
    let _ = js_sys::Reflect::set(&error, &JsValue::from_str("kind"), &JsValue::from_str(kind));
    error.into()
}

#[cfg(target_arch = "wasm32")]
#[wasm_bindgen]
extern "C" {
    #[wasm_bindgen(js_namespace = console, js_name = error)]
    fn console_error(message: &str);
}

/// Runs when the module is instantiated: a panic (a bug, never an argument error) is written to
/// the console before the module traps, so that it can be reported.
#[cfg(target_arch = "wasm32")]
#[wasm_bindgen(start)]
fn start() {
    std::panic::set_hook(Box::new(|info| {
        console_error(&format!("genloom-wasm: internal error (please report it): {info}"));
    }));
}

/// A generator: a loaded ONNX model with its optimised plans, ready to sample latents and make
/// pictures. Build it from model bytes; call `free()` when done (the memory is otherwise
/// reclaimed only when the object is garbage-collected).
#[wasm_bindgen]
pub struct Generator {
    inner: genloom::Generator,
}

#[wasm_bindgen]
impl Generator {
    /// Loads a single-file ONNX model from a `Uint8Array` (or `ArrayBuffer`) and builds its
    /// plans. `options` may hold `microBatch` (images per inference call, default 8),
    /// `maxCachedPlans` (default 4), `warmUp` (build the plans now, default true) and
    /// `f16Compute` (compute in f16 except Conv: less memory, slower, pixels within about one
    /// level; default false).
    ///
    /// # Errors
    /// Throws for bytes that are not a usable generator (empty, an HTML page, not ONNX, external
    /// data, no latent input...) and for bad options, with the runtime's message.
    #[wasm_bindgen(constructor)]
    pub fn new(bytes: &JsValue, options: &JsValue) -> Result<Generator, JsValue> {
        let fields =
            js::Fields::new("generator options", options, &["microBatch", "maxCachedPlans", "warmUp", "f16Compute"])
                .map_err(err)?;
        let mut opts = GeneratorOptions::default();
        if let Some(v) = fields.get("microBatch").map_err(err)? {
            opts.micro_batch =
                render::whole("microBatch", js::number("microBatch", &v).map_err(err)?, 1, 4096)
                    .map_err(err)? as usize;
        }
        if let Some(v) = fields.get("maxCachedPlans").map_err(err)? {
            let n = js::number("maxCachedPlans", &v).map_err(err)?;
            opts.max_cached_plans = render::whole("maxCachedPlans", n, 1, 64).map_err(err)? as usize;
        }
        if let Some(v) = fields.get("warmUp").map_err(err)? {
            opts.warm_up = js::boolean("warmUp", &v).map_err(err)?;
        }
        if let Some(v) = fields.get("f16Compute").map_err(err)? {
            opts.f16_compute = js::boolean("f16Compute", &v).map_err(err)?;
        }
        // WebAssembly here has one thread: generation always runs on the calling thread.
        opts.threads = 1;
        let bytes = js::bytes("model bytes", bytes).map_err(err)?;
        let mut load = LoadOptions::default();
        load.limits.max_images = MAX_IMAGES;
        let model = Model::from_bytes(&bytes, &load).map_err(err)?;
        let inner = genloom::Generator::new(model, opts).map_err(err)?;
        Ok(Generator { inner })
    }

    /// The same as `new Generator(bytes, options)`.
    ///
    /// # Errors
    /// As the constructor.
    #[wasm_bindgen(js_name = fromBytes)]
    pub fn from_bytes(bytes: &JsValue, options: &JsValue) -> Result<Generator, JsValue> {
        Generator::new(bytes, options)
    }

    /// Values per latent (Z).
    #[wasm_bindgen(getter, js_name = latentDim)]
    pub fn latent_dim(&self) -> usize {
        self.inner.signature().latent.dim
    }

    /// Number of classes of a conditional model; `undefined` for an unconditional one.
    #[wasm_bindgen(getter, js_name = labelClasses)]
    pub fn label_classes(&self) -> Option<usize> {
        self.inner.signature().label.as_ref().map(|l| l.classes)
    }

    /// Image width in pixels.
    #[wasm_bindgen(getter)]
    pub fn width(&self) -> usize {
        self.inner.signature().image.width
    }

    /// Image height in pixels.
    #[wasm_bindgen(getter)]
    pub fn height(&self) -> usize {
        self.inner.signature().image.height
    }

    /// Channels of the model's output (1 gray, 3 RGB, 4 RGBA).
    #[wasm_bindgen(getter)]
    pub fn channels(&self) -> usize {
        self.inner.signature().image.channels
    }

    /// The output's value range `[lo, hi]` (lo maps to 0, hi to 255), as a `Float32Array`.
    #[wasm_bindgen(getter)]
    pub fn range(&self) -> Vec<f32> {
        let r = self.inner.signature().image.range;
        vec![r.lo, r.hi]
    }

    /// The whole signature as a plain object (the runtime's JSON form: latent, label, image,
    /// batch).
    ///
    /// # Errors
    /// Never in practice.
    pub fn signature(&self) -> Result<JsValue, JsValue> {
        to_js(self.inner.signature())
    }

    /// What the model file holds, as a plain object (size, sha256, parameters, ops, metadata,
    /// the load-time passes...).
    ///
    /// # Errors
    /// Never in practice.
    pub fn info(&self) -> Result<JsValue, JsValue> {
        to_js(self.inner.model().info())
    }

    /// Draws `count` latents of `seed` (a `BigInt`), bit for bit the ones Rust and C draw.
    /// `options`: `truncation` (resample components beyond this threshold), `psi` (shrink toward
    /// zero, 0 to 1), `prior` (`"gaussian"` or `"uniform"`), `mode` (`"portable"` or `"numpy"`,
    /// matching `numpy.random.RandomState(seed)`), `firstIndex` (a `BigInt`: draw rows
    /// `firstIndex ..`). Returns a `Float32Array` of `count * latentDim` values.
    ///
    /// # Errors
    /// Throws for a bad seed, count or option.
    #[wasm_bindgen(js_name = sampleLatents)]
    pub fn sample_latents(&self, seed: &JsValue, count: f64, options: &JsValue) -> Result<Vec<f32>, JsValue> {
        let seed = js::seed("seed", seed).map_err(err)?;
        let max = self.inner.model().limits().max_images;
        let count = render::whole("count", count, 1, max).map_err(err)? as usize;
        let f =
            js::Fields::new("sample options", options, &["truncation", "psi", "prior", "mode", "firstIndex"])
                .map_err(err)?;
        let mut o = SampleOptions::new(seed, count);
        if let Some(v) = f.get("truncation").map_err(err)? {
            o.truncation = Some(js::number("truncation", &v).map_err(err)? as f32);
        }
        if let Some(v) = f.get("psi").map_err(err)? {
            o.psi = Some(js::number("psi", &v).map_err(err)? as f32);
        }
        if let Some(v) = f.get("prior").map_err(err)? {
            o.prior = js::string("prior", &v).map_err(err)?.parse().map_err(err)?;
        }
        if let Some(v) = f.get("mode").map_err(err)? {
            o.mode = match js::string("mode", &v).map_err(err)?.as_str() {
                "portable" => RngMode::Portable,
                "numpy" | "numpy-compatible" => RngMode::NumpyCompatible,
                other => {
                    return Err(err(render::invalid("mode", format!("`{other}`"), "`portable` or `numpy`")))
                }
            };
        }
        if let Some(v) = f.get("firstIndex").map_err(err)? {
            o.first_index = js::seed("firstIndex", &v).map_err(err)?;
        }
        Ok(self.inner.sample_latents(&o).map_err(err)?.into_vec())
    }

    /// A path through keyframe latents (`count * latentDim` values), like the free function
    /// `latentPath` with this model's latent size.
    ///
    /// # Errors
    /// As `latentPath`.
    #[wasm_bindgen(js_name = latentPath)]
    pub fn latent_path(&self, keyframes: &JsValue, options: &JsValue) -> Result<Vec<f32>, JsValue> {
        latent_path(keyframes, self.latent_dim() as f64, options)
    }

    /// Generates one image per latent (`latents`: a `Float32Array` of `count * latentDim`
    /// values; `labels`: one class per image for a conditional model, as a `BigInt64Array`, an
    /// `Int32Array` or an array, else `undefined`) and returns RGBA bytes, image after image,
    /// `count * height * width * 4`, ready for `new ImageData(bytes.subarray(...), width,
    /// height)`.
    ///
    /// # Errors
    /// Throws for latents of the wrong size or with NaN, missing or out-of-range labels, or a
    /// failed inference.
    #[wasm_bindgen(js_name = generateRgba)]
    pub fn generate_rgba(&self, latents: &JsValue, labels: &JsValue) -> Result<Clamped<Vec<u8>>, JsValue> {
        let images = self.run(latents, labels)?;
        Ok(Clamped(genloom::pixels::rgba8(&images).map_err(err)?))
    }

    /// Generates as `generateRgba` does but returns the model's raw output: a `Float32Array` of
    /// `count * channels * height * width` values in the model's layout and range.
    ///
    /// # Errors
    /// As `generateRgba`.
    #[wasm_bindgen(js_name = generateFloat)]
    pub fn generate_float(&self, latents: &JsValue, labels: &JsValue) -> Result<Vec<f32>, JsValue> {
        Ok(self.run(latents, labels)?.data)
    }

    /// Generates and encodes a PNG (a `Uint8Array`): one image alone, or a contact sheet of
    /// several. `options`: `columns` (tiles per row), `scale` (1 to 64, nearest neighbour),
    /// `margin` (pixels between tiles, default 2), `provenance` (default true: text chunks say
    /// the picture is synthetic and name the model's SHA-256 and the latent count, as every
    /// PNG genloom writes does).
    ///
    /// # Errors
    /// As `generateRgba`, and for bad options or a picture over 16384 pixels a side.
    #[wasm_bindgen(js_name = generatePng)]
    pub fn generate_png(
        &self,
        latents: &JsValue,
        labels: &JsValue,
        options: &JsValue,
    ) -> Result<Vec<u8>, JsValue> {
        let f = js::Fields::new("PNG options", options, &["columns", "scale", "margin", "provenance"])
            .map_err(err)?;
        let mut o = genloom::pixels::GridOptions::default();
        if let Some(v) = f.get("columns").map_err(err)? {
            o.columns = Some(
                render::whole("columns", js::number("columns", &v).map_err(err)?, 1, 4096).map_err(err)?
                    as usize,
            );
        }
        if let Some(v) = f.get("scale").map_err(err)? {
            o.scale =
                render::whole("scale", js::number("scale", &v).map_err(err)?, 1, 64).map_err(err)? as usize;
        }
        if let Some(v) = f.get("margin").map_err(err)? {
            o.margin = render::whole("margin", js::number("margin", &v).map_err(err)?, 0, 256).map_err(err)?
                as usize;
        }
        let with_provenance = match f.get("provenance").map_err(err)? {
            Some(v) => js::boolean("provenance", &v).map_err(err)?,
            None => true,
        };
        let images = self.run(latents, labels)?;
        let provenance = genloom::pixels::Provenance {
            model: "model bytes given to genloom's web package".into(),
            model_sha256: self.inner.model().info().sha256.clone(),
            origin: format!("{} latents given to generatePng", images.count),
        };
        genloom::pixels::images_png(&images, &o, with_provenance.then_some(&provenance)).map_err(err)
    }
}

impl Generator {
    fn run(&self, latents: &JsValue, labels: &JsValue) -> Result<genloom::Images, JsValue> {
        let dim = self.latent_dim();
        let values = js::floats("latents", latents).map_err(err)?;
        if values.len() < 2 * dim && values.len() != dim {
            let name = self.inner.signature().latent.name.clone();
            return Err(err(genloom::Error::LatentDim { name, actual: values.len(), expected: dim }));
        }
        if !values.len().is_multiple_of(dim) {
            return Err(err(render::invalid(
                "latents",
                format!("{} values", values.len()),
                format!("a whole number of latents of {dim} values each (count x {dim})"),
            )));
        }
        let labels = js::labels(labels).map_err(err)?;
        let latents = Latents::new(dim, values).map_err(err)?;
        self.inner.generate(&latents, labels.as_deref()).map_err(err)
    }
}

fn to_js<T: serde::Serialize>(value: &T) -> Result<JsValue, JsValue> {
    let text = serde_json::to_string(value).map_err(|e| thrown(&format!("could not describe: {e}"), "io"))?;
    js_sys::JSON::parse(&text).map_err(|_| thrown("could not describe: JSON.parse failed", "io"))
}

/// Straight-line interpolation `(1 - t) a + t b` of two latents (`Float32Array`s of one
/// length), computed in double precision; `t` outside [0, 1] extrapolates.
///
/// # Errors
/// Throws for lengths that differ, a non-finite `t` or non-finite values.
#[wasm_bindgen]
pub fn lerp(a: &JsValue, b: &JsValue, t: f64) -> Result<Vec<f32>, JsValue> {
    let (a, b) = (js::floats("a", a).map_err(err)?, js::floats("b", b).map_err(err)?);
    genloom::latent::lerp(&a, &b, t).map_err(err)
}

/// Great-circle interpolation of two latents (keeps Gaussian latents at a typical norm; the
/// parallel and zero-length cases are handled).
///
/// # Errors
/// As `lerp`.
#[wasm_bindgen]
pub fn slerp(a: &JsValue, b: &JsValue, t: f64) -> Result<Vec<f32>, JsValue> {
    let (a, b) = (js::floats("a", a).map_err(err)?, js::floats("b", b).map_err(err)?);
    genloom::latent::slerp(&a, &b, t).map_err(err)
}

/// The frames of a path through keyframe latents (`keyframes`: `K * dim` values). `options`:
/// `steps` (frames per segment, default 16), `interpolation` (`"slerp"`, the default, or
/// `"lerp"`), `looped` (return to the first keyframe, default false). An open path has
/// `(K - 1) * steps + 1` frames and ends on the last keyframe; a looped one `K * steps`.
///
/// # Errors
/// Throws for fewer than 2 keyframes, values that are not a multiple of `dim`, `steps` 0 or
/// over 100000 frames in all.
#[wasm_bindgen(js_name = latentPath)]
pub fn latent_path(keyframes: &JsValue, dim: f64, options: &JsValue) -> Result<Vec<f32>, JsValue> {
    let dim = render::whole("latent size", dim, 1, 1 << 20).map_err(err)? as usize;
    let f = js::Fields::new("path options", options, &["steps", "interpolation", "looped"]).map_err(err)?;
    let mut o = PathOptions::default();
    if let Some(v) = f.get("steps").map_err(err)? {
        o.steps =
            render::whole("steps", js::number("steps", &v).map_err(err)?, 1, 100_000).map_err(err)? as usize;
    }
    if let Some(v) = f.get("interpolation").map_err(err)? {
        o.interpolation =
            js::string("interpolation", &v).map_err(err)?.parse::<Interpolation>().map_err(err)?;
    }
    if let Some(v) = f.get("looped").map_err(err)? {
        o.looped = js::boolean("looped", &v).map_err(err)?;
    }
    let keys = Latents::new(dim, js::floats("keyframes", keyframes).map_err(err)?).map_err(err)?;
    Ok(genloom::latent::path(&keys, &o).map_err(err)?.into_vec())
}

/// A PNG (`Uint8Array`) of RGBA bytes (`Uint8ClampedArray` or `Uint8Array`) of `width x height`
/// pixels, such as a canvas's `getImageData(...).data`.
///
/// # Errors
/// Throws when the bytes are not `width * height * 4` or a side is 0 or over 16384.
#[wasm_bindgen(js_name = encodePng)]
pub fn encode_png(rgba: &JsValue, width: f64, height: f64) -> Result<Vec<u8>, JsValue> {
    let w = render::whole("width", width, 1, genloom::pixels::MAX_SIDE as u64).map_err(err)? as usize;
    let h = render::whole("height", height, 1, genloom::pixels::MAX_SIDE as u64).map_err(err)? as usize;
    let pixels = genloom::pixels::Pixels::from_rgba8(js::bytes("RGBA data", rgba).map_err(err)?, w, h).map_err(err)?;
    pixels.to_png().map_err(err)
}

/// The version of the genloom runtime inside this package.
#[wasm_bindgen]
pub fn version() -> String {
    genloom::VERSION.to_string()
}

/// Bytes of WebAssembly memory in use by the module now (its linear memory only grows; a
/// steady value over many calls means no leak).
#[wasm_bindgen(js_name = memoryBytes)]
pub fn memory_bytes() -> f64 {
    #[cfg(target_arch = "wasm32")]
    {
        (core::arch::wasm32::memory_size::<0>() * 65536) as f64
    }
    #[cfg(not(target_arch = "wasm32"))]
    {
        0.0
    }
}
