//! Latent vectors: seeded sampling, truncation, interpolation, paths and variations.
//!
//! # Sampling, precisely
//! In the default [`RngMode::Portable`] mode, latent row `i` of seed `s` is computed from the
//! Philox4x64-10 blocks `block(counter = [b, i, 0, 0], key = [s, 0])`, `b = 0, 1, 2, ...`
//! (see [`philox4x64_10`]). Consecutive pairs of 64-bit words `(x, y)` give two standard normals
//! by Box-Muller: `u1 = ((x >> 11) + 1) 2^-53`, `u2 = (y >> 11) 2^-53`, `r = sqrt(-2 ln u1)`,
//! `z = (r cos 2 pi u2, r sin 2 pi u2)`, computed in `f64` with `libm` and rounded to `f32`.
//! The uniform prior takes one word per component: `2 (x >> 11) 2^-53 - 1`, in [-1, 1).
//! So row `i` depends only on `(s, i)`: drawing 1 or 1000 latents gives the same row `i`, and
//! the same bits on every target.
//!
//! [`RngMode::NumpyCompatible`] instead reproduces
//! `numpy.random.RandomState(seed).standard_normal((count, dim)).astype(numpy.float32)` (or
//! `.uniform(-1, 1, ...)`) bit for bit: MT19937 with `init_genrand` seeding, NumPy's 53-bit
//! doubles and its legacy Marsaglia polar Gaussian. The uniform doubles are identical to
//! NumPy's; the Gaussian doubles use a correctly rounded `log` where NumPy calls the platform's
//! (glibc's differs in the last bit for about 1 value in 1000), which the `f32` cast absorbs.
//! It is one sequential stream, so there row `i` depends on every row before it; `first_index`
//! skips rows by drawing them.
//!
//! # Truncation
//! - Resampling (Brock, Donahue and Simonyan 2019): with [`SampleOptions::truncation`] set to
//!   `c`, every Gaussian component with `|z| > c` is replaced by the next value of the same row's
//!   stream, until `|z| <= c`. The components then follow a standard normal truncated to
//!   `[-c, c]` (variance 0.2911 for `c = 1`, by SciPy's `truncnorm`).
//! - Shrinking (Karras, Laine and Aila 2019): with [`SampleOptions::psi`] set, each latent
//!   becomes `centre + psi (z - centre)`; `psi = 0` gives the centre and `psi = 1` the identity.

mod crlog;
mod interp;
mod rng;

pub use interp::{jitter, lerp, path, slerp, Interpolation, PathOptions};
pub use rng::{philox4x64_10, Mt19937};

use crate::error::{Error, Result};

/// The distribution latents are drawn from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Prior {
    /// The standard normal N(0, 1) per component (the usual GAN prior).
    #[default]
    Gaussian,
    /// Uniform on [-1, 1) per component.
    Uniform,
}

impl std::str::FromStr for Prior {
    type Err = Error;
    fn from_str(s: &str) -> Result<Prior> {
        match s {
            "gaussian" | "normal" => Ok(Prior::Gaussian),
            "uniform" => Ok(Prior::Uniform),
            _ => Err(Error::invalid("prior", format!("`{s}`"), "`gaussian` or `uniform`")),
        }
    }
}

/// Which random generator produces the latents.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum RngMode {
    /// Philox4x64-10, counter-based: latent `i` depends only on `(seed, i)`.
    #[default]
    Portable,
    /// MT19937 with NumPy's legacy transforms, matching `numpy.random.RandomState(seed)`.
    NumpyCompatible,
}

/// How to draw a set of latents.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[non_exhaustive]
pub struct SampleOptions {
    /// The seed. In NumPy-compatible mode it must be below 2^32, as NumPy requires.
    pub seed: u64,
    /// How many latents.
    pub count: usize,
    /// The index of the first latent: rows `first_index .. first_index + count` are drawn.
    /// In NumPy-compatible mode the rows before it are drawn too, so `first_index * dim` may
    /// be at most 10^7 (and the skip at most 4 * 10^7 draws when truncation redraws).
    pub first_index: u64,
    /// The prior.
    pub prior: Prior,
    /// Resampling truncation threshold `c > 0` (Gaussian prior only), or none.
    pub truncation: Option<f32>,
    /// Shrink factor toward [`SampleOptions::centre`], `psi` in [0, 1] (0 = centre), or none.
    pub psi: Option<f32>,
    /// The centre psi shrinks toward; the zero vector (the prior's mean) when `None`.
    pub centre: Option<Vec<f32>>,
    /// The generator.
    pub mode: RngMode,
}

impl Default for SampleOptions {
    fn default() -> Self {
        SampleOptions {
            seed: 0,
            count: 1,
            first_index: 0,
            prior: Prior::Gaussian,
            truncation: None,
            psi: None,
            centre: None,
            mode: RngMode::Portable,
        }
    }
}

impl SampleOptions {
    /// Options for `count` Gaussian latents of `seed`.
    pub fn new(seed: u64, count: usize) -> SampleOptions {
        SampleOptions { seed, count, ..Default::default() }
    }

    /// Checks every option once, against the latent size `dim`.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] naming the option, the value and what it accepts.
    pub fn validate(&self, dim: usize) -> Result<()> {
        if self.count == 0 {
            return Err(Error::invalid("count", 0, "at least 1"));
        }
        if dim == 0 {
            return Err(Error::invalid("latent size", 0, "at least 1"));
        }
        if let Some(c) = self.truncation {
            if !(c.is_finite() && c >= 0.05) {
                return Err(Error::invalid(
                    "truncation",
                    c,
                    "a finite threshold of at least 0.05 (common practice: 0.5 to 2)",
                ));
            }
            if self.prior != Prior::Gaussian {
                return Err(Error::invalid(
                    "truncation",
                    c,
                    "no truncation with the uniform prior (it applies to the Gaussian prior)",
                ));
            }
        }
        if let Some(psi) = self.psi {
            if !(0.0..=1.0).contains(&psi) {
                return Err(Error::invalid("psi", psi, "a value in [0, 1] (0 = centre, 1 = no change)"));
            }
        }
        if let Some(centre) = &self.centre {
            if centre.len() != dim {
                return Err(Error::LatentDim { name: "centre".into(), actual: centre.len(), expected: dim });
            }
            check_finite(centre, dim)?;
        }
        // The NumPy stream is sequential: skipping to `first_index` draws every value before it.
        // 10^7 values take about a quarter of a second natively (and seconds in instrumented
        // fuzz builds); past that the call would stall its caller.
        const MAX_SKIP: u64 = 10_000_000;
        if self.mode == RngMode::NumpyCompatible && self.first_index.saturating_mul(dim as u64) > MAX_SKIP {
            return Err(Error::invalid(
                "first index",
                self.first_index,
                format!("at most {} in NumPy-compatible mode for {dim}-value latents (the stream is drawn in order)", MAX_SKIP / dim as u64),
            ));
        }
        if self.mode == RngMode::NumpyCompatible && self.seed > u64::from(u32::MAX) {
            return Err(Error::invalid(
                "seed",
                self.seed,
                "a seed in 0..=4294967295 in NumPy-compatible mode (NumPy's RandomState limit)",
            ));
        }
        Ok(())
    }
}

/// A set of latent vectors, row-major `count x dim`.
#[derive(Debug, Clone, PartialEq)]
pub struct Latents {
    dim: usize,
    data: Vec<f32>,
}

impl Latents {
    /// Wraps row-major values of `dim` components each.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] when `dim` is 0 or does not divide the length, or the set is
    /// empty; [`Error::NonFiniteLatent`] for NaN or infinity.
    pub fn new(dim: usize, data: Vec<f32>) -> Result<Latents> {
        if dim == 0 {
            return Err(Error::invalid("latent size", 0, "at least 1"));
        }
        if data.is_empty() || !data.len().is_multiple_of(dim) {
            return Err(Error::invalid(
                "latent values",
                format!("{} values", data.len()),
                format!("a non-zero multiple of the latent size {dim}"),
            ));
        }
        check_finite(&data, dim)?;
        Ok(Latents { dim, data })
    }

    /// Draws latents of size `dim` as `options` say.
    ///
    /// # Errors
    /// As [`SampleOptions::validate`].
    pub fn sample(dim: usize, options: &SampleOptions) -> Result<Latents> {
        options.validate(dim)?;
        let mut data = vec![0f32; options.count * dim];
        match options.mode {
            RngMode::Portable => {
                for (r, row) in data.chunks_mut(dim).enumerate() {
                    let index = options.first_index.wrapping_add(r as u64);
                    portable_row(options.seed, index, options.prior, options.truncation, row);
                }
            }
            RngMode::NumpyCompatible => {
                let mut mt = Mt19937::new(options.seed as u32);
                let skip = options.first_index.saturating_mul(dim as u64);
                numpy_skip(&mut mt, skip, options, MAX_SKIP_DRAWS)?;
                for v in data.iter_mut() {
                    *v = numpy_value(&mut mt, options.prior, options.truncation) as f32;
                }
            }
        }
        if let Some(psi) = options.psi {
            let zero;
            let centre = match &options.centre {
                Some(c) => c.as_slice(),
                None => {
                    zero = vec![0f32; dim];
                    &zero
                }
            };
            for row in data.chunks_mut(dim) {
                for (v, c) in row.iter_mut().zip(centre) {
                    *v = c + psi * (*v - c);
                }
            }
        }
        Ok(Latents { dim, data })
    }

    /// Components per latent.
    pub fn dim(&self) -> usize {
        self.dim
    }

    /// Number of latents.
    pub fn count(&self) -> usize {
        self.data.len() / self.dim
    }

    /// All values, row-major.
    pub fn as_slice(&self) -> &[f32] {
        &self.data
    }

    /// Latent `i`.
    ///
    /// # Panics
    /// When `i >= count()`.
    pub fn row(&self, i: usize) -> &[f32] {
        &self.data[i * self.dim..(i + 1) * self.dim]
    }

    /// Iterates over the latents.
    pub fn rows(&self) -> impl Iterator<Item = &[f32]> {
        self.data.chunks(self.dim)
    }

    /// Takes the values out.
    pub fn into_vec(self) -> Vec<f32> {
        self.data
    }

    /// Latents `range` as a new set.
    ///
    /// # Errors
    /// [`Error::InvalidOption`] for an empty or out-of-bounds range.
    pub fn slice(&self, range: std::ops::Range<usize>) -> Result<Latents> {
        if range.start >= range.end || range.end > self.count() {
            return Err(Error::invalid(
                "latent range",
                format!("{}..{}", range.start, range.end),
                format!("a non-empty range within 0..{}", self.count()),
            ));
        }
        Ok(Latents { dim: self.dim, data: self.data[range.start * self.dim..range.end * self.dim].to_vec() })
    }
}

pub(crate) fn check_finite(data: &[f32], dim: usize) -> Result<()> {
    if let Some(pos) = data.iter().position(|v| !v.is_finite()) {
        return Err(Error::NonFiniteLatent { index: pos / dim, component: pos % dim, value: data[pos] });
    }
    Ok(())
}

fn portable_row(seed: u64, index: u64, prior: Prior, truncation: Option<f32>, row: &mut [f32]) {
    match prior {
        Prior::Uniform => {
            let mut s = rng::RowStream::new(seed, 0, index);
            for v in row.iter_mut() {
                *v = (2.0 * s.next_unit() - 1.0) as f32;
            }
        }
        Prior::Gaussian => {
            let mut g = rng::PortableGaussian::new(seed, 0, index);
            let limit = truncation.map(f64::from);
            for v in row.iter_mut() {
                let mut z = g.next();
                if let Some(c) = limit {
                    while z.abs() > c {
                        z = g.next();
                    }
                }
                *v = z as f32;
            }
        }
    }
}

/// Most Gaussian draws spent skipping to `first_index` in NumPy-compatible mode. Truncation
/// redraws values past the threshold, so a small threshold multiplies the draws per value (about
/// 25 at 0.05); the skip stops at this budget instead of stalling.
const MAX_SKIP_DRAWS: u64 = 40_000_000;

/// Draws and drops `values` values of the NumPy stream, spending at most `budget` underlying
/// draws.
fn numpy_skip(mt: &mut Mt19937, values: u64, options: &SampleOptions, budget: u64) -> Result<()> {
    let mut draws = 0u64;
    for _ in 0..values {
        draws += match options.prior {
            Prior::Uniform => {
                mt.next_f64();
                1
            }
            Prior::Gaussian => {
                let c = options.truncation.map_or(f64::INFINITY, f64::from);
                let mut n = 1;
                while mt.next_gaussian().abs() > c {
                    n += 1;
                }
                n
            }
        };
        if draws > budget {
            return Err(Error::invalid(
                "first index",
                options.first_index,
                format!(
                    "a nearer row in NumPy-compatible mode: skipping to it with truncation {} draws more than {budget} values (the stream is drawn in order)",
                    options.truncation.unwrap_or(f32::INFINITY)
                ),
            ));
        }
    }
    Ok(())
}

fn numpy_value(mt: &mut Mt19937, prior: Prior, truncation: Option<f32>) -> f64 {
    match prior {
        Prior::Uniform => -1.0 + 2.0 * mt.next_f64(),
        Prior::Gaussian => {
            let mut z = mt.next_gaussian();
            if let Some(c) = truncation.map(f64::from) {
                while z.abs() > c {
                    z = mt.next_gaussian();
                }
            }
            z
        }
    }
}

/// Gaussian noise rows from an independent stream (key `[seed, stream]`), used by [`jitter`].
pub(crate) fn noise_row(seed: u64, stream: u64, index: u64, row: &mut [f32]) {
    let mut g = rng::PortableGaussian::new(seed, stream, index);
    for v in row.iter_mut() {
        *v = g.next() as f32;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn skipping_with_a_small_truncation_stops_at_its_budget() {
        // With truncation 0.05 about 1 Gaussian draw in 25 is kept, so 1000 skipped values cost
        // about 25 000 draws: over a budget of 5000, within one of 10^6.
        let o = SampleOptions {
            mode: RngMode::NumpyCompatible,
            truncation: Some(0.05),
            first_index: 1000,
            ..SampleOptions::new(3, 1)
        };
        let e = numpy_skip(&mut Mt19937::new(3), 1000, &o, 5000).unwrap_err();
        assert!(e.to_string().contains("draws more than 5000 values"), "{e}");
        assert!(numpy_skip(&mut Mt19937::new(3), 1000, &o, 1_000_000).is_ok());
        // The skip draws exactly what sampling the skipped rows would: row 1000 after a skip
        // equals the last row of 1001 rows drawn from the start.
        let all = Latents::sample(
            1,
            &SampleOptions { first_index: 0, ..SampleOptions { count: 1001, ..o.clone() } },
        )
        .unwrap();
        let one = Latents::sample(1, &o).unwrap();
        assert_eq!(one.as_slice()[0].to_bits(), all.as_slice()[1000].to_bits());
    }

    #[test]
    fn row_i_does_not_depend_on_count() {
        let all = Latents::sample(64, &SampleOptions::new(9, 10)).unwrap();
        let one = Latents::sample(64, &SampleOptions { first_index: 7, ..SampleOptions::new(9, 1) }).unwrap();
        assert_eq!(all.row(7), one.row(0));
    }

    #[test]
    fn truncation_bounds_every_component() {
        let opts = SampleOptions { truncation: Some(0.5), ..SampleOptions::new(1, 50) };
        let l = Latents::sample(32, &opts).unwrap();
        assert!(l.as_slice().iter().all(|v| v.abs() <= 0.5));
    }

    #[test]
    fn psi_zero_gives_centre_and_one_identity() {
        let base = Latents::sample(8, &SampleOptions::new(3, 4)).unwrap();
        let same = Latents::sample(8, &SampleOptions { psi: Some(1.0), ..SampleOptions::new(3, 4) }).unwrap();
        assert_eq!(base, same);
        let centre = vec![0.5f32; 8];
        let c = Latents::sample(
            8,
            &SampleOptions { psi: Some(0.0), centre: Some(centre.clone()), ..SampleOptions::new(3, 4) },
        )
        .unwrap();
        assert!(c.rows().all(|r| r == centre.as_slice()));
    }

    #[test]
    fn bad_options_are_named() {
        let e = Latents::sample(8, &SampleOptions::new(0, 0)).unwrap_err();
        assert!(e.to_string().contains("count is 0"), "{e}");
        let e = Latents::sample(8, &SampleOptions { psi: Some(1.5), ..Default::default() }).unwrap_err();
        assert!(e.to_string().contains("psi is 1.5"), "{e}");
        let e = Latents::sample(
            8,
            &SampleOptions { mode: RngMode::NumpyCompatible, seed: 1 << 40, ..Default::default() },
        )
        .unwrap_err();
        assert!(e.to_string().contains("4294967295"), "{e}");
        // Found by fuzzing: a huge first index in NumPy mode used to draw forever.
        let e = Latents::sample(
            1,
            &SampleOptions { mode: RngMode::NumpyCompatible, first_index: u64::MAX, ..Default::default() },
        )
        .unwrap_err();
        assert!(e.to_string().contains("first index"), "{e}");
        // Found by fuzzing: a first index within the old bound (33.5 million values) still took
        // seconds; the bound is now 10^7 values.
        let e = Latents::sample(
            1,
            &SampleOptions { mode: RngMode::NumpyCompatible, first_index: 33_554_178, ..Default::default() },
        )
        .unwrap_err();
        assert!(e.to_string().contains("at most 10000000"), "{e}");
        let e = Latents::new(4, vec![0.0, 1.0, f32::NAN, 0.0]).unwrap_err();
        assert!(e.to_string().contains("latent 0 has a non-finite value (NaN) at component 2"), "{e}");
    }
}
