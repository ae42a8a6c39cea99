//! The plain-Rust half of the package: options as Rust values and the conversions from generated
//! images to bytes. Nothing here touches JavaScript, so it is unit-tested natively.

use genloom::pixels::{self, GridOptions, PixelFormat, Pixels};
use genloom::{Error, Images, Result};

/// The largest side, in pixels, of a PNG this package writes (the runtime's contact-sheet limit).
pub const MAX_PNG_SIDE: usize = 16384;

/// An argument error in the runtime's words: "`option` is `value`, expected `expected`".
pub fn invalid(option: &str, value: impl std::fmt::Display, expected: impl Into<String>) -> Error {
    Error::InvalidOption { option: option.to_string(), value: value.to_string(), expected: expected.into() }
}

/// How [`png`] lays out the images it is given.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PngOptions {
    /// Tiles per row of a sheet; `None` for a square-ish sheet.
    pub columns: Option<usize>,
    /// Nearest-neighbour scale of each tile, 1 to 64.
    pub scale: usize,
    /// Pixels between and around the tiles of a sheet (ignored for a single image).
    pub margin: usize,
}

impl Default for PngOptions {
    fn default() -> Self {
        PngOptions { columns: None, scale: 1, margin: 2 }
    }
}

/// Every image as RGBA bytes, one after the other: `count * height * width * 4` bytes, rows top
/// to bottom, ready for a canvas `ImageData`. The conversion is the runtime's one rule
/// (map the model's range to [0, 1], clamp, round half up; NaN becomes 0; alpha 255 unless the
/// model makes it).
///
/// # Errors
/// None in practice; kept fallible because the runtime's conversion is.
pub fn rgba(images: &Images) -> Result<Vec<u8>> {
    let mut out = Vec::with_capacity(images.count * images.width * images.height * 4);
    for i in 0..images.count {
        let (p, _) = pixels::to_pixels(images, i, PixelFormat::Rgba8)?;
        out.extend_from_slice(&p.data);
    }
    Ok(out)
}

/// A PNG of the images: one image alone (scaled), or a contact sheet of several. The format is
/// the one that keeps every channel of the model's output (gray, RGB or RGBA).
///
/// # Errors
/// [`Error::InvalidOption`] for no images, a scale outside 1 to 64, zero columns, or a picture
/// over [`MAX_PNG_SIDE`] pixels a side; [`Error::Image`] when encoding fails.
pub fn png(images: &Images, options: &PngOptions) -> Result<Vec<u8>> {
    if images.count == 0 {
        return Err(invalid("images", 0, "at least one image"));
    }
    if options.scale == 0 || options.scale > 64 {
        return Err(invalid("scale", options.scale, "1 to 64"));
    }
    let format = PixelFormat::natural(images.channels);
    if images.count == 1 {
        let side = images.width.max(images.height).saturating_mul(options.scale);
        if side > MAX_PNG_SIDE {
            return Err(invalid("picture size", side, format!("at most {MAX_PNG_SIDE} pixels a side")));
        }
        let (p, _) = pixels::to_pixels(images, 0, format)?;
        return p.upscale(options.scale).to_png();
    }
    let (tiles, _) = pixels::all_pixels(images, format)?;
    let mut grid = GridOptions::default();
    grid.columns = options.columns;
    grid.scale = options.scale;
    grid.margin = options.margin.min(256);
    pixels::grid(&tiles, &grid)?.to_png()
}

/// A PNG of an RGBA buffer of `width x height` pixels (a canvas snapshot, say).
///
/// # Errors
/// [`Error::InvalidOption`] when the buffer is not `width * height * 4` bytes or a side is 0 or
/// over [`MAX_PNG_SIDE`]; [`Error::Image`] when encoding fails.
pub fn png_of_rgba(data: Vec<u8>, width: usize, height: usize) -> Result<Vec<u8>> {
    for (name, side) in [("width", width), ("height", height)] {
        if side == 0 || side > MAX_PNG_SIDE {
            return Err(invalid(name, side, format!("1 to {MAX_PNG_SIDE} pixels")));
        }
    }
    let want = width * height * 4;
    if data.len() != want {
        return Err(invalid(
            "RGBA data",
            format!("{} bytes", data.len()),
            format!("{want} bytes ({width} x {height} pixels x 4)"),
        ));
    }
    Pixels { width, height, format: PixelFormat::Rgba8, data }.to_png()
}

/// Checks a count given by JavaScript (a double) and returns it as an index type.
///
/// # Errors
/// [`Error::InvalidOption`] unless `value` is a whole number in `min..=max`.
pub fn whole(option: &str, value: f64, min: u64, max: u64) -> Result<u64> {
    if value.is_finite() && value.fract() == 0.0 && value >= min as f64 && value <= max as f64 {
        Ok(value as u64)
    } else {
        Err(invalid(option, value, format!("a whole number from {min} to {max}")))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use genloom::{Layout, ValueRange};

    fn images(count: usize) -> Images {
        let (c, h, w) = (3, 2, 3);
        let data = (0..count * c * h * w).map(|k| (k % 7) as f32 / 3.0 - 1.0).collect();
        Images {
            count,
            channels: c,
            height: h,
            width: w,
            layout: Layout::Nchw,
            range: ValueRange::TANH,
            data,
        }
    }

    #[test]
    fn rgba_is_the_runtime_rule_with_opaque_alpha() {
        let im = images(2);
        let out = rgba(&im).unwrap();
        assert_eq!(out.len(), 2 * 2 * 3 * 4);
        for i in 0..2 {
            let (p, _) = pixels::to_pixels(&im, i, PixelFormat::Rgba8).unwrap();
            assert_eq!(&out[i * 24..(i + 1) * 24], &p.data[..]);
        }
        assert!(out.chunks(4).all(|px| px[3] == 255));
    }

    #[test]
    fn png_of_one_image_and_of_a_sheet() {
        let one = png(&images(1), &PngOptions { scale: 4, ..Default::default() }).unwrap();
        assert!(one.starts_with(b"\x89PNG\r\n\x1a\n"));
        // IHDR width and height, big-endian, at bytes 16..24.
        assert_eq!(&one[16..24], &[0, 0, 0, 12, 0, 0, 0, 8]);
        let sheet = png(&images(4), &PngOptions { columns: Some(4), scale: 1, margin: 1 }).unwrap();
        assert_eq!(&sheet[16..24], &[0, 0, 0, 4 * 3 + 5, 0, 0, 0, 2 + 2]);
    }

    #[test]
    fn png_refuses_bad_scales_and_huge_pictures() {
        for scale in [0, 65] {
            let e = png(&images(1), &PngOptions { scale, ..Default::default() }).unwrap_err();
            assert!(e.to_string().contains("scale"), "{e}");
        }
        let mut big = images(1);
        big.width = 3000;
        big.height = 1;
        big.data = vec![0.0; 3 * 3000];
        let e = png(&big, &PngOptions { scale: 8, ..Default::default() }).unwrap_err();
        assert!(e.to_string().contains("at most 16384"), "{e}");
    }

    #[test]
    fn png_of_rgba_checks_the_buffer_size() {
        assert!(png_of_rgba(vec![9; 2 * 3 * 4], 2, 3).unwrap().starts_with(b"\x89PNG"));
        let e = png_of_rgba(vec![9; 23], 2, 3).unwrap_err().to_string();
        assert_eq!(e, "RGBA data is 23 bytes, expected 24 bytes (2 x 3 pixels x 4)");
        assert!(png_of_rgba(vec![], 0, 3).is_err());
    }

    #[test]
    fn whole_numbers_only() {
        assert_eq!(whole("count", 8.0, 1, 10).unwrap(), 8);
        for bad in [0.0, 11.0, 2.5, f64::NAN, f64::INFINITY, -1.0] {
            let e = whole("count", bad, 1, 10).unwrap_err().to_string();
            assert!(e.starts_with("count is ") && e.ends_with("expected a whole number from 1 to 10"), "{e}");
        }
    }
}
