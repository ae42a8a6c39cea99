//! Status codes and the mapping from the runtime's errors to them.

use genloom::{Error, ErrorKind};

/// What a call did. `GENLOOM_STATUS_OK` is 0; every other value is a failure whose detail is in
/// `genloom_last_error_message()`.
///
/// The numbers are part of the ABI: they never change and are never reused. New codes may be
/// added at the end in later versions, so treat any unknown non-zero value as a failure (and
/// `genloom_status_name()` returns `"GENLOOM_STATUS_UNKNOWN"` for it).
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum genloom_status {
    /// Success.
    Ok = 0,
    /// A required pointer was NULL (or a buffer pointer was NULL with a non-zero length).
    NullArgument = 1,
    /// A value was out of range: an unknown enum value, a zero count, a latent buffer whose
    /// length is not a multiple of the latent size, a label out of range, NaN in a latent, a
    /// path that is not valid UTF-8 on a platform that needs it, a misaligned buffer...
    InvalidArgument = 2,
    /// An output buffer was too small; the size it needs was written to `*needed`.
    BufferTooSmall = 3,
    /// The model could not be loaded or prepared: not ONNX, malformed, or refused by tract
    /// (which builds a plan per micro-batch size on first use, so a generation call can return
    /// it too).
    LoadFailed = 4,
    /// The model loaded but is not a generator genloom recognises (no latent input found,
    /// unknown value range, ...). Called GENLOOM_STATUS_SIGNATURE before 0.2, a name that read
    /// like cryptographic signing; that name stays defined as an alias for one more release.
    UnrecognizedModel = 5,
    /// Inference failed, or gave an output that does not match the signature.
    InferenceFailed = 6,
    /// The progress callback returned 0 and the work stopped; nothing was written.
    Cancelled = 7,
    /// A request went past a safety limit (model size, image count, micro-batch bytes).
    Limit = 8,
    /// A file could not be read, or an image could not be encoded.
    Io = 9,
    /// The option or feature is not available in this build (reserved: no call of this version
    /// returns it).
    Unsupported = 10,
    /// A panic inside genloom was caught at the boundary. This is a bug in genloom: please report
    /// it with the message. Free the handles the call used; do not keep using them.
    Panic = 11,
    /// An error the binding has no specific code for (a newer kind of runtime error).
    Internal = 12,
}

impl genloom_status {
    /// The status with this code, if this version knows it.
    pub fn from_code(code: std::ffi::c_int) -> Option<genloom_status> {
        use genloom_status::*;
        const ALL: [genloom_status; 13] = [
            Ok,
            NullArgument,
            InvalidArgument,
            BufferTooSmall,
            LoadFailed,
            UnrecognizedModel,
            InferenceFailed,
            Cancelled,
            Limit,
            Io,
            Unsupported,
            Panic,
            Internal,
        ];
        ALL.iter().copied().find(|s| *s as std::ffi::c_int == code)
    }

    /// The C name of the status, NUL-terminated.
    pub(crate) fn c_name(self) -> &'static [u8] {
        match self {
            genloom_status::Ok => b"GENLOOM_STATUS_OK\0",
            genloom_status::NullArgument => b"GENLOOM_STATUS_NULL_ARGUMENT\0",
            genloom_status::InvalidArgument => b"GENLOOM_STATUS_INVALID_ARGUMENT\0",
            genloom_status::BufferTooSmall => b"GENLOOM_STATUS_BUFFER_TOO_SMALL\0",
            genloom_status::LoadFailed => b"GENLOOM_STATUS_LOAD_FAILED\0",
            genloom_status::UnrecognizedModel => b"GENLOOM_STATUS_UNRECOGNIZED_MODEL\0",
            genloom_status::InferenceFailed => b"GENLOOM_STATUS_INFERENCE_FAILED\0",
            genloom_status::Cancelled => b"GENLOOM_STATUS_CANCELLED\0",
            genloom_status::Limit => b"GENLOOM_STATUS_LIMIT\0",
            genloom_status::Io => b"GENLOOM_STATUS_IO\0",
            genloom_status::Unsupported => b"GENLOOM_STATUS_UNSUPPORTED\0",
            genloom_status::Panic => b"GENLOOM_STATUS_PANIC\0",
            genloom_status::Internal => b"GENLOOM_STATUS_INTERNAL\0",
        }
    }
}

/// The status for a runtime error: one arm per kind.
pub(crate) fn status_of(error: &Error) -> genloom_status {
    match error.kind() {
        ErrorKind::Load => genloom_status::LoadFailed,
        ErrorKind::Signature => genloom_status::UnrecognizedModel,
        ErrorKind::InvalidArgument | ErrorKind::Npy => genloom_status::InvalidArgument,
        ErrorKind::Inference => genloom_status::InferenceFailed,
        ErrorKind::Cancelled => genloom_status::Cancelled,
        ErrorKind::Limit => genloom_status::Limit,
        ErrorKind::Io => genloom_status::Io,
        _ => genloom_status::Internal,
    }
}
