//! The tract panic guard: every tract call runs inside it, so a model that reaches an
//! unimplemented path in tract gives an error, never a crash of the host application.

use crate::error::{BoxError, Error, Result, TractStage};
use tract_onnx::prelude::TractResult;

/// Runs a tract step, turning both its errors and its panics into [`Error::Tract`]: tract is a
/// large engine, and a model that reaches an unimplemented path in it must not take the host
/// application down.
pub(crate) fn guard<T>(action: impl Into<String>, f: impl FnOnce() -> TractResult<T>) -> Result<T> {
    guard_stage(TractStage::Prepare, action, f)
}

/// As [`guard`], for running a plan: its failures are inference errors.
pub(crate) fn guard_run<T>(action: impl Into<String>, f: impl FnOnce() -> TractResult<T>) -> Result<T> {
    guard_stage(TractStage::Run, action, f)
}

fn guard_stage<T>(
    stage: TractStage,
    action: impl Into<String>,
    f: impl FnOnce() -> TractResult<T>,
) -> Result<T> {
    let make = |action: String, e: BoxError| Error::Tract { action, stage, source: e };
    match std::panic::catch_unwind(std::panic::AssertUnwindSafe(f)) {
        Ok(Ok(v)) => Ok(v),
        Ok(Err(e)) => Err(make(action.into(), e.into())),
        Err(panic) => {
            let msg = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "an unknown panic".into());
            Err(make(action.into(), format!("tract stopped on an internal error (panic: {msg})").into()))
        }
    }
}
