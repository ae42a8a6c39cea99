//! The plain-Rust half of the package's argument checks: counts given as JavaScript numbers and
//! errors in the runtime's words. Nothing here touches JavaScript, so it is unit-tested natively.

use genloom::{Error, Result};

/// An argument error in the runtime's words: "`option` is `value`, expected `expected`".
pub fn invalid(option: &str, value: impl std::fmt::Display, expected: impl Into<String>) -> Error {
    Error::InvalidOption { option: option.to_string(), value: value.to_string(), expected: expected.into() }
}

/// Checks a count given by JavaScript (a double) and returns it as an index type.
///
/// # Errors
/// [`Error::InvalidOption`] unless `value` is a whole number in `min..=max`.
pub fn whole(option: &str, value: f64, min: u64, max: u64) -> Result<u64> {
    if value.is_finite() && value.fract() == 0.0 && value >= min as f64 && value <= max as f64 {
        Ok(value as u64)
    } else {
        Err(invalid(option, value, format!("a whole number from {min} to {max}")))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn whole_numbers_only() {
        assert_eq!(whole("count", 8.0, 1, 10).unwrap(), 8);
        for bad in [0.0, 11.0, 2.5, f64::NAN, f64::INFINITY, -1.0] {
            let e = whole("count", bad, 1, 10).unwrap_err().to_string();
            assert!(e.starts_with("count is ") && e.ends_with("expected a whole number from 1 to 10"), "{e}");
        }
    }
}
