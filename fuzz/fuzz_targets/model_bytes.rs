//! Any bytes as a model: sniffing, protobuf decoding, the size and graph checks, the load-time
//! passes, tract's parsing and typing and signature discovery; a model that loads is built into a
//! generator and renders one image. Errors are fine; a panic escaping genloom, a hang or an
//! allocation past the RSS limit is a bug.
#![no_main]

use genloom::pixels::{to_pixels, PixelFormat};
use genloom::{Generator, GeneratorOptions, LoadOptions, Model, SampleOptions};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    genloom_fuzz::install_panic_hook();
    genloom_fuzz::guarded(|| run(data));
});

fn run(data: &[u8]) {
    // Small limits keep each iteration fast and its memory bounded; the limits themselves are
    // part of what is tested (they must stop a model before it allocates).
    let mut options = LoadOptions::default();
    options.limits.max_model_bytes = 4 << 20;
    options.limits.max_output_pixels = 256 * 256;
    options.limits.max_parameters = 4_000_000;
    options.limits.max_micro_batch_bytes = 16 << 20;
    let Ok(model) = Model::from_bytes(data, &options) else { return };

    let signature = model.signature().clone();
    assert!(signature.latent.dim > 0, "a loaded model has a latent size of 0");
    assert!(
        signature.image.height as u64 * signature.image.width as u64 <= options.limits.max_output_pixels,
        "a model past max_output_pixels loaded: {}x{}",
        signature.image.width,
        signature.image.height
    );

    let mut generator_options = GeneratorOptions::default();
    generator_options.warm_up = false;
    let Ok(generator) = Generator::new(model, generator_options) else { return };
    let latents = match generator.sample_latents(&SampleOptions::new(0, 1)) {
        Ok(latents) => latents,
        Err(e) => panic!("a loaded model cannot sample one latent: {e}"),
    };
    let labels = signature.label.as_ref().map(|_| vec![0i64]);
    let Ok(images) = generator.generate(&latents, labels.as_deref()) else { return };
    assert_eq!(images.count, 1, "one latent gave {} images", images.count);
    assert_eq!(
        images.data.len(),
        images.values_per_image(),
        "the image holds {} values, expected {}",
        images.data.len(),
        images.values_per_image()
    );
    assert_eq!(
        (images.channels, images.height, images.width),
        (signature.image.channels, signature.image.height, signature.image.width),
        "the image does not match the signature"
    );
    let format = PixelFormat::natural(images.channels);
    if let Err(e) = to_pixels(&images, 0, format) {
        panic!("a generated image does not convert to pixels: {e}");
    }
}
