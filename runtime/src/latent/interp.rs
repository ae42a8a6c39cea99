//! Interpolation between latents, keyframe paths and variations around one latent.
//!
//! Slerp follows Shoemake (1985), applied to raw (unnormalised) latents as is usual for GAN
//! latents (White 2016): with `omega` the angle between `a` and `b`,
//! `slerp(a, b, t) = sin((1 - t) omega) / sin(omega) a + sin(t omega) / sin(omega) b`.
//! The formula divides by `sin(omega)`, so three cases are handled apart, all in `f64`:
//! - a zero vector: lerp (there is no angle);
//! - parallel (`omega < 1e-4`): lerp, which is the formula's limit;
//! - antiparallel (`pi - omega < 1e-4`): the great circle is not unique, so the path turns
//!   through `p`, the unit vector along the coordinate axis where `|a_k|` is smallest, made
//!   orthogonal to `a` and scaled to the mean norm `(|a| + |b|) / 2`: `slerp(a, p, 2t)` for
//!   `t <= 1/2`, then `slerp(p, b, 2t - 1)`.

use super::{check_finite, noise_row, Latents};
use crate::error::{Error, Result};

/// How to move between two latents.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Interpolation {
    /// Straight line `(1 - t) a + t b`.
    Lerp,
    /// Great-circle arc (Shoemake's slerp); keeps Gaussian latents at a typical norm.
    #[default]
    Slerp,
}

impl std::str::FromStr for Interpolation {
    type Err = Error;
    fn from_str(s: &str) -> Result<Interpolation> {
        match s {
            "lerp" | "linear" => Ok(Interpolation::Lerp),
            "slerp" | "spherical" => Ok(Interpolation::Slerp),
            _ => Err(Error::invalid("interpolation", format!("`{s}`"), "`lerp` or `slerp`")),
        }
    }
}

fn check_pair(a: &[f32], b: &[f32], t: f64) -> Result<()> {
    if a.len() != b.len() {
        return Err(Error::LatentDim { name: "second latent".into(), actual: b.len(), expected: a.len() });
    }
    if !t.is_finite() {
        return Err(Error::invalid("t", t, "a finite number (0 = first latent, 1 = second)"));
    }
    check_finite(a, a.len().max(1))?;
    check_finite(b, b.len().max(1))?;
    Ok(())
}

/// Linear interpolation `(1 - t) a + t b`, computed in `f64`.
///
/// # Errors
/// [`Error::LatentDim`] when the lengths differ; [`Error::InvalidOption`] for a non-finite `t`;
/// [`Error::NonFiniteLatent`] for NaN or infinite components.
pub fn lerp(a: &[f32], b: &[f32], t: f64) -> Result<Vec<f32>> {
    check_pair(a, b, t)?;
    Ok(lerp64(a, b, t).into_iter().map(|v| v as f32).collect())
}

fn lerp64(a: &[f32], b: &[f32], t: f64) -> Vec<f64> {
    a.iter().zip(b).map(|(&x, &y)| (1.0 - t) * f64::from(x) + t * f64::from(y)).collect()
}

/// Spherical interpolation (see the module docs for the exact rule and its special cases).
///
/// # Errors
/// As [`lerp`].
pub fn slerp(a: &[f32], b: &[f32], t: f64) -> Result<Vec<f32>> {
    check_pair(a, b, t)?;
    let a64: Vec<f64> = a.iter().map(|&v| f64::from(v)).collect();
    let b64: Vec<f64> = b.iter().map(|&v| f64::from(v)).collect();
    Ok(slerp64(&a64, &b64, t).into_iter().map(|v| v as f32).collect())
}

fn norm(v: &[f64]) -> f64 {
    libm::sqrt(v.iter().map(|x| x * x).sum())
}

const PARALLEL_EPS: f64 = 1e-4;

pub(crate) fn slerp64(a: &[f64], b: &[f64], t: f64) -> Vec<f64> {
    let lerp = |t: f64| -> Vec<f64> { a.iter().zip(b).map(|(x, y)| (1.0 - t) * x + t * y).collect() };
    let na = norm(a);
    let nb = norm(b);
    if na == 0.0 || nb == 0.0 {
        return lerp(t);
    }
    let dot: f64 = a.iter().zip(b).map(|(x, y)| x * y).sum();
    let cos = (dot / (na * nb)).clamp(-1.0, 1.0);
    let omega = libm::acos(cos);
    if omega < PARALLEL_EPS {
        return lerp(t);
    }
    if core::f64::consts::PI - omega < PARALLEL_EPS {
        // First index of the smallest magnitude.
        let mut k = 0;
        for (j, v) in a.iter().enumerate() {
            if v.abs() < a[k].abs() {
                k = j;
            }
        }
        let along = a[k] / (na * na);
        let mut p: Vec<f64> = a.iter().map(|x| -along * x).collect();
        p[k] += 1.0;
        let np = norm(&p);
        if !(np > 0.0 && np.is_finite()) {
            // One-value latents have no perpendicular direction: go straight through.
            return lerp(t);
        }
        let scale = (na + nb) / 2.0 / np;
        for v in p.iter_mut() {
            *v *= scale;
        }
        // Each half is a quarter turn, so it never meets this case again; for inputs so extreme
        // that rounding makes a half antiparallel anyway, `slerp_plain` falls back to lerp
        // (found by fuzzing: the recursion used to be unbounded there).
        return if t <= 0.5 { slerp_plain(a, &p, 2.0 * t) } else { slerp_plain(&p, b, 2.0 * t - 1.0) };
    }
    slerp_formula(a, b, omega, t)
}

/// Slerp without the antiparallel construction: lerp when either end is zero or the ends are
/// (anti)parallel, Shoemake's formula otherwise.
fn slerp_plain(a: &[f64], b: &[f64], t: f64) -> Vec<f64> {
    let (na, nb) = (norm(a), norm(b));
    let dot: f64 = a.iter().zip(b).map(|(x, y)| x * y).sum();
    let omega = libm::acos((dot / (na * nb)).clamp(-1.0, 1.0));
    if na == 0.0 || nb == 0.0 || !(omega >= PARALLEL_EPS && core::f64::consts::PI - omega >= PARALLEL_EPS) {
        return a.iter().zip(b).map(|(x, y)| (1.0 - t) * x + t * y).collect();
    }
    slerp_formula(a, b, omega, t)
}

/// Shoemake (1985): `sin((1 - t) omega) / sin(omega) * a + sin(t omega) / sin(omega) * b`.
fn slerp_formula(a: &[f64], b: &[f64], omega: f64, t: f64) -> Vec<f64> {
    let so = libm::sin(omega);
    let wa = libm::sin((1.0 - t) * omega) / so;
    let wb = libm::sin(t * omega) / so;
    a.iter().zip(b).map(|(x, y)| wa * x + wb * y).collect()
}

/// A path through keyframe latents.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[non_exhaustive]
pub struct PathOptions {
    /// Frames from one keyframe to the next (the next keyframe itself not counted), at least 1.
    pub steps: usize,
    /// Lerp or slerp.
    pub interpolation: Interpolation,
    /// Return from the last keyframe to the first, for a seamless loop.
    pub looped: bool,
}

impl Default for PathOptions {
    fn default() -> Self {
        PathOptions { steps: 16, interpolation: Interpolation::Slerp, looped: false }
    }
}

/// The frames of a path through `keyframes`: an open path of `K` keyframes has
/// `(K - 1) * steps + 1` frames and ends on the last keyframe; a looped path has `K * steps`
/// frames and its last frame leads back to the first. Within each segment, frame `j` is at
/// `t = j / steps`, so slerp frames are equally spaced in angle.
///
/// # Errors
/// [`Error::InvalidOption`] for fewer than 2 keyframes (or 1 with no loop) and `steps == 0`.
pub fn path(keyframes: &Latents, options: &PathOptions) -> Result<Latents> {
    let k = keyframes.count();
    if k < 2 {
        return Err(Error::invalid("keyframes", k, "at least 2 latents to move between"));
    }
    if options.steps == 0 {
        return Err(Error::invalid("steps", 0, "at least 1 frame per segment"));
    }
    if options.steps.saturating_mul(k) > 100_000 {
        return Err(Error::invalid(
            "frames",
            options.steps.saturating_mul(k),
            "at most 100000 frames in one path",
        ));
    }
    let dim = keyframes.dim();
    let segments = if options.looped { k } else { k - 1 };
    let mut data = Vec::with_capacity((segments * options.steps + 1) * dim);
    for s in 0..segments {
        let a = keyframes.row(s);
        let b = keyframes.row((s + 1) % k);
        for j in 0..options.steps {
            let t = j as f64 / options.steps as f64;
            let frame = match options.interpolation {
                Interpolation::Lerp => lerp(a, b, t)?,
                Interpolation::Slerp => slerp(a, b, t)?,
            };
            data.extend_from_slice(&frame);
        }
    }
    if !options.looped {
        data.extend_from_slice(keyframes.row(k - 1));
    }
    Latents::new(dim, data)
}

/// `count` variations of one latent: `sqrt(1 - s^2) base + s n_j`, where `n_j` is Gaussian noise
/// row `j` of `seed` (an independent Philox stream, key `[seed, 1]`). The mix keeps a Gaussian
/// latent's variance, so strength `s = 0` returns `base` and `s = 1` a fresh latent.
///
/// # Errors
/// [`Error::InvalidOption`] for `count == 0` or a strength outside [0, 1];
/// [`Error::NonFiniteLatent`] for a non-finite base.
pub fn jitter(base: &[f32], count: usize, strength: f32, seed: u64) -> Result<Latents> {
    if count == 0 {
        return Err(Error::invalid("count", 0, "at least 1"));
    }
    if !(0.0..=1.0).contains(&strength) {
        return Err(Error::invalid("jitter strength", strength, "a value in [0, 1]"));
    }
    if base.is_empty() {
        return Err(Error::invalid("latent size", 0, "at least 1"));
    }
    check_finite(base, base.len())?;
    let keep = libm::sqrt(1.0 - f64::from(strength) * f64::from(strength));
    let mut data = vec![0f32; count * base.len()];
    for (j, row) in data.chunks_mut(base.len()).enumerate() {
        noise_row(seed, 1, j as u64, row);
        for (v, &b) in row.iter_mut().zip(base) {
            *v = (keep * f64::from(b) + f64::from(strength) * f64::from(*v)) as f32;
        }
    }
    Latents::new(base.len(), data)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn angle(a: &[f32], b: &[f32]) -> f64 {
        let a: Vec<f64> = a.iter().map(|&v| f64::from(v)).collect();
        let b: Vec<f64> = b.iter().map(|&v| f64::from(v)).collect();
        let d: f64 = a.iter().zip(&b).map(|(x, y)| x * y).sum();
        (d / (norm(&a) * norm(&b))).clamp(-1.0, 1.0).acos()
    }

    fn vec_strategy(n: usize) -> impl Strategy<Value = Vec<f32>> {
        proptest::collection::vec(-3.0f32..3.0, n)
    }

    #[test]
    fn antiparallel_one_value_latents_terminate() {
        // Found by fuzzing: for one-value latents the perpendicular helper is a rounding
        // residue parallel to the ends, and the antiparallel case recursed until the stack
        // overflowed (first input: -2.8706055 against its negation at t = 0).
        for i in 0..2000 {
            let x = -4.0 + i as f32 * 0.004_01;
            for t in [0.0, 0.25, 0.5, 0.75, 1.0] {
                let out = slerp(&[x], &[-x], t).unwrap();
                assert_eq!(out.len(), 1);
                assert!(out[0].is_finite(), "{x} at {t}: {out:?}");
            }
        }
        assert_eq!(slerp(&[-2.870_605_5], &[2.870_605_5], 0.0).unwrap().len(), 1);
    }

    proptest! {
        // Properties of Shoemake's slerp: endpoints, symmetry, constant angle steps.
        #[test]
        fn slerp_endpoints((a, b) in (vec_strategy(16), vec_strategy(16))) {
            let s0 = slerp(&a, &b, 0.0).unwrap();
            let s1 = slerp(&a, &b, 1.0).unwrap();
            for i in 0..16 {
                prop_assert!((s0[i] - a[i]).abs() <= 1e-5 * (1.0 + a[i].abs()));
                prop_assert!((s1[i] - b[i]).abs() <= 1e-5 * (1.0 + b[i].abs()));
            }
        }

        #[test]
        fn slerp_is_symmetric((a, b, t) in (vec_strategy(16), vec_strategy(16), 0.0f64..1.0)) {
            let x = slerp(&a, &b, t).unwrap();
            let y = slerp(&b, &a, 1.0 - t).unwrap();
            for i in 0..16 {
                prop_assert!((x[i] - y[i]).abs() <= 1e-4 * (1.0 + x[i].abs()));
            }
        }

        #[test]
        fn slerp_steps_are_equal_in_angle((a, b) in (vec_strategy(32), vec_strategy(32))) {
            // Equal angle steps hold for endpoints of equal norm (Shoemake's unit quaternions).
            let na = a.iter().map(|v| f64::from(*v).powi(2)).sum::<f64>().sqrt();
            let nb = b.iter().map(|v| f64::from(*v).powi(2)).sum::<f64>().sqrt();
            prop_assume!(na > 1e-3 && nb > 1e-3);
            let b: Vec<f32> = b.iter().map(|v| (f64::from(*v) * na / nb) as f32).collect();
            let total = angle(&a, &b);
            prop_assume!(total > 0.2 && total < 3.0);
            let frames: Vec<Vec<f32>> = (0..=8).map(|j| slerp(&a, &b, j as f64 / 8.0).unwrap()).collect();
            for w in frames.windows(2) {
                prop_assert!((angle(&w[0], &w[1]) - total / 8.0).abs() < 1e-3);
            }
        }

        #[test]
        fn lerp_midpoint_is_mean((a, b) in (vec_strategy(8), vec_strategy(8))) {
            let m = lerp(&a, &b, 0.5).unwrap();
            for i in 0..8 {
                prop_assert!((m[i] - (a[i] + b[i]) / 2.0).abs() <= 1e-6);
            }
        }
    }

    #[test]
    fn special_cases_stay_finite() {
        let a = vec![1.0f32, 2.0, 3.0];
        let neg: Vec<f32> = a.iter().map(|v| -v).collect();
        let zero = vec![0.0f32; 3];
        for t in [0.0, 0.3, 0.5, 0.7, 1.0] {
            for b in [&a, &neg, &zero] {
                assert!(slerp(&a, b, t).unwrap().iter().all(|v| v.is_finite()));
            }
        }
        // The antiparallel midpoint is orthogonal to both ends, at their norm.
        let mid = slerp(&a, &neg, 0.5).unwrap();
        assert!((angle(&a, &mid) - std::f64::consts::FRAC_PI_2).abs() < 1e-6);
    }

    #[test]
    fn path_frame_counts() {
        let k = Latents::sample(8, &super::super::SampleOptions::new(1, 3)).unwrap();
        let open = path(&k, &PathOptions { steps: 4, ..Default::default() }).unwrap();
        assert_eq!(open.count(), 9);
        assert_eq!(open.row(8), k.row(2));
        let looped = path(&k, &PathOptions { steps: 4, looped: true, ..Default::default() }).unwrap();
        assert_eq!(looped.count(), 12);
        assert_eq!(looped.row(0), k.row(0));
        assert_eq!(looped.row(4), k.row(1));
    }

    #[test]
    fn jitter_endpoints() {
        let base = vec![0.25f32; 6];
        let same = jitter(&base, 3, 0.0, 5).unwrap();
        assert!(same.rows().all(|r| r == base.as_slice()));
        let varied = jitter(&base, 3, 0.3, 5).unwrap();
        assert_ne!(varied.row(0), varied.row(1));
        assert!(jitter(&base, 3, 1.5, 5).is_err());
    }
}
