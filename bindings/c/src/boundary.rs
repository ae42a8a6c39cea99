//! The one boundary every export runs in: panics caught, pointers checked, errors mapped to a
//! status and the thread-local message.

use crate::status::{genloom_status, status_of};
use std::cell::RefCell;
use std::ffi::CString;
use std::panic::{catch_unwind, AssertUnwindSafe};

thread_local! {
    /// The message of the last failed call on this thread ("" after a successful call).
    static LAST_ERROR: RefCell<CString> = RefCell::new(CString::default());
}

/// A failed call: its status and the message for `genloom_last_error_message`.
#[derive(Debug)]
pub(crate) struct Failure {
    pub(crate) status: genloom_status,
    pub(crate) message: String,
}

impl Failure {
    pub(crate) fn new(status: genloom_status, message: impl Into<String>) -> Failure {
        Failure { status, message: message.into() }
    }

    pub(crate) fn invalid(message: impl Into<String>) -> Failure {
        Failure::new(genloom_status::InvalidArgument, message)
    }
}

/// A runtime error: its kind gives the status; the message keeps every cause (tract's chain).
impl From<genloom::Error> for Failure {
    fn from(error: genloom::Error) -> Failure {
        Failure::new(status_of(&error), error.chain())
    }
}

pub(crate) type Outcome<T = ()> = Result<T, Failure>;

fn set_last_error(message: &str) {
    // A message with an interior NUL would be cut short in C: show it as U+FFFD instead.
    let text = CString::new(message.replace('\0', "\u{fffd}")).unwrap_or_default();
    // try_with: during thread teardown the slot may already be gone; then there is no one to tell.
    let _ = LAST_ERROR.try_with(|slot| *slot.borrow_mut() = text);
}

/// Runs `f` with the last error untouched, returning `fallback` if it panics. For the calls that
/// cannot fail (version, names, `_free`) and for the calls that read the last error.
pub(crate) fn guard<T>(fallback: T, f: impl FnOnce() -> T) -> T {
    catch_unwind(AssertUnwindSafe(f)).unwrap_or(fallback)
}

/// The boundary of every fallible export: clears the last error, runs `f`, catches a panic, and
/// turns a failure into its status plus the thread-local message.
///
/// `AssertUnwindSafe` is sound here in the sense that matters to C: after a caught panic the call
/// reports `GENLOOM_STATUS_PANIC` and the header tells the caller to free the handles involved.
pub(crate) fn boundary(f: impl FnOnce() -> Outcome) -> genloom_status {
    set_last_error("");
    match catch_unwind(AssertUnwindSafe(f)) {
        Ok(Ok(())) => genloom_status::Ok,
        Ok(Err(failure)) => {
            set_last_error(&failure.message);
            failure.status
        }
        Err(payload) => {
            let what = payload
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| payload.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "a panic with no message".to_string());
            set_last_error(&format!(
                "internal error: genloom panicked ({what}); this is a bug in genloom, please report it"
            ));
            genloom_status::Panic
        }
    }
}

/// The last error's text as a C string pointer, valid until the slot changes (the next fallible
/// call on this thread).
pub(crate) fn last_error_ptr() -> *const std::ffi::c_char {
    static EMPTY: &[u8] = b"\0";
    LAST_ERROR.try_with(|slot| slot.borrow().as_ptr()).unwrap_or(EMPTY.as_ptr().cast())
}

/// The last error's bytes, without the NUL.
pub(crate) fn last_error_bytes() -> Vec<u8> {
    LAST_ERROR.try_with(|slot| slot.borrow().as_bytes().to_vec()).unwrap_or_default()
}

fn null(name: &str) -> Failure {
    Failure::new(genloom_status::NullArgument, format!("`{name}` is NULL, expected a valid pointer"))
}

fn misaligned<T>(name: &str, p: *const T) -> Failure {
    Failure::invalid(format!(
        "`{name}` ({p:p}) is not aligned to {} bytes as its element type requires",
        std::mem::align_of::<T>()
    ))
}

/// Borrows `*p`.
///
/// # Safety
/// `p` is NULL or points to a valid `T` that outlives `'a` and is not mutated meanwhile.
pub(crate) unsafe fn arg_ref<'a, T>(p: *const T, name: &str) -> Outcome<&'a T> {
    if p.is_null() {
        return Err(null(name));
    }
    if !p.is_aligned() {
        return Err(misaligned(name, p));
    }
    // SAFETY: non-null and aligned, and valid by the caller's contract.
    Ok(unsafe { &*p })
}

/// Borrows `*p` mutably.
///
/// # Safety
/// `p` is NULL or points to a valid `T` that outlives `'a` with no other reference to it.
pub(crate) unsafe fn arg_mut<'a, T>(p: *mut T, name: &str) -> Outcome<&'a mut T> {
    if p.is_null() {
        return Err(null(name));
    }
    if !p.is_aligned() {
        return Err(misaligned(name, p));
    }
    // SAFETY: non-null and aligned, and valid and unaliased by the caller's contract.
    Ok(unsafe { &mut *p })
}

/// Borrows `len` elements at `p`; an empty slice when `len` is 0 (then `p` may be NULL).
///
/// # Safety
/// When `len > 0`, `p` is NULL or points to `len` initialised `T`s that outlive `'a` and are not
/// mutated meanwhile.
pub(crate) unsafe fn arg_slice<'a, T>(p: *const T, len: usize, name: &str) -> Outcome<&'a [T]> {
    if len == 0 {
        return Ok(&[]);
    }
    if p.is_null() {
        return Err(Failure::new(
            genloom_status::NullArgument,
            format!("`{name}` is NULL but its length is {len}; expected a buffer of {len} elements"),
        ));
    }
    if !p.is_aligned() {
        return Err(misaligned(name, p));
    }
    if len.checked_mul(std::mem::size_of::<T>()).is_none_or(|b| b > isize::MAX as usize) {
        return Err(Failure::invalid(format!("`{name}` has length {len}, larger than any buffer can be")));
    }
    // SAFETY: non-null, aligned, at most isize::MAX bytes, and valid for `len` elements by the
    // caller's contract.
    Ok(unsafe { std::slice::from_raw_parts(p, len) })
}

/// A checked, not yet written out-param.
pub(crate) struct Out<T> {
    p: *mut T,
}

impl<T> Out<T> {
    /// Checks `p` now (before any work), to write it after the work succeeded.
    pub(crate) fn new(p: *mut T, name: &str) -> Outcome<Out<T>> {
        if p.is_null() {
            return Err(null(name));
        }
        if !p.is_aligned() {
            return Err(misaligned(name, p));
        }
        Ok(Out { p })
    }

    /// Writes the value.
    ///
    /// # Safety
    /// The pointer given to [`Out::new`] is valid for a write of `T`.
    pub(crate) unsafe fn write(self, value: T) {
        // SAFETY: non-null and aligned (checked in `new`), writable by the caller's contract.
        // `write` does not drop the old contents, which may be uninitialised.
        unsafe { self.p.write(value) }
    }
}

/// A caller's output buffer with its optional `needed` out-param.
pub(crate) struct OutBuf<T> {
    p: *mut T,
    len: usize,
    needed: *mut usize,
    what: &'static str,
}

impl<T: Copy> OutBuf<T> {
    /// Checks the buffer: NULL is allowed only with length 0 (the size query).
    pub(crate) fn new(
        p: *mut T,
        len: usize,
        needed: *mut usize,
        name: &str,
        what: &'static str,
    ) -> Outcome<Self> {
        if p.is_null() && len > 0 {
            return Err(Failure::new(
                genloom_status::NullArgument,
                format!("`{name}` is NULL but its length is {len}; pass length 0 to ask for the size"),
            ));
        }
        if !p.is_aligned() {
            return Err(misaligned(name, p.cast_const()));
        }
        if !needed.is_null() && !needed.is_aligned() {
            return Err(misaligned("needed", needed.cast_const()));
        }
        Ok(OutBuf { p, len, needed, what })
    }

    /// Fails with `BUFFER_TOO_SMALL` (writing `*needed`) when the buffer holds fewer than `n`
    /// elements. Called before expensive work, so that a size query costs nothing.
    ///
    /// # Safety
    /// `needed` (given to [`OutBuf::new`]) is NULL or valid for a write.
    pub(crate) unsafe fn reserve(&self, n: usize) -> Outcome {
        if self.len >= n {
            return Ok(());
        }
        if !self.needed.is_null() {
            // SAFETY: non-null and aligned (checked in `new`), writable by the caller's contract.
            unsafe { self.needed.write(n) };
        }
        Err(Failure::new(
            genloom_status::BufferTooSmall,
            format!("the output buffer holds {} {}, {n} are needed", self.len, self.what),
        ))
    }

    /// Copies `src` into the buffer and writes `*needed = src.len()`.
    ///
    /// # Safety
    /// The buffer is valid for writes of `len` elements and overlaps no input; `needed` is NULL or
    /// valid for a write.
    pub(crate) unsafe fn fill(self, src: &[T]) -> Outcome {
        // SAFETY: as this function's contract.
        unsafe { self.reserve(src.len())? };
        if !src.is_empty() {
            // SAFETY: `p` is non-null (len >= src.len() > 0, and NULL only with len 0), aligned, valid
            // for `len >= src.len()` writes, and does not overlap `src`, which is our own memory.
            unsafe { std::ptr::copy_nonoverlapping(src.as_ptr(), self.p, src.len()) };
        }
        if !self.needed.is_null() {
            // SAFETY: non-null and aligned (checked in `new`), writable by the caller's contract.
            unsafe { self.needed.write(src.len()) };
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn last() -> String {
        String::from_utf8(last_error_bytes()).unwrap()
    }

    #[test]
    fn a_panic_is_caught_and_reported() {
        let status = boundary(|| panic!("boom at the boundary"));
        assert_eq!(status, genloom_status::Panic);
        assert!(last().contains("boom at the boundary"), "{}", last());
        let status = boundary(|| {
            let v: Vec<u8> = Vec::new();
            let _ = v[std::hint::black_box(3)];
            Ok(())
        });
        assert_eq!(status, genloom_status::Panic);
        assert!(last().contains("index out of bounds"), "{}", last());
    }

    #[test]
    fn a_success_clears_the_message() {
        assert_eq!(boundary(|| Err(Failure::invalid("bad"))), genloom_status::InvalidArgument);
        assert_eq!(last(), "bad");
        assert_eq!(boundary(|| Ok(())), genloom_status::Ok);
        assert_eq!(last(), "");
    }

    #[test]
    fn guard_returns_the_fallback_on_panic() {
        assert_eq!(guard(7, || panic!("x")), 7);
        assert_eq!(guard(7, || 1), 1);
    }

    #[test]
    fn interior_nul_is_replaced() {
        set_last_error("a\0b");
        assert_eq!(last(), "a\u{fffd}b");
    }
}
