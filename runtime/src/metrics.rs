//! Image comparison and diversity measures.
//!
//! - PSNR: `10 log10(peak^2 / MSE)`, infinite for identical images (as
//!   `skimage.metrics.peak_signal_noise_ratio`).
//! - SSIM: Wang, Bovik, Sheikh and Simoncelli (2004), with the paper's settings: an 11x11
//!   Gaussian window of sigma 1.5, `K1 = 0.01`, `K2 = 0.03`, population (not sample) covariances.
//!   The window is applied as a separable filter with mirrored edges, and the mean is taken over
//!   the pixels at least 5 from the border, channel by channel, then over channels: the same
//!   choices as `skimage.metrics.structural_similarity(gaussian_weights=True, sigma=1.5,
//!   use_sample_covariance=False)`, which the tests compare against.

use crate::error::{Error, Result};
use crate::pixels::Pixels;

/// Differences between two sets of float outputs and their 8-bit pictures.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Fidelity {
    /// Images compared.
    pub images: usize,
    /// Largest absolute difference of the float outputs.
    pub max_abs: f32,
    /// Mean absolute difference of the float outputs.
    pub mean_abs: f32,
    /// PSNR of all 8-bit pixels together, in dB (peak 255); infinite when identical.
    pub psnr_db: f64,
    /// Lowest PSNR of one image, in dB.
    pub min_psnr_db: f64,
    /// Mean SSIM over images (8-bit, data range 255).
    pub ssim: f64,
    /// Lowest SSIM of one image.
    pub min_ssim: f64,
    /// Share of 8-bit channel values that differ by more than 2 levels.
    pub off_by_more_than_2: f64,
}

/// Mean squared error of two equally sized byte buffers.
fn mse(a: &[u8], b: &[u8]) -> f64 {
    let s: f64 = a.iter().zip(b).map(|(&x, &y)| (f64::from(x) - f64::from(y)).powi(2)).sum();
    s / a.len().max(1) as f64
}

/// PSNR in dB of two 8-bit pictures (peak 255).
///
/// # Errors
/// [`Error::InvalidOption`] when sizes or formats differ.
pub fn psnr(a: &Pixels, b: &Pixels) -> Result<f64> {
    same_shape(a, b)?;
    Ok(psnr_of_mse(mse(&a.data, &b.data)))
}

fn psnr_of_mse(m: f64) -> f64 {
    if m == 0.0 {
        f64::INFINITY
    } else {
        10.0 * (255.0f64 * 255.0 / m).log10()
    }
}

fn same_shape(a: &Pixels, b: &Pixels) -> Result<()> {
    if a.width != b.width || a.height != b.height || a.format != b.format || a.data.len() != b.data.len() {
        return Err(Error::invalid(
            "pictures",
            format!("{}x{} {:?} and {}x{} {:?}", a.width, a.height, a.format, b.width, b.height, b.format),
            "two pictures of the same size and format",
        ));
    }
    Ok(())
}

const RADIUS: usize = 5;

fn gaussian_kernel() -> [f64; 2 * RADIUS + 1] {
    let mut k = [0f64; 2 * RADIUS + 1];
    let sigma = 1.5f64;
    for (i, w) in k.iter_mut().enumerate() {
        let x = i as f64 - RADIUS as f64;
        *w = (-x * x / (2.0 * sigma * sigma)).exp();
    }
    let s: f64 = k.iter().sum();
    for w in k.iter_mut() {
        *w /= s;
    }
    k
}

/// Mirrors an index into 0..n (`d c b a | a b c d | d c b a`, SciPy's `reflect`).
fn reflect(i: isize, n: usize) -> usize {
    let n = n as isize;
    let period = 2 * n;
    let mut j = i.rem_euclid(period);
    if j >= n {
        j = period - 1 - j;
    }
    j as usize
}

fn filter(img: &[f64], w: usize, h: usize, k: &[f64]) -> Vec<f64> {
    let r = RADIUS as isize;
    let mut tmp = vec![0f64; w * h];
    for y in 0..h {
        for x in 0..w {
            let mut s = 0.0;
            for (t, kw) in k.iter().enumerate() {
                s += kw * img[y * w + reflect(x as isize + t as isize - r, w)];
            }
            tmp[y * w + x] = s;
        }
    }
    let mut out = vec![0f64; w * h];
    for y in 0..h {
        for x in 0..w {
            let mut s = 0.0;
            for (t, kw) in k.iter().enumerate() {
                s += kw * tmp[reflect(y as isize + t as isize - r, h) * w + x];
            }
            out[y * w + x] = s;
        }
    }
    out
}

/// Mean SSIM of one channel plane pair (values in 0..=255).
fn ssim_plane(a: &[f64], b: &[f64], w: usize, h: usize) -> f64 {
    let k = gaussian_kernel();
    let (c1, c2) = ((0.01f64 * 255.0).powi(2), (0.03f64 * 255.0).powi(2));
    let ux = filter(a, w, h, &k);
    let uy = filter(b, w, h, &k);
    let aa: Vec<f64> = a.iter().map(|v| v * v).collect();
    let bb: Vec<f64> = b.iter().map(|v| v * v).collect();
    let ab: Vec<f64> = a.iter().zip(b).map(|(x, y)| x * y).collect();
    let uxx = filter(&aa, w, h, &k);
    let uyy = filter(&bb, w, h, &k);
    let uxy = filter(&ab, w, h, &k);
    let (mut sum, mut n) = (0.0, 0usize);
    for y in RADIUS..h.saturating_sub(RADIUS) {
        for x in RADIUS..w.saturating_sub(RADIUS) {
            let i = y * w + x;
            let vx = uxx[i] - ux[i] * ux[i];
            let vy = uyy[i] - uy[i] * uy[i];
            let vxy = uxy[i] - ux[i] * uy[i];
            let s = ((2.0 * ux[i] * uy[i] + c1) * (2.0 * vxy + c2))
                / ((ux[i] * ux[i] + uy[i] * uy[i] + c1) * (vx + vy + c2));
            sum += s;
            n += 1;
        }
    }
    sum / n.max(1) as f64
}

/// SSIM of two 8-bit pictures: the mean over channels of each channel's mean SSIM.
///
/// # Errors
/// [`Error::InvalidOption`] when sizes or formats differ, or the pictures are smaller than the
/// 11x11 window.
pub fn ssim(a: &Pixels, b: &Pixels) -> Result<f64> {
    same_shape(a, b)?;
    if a.width < 2 * RADIUS + 1 || a.height < 2 * RADIUS + 1 {
        return Err(Error::invalid(
            "picture size for SSIM",
            format!("{}x{}", a.width, a.height),
            "at least 11x11 (the Gaussian window)",
        ));
    }
    let c = a.format.bytes_per_pixel();
    let (w, h) = (a.width, a.height);
    let mut total = 0.0;
    for ch in 0..c {
        let pa: Vec<f64> = a.data.iter().skip(ch).step_by(c).map(|&v| f64::from(v)).collect();
        let pb: Vec<f64> = b.data.iter().skip(ch).step_by(c).map(|&v| f64::from(v)).collect();
        total += ssim_plane(&pa, &pb, w, h);
    }
    Ok(total / c as f64)
}

/// Compares float outputs `a` (the reference) and `b` image by image.
///
/// # Errors
/// [`Error::InvalidOption`] when the two sets differ in shape.
pub fn fidelity(a: &crate::Images, b: &crate::Images) -> Result<Fidelity> {
    if a.count != b.count || a.data.len() != b.data.len() || a.values_per_image() != b.values_per_image() {
        return Err(Error::invalid(
            "image sets",
            format!(
                "{} and {} images of {} and {} values",
                a.count,
                b.count,
                a.values_per_image(),
                b.values_per_image()
            ),
            "two sets of the same shape",
        ));
    }
    let (mut max_abs, mut sum_abs) = (0f32, 0f64);
    for (x, y) in a.data.iter().zip(&b.data) {
        let d = (x - y).abs();
        max_abs = if d.is_nan() { f32::INFINITY } else { max_abs.max(d) };
        sum_abs += f64::from(d);
    }
    let format = crate::pixels::PixelFormat::natural(a.channels);
    let (pa, _) = crate::pixels::all_pixels(a, format)?;
    let (pb, _) = crate::pixels::all_pixels(b, format)?;
    let (mut sq, mut n, mut off) = (0f64, 0usize, 0usize);
    let (mut min_psnr, mut ssim_sum, mut min_ssim) = (f64::INFINITY, 0f64, f64::INFINITY);
    let window_fits = a.width > 2 * RADIUS && a.height > 2 * RADIUS;
    for (x, y) in pa.iter().zip(&pb) {
        let m = mse(&x.data, &y.data);
        sq += m * x.data.len() as f64;
        n += x.data.len();
        off +=
            x.data.iter().zip(&y.data).filter(|(p, q)| (i16::from(**p) - i16::from(**q)).abs() > 2).count();
        min_psnr = min_psnr.min(psnr_of_mse(m));
        let s = if window_fits { ssim(x, y)? } else { f64::NAN };
        ssim_sum += s;
        min_ssim = min_ssim.min(s);
    }
    Ok(Fidelity {
        images: a.count,
        max_abs,
        mean_abs: (sum_abs / a.data.len().max(1) as f64) as f32,
        psnr_db: psnr_of_mse(sq / n.max(1) as f64),
        min_psnr_db: min_psnr,
        ssim: ssim_sum / a.count.max(1) as f64,
        min_ssim,
        off_by_more_than_2: off as f64 / n.max(1) as f64,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pixels::PixelFormat;

    #[test]
    fn identical_pictures() {
        let p = Pixels {
            width: 12,
            height: 12,
            format: PixelFormat::Gray8,
            data: (0..144).map(|i| i as u8).collect(),
        };
        assert_eq!(psnr(&p, &p).unwrap(), f64::INFINITY);
        assert!((ssim(&p, &p).unwrap() - 1.0).abs() < 1e-12);
        assert_eq!(reflect(-1, 5), 0);
        assert_eq!(reflect(-2, 5), 1);
        assert_eq!(reflect(5, 5), 4);
        assert_eq!(reflect(6, 5), 3);
    }
}
