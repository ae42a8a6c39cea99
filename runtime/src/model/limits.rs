//! [`Limits`]: what a model and a request may cost, and the check that names the limit passed.

use super::*;

/// Upper bounds on what a model and a request may cost. The defaults are generous for image
/// generators (which are rarely over 200 MB) and stop absurd inputs before any allocation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[non_exhaustive]
pub struct Limits {
    /// Largest model file (with its external data) in bytes. Default 1 GiB.
    pub max_model_bytes: u64,
    /// Most parameters (weight elements). Default 500 million.
    pub max_parameters: u64,
    /// Most pixels in one output image (height x width). Default 16 777 216 (4096 x 4096).
    pub max_output_pixels: u64,
    /// Most images in one request. Default 100 000.
    pub max_images: u64,
    /// Most bytes of float output in one micro-batch. Default 256 MiB.
    pub max_micro_batch_bytes: u64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_model_bytes: 1 << 30,
            max_parameters: 500_000_000,
            max_output_pixels: 4096 * 4096,
            max_images: 100_000,
            max_micro_batch_bytes: 256 << 20,
        }
    }
}

pub(crate) fn check_limit(what: &str, actual: u64, max: u64, setting: &str) -> Result<()> {
    if actual > max {
        return Err(Error::Limit { limit: what.to_string(), actual, max, setting: setting.to_string() });
    }
    Ok(())
}
