//! Tests of the C ABI from Rust: the header's drift and version, misuse (NULL, short buffers, bad
//! enum values, failed loads), and equality of every call with the Rust API.

// The tests call the `extern "C"` functions as a C program would, which takes `unsafe`; each
// unsafe block says why it is sound.
#![allow(unsafe_code)]
#![warn(clippy::undocumented_unsafe_blocks)]

mod calls;
mod header;
mod misuse;
