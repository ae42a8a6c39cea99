//! Shared set-up for the benches: the demo model and its exports, made in memory.

use genloom::convert::{self, ConvertOptions, Precision};
use genloom::{LoadOptions, Model};

/// The demo model (`tiles`, single file) as shipped in the `genloom` command.
pub fn demo_model() -> Model {
    Model::from_bytes(genloom::demo::TILES_ONNX, &LoadOptions::default()).expect("the built-in model loads")
}

/// `(name, ONNX bytes)` of the f32, f16 and int8 exports of the demo model.
pub fn exports() -> Vec<(&'static str, Vec<u8>)> {
    let src = demo_model();
    [("f32", Precision::F32), ("f16", Precision::F16), ("int8", Precision::Int8)]
        .into_iter()
        .map(|(name, p)| {
            let mut o = ConvertOptions::new(p);
            o.eval_count = 4;
            (name, convert::convert(&src, &o).expect("the demo model converts").bytes)
        })
        .collect()
}
