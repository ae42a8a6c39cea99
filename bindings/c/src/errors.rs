//! The version, status names and the thread-local last error.

use crate::boundary::{guard, last_error_bytes, last_error_ptr, Failure, OutBuf};
use crate::status::genloom_status;
use std::ffi::{c_char, c_int};

/// The library's version, `"MAJOR.MINOR.PATCH"` (NUL-terminated, static). It matches the
/// `GENLOOM_VERSION_*` macros of the header the program was compiled with, unless the program
/// runs against a different build of the library.
///
/// # Safety
/// None needed: takes nothing; the returned string is static and must not be freed.
#[no_mangle]
pub extern "C" fn genloom_version() -> *const c_char {
    guard(c"?".as_ptr(), || concat!(env!("CARGO_PKG_VERSION"), "\0").as_ptr().cast())
}

/// The C name of a status code, e.g. `"GENLOOM_STATUS_BUFFER_TOO_SMALL"` (static,
/// NUL-terminated), or `"GENLOOM_STATUS_UNKNOWN"` for a code this version does not know.
///
/// # Safety
/// None needed: any integer is accepted; the returned string is static and must not be freed.
#[no_mangle]
pub extern "C" fn genloom_status_name(status: c_int) -> *const c_char {
    guard(c"GENLOOM_STATUS_UNKNOWN".as_ptr(), || match genloom_status::from_code(status) {
        Some(s) => s.c_name().as_ptr().cast(),
        None => c"GENLOOM_STATUS_UNKNOWN".as_ptr(),
    })
}

/// The message of the last failed call on this thread: a complete sentence naming the thing
/// that was wrong with the actual and the expected value. `""` after a successful call.
///
/// Never NULL. The pointer stays valid until the next fallible genloom call on the same thread
/// (any call that returns a `genloom_status`, except `genloom_last_error_copy`); copy the text
/// to keep it. It must not be freed. Each thread has its own message.
///
/// # Safety
/// None needed: takes nothing. Do not write through or free the returned pointer.
#[no_mangle]
pub extern "C" fn genloom_last_error_message() -> *const c_char {
    guard(c"".as_ptr(), last_error_ptr)
}

/// Copies the last error message of this thread, NUL-terminated, into `buffer`.
///
/// `*needed` (if `needed` is not NULL) receives the bytes needed including the NUL, both on
/// success and on `GENLOOM_STATUS_BUFFER_TOO_SMALL`. Pass `buffer` NULL and `buffer_len` 0 to ask
/// for the size. This call never changes the last error message itself.
///
/// # Safety
/// `buffer` is NULL with `buffer_len` 0, or valid for writes of `buffer_len` bytes; `needed` is
/// NULL or valid for a write of one `size_t`.
#[no_mangle]
pub unsafe extern "C" fn genloom_last_error_copy(
    buffer: *mut c_char,
    buffer_len: usize,
    needed: *mut usize,
) -> genloom_status {
    guard(genloom_status::Panic, || {
        let run = || -> Result<(), Failure> {
            let mut text = last_error_bytes();
            text.push(0);
            let out = OutBuf::new(buffer.cast::<u8>(), buffer_len, needed, "buffer", "bytes")?;
            // SAFETY: `buffer` and `needed` are valid as this function's contract says, and the
            // buffer cannot overlap `text`, which is our own allocation.
            unsafe { out.fill(&text) }
        };
        match run() {
            Ok(()) => genloom_status::Ok,
            Err(failure) => failure.status,
        }
    })
}
