//! From float outputs to 8-bit pictures: one rule, then PNG files, contact sheets and GIFs.
//!
//! # The rule
//! For a model range `[lo, hi]`, a value `x` becomes
//! `floor(clamp((x - lo) / (hi - lo), 0, 1) * 255 + 0.5)`: map to [0, 1], clamp, scale, and
//! round half up. NaN becomes 0 and is counted in [`PixelStats::nan`]; values outside the range
//! are clamped and counted. Gray output is replicated into RGB; RGB becomes gray by the
//! ITU-R BT.601 luma weights (0.299, 0.587, 0.114) applied to the mapped values; a missing alpha
//! channel is opaque (255).

use crate::error::{Error, Result};
use crate::generate::Images;
use crate::signature::ValueRange;
use image::ImageEncoder;
use std::path::Path;

/// An 8-bit pixel format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum PixelFormat {
    /// One byte per pixel.
    Gray8,
    /// Three bytes per pixel: red, green, blue.
    Rgb8,
    /// Four bytes per pixel: red, green, blue, alpha.
    Rgba8,
}

impl PixelFormat {
    /// Bytes per pixel.
    pub fn bytes_per_pixel(self) -> usize {
        match self {
            PixelFormat::Gray8 => 1,
            PixelFormat::Rgb8 => 3,
            PixelFormat::Rgba8 => 4,
        }
    }

    /// The format that keeps every channel of an output with `channels` channels.
    pub fn natural(channels: usize) -> PixelFormat {
        match channels {
            1 => PixelFormat::Gray8,
            4 => PixelFormat::Rgba8,
            _ => PixelFormat::Rgb8,
        }
    }

    fn color_type(self) -> image::ExtendedColorType {
        match self {
            PixelFormat::Gray8 => image::ExtendedColorType::L8,
            PixelFormat::Rgb8 => image::ExtendedColorType::Rgb8,
            PixelFormat::Rgba8 => image::ExtendedColorType::Rgba8,
        }
    }
}

/// An 8-bit picture, rows top to bottom, interleaved channels.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Pixels {
    /// Width in pixels.
    pub width: usize,
    /// Height in pixels.
    pub height: usize,
    /// Pixel format.
    pub format: PixelFormat,
    /// `width * height * bytes_per_pixel` bytes.
    pub data: Vec<u8>,
}

/// What the conversion had to correct.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, serde::Serialize)]
pub struct PixelStats {
    /// NaN values (written as 0).
    pub nan: usize,
    /// Values below the range's low end (clamped).
    pub below: usize,
    /// Values above the range's high end (clamped).
    pub above: usize,
}

impl PixelStats {
    fn add(&mut self, o: PixelStats) {
        self.nan += o.nan;
        self.below += o.below;
        self.above += o.above;
    }
}

/// Maps one value to [0, 1] by the rule (NaN to 0), counting corrections.
fn unit(x: f32, range: ValueRange, stats: &mut PixelStats) -> f32 {
    if x.is_nan() {
        stats.nan += 1;
        return 0.0;
    }
    let u = (x - range.lo) / (range.hi - range.lo);
    if u < 0.0 {
        stats.below += 1;
        0.0
    } else if u > 1.0 {
        stats.above += 1;
        1.0
    } else {
        u
    }
}

/// Scales a value in [0, 1] to a byte, rounding half up.
fn byte(u: f32) -> u8 {
    (u * 255.0 + 0.5).floor().clamp(0.0, 255.0) as u8
}

/// Converts one float value in `range` to a byte by the module's rule.
pub fn to_byte(x: f32, range: ValueRange) -> u8 {
    byte(unit(x, range, &mut PixelStats::default()))
}

/// Image `i` of `images` as 8-bit pixels.
///
/// # Errors
/// [`Error::InvalidOption`] when `i` is out of range.
pub fn to_pixels(images: &Images, i: usize, format: PixelFormat) -> Result<(Pixels, PixelStats)> {
    if i >= images.count {
        return Err(Error::invalid("image index", i, format!("below the image count {}", images.count)));
    }
    let (w, h, c) = (images.width, images.height, images.channels);
    let mut stats = PixelStats::default();
    let mut data = Vec::with_capacity(w * h * format.bytes_per_pixel());
    let range = images.range;
    for y in 0..h {
        for x in 0..w {
            let mut v = [0f32; 4];
            for (ch, slot) in v.iter_mut().enumerate().take(c) {
                *slot = unit(images.at(i, ch, y, x), range, &mut stats);
            }
            let (r, g, b, a) = match c {
                1 => (v[0], v[0], v[0], 1.0),
                3 => (v[0], v[1], v[2], 1.0),
                _ => (v[0], v[1], v[2], v[3]),
            };
            match format {
                PixelFormat::Gray8 => {
                    let l = if c == 1 { v[0] } else { 0.299 * r + 0.587 * g + 0.114 * b };
                    data.push(byte(l));
                }
                PixelFormat::Rgb8 => data.extend_from_slice(&[byte(r), byte(g), byte(b)]),
                PixelFormat::Rgba8 => data.extend_from_slice(&[byte(r), byte(g), byte(b), byte(a)]),
            }
        }
    }
    Ok((Pixels { width: w, height: h, format, data }, stats))
}

/// All images of `images` as 8-bit pixels, with the corrections summed.
///
/// # Errors
/// None in practice; kept fallible for symmetry with [`to_pixels`].
pub fn all_pixels(images: &Images, format: PixelFormat) -> Result<(Vec<Pixels>, PixelStats)> {
    let mut total = PixelStats::default();
    let mut out = Vec::with_capacity(images.count);
    for i in 0..images.count {
        let (p, s) = to_pixels(images, i, format)?;
        total.add(s);
        out.push(p);
    }
    Ok((out, total))
}

/// The largest side, in pixels, of a picture genloom encodes (contact sheets and scaled
/// pictures included).
pub const MAX_SIDE: usize = 16384;

/// Every image as packed 8-bit RGBA, one after the other: `count * height * width * 4` bytes,
/// rows top to bottom, the layout of a canvas `ImageData` and of the C ABI's RGBA output. The
/// conversion is [`to_pixels`]'s one rule, with alpha 255 unless the model makes it.
///
/// # Errors
/// As [`to_pixels`].
pub fn rgba8(images: &Images) -> Result<Vec<u8>> {
    let mut out = Vec::with_capacity(images.count * images.width * images.height * 4);
    for i in 0..images.count {
        out.extend_from_slice(&to_pixels(images, i, PixelFormat::Rgba8)?.0.data);
    }
    Ok(out)
}

/// A PNG of the images: one image alone (scaled by `layout.scale`), or a contact sheet of
/// several ([`grid`]), in the format that keeps every channel of the model's output, with the
/// provenance chunks when given.
///
/// # Errors
/// [`Error::InvalidOption`] for no images, a scale outside 1 to 64, or a picture over
/// [`MAX_SIDE`] pixels a side; as [`grid`] and [`Pixels::to_png`].
pub fn images_png(images: &Images, layout: &GridOptions, provenance: Option<&Provenance>) -> Result<Vec<u8>> {
    if images.count == 0 {
        return Err(Error::invalid("images", 0, "at least one image"));
    }
    if layout.scale == 0 || layout.scale > 64 {
        return Err(Error::invalid("scale", layout.scale, "1 to 64"));
    }
    let format = PixelFormat::natural(images.channels);
    if images.count == 1 {
        let side = images.width.max(images.height).saturating_mul(layout.scale);
        if side > MAX_SIDE {
            return Err(Error::invalid("picture size", side, format!("at most {MAX_SIDE} pixels a side")));
        }
        let (p, _) = to_pixels(images, 0, format)?;
        return p.upscale(layout.scale).to_png_with(provenance);
    }
    let (tiles, _) = all_pixels(images, format)?;
    grid(&tiles, layout)?.to_png_with(provenance)
}

impl Pixels {
    /// Packed RGBA bytes of a `width x height` picture (a canvas snapshot, say), checked.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] when a side is 0 or over [`MAX_SIDE`], or the buffer is not
    /// `width * height * 4` bytes.
    pub fn from_rgba8(data: Vec<u8>, width: usize, height: usize) -> Result<Pixels> {
        for (name, side) in [("width", width), ("height", height)] {
            if side == 0 || side > MAX_SIDE {
                return Err(Error::invalid(name, side, format!("1 to {MAX_SIDE} pixels")));
            }
        }
        let want = width * height * 4;
        if data.len() != want {
            return Err(Error::invalid(
                "RGBA data",
                format!("{} bytes", data.len()),
                format!("{want} bytes ({width} x {height} pixels x 4)"),
            ));
        }
        Ok(Pixels { width, height, format: PixelFormat::Rgba8, data })
    }

    /// Scales up by an integer factor, nearest neighbour (keeps tiles crisp).
    pub fn upscale(&self, factor: usize) -> Pixels {
        if factor <= 1 {
            return self.clone();
        }
        let bpp = self.format.bytes_per_pixel();
        let (w, h) = (self.width * factor, self.height * factor);
        let mut data = Vec::with_capacity(w * h * bpp);
        for y in 0..h {
            for x in 0..w {
                let at = ((y / factor) * self.width + x / factor) * bpp;
                data.extend_from_slice(&self.data[at..at + bpp]);
            }
        }
        Pixels { width: w, height: h, format: self.format, data }
    }

    /// Converts to another format (gray replicated, alpha added as 255 or dropped).
    pub fn convert(&self, format: PixelFormat) -> Pixels {
        if format == self.format {
            return self.clone();
        }
        let bpp = self.format.bytes_per_pixel();
        let mut data = Vec::with_capacity(self.width * self.height * format.bytes_per_pixel());
        for px in self.data.chunks(bpp) {
            let (r, g, b, a) = match self.format {
                PixelFormat::Gray8 => (px[0], px[0], px[0], 255),
                PixelFormat::Rgb8 => (px[0], px[1], px[2], 255),
                PixelFormat::Rgba8 => (px[0], px[1], px[2], px[3]),
            };
            match format {
                PixelFormat::Gray8 => {
                    let l = 0.299 * f32::from(r) + 0.587 * f32::from(g) + 0.114 * f32::from(b);
                    data.push((l + 0.5).floor().clamp(0.0, 255.0) as u8);
                }
                PixelFormat::Rgb8 => data.extend_from_slice(&[r, g, b]),
                PixelFormat::Rgba8 => data.extend_from_slice(&[r, g, b, a]),
            }
        }
        Pixels { width: self.width, height: self.height, format, data }
    }

    fn check(&self) -> Result<()> {
        let need = self.width * self.height * self.format.bytes_per_pixel();
        if self.width == 0 || self.height == 0 || self.data.len() != need {
            return Err(Error::invalid(
                "pixel buffer",
                format!("{} bytes for {}x{} {:?}", self.data.len(), self.width, self.height, self.format),
                format!("{need} bytes and a non-zero size"),
            ));
        }
        if self.width > u32::MAX as usize || self.height > u32::MAX as usize {
            return Err(Error::invalid(
                "image size",
                format!("{}x{}", self.width, self.height),
                "at most 4294967295 per side",
            ));
        }
        Ok(())
    }

    /// PNG bytes of the picture.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] for a buffer that does not match its size; [`Error::Image`].
    pub fn to_png(&self) -> Result<Vec<u8>> {
        self.check()?;
        let mut out = Vec::new();
        image::codecs::png::PngEncoder::new(&mut out)
            .write_image(&self.data, self.width as u32, self.height as u32, self.format.color_type())
            .map_err(|e| Error::Image { what: "PNG".into(), source: Box::new(e) })?;
        Ok(out)
    }

    /// PNG bytes of the picture with its provenance in text chunks (see [`Provenance`]).
    ///
    /// # Errors
    /// As [`Pixels::to_png`].
    pub fn to_png_with(&self, provenance: Option<&Provenance>) -> Result<Vec<u8>> {
        let png = self.to_png()?;
        Ok(match provenance {
            Some(p) => insert_text_chunks(png, &p.entries()),
            None => png,
        })
    }

    /// Writes a PNG file atomically.
    ///
    /// # Errors
    /// As [`Pixels::to_png`], and [`Error::Io`].
    pub fn write_png(&self, path: &Path) -> Result<()> {
        self.write_png_with(path, None)
    }

    /// Writes a PNG file atomically, with its provenance when given.
    ///
    /// # Errors
    /// As [`Pixels::to_png`], and [`Error::Io`].
    pub fn write_png_with(&self, path: &Path, provenance: Option<&Provenance>) -> Result<()> {
        let bytes = self.to_png_with(provenance)?;
        crate::files::write_atomic(path, &bytes)
    }
}

/// Where a generated picture came from, written into its PNG as international text chunks
/// (`iTXt`, PNG specification 11.3.4.5, UTF-8) so that the file says it is synthetic wherever it
/// goes. The keywords are `Software` and `Source` (predefined by the PNG specification, 11.3.4.2)
/// and `genloom:synthetic`, `genloom:model-sha256`, `genloom:origin` (ours).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Provenance {
    /// The model, as the user named it (a file name, or the built-in model's name).
    pub model: String,
    /// SHA-256 of the model file, hex.
    pub model_sha256: String,
    /// What the picture was drawn from: `"seed 7, index 3"`, `"seed 7, indices 0 to 15"`,
    /// `"latents from z.npy, rows 0 to 3"`, or the source picture for image-to-image models.
    pub origin: String,
}

impl Provenance {
    /// The text entries, keyword and text.
    pub fn entries(&self) -> Vec<(&'static str, String)> {
        vec![
            ("Software", format!("genloom {}", crate::VERSION)),
            (
                "Source",
                format!(
                    "synthetic image drawn by the generator model {} (sha256 {})",
                    self.model, self.model_sha256
                ),
            ),
            ("genloom:synthetic", "true".into()),
            ("genloom:model-sha256", self.model_sha256.clone()),
            ("genloom:origin", self.origin.clone()),
        ]
    }
}

/// CRC-32 as the PNG specification defines it (Annex D: polynomial 0xedb88320, reflected, initial
/// and final XOR 0xffffffff).
fn png_crc(bytes: &[u8]) -> u32 {
    let mut crc = 0xffff_ffffu32;
    for &b in bytes {
        crc ^= u32::from(b);
        for _ in 0..8 {
            crc = if crc & 1 != 0 { 0xedb8_8320 ^ (crc >> 1) } else { crc >> 1 };
        }
    }
    crc ^ 0xffff_ffff
}

/// `png` with one uncompressed `iTXt` chunk per entry inserted before its `IEND` chunk (the last
/// 12 bytes of a PNG the encoder wrote).
fn insert_text_chunks(mut png: Vec<u8>, entries: &[(&str, String)]) -> Vec<u8> {
    let iend = png.split_off(png.len().saturating_sub(12));
    for (keyword, text) in entries {
        // Keyword: 1 to 79 bytes; then compression flag 0, method 0, empty language tag and
        // translated keyword, then UTF-8 text (11.3.4.5).
        let mut data: Vec<u8> = keyword.bytes().take(79).collect();
        data.extend_from_slice(&[0, 0, 0, 0, 0]);
        data.extend_from_slice(text.as_bytes());
        let mut typed = b"iTXt".to_vec();
        typed.extend_from_slice(&data);
        png.extend_from_slice(&(data.len() as u32).to_be_bytes());
        png.extend_from_slice(&typed);
        png.extend_from_slice(&png_crc(&typed).to_be_bytes());
    }
    png.extend_from_slice(&iend);
    png
}

/// How to lay tiles out on a contact sheet.
#[derive(Debug, Clone, PartialEq, Eq)]
#[non_exhaustive]
pub struct GridOptions {
    /// Tiles per row; `None` for a square-ish sheet (`ceil(sqrt(n))`).
    pub columns: Option<usize>,
    /// Pixels between tiles and around the sheet (after scaling). Default 2.
    pub margin: usize,
    /// Nearest-neighbour scale factor for each tile. Default 1.
    pub scale: usize,
    /// Background colour (RGBA). Default dark grey (32, 32, 32, 255).
    pub background: [u8; 4],
}

impl Default for GridOptions {
    fn default() -> Self {
        GridOptions { columns: None, margin: 2, scale: 1, background: [32, 32, 32, 255] }
    }
}

/// A contact sheet of equally sized tiles, in the widest format among them.
///
/// # Errors
/// [`Error::InvalidOption`] for no tiles, tiles of different sizes, zero columns or scale, or a
/// sheet over 16384 pixels a side.
pub fn grid(tiles: &[Pixels], options: &GridOptions) -> Result<Pixels> {
    let first = tiles.first().ok_or_else(|| Error::invalid("tiles", 0, "at least one image"))?;
    if let Some(t) = tiles.iter().find(|t| t.width != first.width || t.height != first.height) {
        return Err(Error::invalid(
            "tile size",
            format!("{}x{}", t.width, t.height),
            format!("every tile {}x{} like the first", first.width, first.height),
        ));
    }
    if options.scale == 0 || options.scale > 64 {
        return Err(Error::invalid("scale", options.scale, "1 to 64"));
    }
    let n = tiles.len();
    let cols = options.columns.unwrap_or_else(|| (n as f64).sqrt().ceil() as usize).max(1).min(n);
    if options.columns == Some(0) {
        return Err(Error::invalid("columns", 0, "at least 1"));
    }
    let rows = n.div_ceil(cols);
    let format = if tiles.iter().any(|t| t.format == PixelFormat::Rgba8) {
        PixelFormat::Rgba8
    } else {
        PixelFormat::Rgb8
    };
    let bpp = format.bytes_per_pixel();
    let (tw, th) = (first.width * options.scale, first.height * options.scale);
    let m = options.margin;
    let w = cols * tw + (cols + 1) * m;
    let h = rows * th + (rows + 1) * m;
    if w > MAX_SIDE || h > MAX_SIDE {
        return Err(Error::invalid(
            "sheet size",
            format!("{w}x{h}"),
            "at most 16384 pixels a side (use fewer tiles or a smaller scale)",
        ));
    }
    let mut data = Vec::with_capacity(w * h * bpp);
    for _ in 0..w * h {
        data.extend_from_slice(&options.background[..bpp]);
    }
    for (k, tile) in tiles.iter().enumerate() {
        let t = tile.convert(format).upscale(options.scale);
        let (r, c) = (k / cols, k % cols);
        let (x0, y0) = (m + c * (tw + m), m + r * (th + m));
        for y in 0..th {
            let dst = ((y0 + y) * w + x0) * bpp;
            let src = y * tw * bpp;
            data[dst..dst + tw * bpp].copy_from_slice(&t.data[src..src + tw * bpp]);
        }
    }
    Ok(Pixels { width: w, height: h, format, data })
}

/// How to write an animated GIF.
#[derive(Debug, Clone, PartialEq, Eq)]
#[non_exhaustive]
pub struct GifOptions {
    /// Time each frame shows, in milliseconds. Default 80.
    pub frame_ms: u32,
    /// Repeat forever (otherwise play once). Default true.
    pub repeat: bool,
    /// Nearest-neighbour scale factor. Default 1.
    pub scale: usize,
}

impl Default for GifOptions {
    fn default() -> Self {
        GifOptions { frame_ms: 80, repeat: true, scale: 1 }
    }
}

/// GIF bytes of an animation (each frame quantised to its own 256-colour palette).
///
/// # Errors
/// [`Error::InvalidOption`] for no frames or frames of different sizes; [`Error::Image`].
pub fn to_gif(frames: &[Pixels], options: &GifOptions) -> Result<Vec<u8>> {
    use image::codecs::gif::{GifEncoder, Repeat};
    let first = frames.first().ok_or_else(|| Error::invalid("frames", 0, "at least one frame"))?;
    if let Some(f) = frames.iter().find(|f| f.width != first.width || f.height != first.height) {
        return Err(Error::invalid(
            "frame size",
            format!("{}x{}", f.width, f.height),
            format!("every frame {}x{} like the first", first.width, first.height),
        ));
    }
    if options.scale == 0 || options.scale > 64 {
        return Err(Error::invalid("scale", options.scale, "1 to 64"));
    }
    let mut out = Vec::new();
    {
        let mut enc = GifEncoder::new_with_speed(&mut out, 10);
        let img_err = |e: image::ImageError| Error::Image { what: "GIF".into(), source: Box::new(e) };
        enc.set_repeat(if options.repeat { Repeat::Infinite } else { Repeat::Finite(0) }).map_err(img_err)?;
        for f in frames {
            let p = f.convert(PixelFormat::Rgba8).upscale(options.scale);
            p.check()?;
            let buf = image::RgbaImage::from_raw(p.width as u32, p.height as u32, p.data)
                .ok_or_else(|| Error::invalid("frame buffer", "short", "width * height * 4 bytes"))?;
            let delay = image::Delay::from_numer_denom_ms(options.frame_ms.max(10), 1);
            enc.encode_frame(image::Frame::from_parts(buf, 0, 0, delay)).map_err(img_err)?;
        }
    }
    Ok(out)
}

/// Writes an animated GIF atomically.
///
/// # Errors
/// As [`to_gif`], and [`Error::Io`].
pub fn write_gif(path: &Path, frames: &[Pixels], options: &GifOptions) -> Result<()> {
    let bytes = to_gif(frames, options)?;
    crate::files::write_atomic(path, &bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tanh_images(count: usize) -> Images {
        let (c, h, w) = (3, 2, 3);
        let data = (0..count * c * h * w).map(|k| (k % 7) as f32 / 3.0 - 1.0).collect();
        Images {
            count,
            channels: c,
            height: h,
            width: w,
            layout: crate::Layout::Nchw,
            range: ValueRange::TANH,
            data,
        }
    }

    #[test]
    fn rgba8_packs_the_one_rule_with_opaque_alpha() {
        let im = tanh_images(2);
        let out = rgba8(&im).unwrap();
        assert_eq!(out.len(), 2 * 2 * 3 * 4);
        for i in 0..2 {
            let (p, _) = to_pixels(&im, i, PixelFormat::Rgba8).unwrap();
            assert_eq!(&out[i * 24..(i + 1) * 24], &p.data[..]);
        }
        assert!(out.chunks(4).all(|px| px[3] == 255));
    }

    #[test]
    fn images_png_of_one_image_and_of_a_sheet() {
        let one = images_png(&tanh_images(1), &GridOptions { scale: 4, ..Default::default() }, None).unwrap();
        assert!(one.starts_with(b"\x89PNG\r\n\x1a\n"));
        // IHDR width and height, big-endian, at bytes 16..24 (PNG specification 11.2.2).
        assert_eq!(&one[16..24], &[0, 0, 0, 12, 0, 0, 0, 8]);
        let layout = GridOptions { columns: Some(4), scale: 1, margin: 1, ..Default::default() };
        let sheet = images_png(&tanh_images(4), &layout, None).unwrap();
        assert_eq!(&sheet[16..24], &[0, 0, 0, 4 * 3 + 5, 0, 0, 0, 2 + 2]);
        let p = Provenance { model: "m".into(), model_sha256: "ab".into(), origin: "seed 1".into() };
        let marked = images_png(&tanh_images(1), &GridOptions::default(), Some(&p)).unwrap();
        assert!(marked.windows(4).any(|w| w == b"iTXt"));
        assert!(!one.windows(4).any(|w| w == b"iTXt"));
    }

    #[test]
    fn images_png_refuses_bad_scales_and_huge_pictures() {
        for scale in [0, 65] {
            let e =
                images_png(&tanh_images(1), &GridOptions { scale, ..Default::default() }, None).unwrap_err();
            assert!(e.to_string().contains("scale"), "{e}");
        }
        let mut big = tanh_images(1);
        big.width = 3000;
        big.height = 1;
        big.data = vec![0.0; 3 * 3000];
        let e = images_png(&big, &GridOptions { scale: 8, ..Default::default() }, None).unwrap_err();
        assert!(e.to_string().contains("at most 16384"), "{e}");
        let mut none = tanh_images(1);
        none.count = 0;
        assert!(images_png(&none, &GridOptions::default(), None).is_err());
    }

    #[test]
    fn from_rgba8_checks_the_buffer_size() {
        assert!(Pixels::from_rgba8(vec![9; 2 * 3 * 4], 2, 3)
            .unwrap()
            .to_png()
            .unwrap()
            .starts_with(b"\x89PNG"));
        let e = Pixels::from_rgba8(vec![9; 23], 2, 3).unwrap_err().to_string();
        assert_eq!(e, "RGBA data is 23 bytes, expected 24 bytes (2 x 3 pixels x 4)");
        assert!(Pixels::from_rgba8(vec![], 0, 3).is_err());
        assert!(Pixels::from_rgba8(vec![0; 4 * 16385], 16385, 1).is_err());
    }

    #[test]
    fn the_rule() {
        let r = ValueRange::TANH;
        assert_eq!(to_byte(-1.0, r), 0);
        assert_eq!(to_byte(1.0, r), 255);
        assert_eq!(to_byte(0.0, r), 128); // 127.5 rounds half up
        assert_eq!(to_byte(-3.0, r), 0);
        assert_eq!(to_byte(f32::NAN, r), 0);
        // Round half up, not to even: 1.5 -> 2 and 2.5 -> 3 levels.
        assert_eq!(to_byte(1.5, ValueRange::BYTE), 2);
        assert_eq!(to_byte(2.5, ValueRange::BYTE), 3);
        assert_eq!(to_byte(127.4, ValueRange::BYTE), 127);
    }

    #[test]
    fn grid_layout() {
        let tile = |v: u8| Pixels { width: 2, height: 2, format: PixelFormat::Rgb8, data: vec![v; 12] };
        let g =
            grid(&[tile(10), tile(20), tile(30)], &GridOptions { margin: 1, ..Default::default() }).unwrap();
        assert_eq!((g.width, g.height), (7, 7));
        assert_eq!(&g.data[0..3], &[32, 32, 32]);
        let at = |x: usize, y: usize| g.data[(y * 7 + x) * 3];
        assert_eq!(at(1, 1), 10);
        assert_eq!(at(4, 1), 20);
        assert_eq!(at(1, 4), 30);
        assert_eq!(at(4, 4), 32);
    }

    #[test]
    fn png_crc_matches_the_specification() {
        // The CRC of an IEND chunk's type, as every PNG ends with it: ae 42 60 82.
        assert_eq!(png_crc(b"IEND"), 0xae42_6082);
        // The CRC-32 check value of the ASCII digits "123456789" (the usual test vector).
        assert_eq!(png_crc(b"123456789"), 0xcbf4_3926);
    }

    #[test]
    fn provenance_chunks_sit_before_iend() {
        let p = Pixels { width: 1, height: 1, format: PixelFormat::Gray8, data: vec![7] };
        let plain = p.to_png().unwrap();
        let prov = Provenance {
            model: "m.onnx".into(),
            model_sha256: "ab".into(),
            origin: "seed 1, index 0".into(),
        };
        let tagged = p.to_png_with(Some(&prov)).unwrap();
        assert_eq!(&tagged[..plain.len() - 12], &plain[..plain.len() - 12]);
        assert_eq!(&tagged[tagged.len() - 12..], &plain[plain.len() - 12..]);
        let text = String::from_utf8_lossy(&tagged);
        assert!(text.contains("iTXtgenloom:synthetic") && text.contains("seed 1, index 0"), "{text}");
    }
}
