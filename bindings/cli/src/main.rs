//! The genloom command.
fn main() {}
