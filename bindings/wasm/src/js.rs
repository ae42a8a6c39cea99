//! JavaScript values in: seeds, latents, labels, model bytes and option objects, each checked and
//! turned into the runtime's types with an error in the runtime's words when it does not fit.

use crate::render::invalid;
use genloom::Result;
use js_sys::{
    Array, ArrayBuffer, BigInt64Array, Float32Array, Int32Array, Object, Reflect, Uint8Array,
    Uint8ClampedArray,
};
use wasm_bindgen::{JsCast, JsValue};

/// A short description of a JS value for error messages: "the number 2.5", "a string", "a
/// Float64Array".
pub fn describe(v: &JsValue) -> String {
    if v.is_undefined() {
        "undefined".into()
    } else if v.is_null() {
        "null".into()
    } else if v.is_bigint() {
        match js_sys::BigInt::new(v) {
            Ok(b) => format!("the BigInt {}n", String::from(b.to_string(10).unwrap_or_else(|_| "?".into()))),
            Err(_) => "a BigInt".into(),
        }
    } else if let Some(f) = v.as_f64() {
        format!("the number {f}")
    } else if v.is_string() {
        "a string".into()
    } else if let Some(b) = v.as_bool() {
        format!("`{b}`")
    } else if v.is_function() {
        "a function".into()
    } else if v.is_object() {
        let name = String::from(Object::from(v.clone()).constructor().name());
        if name.is_empty() {
            "an object".into()
        } else {
            format!("a {name}")
        }
    } else {
        "a value of an unexpected type".into()
    }
}

/// Bytes from a `Uint8Array`, a `Uint8ClampedArray` or an `ArrayBuffer`.
///
/// # Errors
/// [`genloom::Error::InvalidOption`] for anything else.
pub fn bytes(option: &str, v: &JsValue) -> Result<Vec<u8>> {
    if let Some(a) = v.dyn_ref::<Uint8Array>() {
        Ok(a.to_vec())
    } else if let Some(a) = v.dyn_ref::<Uint8ClampedArray>() {
        Ok(a.to_vec())
    } else if let Some(b) = v.dyn_ref::<ArrayBuffer>() {
        Ok(Uint8Array::new(b).to_vec())
    } else {
        Err(invalid(option, describe(v), "a Uint8Array (or an ArrayBuffer)"))
    }
}

/// A seed: a `BigInt` in 0..2^64 (or a whole `Number` up to 2^53 - 1, which means the same).
///
/// # Errors
/// [`genloom::Error::InvalidOption`] for negative, fractional, too large or non-numeric values.
pub fn seed(option: &str, v: &JsValue) -> Result<u64> {
    let expected = "a BigInt from 0n to 18446744073709551615n (such as 7n)";
    if v.is_bigint() {
        return u64::try_from(v.clone()).map_err(|_| invalid(option, describe(v), expected));
    }
    match v.as_f64() {
        Some(f) if f.fract() == 0.0 && (0.0..=9_007_199_254_740_991.0).contains(&f) => Ok(f as u64),
        _ => Err(invalid(option, describe(v), expected)),
    }
}

/// A number (a JS `Number`).
///
/// # Errors
/// [`genloom::Error::InvalidOption`] when `v` is not a number.
pub fn number(option: &str, v: &JsValue) -> Result<f64> {
    v.as_f64().ok_or_else(|| invalid(option, describe(v), "a number"))
}

/// A boolean.
///
/// # Errors
/// [`genloom::Error::InvalidOption`] when `v` is not `true` or `false`.
pub fn boolean(option: &str, v: &JsValue) -> Result<bool> {
    v.as_bool().ok_or_else(|| invalid(option, describe(v), "`true` or `false`"))
}

/// A string.
///
/// # Errors
/// [`genloom::Error::InvalidOption`] when `v` is not a string.
pub fn string(option: &str, v: &JsValue) -> Result<String> {
    v.as_string().ok_or_else(|| invalid(option, describe(v), "a string"))
}

/// Latent values from a `Float32Array` or an array of numbers.
///
/// # Errors
/// [`genloom::Error::InvalidOption`] for anything else.
pub fn floats(option: &str, v: &JsValue) -> Result<Vec<f32>> {
    if let Some(a) = v.dyn_ref::<Float32Array>() {
        return Ok(a.to_vec());
    }
    let expected = "a Float32Array (or an array of numbers)";
    if let Some(a) = v.dyn_ref::<Array>() {
        let mut out = Vec::with_capacity(a.length() as usize);
        for (i, x) in a.iter().enumerate() {
            let f = x.as_f64().ok_or_else(|| invalid(&format!("{option}[{i}]"), describe(&x), "a number"))?;
            out.push(f as f32);
        }
        return Ok(out);
    }
    Err(invalid(option, describe(v), expected))
}

/// Class labels: `undefined`/`null` (none), a `BigInt64Array`, an `Int32Array`, or an array of
/// whole numbers or BigInts.
///
/// # Errors
/// [`genloom::Error::InvalidOption`] for anything else.
pub fn labels(v: &JsValue) -> Result<Option<Vec<i64>>> {
    if v.is_undefined() || v.is_null() {
        return Ok(None);
    }
    if let Some(a) = v.dyn_ref::<BigInt64Array>() {
        return Ok(Some(a.to_vec()));
    }
    if let Some(a) = v.dyn_ref::<Int32Array>() {
        return Ok(Some(a.to_vec().into_iter().map(i64::from).collect()));
    }
    if let Some(a) = v.dyn_ref::<Array>() {
        let mut out = Vec::with_capacity(a.length() as usize);
        for (i, x) in a.iter().enumerate() {
            let label = if x.is_bigint() {
                i64::try_from(x.clone()).ok()
            } else {
                x.as_f64()
                    .filter(|f| f.fract() == 0.0 && f.abs() <= 9_007_199_254_740_991.0)
                    .map(|f| f as i64)
            };
            out.push(label.ok_or_else(|| invalid(&format!("labels[{i}]"), describe(&x), "a whole number"))?);
        }
        return Ok(Some(out));
    }
    Err(invalid(
        "labels",
        describe(v),
        "a BigInt64Array, an Int32Array or an array of class numbers (or nothing for an unconditional model)",
    ))
}

/// The fields of an options object, checked against the names it may have. `undefined` and
/// `null` are an empty object; a field set to `undefined` or `null` counts as absent.
pub struct Fields {
    obj: Option<Object>,
}

impl Fields {
    /// Reads `v` as the options object of `what`, refusing names outside `known` (so that a
    /// misspelt option is an error, not silently ignored).
    ///
    /// # Errors
    /// [`genloom::Error::InvalidOption`] when `v` is not an object or has an unknown field.
    pub fn new(what: &str, v: &JsValue, known: &[&str]) -> Result<Fields> {
        if v.is_undefined() || v.is_null() {
            return Ok(Fields { obj: None });
        }
        if !v.is_object() || v.is_function() || Array::is_array(v) {
            return Err(invalid(what, describe(v), "an object such as { ... }"));
        }
        let obj = Object::from(v.clone());
        for key in Object::keys(&obj).iter() {
            let key = key.as_string().unwrap_or_default();
            if !known.contains(&key.as_str()) {
                return Err(invalid(
                    &format!("{what} field `{key}`"),
                    "unknown",
                    format!("one of {}", known.join(", ")),
                ));
            }
        }
        Ok(Fields { obj: Some(obj) })
    }

    /// The value of field `name`, or `None` when absent, `undefined` or `null`.
    ///
    /// # Errors
    /// [`genloom::Error::InvalidOption`] when reading the field throws (a getter that fails).
    pub fn get(&self, name: &str) -> Result<Option<JsValue>> {
        let Some(obj) = &self.obj else { return Ok(None) };
        let v = Reflect::get(obj, &JsValue::from_str(name))
            .map_err(|e| invalid(name, describe(&e), "a readable field"))?;
        Ok(if v.is_undefined() || v.is_null() { None } else { Some(v) })
    }
}
