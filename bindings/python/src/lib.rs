//! `genloom._native`: the Python extension of genloom (PyO3). The Python package `genloom`
//! re-exports it; see `bindings/python/README.md`.
//!
//! Arrays come in and go out as NumPy arrays; reports go out as the runtime's serde JSON, which
//! the Python side turns into dicts, so a report is the same one every other binding shows.
//! Errors become the exception classes of `genloom._errors`, chosen by [`genloom::ErrorKind`].
#![forbid(unsafe_code)]

mod convert;

use convert::{argument_error, image_shape, labels_from, latents_from, py_err, to_dict};
use genloom::pixels::PixelFormat;
use genloom::{Generator, GeneratorOptions, LoadOptions, Prior, RngMode, SampleOptions};
use numpy::ndarray::{Array2, Array4};
use numpy::{IntoPyArray, PyArray1, PyArray2, PyArray4};
use pyo3::prelude::*;
use pyo3::types::{PyBytes, PyDict};
use std::path::PathBuf;

/// A checked model: its signature and what it is made of (`genloom.Model`).
#[pyclass(name = "Model", module = "genloom._native", frozen)]
struct PyModel {
    inner: genloom::Model,
}

/// Reads a model from a path (str or os.PathLike) or from bytes, with signature overrides.
fn load_model(source: &Bound<'_, PyAny>, load: &LoadOptions) -> PyResult<genloom::Model> {
    let py = source.py();
    if let Ok(b) = source.cast::<PyBytes>() {
        let bytes = b.as_bytes().to_vec();
        return py.detach(|| genloom::Model::from_bytes(&bytes, load)).map_err(py_err);
    }
    let path: PathBuf = source.extract().map_err(|_| {
        argument_error(format!(
            "the model is a {}, expected a path (str or os.PathLike) or the model's bytes",
            type_name(source)
        ))
    })?;
    py.detach(|| genloom::Model::from_path(&path, load)).map_err(py_err)
}

/// The Python type name of a value, for messages.
fn type_name(v: &Bound<'_, PyAny>) -> String {
    v.get_type().name().map(|n| n.to_string()).unwrap_or_else(|_| "value".into())
}

/// Signature overrides from keyword arguments, as the CLI's `--latent-input` and friends.
fn load_options(
    latent_input: Option<String>,
    label_input: Option<String>,
    label_classes: Option<usize>,
    image_output: Option<String>,
    layout: Option<&str>,
    range: Option<&str>,
) -> PyResult<LoadOptions> {
    let mut o = genloom::SignatureOverrides::default();
    o.latent_input = latent_input;
    o.label_input = label_input;
    o.label_classes = label_classes;
    o.image_output = image_output;
    o.layout = layout.map(str::parse).transpose().map_err(py_err)?;
    o.range = range.map(str::parse).transpose().map_err(py_err)?;
    Ok(LoadOptions::with_overrides(o))
}

#[pymethods]
impl PyModel {
    /// Loads `source` (a path or bytes). The keyword arguments are the signature overrides.
    #[new]
    #[pyo3(signature = (source, *, latent_input=None, label_input=None, label_classes=None, image_output=None, layout=None, range=None))]
    fn new(
        source: &Bound<'_, PyAny>,
        latent_input: Option<String>,
        label_input: Option<String>,
        label_classes: Option<usize>,
        image_output: Option<String>,
        layout: Option<&str>,
        range: Option<&str>,
    ) -> PyResult<PyModel> {
        let load = load_options(latent_input, label_input, label_classes, image_output, layout, range)?;
        Ok(PyModel { inner: load_model(source, &load)? })
    }

    /// The signature as a dict (latent, label, image, batch), as `genloom inspect --json`.
    #[getter]
    fn signature<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        to_dict(py, self.inner.signature())
    }

    /// What the model is made of, as a dict.
    #[getter]
    fn info<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        to_dict(py, self.inner.info())
    }

    fn __repr__(&self) -> String {
        let s = self.inner.signature();
        format!("<genloom.Model latent {} image {}>", s.latent.dim, s.image.layout)
    }
}

/// A model with its plans, ready to generate (`genloom.Generator`). Safe to share between
/// Python threads: the GIL is released while it runs.
#[pyclass(name = "Generator", module = "genloom._native", frozen)]
struct PyGenerator {
    inner: Generator,
}

/// Parses a pixel format name.
fn pixel_format(name: &str) -> PyResult<PixelFormat> {
    match name.to_ascii_lowercase().as_str() {
        "gray8" | "l8" => Ok(PixelFormat::Gray8),
        "rgb8" => Ok(PixelFormat::Rgb8),
        "rgba8" => Ok(PixelFormat::Rgba8),
        _ => Err(argument_error(format!("format is `{name}`, expected `gray8`, `rgb8` or `rgba8`"))),
    }
}

#[pymethods]
impl PyGenerator {
    /// Builds the generator from a `Model`, a path or bytes.
    #[new]
    #[pyo3(signature = (model, *, threads=1, micro_batch=8, f16_compute=false))]
    fn new(
        py: Python<'_>,
        model: &Bound<'_, PyAny>,
        threads: usize,
        micro_batch: usize,
        f16_compute: bool,
    ) -> PyResult<PyGenerator> {
        let m = match model.cast::<PyModel>() {
            Ok(m) => m.get().inner.clone(),
            Err(_) => load_model(model, &LoadOptions::default())?,
        };
        let mut o = GeneratorOptions::default();
        o.threads = threads;
        o.micro_batch = micro_batch;
        o.f16_compute = f16_compute;
        let g = py.detach(|| Generator::new(m, o)).map_err(py_err)?;
        Ok(PyGenerator { inner: g })
    }

    /// The model's signature as a dict.
    #[getter]
    fn signature<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        to_dict(py, self.inner.signature())
    }

    /// The model.
    #[getter]
    fn model(&self) -> PyModel {
        PyModel { inner: self.inner.model().clone() }
    }

    /// Draws `count` latents: float32 `[count, dim]`.
    #[pyo3(signature = (seed, count, *, first_index=0, prior="gaussian", truncation=None, psi=None, rng="portable"))]
    #[allow(clippy::too_many_arguments)]
    fn sample_latents<'py>(
        &self,
        py: Python<'py>,
        seed: u64,
        count: usize,
        first_index: u64,
        prior: &str,
        truncation: Option<f32>,
        psi: Option<f32>,
        rng: &str,
    ) -> PyResult<Bound<'py, PyArray2<f32>>> {
        let mut o = SampleOptions::new(seed, count);
        o.first_index = first_index;
        o.prior = prior.parse::<Prior>().map_err(py_err)?;
        o.truncation = truncation;
        o.psi = psi;
        o.mode = match rng {
            "portable" => RngMode::Portable,
            "numpy" => RngMode::NumpyCompatible,
            other => return Err(argument_error(format!("rng is `{other}`, expected `portable` or `numpy`"))),
        };
        let l = py.detach(|| self.inner.sample_latents(&o)).map_err(py_err)?;
        let dim = l.dim();
        let a = Array2::from_shape_vec((l.count(), dim), l.into_vec())
            .map_err(|e| argument_error(e.to_string()))?;
        Ok(a.into_pyarray(py))
    }

    /// Generates one image per latent row: float32 in the model's layout (`[N, C, H, W]` or
    /// `[N, H, W, C]`) and range. `progress(done, total)` is called after each micro-batch;
    /// returning False cancels (CancelledError), and so does Ctrl-C (KeyboardInterrupt).
    #[pyo3(signature = (latents, labels=None, *, progress=None))]
    fn generate<'py>(
        &self,
        py: Python<'py>,
        latents: &Bound<'py, PyAny>,
        labels: Option<&Bound<'py, PyAny>>,
        progress: Option<Py<PyAny>>,
    ) -> PyResult<Bound<'py, PyArray4<f32>>> {
        let sig = self.inner.signature();
        let l = latents_from(latents, sig.latent.dim)?;
        let lab = labels.map(labels_from).transpose()?;
        let mut raised: Option<PyErr> = None;
        let result = py.detach(|| {
            self.inner.generate_with(&l, lab.as_deref(), &mut |p| {
                Python::attach(|py| {
                    if let Err(e) = py.check_signals() {
                        raised = Some(e);
                        return false;
                    }
                    let Some(cb) = &progress else { return true };
                    match cb.call1(py, (p.done, p.total)) {
                        Ok(v) => !matches!(v.bind(py).extract::<bool>(), Ok(false)),
                        Err(e) => {
                            raised = Some(e);
                            false
                        }
                    }
                })
            })
        });
        let images = match (result, raised) {
            (Err(_), Some(e)) => return Err(e),
            (r, _) => r.map_err(py_err)?,
        };
        let shape = image_shape(&images);
        let a = Array4::from_shape_vec(shape, images.data).map_err(|e| argument_error(e.to_string()))?;
        Ok(a.into_pyarray(py))
    }

    /// Turns float images (as `generate` returns them) into uint8 `[N, H, W, C]` by the
    /// runtime's 8-bit rule; `format` is `gray8`, `rgb8` or `rgba8`.
    #[pyo3(signature = (images, format="rgb8"))]
    fn to_pixels<'py>(
        &self,
        py: Python<'py>,
        images: &Bound<'py, PyAny>,
        format: &str,
    ) -> PyResult<Bound<'py, PyArray4<u8>>> {
        let fmt = pixel_format(format)?;
        let sig = self.inner.signature();
        let img = convert::images_from(images, sig)?;
        let (pixels, _) = genloom::pixels::all_pixels(&img, fmt).map_err(py_err)?;
        let bpp = fmt.bytes_per_pixel();
        let mut data = Vec::with_capacity(img.count * img.height * img.width * bpp);
        for p in &pixels {
            data.extend_from_slice(&p.data);
        }
        let a = Array4::from_shape_vec((img.count, img.height, img.width, bpp), data)
            .map_err(|e| argument_error(e.to_string()))?;
        Ok(a.into_pyarray(py))
    }

    fn __repr__(&self) -> String {
        let o = self.inner.options();
        format!("<genloom.Generator threads {} micro_batch {}>", o.threads, o.micro_batch)
    }
}

/// A vector from a 1-D float32 array.
fn vector(v: &Bound<'_, PyAny>, what: &str) -> PyResult<Vec<f32>> {
    let a: numpy::PyReadonlyArray1<f32> = v.extract().map_err(|_| {
        argument_error(format!("{what} is {}, expected a 1-D float32 array", convert::describe(v)))
    })?;
    Ok(a.as_array().to_vec())
}

/// Linear interpolation between two latents.
#[pyfunction]
fn lerp<'py>(
    py: Python<'py>,
    a: &Bound<'py, PyAny>,
    b: &Bound<'py, PyAny>,
    t: f64,
) -> PyResult<Bound<'py, PyArray1<f32>>> {
    let v = genloom::latent::lerp(&vector(a, "a")?, &vector(b, "b")?, t).map_err(py_err)?;
    Ok(v.into_pyarray(py))
}

/// Spherical interpolation between two latents.
#[pyfunction]
fn slerp<'py>(
    py: Python<'py>,
    a: &Bound<'py, PyAny>,
    b: &Bound<'py, PyAny>,
    t: f64,
) -> PyResult<Bound<'py, PyArray1<f32>>> {
    let v = genloom::latent::slerp(&vector(a, "a")?, &vector(b, "b")?, t).map_err(py_err)?;
    Ok(v.into_pyarray(py))
}

/// The frames of a path through keyframe latents `[K, dim]`.
#[pyfunction]
#[pyo3(signature = (keyframes, steps=16, interpolation="slerp", looped=false))]
fn latent_path<'py>(
    py: Python<'py>,
    keyframes: &Bound<'py, PyAny>,
    steps: usize,
    interpolation: &str,
    looped: bool,
) -> PyResult<Bound<'py, PyArray2<f32>>> {
    let k = latents_from(keyframes, 0)?;
    let mut o = genloom::PathOptions::default();
    o.steps = steps;
    o.interpolation = interpolation.parse().map_err(py_err)?;
    o.looped = looped;
    let p = genloom::latent::path(&k, &o).map_err(py_err)?;
    let dim = p.dim();
    let a =
        Array2::from_shape_vec((p.count(), dim), p.into_vec()).map_err(|e| argument_error(e.to_string()))?;
    Ok(a.into_pyarray(py))
}

/// A flat float32 copy of an array of any shape (float32 or float64).
fn floats(v: &Bound<'_, PyAny>, what: &str) -> PyResult<Vec<f32>> {
    if let Ok(a) = v.extract::<numpy::PyReadonlyArrayDyn<f32>>() {
        return Ok(convert::c_order(&a));
    }
    if let Ok(a) = v.extract::<numpy::PyReadonlyArrayDyn<f64>>() {
        return Ok(a.as_array().iter().map(|&x| x as f32).collect());
    }
    Err(argument_error(format!("{what} is {}, expected a float32 array", convert::describe(v))))
}

/// Runs the release gate; returns the report (schema genloom.check/1) as JSON text.
#[pyfunction]
#[pyo3(signature = (path, *, options, reference=None, labels=None, against=None, skip=Vec::new(), load=None))]
#[allow(clippy::too_many_arguments)]
fn check(
    py: Python<'_>,
    path: PathBuf,
    options: &Bound<'_, PyDict>,
    reference: Option<(Bound<'_, PyAny>, Bound<'_, PyAny>)>,
    labels: Option<&Bound<'_, PyAny>>,
    against: Option<PathBuf>,
    skip: Vec<String>,
    load: Option<&Bound<'_, PyDict>>,
) -> PyResult<String> {
    let load = convert::load_from_dict(load)?;
    let mut o = convert::check_options(options)?;
    o.skip = skip.iter().map(|s| s.parse()).collect::<genloom::Result<_>>().map_err(py_err)?;
    o.validate().map_err(py_err)?;
    if let Some(src) = against {
        o.against = Some(py.detach(|| genloom::Model::from_path(&src, &load)).map_err(py_err)?);
    }
    if let Some((lat, out)) = reference {
        let dim =
            py.detach(|| genloom::Model::from_path(&path, &load)).map_err(py_err)?.signature().latent.dim;
        let latents = latents_from(&lat, dim)?;
        let outputs = floats(&out, "the reference outputs")?;
        let labels = labels.map(labels_from).transpose()?;
        o.reference = Some(genloom::check::FrameworkReference { latents, labels, outputs });
    } else if labels.is_some() {
        return Err(argument_error("labels were given without reference=(latents, outputs)"));
    }
    let report = py.detach(|| genloom::check::check_path(&path, &load, &o)).map_err(py_err)?;
    serde_json::to_string(&report).map_err(|e| argument_error(e.to_string()))
}

/// Converts a model and writes the export; returns the fidelity report as JSON text.
#[pyfunction]
#[pyo3(signature = (path, *, to, out, per_channel=true, keep_float=None, eval_seed=0, eval_count=64, load=None))]
#[allow(clippy::too_many_arguments)]
fn convert_model(
    py: Python<'_>,
    path: PathBuf,
    to: &str,
    out: PathBuf,
    per_channel: bool,
    keep_float: Option<Vec<String>>,
    eval_seed: u64,
    eval_count: usize,
    load: Option<&Bound<'_, PyDict>>,
) -> PyResult<String> {
    let load = convert::load_from_dict(load)?;
    let mut o = genloom::ConvertOptions::new(to.parse().map_err(py_err)?);
    o.per_channel = per_channel;
    if let Some(nodes) = keep_float {
        o.keep_float = genloom::convert::KeepFloat::Nodes(nodes);
    }
    o.eval_seed = eval_seed;
    o.eval_count = eval_count;
    if path.canonicalize().ok().is_some() && path.canonicalize().ok() == out.canonicalize().ok() {
        return Err(argument_error(format!(
            "out {} is the source model itself; choose another file",
            out.display()
        )));
    }
    let export = py
        .detach(|| {
            let source = genloom::Model::from_path(&path, &load)?;
            let export = genloom::convert::convert(&source, &o)?;
            genloom::files::write_atomic(&out, &export.bytes)?;
            Ok::<_, genloom::Error>(export)
        })
        .map_err(py_err)?;
    serde_json::to_string(&export.report).map_err(|e| argument_error(e.to_string()))
}

/// Compares two models on the same seeded latents; returns the fidelity as JSON text.
#[pyfunction]
#[pyo3(signature = (reference, other, *, seed=0, count=64))]
fn compare(py: Python<'_>, reference: PathBuf, other: PathBuf, seed: u64, count: usize) -> PyResult<String> {
    let f = py
        .detach(|| {
            let a = genloom::Model::from_path(&reference, &LoadOptions::default())?;
            let b = genloom::Model::from_path(&other, &LoadOptions::default())?;
            genloom::convert::compare(&a, &b, seed, count)
        })
        .map_err(py_err)?;
    serde_json::to_string(&f).map_err(|e| argument_error(e.to_string()))
}

/// Measures a model; returns the measurement as JSON text (heap figures are zero: the
/// extension does not count allocations).
#[pyfunction]
#[pyo3(name = "bench", signature = (path, *, micro_batches=None, threads=None, iters=40, count=512, f16_compute=false))]
fn bench_model(
    py: Python<'_>,
    path: PathBuf,
    micro_batches: Option<Vec<usize>>,
    threads: Option<Vec<usize>>,
    iters: usize,
    count: usize,
    f16_compute: bool,
) -> PyResult<String> {
    let mut o = genloom::bench::BenchOptions::default();
    if let Some(m) = micro_batches {
        o.micro_batches = m;
    }
    if let Some(t) = threads {
        o.threads = t;
    }
    o.iters = iters;
    o.count = count;
    o.f16_compute = f16_compute;
    let m = py
        .detach(|| {
            let model = genloom::Model::from_path(&path, &LoadOptions::default())?;
            genloom::bench::measure(&model, &o, &genloom::bench::NoHeapMeter, &mut |_| {})
        })
        .map_err(py_err)?;
    serde_json::to_string(&m).map_err(|e| argument_error(e.to_string()))
}

/// The extension module.
#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<PyModel>()?;
    m.add_class::<PyGenerator>()?;
    m.add_function(wrap_pyfunction!(lerp, m)?)?;
    m.add_function(wrap_pyfunction!(slerp, m)?)?;
    m.add_function(wrap_pyfunction!(latent_path, m)?)?;
    m.add_function(wrap_pyfunction!(check, m)?)?;
    m.add_function(wrap_pyfunction!(convert_model, m)?)?;
    m.add_function(wrap_pyfunction!(compare, m)?)?;
    m.add_function(wrap_pyfunction!(bench_model, m)?)?;
    m.add("VERSION", genloom::VERSION)?;
    m.add("DEFAULT_SEED", genloom::DEFAULT_SEED)?;
    Ok(())
}
