//! The gate's report: JSON through serde (schema `genloom.check/1`) and text through `Display`,
//! so every binding shows the same words.

use super::{CheckId, CheckOptions, Status};
use crate::probe::ActivationReport;
use crate::signature::Signature;

/// One check's result.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CheckResult {
    /// Which check.
    pub id: CheckId,
    /// Outcome.
    pub status: Status,
    /// What was measured, in words with the figure.
    pub measured: String,
    /// The threshold applied.
    pub threshold: String,
    /// Why it failed or warned, or notes.
    pub detail: String,
}

/// A threshold in force, with where its default comes from.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Threshold {
    /// The check it belongs to.
    pub check: CheckId,
    /// What it bounds.
    pub name: String,
    /// Its value in this run.
    pub value: f64,
    /// Where the default comes from: a standard, a paper, or "common practice, no source".
    pub source: String,
}

/// The gate's report.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CheckReport {
    /// Schema id of this JSON document.
    pub schema: String,
    /// The genloom version that checked.
    pub genloom_version: String,
    /// The model checked (its path or the name given).
    pub model: String,
    /// SHA-256 of the model file (with its external data), hex.
    pub model_sha256: String,
    /// Seed of every latent the gate drew.
    pub seed: u64,
    /// Whether warnings fail the gate.
    pub strict: bool,
    /// Its signature, when one was found.
    pub signature: Option<Signature>,
    /// Every check, in order.
    pub checks: Vec<CheckResult>,
    /// Every threshold in force.
    pub thresholds: Vec<Threshold>,
    /// What the activation probe saw (when `finiteness` ran).
    pub activations: Option<ActivationReport>,
    /// Checks that passed.
    pub passed: usize,
    /// Checks that warned.
    pub warned: usize,
    /// Checks that failed.
    pub failed: usize,
    /// Checks not run.
    pub skipped: usize,
    /// Wall time of the whole gate in milliseconds.
    pub elapsed_ms: f64,
}

/// What a report is made from.
pub(super) struct Parts<'a> {
    pub model: String,
    pub model_sha256: String,
    pub signature: Option<Signature>,
    pub checks: Vec<CheckResult>,
    pub options: &'a CheckOptions,
    pub activations: Option<ActivationReport>,
    pub elapsed_ms: f64,
}

impl CheckReport {
    pub(super) fn new(p: Parts<'_>) -> CheckReport {
        let count = |s: Status| p.checks.iter().filter(|c| c.status == s).count();
        CheckReport {
            schema: "genloom.check/1".into(),
            genloom_version: crate::VERSION.into(),
            model: p.model,
            model_sha256: p.model_sha256,
            seed: p.options.seed,
            strict: p.options.strict,
            signature: p.signature,
            passed: count(Status::Pass),
            warned: count(Status::Warn),
            failed: count(Status::Fail),
            skipped: count(Status::Skip),
            checks: p.checks,
            thresholds: p.options.thresholds(),
            activations: p.activations,
            elapsed_ms: p.elapsed_ms,
        }
    }

    /// Whether the model may ship: nothing failed (and, when strict, nothing warned).
    pub fn ok(&self) -> bool {
        self.failed == 0 && !(self.strict && self.warned > 0)
    }

    /// The result of one check.
    pub fn get(&self, id: CheckId) -> Option<&CheckResult> {
        self.checks.iter().find(|c| c.id == id)
    }
}

impl std::fmt::Display for CheckReport {
    /// The text report: one line a check (pass, WARN, FAIL, skip), the threshold of those that
    /// did not pass, the detail on the next line, then the verdict.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        writeln!(f, "{} (sha256 {})", self.model, &self.model_sha256[..self.model_sha256.len().min(16)])?;
        for c in &self.checks {
            let mark = match c.status {
                Status::Pass => "pass",
                Status::Warn => "WARN",
                Status::Fail => "FAIL",
                Status::Skip => "skip",
            };
            write!(f, "  {mark}  {:<19}", c.id.as_str())?;
            if !c.measured.is_empty() {
                write!(f, " {}", c.measured)?;
            }
            if !c.threshold.is_empty() && c.status != Status::Pass {
                write!(f, " [threshold: {}]", c.threshold)?;
            }
            if !c.detail.is_empty() {
                if c.measured.is_empty() {
                    write!(f, " {}", c.detail)?;
                } else {
                    write!(f, "\n        {}", c.detail)?;
                }
            }
            writeln!(f)?;
        }
        let verdict = if self.ok() {
            "ship"
        } else if self.failed == 0 {
            "do not ship (strict: warnings fail)"
        } else {
            "do not ship"
        };
        write!(
            f,
            "{verdict}: {} passed, {} warned, {} failed, {} skipped ({:.0} ms, seed {}, genloom {})",
            self.passed,
            self.warned,
            self.failed,
            self.skipped,
            self.elapsed_ms,
            self.seed,
            self.genloom_version
        )
    }
}
