//! PNG encoding of RGBA8 pixels.

use crate::boundary::{arg_slice, boundary, Failure, OutBuf};
use crate::status::genloom_status;
use genloom::pixels::Pixels;

/// Encodes `width x height` RGBA8 pixels (rows top to bottom, 4 bytes per pixel, as
/// `genloom_generator_generate_rgba8` writes them; `rgba_len` must be `width * height * 4`) as
/// PNG bytes into `png`.
///
/// The PNG's size is only known once encoded, so this call encodes first and then checks the
/// buffer: a short one gives `GENLOOM_STATUS_BUFFER_TOO_SMALL` with the exact size in `*needed`
/// (the encoding is deterministic, so a second call with that size succeeds). A buffer of
/// `width * height * 4 + 1024` bytes is always enough for images up to 4096 x 4096. On success
/// `*needed` (if not NULL) receives the bytes written.
///
/// # Safety
/// `rgba` is valid for reads of `rgba_len` bytes; `png` is valid for writes of `png_len` bytes
/// (or NULL with `png_len` 0) and does not overlap `rgba`; `needed` is NULL or valid for a write
/// of one `size_t`.
#[no_mangle]
pub unsafe extern "C" fn genloom_pixels_encode_png(
    rgba: *const u8,
    rgba_len: usize,
    width: usize,
    height: usize,
    png: *mut u8,
    png_len: usize,
    needed: *mut usize,
) -> genloom_status {
    boundary(|| {
        // SAFETY: valid for `rgba_len` reads by this function's contract.
        let rgba = unsafe { arg_slice(rgba, rgba_len, "rgba") }?;
        let out = OutBuf::new(png, png_len, needed, "png", "bytes")?;
        let expected = width.checked_mul(height).and_then(|n| n.checked_mul(4));
        if width == 0 || height == 0 || expected != Some(rgba.len()) {
            return Err(Failure::invalid(format!(
                "`rgba_len` is {} for a {width}x{height} image, expected width * height * 4 = {} bytes \
                 and a non-zero size",
                rgba.len(),
                expected.map_or_else(|| "(overflow)".to_string(), |n| n.to_string())
            )));
        }
        let bytes = Pixels::from_rgba8(rgba.to_vec(), width, height)?.to_png()?;
        // SAFETY: the buffer and `needed` are writable by this function's contract; `bytes` is ours.
        unsafe { out.fill(&bytes) }
    })
}
