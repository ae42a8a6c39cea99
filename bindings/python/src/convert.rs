//! Conversions between Python values and the runtime's types, and the runtime's errors as
//! Python exceptions.

use genloom::check::CheckOptions;
use genloom::{ErrorKind, Images, Latents, Layout, LoadOptions, Signature};
use numpy::{PyReadonlyArray1, PyReadonlyArray2, PyReadonlyArrayDyn, PyUntypedArrayMethods};
use pyo3::prelude::*;
use pyo3::types::PyDict;

/// The exception class name of an error kind (classes in `genloom._errors`).
fn class_name(kind: ErrorKind) -> &'static str {
    match kind {
        ErrorKind::Load => "LoadError",
        ErrorKind::Signature => "SignatureError",
        ErrorKind::InvalidArgument => "ArgumentError",
        ErrorKind::Npy => "NpyError",
        ErrorKind::Inference => "InferenceError",
        ErrorKind::Cancelled => "CancelledError",
        ErrorKind::Limit => "LimitError",
        ErrorKind::Io => "IoError",
        _ => "GenloomError",
    }
}

/// An exception of class `name` from `genloom._errors` with `message`, and its `kind`.
fn raise(name: &str, kind: &str, message: String) -> PyErr {
    Python::attach(|py| {
        let made = py
            .import("genloom._errors")
            .and_then(|m| m.getattr(name))
            .and_then(|cls| cls.call1((message.clone(),)))
            .and_then(|e| {
                e.setattr("kind", kind)?;
                Ok(e)
            });
        match made {
            Ok(e) => PyErr::from_value(e),
            Err(e) => e,
        }
    })
}

/// The runtime's error as the exception of its kind, with the whole message chain.
pub fn py_err(e: genloom::Error) -> PyErr {
    let kind = e.kind();
    raise(class_name(kind), kind.as_str(), e.chain())
}

/// An `ArgumentError` raised by the binding itself (wrong dtype, shape or option).
pub fn argument_error(message: impl Into<String>) -> PyErr {
    raise("ArgumentError", ErrorKind::InvalidArgument.as_str(), message.into())
}

/// What an array-like value is, for messages: `a float64 array of shape (2, 64)` or its type.
pub fn describe(v: &Bound<'_, PyAny>) -> String {
    let dtype = v.getattr("dtype").and_then(|d| d.str()).map(|s| s.to_string());
    let shape = v.getattr("shape").and_then(|d| d.str()).map(|s| s.to_string());
    match (dtype, shape) {
        (Ok(d), Ok(s)) => format!("a {d} array of shape {s}"),
        _ => format!("a {}", v.get_type().name().map(|n| n.to_string()).unwrap_or_else(|_| "value".into())),
    }
}

/// Latents from a float32 `[count, dim]` array (`dim` 0: any size).
pub fn latents_from(v: &Bound<'_, PyAny>, dim: usize) -> PyResult<Latents> {
    let expected = if dim == 0 { "[count, dim]".to_string() } else { format!("[count, {dim}]") };
    let a: PyReadonlyArray2<f32> = v.extract().map_err(|_| {
        argument_error(format!("latents are {}, expected a float32 array of shape {expected}", describe(v)))
    })?;
    let shape = a.shape();
    let (count, d) = (shape[0], shape[1]);
    if dim != 0 && d != dim {
        return Err(argument_error(format!(
            "latents have shape ({count}, {d}), expected {expected}: the model's latent size is {dim}"
        )));
    }
    let data = c_order(&a);
    Latents::new(d, data).map_err(py_err)
}

/// Labels from a 1-D integer array (int64 or int32) or a list of ints.
pub fn labels_from(v: &Bound<'_, PyAny>) -> PyResult<Vec<i64>> {
    if let Ok(a) = v.extract::<PyReadonlyArray1<i64>>() {
        return Ok(a.as_array().to_vec());
    }
    if let Ok(a) = v.extract::<PyReadonlyArray1<i32>>() {
        return Ok(a.as_array().iter().map(|&x| i64::from(x)).collect());
    }
    if v.getattr("dtype").is_err() {
        if let Ok(list) = v.extract::<Vec<i64>>() {
            return Ok(list);
        }
    }
    Err(argument_error(format!(
        "labels are {}, expected a 1-D int64 or int32 array (one class per latent)",
        describe(v)
    )))
}

/// The values of an array in C (row-major) order: one copy from a C-contiguous array, the
/// logical order of any other (`as_slice` would hand a Fortran-order array over in memory
/// order).
pub fn c_order<T: numpy::Element + Copy, D: numpy::ndarray::Dimension>(
    a: &numpy::PyReadonlyArray<'_, T, D>,
) -> Vec<T> {
    if a.is_c_contiguous() {
        if let Ok(s) = a.as_slice() {
            return s.to_vec();
        }
    }
    a.as_array().iter().copied().collect()
}

/// The NumPy shape of images in their layout.
pub fn image_shape(i: &Images) -> (usize, usize, usize, usize) {
    match i.layout {
        Layout::Nchw => (i.count, i.channels, i.height, i.width),
        Layout::Nhwc => (i.count, i.height, i.width, i.channels),
    }
}

/// Float images from a float32 array in the signature's layout.
pub fn images_from(v: &Bound<'_, PyAny>, sig: &Signature) -> PyResult<Images> {
    let im = &sig.image;
    let (c, h, w) = (im.channels, im.height, im.width);
    let expected = match im.layout {
        Layout::Nchw => format!("[N, {c}, {h}, {w}] (NCHW)"),
        Layout::Nhwc => format!("[N, {h}, {w}, {c}] (NHWC)"),
    };
    let wrong = || {
        argument_error(format!("images are {}, expected a float32 array of shape {expected}", describe(v)))
    };
    let a: PyReadonlyArrayDyn<f32> = v.extract().map_err(|_| wrong())?;
    let s = a.shape().to_vec();
    let ok = s.len() == 4
        && match im.layout {
            Layout::Nchw => s[1..] == [c, h, w],
            Layout::Nhwc => s[1..] == [h, w, c],
        };
    if !ok {
        return Err(wrong());
    }
    let data = c_order(&a);
    Ok(Images { count: s[0], channels: c, height: h, width: w, layout: im.layout, range: im.range, data })
}

/// A serde value as a Python dict (through JSON, so it is the same report every binding shows).
pub fn to_dict<'py, T: serde::Serialize>(py: Python<'py>, value: &T) -> PyResult<Bound<'py, PyAny>> {
    let text = serde_json::to_string(value).map_err(|e| argument_error(e.to_string()))?;
    py.import("json")?.call_method1("loads", (text,))
}

/// Signature overrides from a dict of the `Model` keyword arguments.
pub fn load_from_dict(d: Option<&Bound<'_, PyDict>>) -> PyResult<LoadOptions> {
    let mut o = genloom::SignatureOverrides::default();
    if let Some(d) = d {
        for (k, v) in d.iter() {
            if v.is_none() {
                continue;
            }
            let key: String = k.extract()?;
            match key.as_str() {
                "latent_input" => o.latent_input = Some(v.extract()?),
                "label_input" => o.label_input = Some(v.extract()?),
                "label_classes" => o.label_classes = Some(v.extract()?),
                "image_output" => o.image_output = Some(v.extract()?),
                "layout" => o.layout = Some(v.extract::<String>()?.parse().map_err(py_err)?),
                "range" => o.range = Some(v.extract::<String>()?.parse().map_err(py_err)?),
                other => return Err(argument_error(format!("unknown model option `{other}`"))),
            }
        }
    }
    Ok(LoadOptions::with_overrides(o))
}

/// The gate's options from a dict of thresholds, named as the CLI's flags
/// (`count` is `--count`, the number of samples).
pub fn check_options(d: &Bound<'_, PyDict>) -> PyResult<CheckOptions> {
    let mut o = CheckOptions::default();
    for (k, v) in d.iter() {
        if v.is_none() {
            continue;
        }
        let key: String = k.extract()?;
        let f = || -> PyResult<f64> { v.extract() };
        match key.as_str() {
            "seed" => o.seed = v.extract()?,
            "max_batch" => o.max_batch = v.extract()?,
            "count" => o.samples = v.extract()?,
            "strict" => o.strict = v.extract()?,
            "batch_atol" => o.batch_tolerance.atol = f()?,
            "batch_rtol" => o.batch_tolerance.rtol = f()?,
            "parity_atol" => o.reference_tolerance.atol = f()?,
            "parity_rtol" => o.reference_tolerance.rtol = f()?,
            "range_tolerance" => o.range_tolerance = f()?,
            "max_saturated" => o.max_saturated = f()?,
            "min_diversity" => o.min_diversity = f()?,
            "max_duplicates" => o.max_duplicates = f()?,
            "dead_ratio" => o.dead_ratio = f()?,
            "min_psnr" => o.min_psnr = f()?,
            "min_ssim" => o.min_ssim = f()?,
            other => return Err(argument_error(format!("unknown check option `{other}`"))),
        }
    }
    Ok(o)
}
