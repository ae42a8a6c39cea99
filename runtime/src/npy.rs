//! NPY files (NumPy's array format, format specification version 1.0) for latents and labels.
//!
//! Reading accepts format versions 1.0, 2.0 and 3.0, C order, and the element types
//! `f4 f8 i8 i4 i2 i1 u1` in either byte order. Fortran-ordered arrays, object arrays (pickles)
//! and other types are refused with an error that says how to re-save the array. Writing always
//! produces version 1.0, little-endian, C order, with the header padded to a multiple of 64 bytes
//! as NumPy does.

use crate::error::{Error, Result};
use crate::latent::Latents;
use std::path::Path;

const MAGIC: &[u8; 6] = b"\x93NUMPY";

/// Values of an NPY array, converted to native byte order.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum NpyData {
    /// `<f4`
    F32(Vec<f32>),
    /// `<f8`
    F64(Vec<f64>),
    /// `<i8`
    I64(Vec<i64>),
    /// `<i4`, `<i2`, `|i1` (widened)
    I32(Vec<i32>),
    /// `|u1`
    U8(Vec<u8>),
}

impl NpyData {
    fn len(&self) -> usize {
        match self {
            NpyData::F32(v) => v.len(),
            NpyData::F64(v) => v.len(),
            NpyData::I64(v) => v.len(),
            NpyData::I32(v) => v.len(),
            NpyData::U8(v) => v.len(),
        }
    }

    /// The NumPy type name, for messages.
    pub fn dtype_name(&self) -> &'static str {
        match self {
            NpyData::F32(_) => "float32",
            NpyData::F64(_) => "float64",
            NpyData::I64(_) => "int64",
            NpyData::I32(_) => "int32",
            NpyData::U8(_) => "uint8",
        }
    }
}

/// An array read from an NPY file.
#[derive(Debug, Clone, PartialEq)]
pub struct NpyArray {
    /// The shape (empty for a 0-d array).
    pub shape: Vec<usize>,
    /// The values in C order.
    pub data: NpyData,
}

fn err(what: &str, reason: impl Into<String>) -> Error {
    Error::Npy { what: what.to_string(), reason: reason.into() }
}

/// Parses NPY bytes. `what` names the source in errors (a path or "latents").
///
/// # Errors
/// [`Error::Npy`] for a bad magic string, an unsupported version, type or order, a malformed
/// header, or data that does not match the shape.
pub fn parse(bytes: &[u8], what: &str) -> Result<NpyArray> {
    if bytes.len() < 10 || &bytes[..6] != MAGIC {
        return Err(err(what, "not an NPY file (it does not start with \\x93NUMPY)"));
    }
    let (major, minor) = (bytes[6], bytes[7]);
    let (header_len, start): (usize, usize) = match major {
        1 => (u16::from_le_bytes([bytes[8], bytes[9]]) as usize, 10),
        2 | 3 => {
            if bytes.len() < 12 {
                return Err(err(what, "the file ends inside its header"));
            }
            (u32::from_le_bytes([bytes[8], bytes[9], bytes[10], bytes[11]]) as usize, 12)
        }
        _ => {
            return Err(err(
                what,
                format!("format version {major}.{minor} is not supported; expected 1.0, 2.0 or 3.0"),
            ))
        }
    };
    let end = start.checked_add(header_len).filter(|&e| e <= bytes.len()).ok_or_else(|| {
        err(what, format!("the header says it is {header_len} bytes but the file ends first"))
    })?;
    let header = std::str::from_utf8(&bytes[start..end]).map_err(|_| err(what, "the header is not text"))?;
    let descr = dict_value(header, "descr").ok_or_else(|| err(what, "the header has no 'descr'"))?;
    let fortran =
        dict_value(header, "fortran_order").ok_or_else(|| err(what, "the header has no 'fortran_order'"))?;
    let shape_text = dict_value(header, "shape").ok_or_else(|| err(what, "the header has no 'shape'"))?;
    if fortran.trim() != "False" {
        return Err(err(
            what,
            "the array is in Fortran order; save it in C order (numpy.ascontiguousarray) and try again",
        ));
    }
    let descr = descr.trim().trim_matches(|c| c == '\'' || c == '"');
    let shape = parse_shape(shape_text)
        .ok_or_else(|| err(what, format!("the shape {shape_text} is not a tuple of sizes")))?;
    let count = shape
        .iter()
        .try_fold(1usize, |a, &d| a.checked_mul(d))
        .ok_or_else(|| err(what, format!("the shape {shape:?} is too large")))?;
    let body = &bytes[end..];
    let (kind, size) = match descr.get(1..) {
        Some(k) if !k.is_empty() => (k, k.get(1..).and_then(|n| n.parse::<usize>().ok()).unwrap_or(0)),
        _ => return Err(err(what, format!("element type `{descr}` is not understood"))),
    };
    let little = match descr.as_bytes()[0] {
        b'<' | b'|' | b'=' => true,
        b'>' => false,
        _ => return Err(err(what, format!("element type `{descr}` has no byte order mark"))),
    };
    if descr.starts_with('|') && kind.starts_with('O') || kind.starts_with('O') {
        return Err(err(what, "the array holds Python objects (a pickle); save a numeric array instead"));
    }
    let expected =
        count.checked_mul(size).ok_or_else(|| err(what, format!("the shape {shape:?} is too large")))?;
    if size == 0 || !matches!(kind, "f4" | "f8" | "i8" | "i4" | "i2" | "i1" | "u1") {
        return Err(err(
            what,
            format!("element type `{descr}` is not supported; expected float32, float64, int64, int32, int16, int8 or uint8"),
        ));
    }
    if body.len() != expected {
        return Err(err(
            what,
            format!(
                "the header's shape {shape:?} of {} needs {expected} bytes of data, the file holds {}",
                kind,
                body.len()
            ),
        ));
    }
    let word = |i: usize| -> &[u8] { &body[i * size..(i + 1) * size] };
    macro_rules! read_as {
        ($t:ty, $n:expr) => {{
            (0..count)
                .map(|i| {
                    let mut b = [0u8; $n];
                    b.copy_from_slice(word(i));
                    if little {
                        <$t>::from_le_bytes(b)
                    } else {
                        <$t>::from_be_bytes(b)
                    }
                })
                .collect::<Vec<$t>>()
        }};
    }
    let data = match kind {
        "f4" => NpyData::F32(read_as!(f32, 4)),
        "f8" => NpyData::F64(read_as!(f64, 8)),
        "i8" => NpyData::I64(read_as!(i64, 8)),
        "i4" => NpyData::I32(read_as!(i32, 4)),
        "i2" => NpyData::I32(read_as!(i16, 2).into_iter().map(i32::from).collect()),
        "i1" => NpyData::I32(body.iter().map(|&b| i32::from(b as i8)).collect()),
        _ => NpyData::U8(body.to_vec()),
    };
    debug_assert_eq!(data.len(), count);
    Ok(NpyArray { shape, data })
}

/// The text of `key`'s value in a Python dict literal (simple values and tuples only).
fn dict_value<'a>(header: &'a str, key: &str) -> Option<&'a str> {
    let at = header.find(&format!("'{key}'")).or_else(|| header.find(&format!("\"{key}\"")))?;
    let rest = &header[at + key.len() + 2..];
    let rest = rest.trim_start().strip_prefix(':')?.trim_start();
    if rest.starts_with('(') {
        let close = rest.find(')')?;
        return Some(&rest[..=close]);
    }
    let stop = rest.find([',', '}']).unwrap_or(rest.len());
    Some(&rest[..stop])
}

fn parse_shape(text: &str) -> Option<Vec<usize>> {
    let inner = text.trim().strip_prefix('(')?.strip_suffix(')')?;
    inner
        .split(',')
        .map(str::trim)
        .filter(|s| !s.is_empty())
        .map(|s| s.trim_end_matches('L').parse::<usize>().ok())
        .collect()
}

fn header(descr: &str, shape: &[usize]) -> Vec<u8> {
    let shape_text = match shape.len() {
        0 => "()".to_string(),
        1 => format!("({},)", shape[0]),
        _ => format!("({})", shape.iter().map(|d| d.to_string()).collect::<Vec<_>>().join(", ")),
    };
    let mut dict = format!("{{'descr': '{descr}', 'fortran_order': False, 'shape': {shape_text}, }}");
    let total = 10 + dict.len() + 1;
    let pad = (64 - total % 64) % 64;
    dict.push_str(&" ".repeat(pad));
    dict.push('\n');
    let mut out = Vec::with_capacity(10 + dict.len());
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&[1, 0]);
    out.extend_from_slice(&(dict.len() as u16).to_le_bytes());
    out.extend_from_slice(dict.as_bytes());
    out
}

/// NPY v1.0 bytes of a float32 array.
pub fn to_bytes_f32(shape: &[usize], values: &[f32]) -> Vec<u8> {
    let mut out = header("<f4", shape);
    for v in values {
        out.extend_from_slice(&v.to_le_bytes());
    }
    out
}

/// NPY v1.0 bytes of a uint8 array (image stacks, for NumPy-side tools).
pub fn to_bytes_u8(shape: &[usize], values: &[u8]) -> Vec<u8> {
    let mut out = header("|u1", shape);
    out.extend_from_slice(values);
    out
}

/// NPY v1.0 bytes of an int64 array.
pub fn to_bytes_i64(shape: &[usize], values: &[i64]) -> Vec<u8> {
    let mut out = header("<i8", shape);
    for v in values {
        out.extend_from_slice(&v.to_le_bytes());
    }
    out
}

fn read_file(path: &Path) -> Result<Vec<u8>> {
    std::fs::read(path).map_err(|e| Error::io("read", path, e))
}

impl NpyArray {
    /// Reads an NPY file.
    ///
    /// # Errors
    /// [`Error::Io`] when it cannot be read, then as [`parse`].
    pub fn read(path: &Path) -> Result<NpyArray> {
        parse(&read_file(path)?, &path.display().to_string())
    }

    /// The values as latents of `dim` components: accepts shapes `(N, dim)`, `(dim,)` and
    /// `(N, dim, 1, 1)`, float32 or float64 (rounded to float32).
    ///
    /// # Errors
    /// [`Error::Npy`] for another shape or an integer type; [`Error::NonFiniteLatent`].
    pub fn into_latents(self, dim: usize, what: &str) -> Result<Latents> {
        let ok_shape = match self.shape.as_slice() {
            [z] => *z == dim,
            [n, z] => *z == dim && *n > 0,
            [n, z, 1, 1] => *z == dim && *n > 0,
            _ => false,
        };
        if !ok_shape {
            return Err(err(
                what,
                format!(
                    "latents have shape {:?}, expected (N, {dim}) for this model's {dim}-value latents",
                    self.shape
                ),
            ));
        }
        let values = match self.data {
            NpyData::F32(v) => v,
            NpyData::F64(v) => v.into_iter().map(|x| x as f32).collect(),
            other => {
                return Err(err(
                    what,
                    format!("latents are {}, expected float32 or float64", other.dtype_name()),
                ))
            }
        };
        Latents::new(dim, values)
    }

    /// The values as class labels: a 1-d integer array of `count` entries.
    ///
    /// # Errors
    /// [`Error::Npy`] for another shape or a float type.
    pub fn into_labels(self, what: &str) -> Result<Vec<i64>> {
        if self.shape.len() != 1 {
            return Err(err(what, format!("labels have shape {:?}, expected (N,) of integers", self.shape)));
        }
        match self.data {
            NpyData::I64(v) => Ok(v),
            NpyData::I32(v) => Ok(v.into_iter().map(i64::from).collect()),
            NpyData::U8(v) => Ok(v.into_iter().map(i64::from).collect()),
            other => {
                Err(err(what, format!("labels are {}, expected int64 (or int32, uint8)", other.dtype_name())))
            }
        }
    }
}

/// Reads latents of `dim` components from an NPY file.
///
/// # Errors
/// As [`NpyArray::read`] and [`NpyArray::into_latents`].
pub fn read_latents(path: &Path, dim: usize) -> Result<Latents> {
    NpyArray::read(path)?.into_latents(dim, &path.display().to_string())
}

/// Reads class labels from an NPY file.
///
/// # Errors
/// As [`NpyArray::read`] and [`NpyArray::into_labels`].
pub fn read_labels(path: &Path) -> Result<Vec<i64>> {
    NpyArray::read(path)?.into_labels(&path.display().to_string())
}

/// Writes latents as a float32 `(N, dim)` NPY file, atomically.
///
/// # Errors
/// [`Error::Io`].
pub fn write_latents(path: &Path, latents: &Latents) -> Result<()> {
    crate::files::write_atomic(path, &to_bytes_f32(&[latents.count(), latents.dim()], latents.as_slice()))
}

/// Writes labels as an int64 `(N,)` NPY file, atomically.
///
/// # Errors
/// [`Error::Io`].
pub fn write_labels(path: &Path, labels: &[i64]) -> Result<()> {
    crate::files::write_atomic(path, &to_bytes_i64(&[labels.len()], labels))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_alignment() {
        let b = to_bytes_f32(&[2, 3], &[1.0, 2.0, 3.0, 4.0, 5.0, 6.5]);
        let header_len = u16::from_le_bytes([b[8], b[9]]) as usize;
        assert_eq!((10 + header_len) % 64, 0);
        let a = parse(&b, "t").unwrap();
        assert_eq!(a.shape, vec![2, 3]);
        assert_eq!(a.data, NpyData::F32(vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.5]));
        let l = parse(&to_bytes_i64(&[3], &[-1, 0, 7]), "l").unwrap().into_labels("l").unwrap();
        assert_eq!(l, vec![-1, 0, 7]);
    }

    #[test]
    fn errors_name_the_problem() {
        let b = to_bytes_f32(&[2, 3], &[0.0; 6]);
        let e = parse(&b[..b.len() - 4], "x.npy").unwrap_err().to_string();
        assert!(e.contains("needs 24 bytes of data, the file holds 20"), "{e}");
        // A multi-byte character in the type (found by fuzzing) is an error, not a panic.
        let mut odd = b"\x93NUMPY\x01\x00".to_vec();
        let h = "{'descr': '<\u{e9}4', 'fortran_order': False, 'shape': (1,), }\n";
        odd.extend_from_slice(&(h.len() as u16).to_le_bytes());
        odd.extend_from_slice(h.as_bytes());
        assert!(parse(&odd, "x.npy").is_err());
        let e = parse(b"hello world", "x.npy").unwrap_err().to_string();
        assert!(e.contains("not an NPY file"), "{e}");
        let e = parse(&b, "x.npy").unwrap().into_latents(4, "x.npy").unwrap_err().to_string();
        assert!(e.contains("shape [2, 3], expected (N, 4)"), "{e}");
    }
}
