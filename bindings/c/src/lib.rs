//! C ABI for genloom (work in progress).
