//! Shared pieces of the genloom fuzz targets.
//!
//! # Panics
//! libfuzzer-sys installs a panic hook that aborts the process at the panic site, before
//! unwinding. genloom deliberately catches tract's panics (`model::guard`) and the C ABI catches
//! every panic at its boundary, so with that hook a panic the library handles as documented would
//! be reported as a crash. [`install_panic_hook`] replaces it with a quiet hook that only records
//! the panic; [`guarded`] then aborts (a crash for libFuzzer) when a panic escapes the genloom
//! API, after printing where it was raised. So a caught panic passes and an escaped one fails.
//!
//! Each distinct panic location is printed once per process (`genloom-fuzz: panic at ...`), so a
//! run shows which internal errors tract reached. Set `GENLOOM_FUZZ_VERBOSE_PANICS=1` to print
//! every panic, and `RUST_BACKTRACE=1` to record a backtrace with each one.

use std::backtrace::{Backtrace, BacktraceStatus};
use std::cell::RefCell;
use std::collections::HashSet;
use std::panic::{self, AssertUnwindSafe};
use std::sync::{Mutex, Once};

thread_local! {
    static LAST_PANIC: RefCell<Option<String>> = const { RefCell::new(None) };
}

static SEEN: Mutex<Option<HashSet<String>>> = Mutex::new(None);

/// Replaces libfuzzer-sys's aborting panic hook with one that records (see the module docs).
/// Cheap after the first call; call it at the start of every target.
pub fn install_panic_hook() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        let verbose = std::env::var_os("GENLOOM_FUZZ_VERBOSE_PANICS").is_some();
        panic::set_hook(Box::new(move |info| {
            let location =
                info.location().map(|l| format!("{}:{}:{}", l.file(), l.line(), l.column())).unwrap_or_default();
            let payload = info.payload();
            let message = payload
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| payload.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "(a panic with no message)".into());
            let backtrace = Backtrace::capture();
            let mut text = format!("panic at {location}: {message}");
            if backtrace.status() == BacktraceStatus::Captured {
                text.push_str(&format!("\n{backtrace}"));
            }
            let first = {
                let mut seen = SEEN.lock().unwrap_or_else(|e| e.into_inner());
                seen.get_or_insert_with(HashSet::new).insert(location)
            };
            if first || verbose {
                eprintln!("genloom-fuzz: {text}");
            }
            let _ = LAST_PANIC.try_with(|p| *p.borrow_mut() = Some(text));
        }));
    });
}

/// The last panic recorded on this thread, if any (message, location and, with
/// `RUST_BACKTRACE=1`, the backtrace).
pub fn last_panic() -> Option<String> {
    LAST_PANIC.try_with(|p| p.borrow().clone()).ok().flatten()
}

/// Runs one fuzz iteration; a panic that escapes it is a crash: it is printed and the process
/// aborts, which libFuzzer reports as a crash and saves the input.
pub fn guarded(f: impl FnOnce()) {
    let _ = LAST_PANIC.try_with(|p| *p.borrow_mut() = None);
    if panic::catch_unwind(AssertUnwindSafe(f)).is_err() {
        eprintln!(
            "genloom-fuzz: a panic escaped the genloom API: {}",
            last_panic().unwrap_or_else(|| "(not recorded)".into())
        );
        std::process::abort();
    }
}

/// Reads fuzz bytes as simple values, returning zeros once the input runs out.
#[derive(Debug)]
pub struct Bytes<'a> {
    data: &'a [u8],
}

impl<'a> Bytes<'a> {
    /// Reads from `data`.
    pub fn new(data: &'a [u8]) -> Bytes<'a> {
        Bytes { data }
    }

    /// The next `N` bytes, zero-padded past the end.
    pub fn array<const N: usize>(&mut self) -> [u8; N] {
        let mut out = [0u8; N];
        let n = N.min(self.data.len());
        out[..n].copy_from_slice(&self.data[..n]);
        self.data = &self.data[n..];
        out
    }

    /// One byte.
    pub fn u8(&mut self) -> u8 {
        self.array::<1>()[0]
    }

    /// A bool from one byte.
    pub fn bool(&mut self) -> bool {
        self.u8() & 1 == 1
    }

    /// Little-endian u16.
    pub fn u16(&mut self) -> u16 {
        u16::from_le_bytes(self.array())
    }

    /// Little-endian u32.
    pub fn u32(&mut self) -> u32 {
        u32::from_le_bytes(self.array())
    }

    /// Little-endian u64.
    pub fn u64(&mut self) -> u64 {
        u64::from_le_bytes(self.array())
    }

    /// Any f32 bit pattern (NaN, infinities, subnormals and negative zero included).
    pub fn f32(&mut self) -> f32 {
        f32::from_bits(self.u32())
    }

    /// Any f64 bit pattern.
    pub fn f64(&mut self) -> f64 {
        f64::from_bits(self.u64())
    }

    /// A value in `lo..=hi`.
    pub fn range(&mut self, lo: usize, hi: usize) -> usize {
        debug_assert!(lo <= hi);
        lo + (self.u32() as usize) % (hi - lo + 1)
    }

    /// A float that is often interesting: one byte picks a special value, a small "typical"
    /// value, or (otherwise) any bit pattern.
    pub fn edgy_f32(&mut self) -> f32 {
        match self.u8() % 16 {
            0 => f32::NAN,
            1 => f32::INFINITY,
            2 => f32::NEG_INFINITY,
            3 => 0.0,
            4 => -0.0,
            5 => f32::MIN_POSITIVE,
            6 => f32::MAX,
            7 => f32::EPSILON,
            8..=11 => (self.u16() as f32) / 8192.0 - 4.0, // -4 .. 4, step 1/8192
            _ => self.f32(),
        }
    }

    /// Whatever is left.
    pub fn rest(&mut self) -> &'a [u8] {
        std::mem::take(&mut self.data)
    }

    /// Whether the input is used up.
    pub fn is_empty(&self) -> bool {
        self.data.is_empty()
    }
}
