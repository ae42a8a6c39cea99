//! Latent sampling and interpolation with parameters taken from the fuzz bytes: every option of
//! `Latents::sample` (any seed, prior, truncation and psi bit pattern, either generator, any first
//! index, an optional centre), `lerp` and `slerp` of arbitrary vectors at any `t`, keyframe
//! `path`s with any step count (the runtime caps a path at 100 000 frames; keyframes here are at
//! most 64 values, so a path stays within ~26 MB) and `jitter`. Errors are fine; a panic, a hang
//! or a result of the wrong size is a bug.
#![no_main]

use genloom::latent::{jitter, lerp, path, slerp};
use genloom::{Interpolation, Latents, PathOptions, Prior, RngMode, SampleOptions};
use genloom_fuzz::Bytes;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    genloom_fuzz::install_panic_hook();
    genloom_fuzz::guarded(|| run(data));
});

fn run(data: &[u8]) {
    let mut b = Bytes::new(data);
    // The first byte picks which calls this input drives, so that short inputs reach each one.
    let which = b.u8();
    if which & 1 != 0 {
        sample(&mut b);
    }
    if which & 2 != 0 {
        interpolate(&mut b);
    }
    if which & 4 != 0 {
        keyframe_path(&mut b);
    }
    if which & 8 != 0 {
        variations(&mut b);
    }
}

fn vector(b: &mut Bytes<'_>, len: usize) -> Vec<f32> {
    (0..len).map(|_| b.edgy_f32()).collect()
}

fn sample(b: &mut Bytes<'_>) {
    let dim = b.range(1, 512);
    let count = b.range(1, 64);
    let flags = b.u8();
    let mut options = SampleOptions::new(b.u64(), count);
    options.prior = if flags & 1 != 0 { Prior::Uniform } else { Prior::Gaussian };
    options.mode = if flags & 2 != 0 { RngMode::NumpyCompatible } else { RngMode::Portable };
    options.truncation = (flags & 4 != 0).then(|| b.edgy_f32());
    options.psi = (flags & 8 != 0).then(|| b.edgy_f32());
    options.first_index = match flags >> 6 {
        0 => 0,
        1 => u64::from(b.u8()),
        2 => u64::from(b.u16()),
        _ => b.u64(),
    };
    // NumPy mode draws every skipped value in order, by design: up to 10^7 values (the
    // runtime's bound, a quarter of a second natively) take several seconds in this
    // instrumented build, past libFuzzer's timeout. Skips beyond the bound are kept (they must
    // be refused at once); skips within it are brought under 2 * 10^5 values.
    let skip = options.first_index.saturating_mul(dim as u64);
    if options.mode == RngMode::NumpyCompatible && skip > 200_000 && skip <= 10_000_000 {
        options.first_index %= 200_000 / dim as u64 + 1;
    }
    if flags & 16 != 0 {
        // A centre of the right size, or (rarely) a wrong one.
        let len = if flags & 32 != 0 { b.range(0, 4) } else { dim };
        options.centre = Some(vector(b, len));
    }
    let Ok(latents) = Latents::sample(dim, &options) else { return };
    assert_eq!((latents.dim(), latents.count()), (dim, count), "sampled the wrong shape");
    let values = latents.as_slice();
    assert_eq!(values.len(), dim * count);
    assert!(values.iter().all(|v| v.is_finite()), "non-finite latent sampled with {options:?}");
    if let Some(c) = options.truncation {
        if options.psi.is_none() {
            assert!(values.iter().all(|v| v.abs() <= c), "a value past the truncation {c}: {options:?}");
        }
    }
    if options.prior == Prior::Uniform && options.psi.is_none() {
        assert!(values.iter().all(|v| (-1.0..=1.0).contains(v)), "a uniform value outside [-1, 1]");
    }
}

fn interpolate(b: &mut Bytes<'_>) {
    let len = b.range(0, 64);
    let len_b = if b.u8() == 0 { b.range(0, 64) } else { len };
    let a = vector(b, len);
    let c = vector(b, len_b);
    let t = match b.u8() % 4 {
        0 => f64::from(b.edgy_f32()),
        1 => f64::from(b.u8()) / 255.0,
        2 => 0.5,
        _ => b.f64(),
    };
    let finite = |v: &[f32]| v.iter().all(|x| x.is_finite());
    if let Ok(out) = lerp(&a, &c, t) {
        assert_eq!(out.len(), a.len(), "lerp changed the length");
        if (0.0..=1.0).contains(&t) {
            assert!(finite(&out), "lerp of finite latents at t = {t} is not finite");
        }
    }
    if let Ok(out) = slerp(&a, &c, t) {
        assert_eq!(out.len(), a.len(), "slerp changed the length");
    }
    // Antiparallel and parallel pairs reach slerp's special cases.
    let neg: Vec<f32> = a.iter().map(|x| -x).collect();
    if let Ok(out) = slerp(&a, &neg, t) {
        assert_eq!(out.len(), a.len());
    }
    let _ = slerp(&a, &a, t);
}

fn keyframe_path(b: &mut Bytes<'_>) {
    let dim = b.range(1, 64);
    let keys = b.range(1, 8);
    let flags = b.u8();
    let steps = match flags % 4 {
        0 => b.range(0, 64),
        1 => b.range(0, 4096),
        // Around the 100 000-frame cap.
        2 => (100_000 / keys).saturating_add(b.range(0, 2)).saturating_sub(1),
        _ => b.u64() as usize,
    };
    let values = vector(b, dim * keys);
    let Ok(keyframes) = Latents::new(dim, values) else { return };
    let mut options = PathOptions::default();
    options.steps = steps;
    options.looped = flags & 4 != 0;
    options.interpolation = if flags & 8 != 0 { Interpolation::Lerp } else { Interpolation::Slerp };
    let Ok(frames) = path(&keyframes, &options) else { return };
    let expected = if options.looped { keys * steps } else { (keys - 1) * steps + 1 };
    assert_eq!(frames.count(), expected, "a path of {keys} keyframes x {steps} steps");
    assert_eq!(frames.dim(), dim);
}

fn variations(b: &mut Bytes<'_>) {
    let len = b.range(0, 64);
    let count = b.range(0, 64);
    let strength = if b.bool() { f32::from(b.u8()) / 255.0 } else { b.edgy_f32() };
    let seed = b.u64();
    let base = vector(b, len);
    let Ok(out) = jitter(&base, count, strength, seed) else { return };
    assert_eq!((out.dim(), out.count()), (len, count), "jitter made the wrong shape");
    if strength == 0.0 {
        assert!(out.rows().all(|row| row == base.as_slice()), "jitter at strength 0 changed the latent");
    }
}
