//! Any bytes as an NPY file: the magic string, versions 1 to 3, the header dictionary, dtypes,
//! byte order and shape arithmetic; an array that parses is converted to latents (for its last
//! dimension) and to labels. Errors are fine; a panic, a hang or an allocation past the RSS
//! limit is a bug.
#![no_main]

use genloom::npy::{self, NpyData};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    genloom_fuzz::install_panic_hook();
    genloom_fuzz::guarded(|| run(data));
});

fn run(data: &[u8]) {
    let Ok(array) = npy::parse(data, "fuzz") else { return };
    let elements = array.shape.iter().try_fold(1usize, |acc, &d| acc.checked_mul(d));
    let values = match &array.data {
        NpyData::F32(v) => v.len(),
        NpyData::F64(v) => v.len(),
        NpyData::I32(v) => v.len(),
        NpyData::I64(v) => v.len(),
        NpyData::U8(v) => v.len(),
        _ => return,
    };
    assert_eq!(
        elements,
        Some(values),
        "shape {:?} holds {elements:?} elements but {values} values were parsed",
        array.shape
    );

    if let Some(&dim) = array.shape.last() {
        if let Ok(latents) = array.clone().into_latents(dim, "fuzz") {
            assert_eq!(latents.dim(), dim);
            assert_eq!(latents.count() * dim, values);
            assert!(latents.as_slice().iter().all(|v| v.is_finite()), "non-finite latents accepted");
        }
    }
    // A few other latent sizes: the conversion must refuse a mismatch, not mis-slice.
    for dim in [1usize, 64] {
        let _ = array.clone().into_latents(dim, "fuzz");
    }
    if let Ok(labels) = array.into_labels("fuzz") {
        assert_eq!(labels.len(), values);
    }
}
