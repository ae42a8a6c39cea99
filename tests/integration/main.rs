//! Integration tests of the genloom runtime against outside references: NumPy, SciPy, the ONNX
//! reference evaluator, PyTorch (through committed goldens), Pillow, and published test vectors.
//! Golden data is made by `tests/golden/make_goldens.py` and `models-demo/make_reference.py`.

#![allow(clippy::unwrap_used)] // tests panic on failure by design

mod check;
mod convert;
mod demo_models;
mod hostile;
mod interp;
mod load_errors;
mod npy_files;
mod passes;
mod pixels_files;
mod rng;
mod test_models;
mod zoo;
