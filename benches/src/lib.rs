//! Bench helpers.
