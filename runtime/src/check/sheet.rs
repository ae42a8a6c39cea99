//! The contact sheet: a picture for people to look at beside the gate's figures.

use super::generator;
use crate::error::Result;
use crate::latent::{Latents, SampleOptions};
use crate::model::Model;

/// A contact sheet for people: rows of samples at truncation none, 2, 1 and 0.5, and a strip
/// along one slerp path, 8 tiles a row.
///
/// # Errors
/// Generation and image errors.
pub fn sheet(model: &Model, seed: u64) -> Result<crate::pixels::Pixels> {
    let g = generator(model, 8)?;
    let dim = model.signature().latent.dim;
    let mut tiles = vec![];
    let format = crate::pixels::PixelFormat::natural(model.signature().image.channels);
    for t in [None, Some(2.0), Some(1.0), Some(0.5)] {
        let mut o = SampleOptions::new(seed, 8);
        o.truncation = t;
        let l = Latents::sample(dim, &o)?;
        let imgs = g.generate(&l, g.signature().cycle_labels(8).as_deref())?;
        tiles.extend(crate::pixels::all_pixels(&imgs, format)?.0);
    }
    let keys = Latents::sample(dim, &SampleOptions::new(seed.wrapping_add(100), 2))?;
    let po = crate::latent::PathOptions { steps: 7, ..Default::default() };
    let path = crate::latent::path(&keys, &po)?;
    let imgs = g.generate(&path, g.signature().cycle_labels(path.count()).as_deref())?;
    tiles.extend(crate::pixels::all_pixels(&imgs, format)?.0);
    let go = crate::pixels::GridOptions {
        columns: Some(8),
        scale: if model.signature().image.width <= 64 { 2 } else { 1 },
        ..Default::default()
    };
    crate::pixels::grid(&tiles, &go)
}
