//! The one error type of the runtime, grouped by concern.
//!
//! Every message names the thing that was wrong and gives the actual and the expected value, so
//! that a caller can show it to a person as it is. tract's own error is kept as the
//! [`std::error::Error::source`] of [`Error::Tract`], never flattened into a string.

use std::path::PathBuf;

/// A boxed error from a library underneath (tract, image, I/O).
pub type BoxError = Box<dyn std::error::Error + Send + Sync + 'static>;

/// Everything that can go wrong in genloom.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    // ----- load -----
    /// The model bytes were empty.
    #[error("{what} is empty (0 bytes): expected an ONNX model")]
    EmptyModel {
        /// What was read (a path or "model bytes").
        what: String,
    },
    /// The model bytes look like an HTML page (a download that went wrong).
    #[error(
        "{what} is an HTML page, not an ONNX model: the download probably saved a web page; fetch the raw file"
    )]
    HtmlPage {
        /// What was read.
        what: String,
    },
    /// The model bytes are a Git LFS pointer, not the model.
    #[error(
        "{what} is a Git LFS pointer file ({size} bytes of text), not the model: run `git lfs pull` to fetch the real file"
    )]
    LfsPointer {
        /// What was read.
        what: String,
        /// Size of the pointer file.
        size: usize,
    },
    /// The bytes are not an ONNX protobuf.
    #[error("{what} is not an ONNX model: {reason}")]
    NotOnnx {
        /// What was read.
        what: String,
        /// Why it was refused.
        reason: String,
    },
    /// A tensor of the model refers to external data, but the model was given as bytes.
    #[error(
        "the model stores tensor `{tensor}` in the external file `{location}`, which cannot be read from bytes alone; \
         load the model from its path (with the data file beside it), or pack it into one file with \
         `genloom convert MODEL --to f32 --out packed.onnx` (the runtime's `convert` with precision f32 does the same)"
    )]
    ExternalDataNeedsPath {
        /// The tensor that needs external data.
        tensor: String,
        /// The location it names.
        location: String,
    },
    /// An external-data location is not a plain relative path inside the model's folder.
    #[error(
        "tensor `{tensor}` names external data at `{location}`, which {reason}; expected a relative file name inside the model's folder"
    )]
    ExternalDataLocation {
        /// The tensor.
        tensor: String,
        /// The location it names.
        location: String,
        /// What is wrong with it.
        reason: String,
    },
    /// An external-data file could not be read.
    #[error("tensor `{tensor}` needs external data file {}, which could not be read: {source}", path.display())]
    ExternalDataMissing {
        /// The tensor.
        tensor: String,
        /// The resolved path.
        path: PathBuf,
        /// The I/O error.
        #[source]
        source: std::io::Error,
    },
    /// An external-data range does not fit the file or the tensor.
    #[error("tensor `{tensor}`: {reason}")]
    ExternalDataRange {
        /// The tensor.
        tensor: String,
        /// What does not fit.
        reason: String,
    },
    /// A tensor's declared size disagrees with its data.
    #[error("tensor `{tensor}` declares {expected} bytes of data ({shape:?} x {dtype}) but holds {actual}")]
    TensorSize {
        /// The tensor.
        tensor: String,
        /// Its declared shape.
        shape: Vec<i64>,
        /// Its element type.
        dtype: String,
        /// Bytes it holds.
        actual: usize,
        /// Bytes it should hold.
        expected: usize,
    },
    /// The graph itself is malformed (missing inputs, cycles, unknown values).
    #[error("the model's graph is malformed: {reason}")]
    Graph {
        /// What is wrong.
        reason: String,
    },
    /// The graph uses an ONNX operator this build's tract does not register. Native builds carry
    /// all of tract's operators; the WebAssembly build carries those image generators use.
    #[error("node `{node}` is the ONNX operator `{op_type}`, which {build} does not carry{hint}")]
    UnsupportedOperator {
        /// The node's name (or its position when it has none).
        node: String,
        /// Its operator.
        op_type: String,
        /// "this build of genloom" or "genloom's web build".
        build: &'static str,
        /// What to do about it, starting with "; " (empty when there is nothing to add).
        hint: &'static str,
    },
    /// A node's attribute (or constant shape input) breaks a rule of the ONNX operator
    /// specification that tract relies on, or asks for something genloom cannot run.
    #[error("node `{node}` ({op_type}): {attribute} {reason}")]
    Attribute {
        /// The node's name (or its position when it has none).
        node: String,
        /// Its operator.
        op_type: String,
        /// The attribute or input at fault.
        attribute: String,
        /// What is wrong and what was expected.
        reason: String,
    },
    /// tract refused or failed at a step.
    #[error("tract could not {action}: {source}")]
    Tract {
        /// What was being done ("parse the model", "optimise the batch-8 plan", ...).
        action: String,
        /// Whether it failed preparing the model (parsing, typing, optimising, building a plan)
        /// or running it.
        stage: TractStage,
        /// tract's error, with its whole chain.
        #[source]
        source: BoxError,
    },

    // ----- signature -----
    /// The generator's signature could not be found or is not supported.
    #[error("signature: {reason}")]
    Signature {
        /// What is missing or ambiguous, with the names found.
        reason: String,
    },
    /// The output value range could not be discovered and was not declared.
    #[error(
        "the value range of output `{output}` is unknown (its last op is {last_op}, not Tanh or Sigmoid); \
         declare it in the signature overrides (range tanh for [-1,1], sigmoid for [0,1], byte for [0,255]; \
         `--range` on the command line, `SignatureOverrides::range` in Rust)"
    )]
    RangeUnknown {
        /// The output.
        output: String,
        /// The op that produces it.
        last_op: String,
    },

    // ----- latent and labels -----
    /// Latent vectors of the wrong size.
    #[error("latent input `{name}` has {actual} values per sample, the model expects {expected}")]
    LatentDim {
        /// Input name.
        name: String,
        /// Values given per sample.
        actual: usize,
        /// Values the model expects.
        expected: usize,
    },
    /// A latent holds NaN or infinity.
    #[error(
        "latent {index} has a non-finite value ({value}) at component {component}: latents must be finite"
    )]
    NonFiniteLatent {
        /// Which latent.
        index: usize,
        /// Which component.
        component: usize,
        /// The value, printed.
        value: f32,
    },
    /// A label is out of range.
    #[error("label {index} is {label}, the model has classes 0..{classes} (0 to {})", classes.saturating_sub(1))]
    LabelOutOfRange {
        /// Which sample.
        index: usize,
        /// The label given.
        label: i64,
        /// The number of classes.
        classes: usize,
    },
    /// Labels were missing, extra, or of the wrong count.
    #[error("labels: {reason}")]
    Labels {
        /// What is wrong.
        reason: String,
    },
    /// An option has a value outside what it accepts.
    #[error("{option} is {value}, expected {expected}")]
    InvalidOption {
        /// The option's name.
        option: String,
        /// The value given.
        value: String,
        /// What it accepts.
        expected: String,
    },

    /// The model's activations pass binary16's largest finite value (65504) for ordinary latents,
    /// so computing it in f16 would make infinities.
    #[error(
        "node `{node}` ({op}) reaches {max_abs:.4e} for ordinary latents, past binary16's largest finite value \
         65504: the model cannot compute in f16 (keep f32 compute, or rescale that layer in the source model)"
    )]
    F16Overflow {
        /// The first node that overflows.
        node: String,
        /// Its operator.
        op: String,
        /// Its largest absolute value in f32.
        max_abs: f32,
    },

    // ----- NPY -----
    /// An NPY file or buffer could not be read or does not hold what is needed.
    #[error("NPY {what}: {reason}")]
    Npy {
        /// What was read.
        what: String,
        /// What is wrong.
        reason: String,
    },

    // ----- inference -----
    /// Inference ran but its output was not what the signature promised.
    #[error("inference: {reason}")]
    Output {
        /// What was wrong.
        reason: String,
    },
    /// The caller cancelled the work.
    #[error("cancelled after {done} of {total} images")]
    Cancelled {
        /// Images finished.
        done: usize,
        /// Images asked for.
        total: usize,
    },

    // ----- limits -----
    /// A request goes past a limit.
    #[error("{limit} is {actual}, over the limit of {max} (raise `{setting}` if this is intended)")]
    Limit {
        /// What is limited, in words.
        limit: String,
        /// The requested amount.
        actual: u64,
        /// The limit.
        max: u64,
        /// The setting that raises it.
        setting: String,
    },

    // ----- io -----
    /// A file could not be read or written.
    #[error("could not {action} {}: {source}", path.display())]
    Io {
        /// What was being done ("read", "write", "rename").
        action: String,
        /// The file.
        path: PathBuf,
        /// The I/O error.
        #[source]
        source: std::io::Error,
    },
    /// Image encoding failed.
    #[error("could not encode {what}: {source}")]
    Image {
        /// What was being encoded.
        what: String,
        /// The image crate's error.
        #[source]
        source: BoxError,
    },
}

/// Where a tract step failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum TractStage {
    /// Parsing, typing, optimising, or building a plan: the model cannot be prepared.
    Prepare,
    /// Running a plan on inputs.
    Run,
}

/// The kind of an [`Error`]: what a binding maps to its own vocabulary (a C status, an exit
/// code, a JS error name, a Python exception class), each with one match.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum ErrorKind {
    /// The model could not be read or prepared (bad bytes, malformed graph, an operator or a
    /// shape tract refuses).
    Load,
    /// The model loaded but does not look like a supported generator.
    Signature,
    /// A value given by the caller is outside what is accepted.
    InvalidArgument,
    /// An NPY file or buffer could not be read.
    Npy,
    /// Running the model failed, or its output broke the signature.
    Inference,
    /// The caller cancelled.
    Cancelled,
    /// A request went past a limit.
    Limit,
    /// A file could not be read or written, or an image could not be encoded.
    Io,
}

impl ErrorKind {
    /// A short stable name: `load`, `signature`, `argument`, `npy`, `inference`, `cancelled`,
    /// `limits` or `io`.
    pub fn as_str(self) -> &'static str {
        match self {
            ErrorKind::Load => "load",
            ErrorKind::Signature => "signature",
            ErrorKind::InvalidArgument => "argument",
            ErrorKind::Npy => "npy",
            ErrorKind::Inference => "inference",
            ErrorKind::Cancelled => "cancelled",
            ErrorKind::Limit => "limits",
            ErrorKind::Io => "io",
        }
    }
}

impl std::fmt::Display for ErrorKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl Error {
    /// The error's kind.
    pub fn kind(&self) -> ErrorKind {
        match self {
            Error::EmptyModel { .. }
            | Error::HtmlPage { .. }
            | Error::LfsPointer { .. }
            | Error::NotOnnx { .. }
            | Error::ExternalDataNeedsPath { .. }
            | Error::ExternalDataLocation { .. }
            | Error::ExternalDataMissing { .. }
            | Error::ExternalDataRange { .. }
            | Error::TensorSize { .. }
            | Error::Graph { .. }
            | Error::UnsupportedOperator { .. }
            | Error::Attribute { .. }
            | Error::Tract { stage: TractStage::Prepare, .. } => ErrorKind::Load,
            Error::Tract { stage: TractStage::Run, .. } | Error::Output { .. } => ErrorKind::Inference,
            Error::Signature { .. } | Error::RangeUnknown { .. } => ErrorKind::Signature,
            Error::LatentDim { .. }
            | Error::NonFiniteLatent { .. }
            | Error::LabelOutOfRange { .. }
            | Error::Labels { .. }
            | Error::InvalidOption { .. }
            | Error::F16Overflow { .. } => ErrorKind::InvalidArgument,
            Error::Npy { .. } => ErrorKind::Npy,
            Error::Cancelled { .. } => ErrorKind::Cancelled,
            Error::Limit { .. } => ErrorKind::Limit,
            Error::Io { .. } | Error::Image { .. } => ErrorKind::Io,
        }
    }

    /// The message with every cause underneath it (tract's own chain included), joined by
    /// ": ": what a binding that has only a string to hand over (C, JS) should show.
    pub fn chain(&self) -> String {
        let mut s = self.to_string();
        let mut cause = std::error::Error::source(self);
        while let Some(c) = cause {
            let text = c.to_string();
            if !s.contains(&text) {
                s.push_str(": ");
                s.push_str(&text);
            }
            cause = c.source();
        }
        s
    }

    /// A tract failure while preparing the model.
    pub(crate) fn tract(action: impl Into<String>, e: impl Into<BoxError>) -> Error {
        Error::Tract { action: action.into(), stage: TractStage::Prepare, source: e.into() }
    }

    /// A tract failure while running a plan.
    pub(crate) fn tract_run(action: impl Into<String>, e: impl Into<BoxError>) -> Error {
        Error::Tract { action: action.into(), stage: TractStage::Run, source: e.into() }
    }

    pub(crate) fn invalid(
        option: impl Into<String>,
        value: impl std::fmt::Display,
        expected: impl Into<String>,
    ) -> Error {
        Error::InvalidOption { option: option.into(), value: value.to_string(), expected: expected.into() }
    }

    pub(crate) fn io(action: &str, path: impl Into<PathBuf>, source: std::io::Error) -> Error {
        Error::Io { action: action.to_string(), path: path.into(), source }
    }
}

/// The runtime's result type.
pub type Result<T, E = Error> = std::result::Result<T, E>;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tract_errors_are_split_by_stage_and_keep_their_cause() {
        let inner: BoxError = "inner cause".into();
        let e = Error::tract("type the model", inner);
        assert_eq!(e.kind(), ErrorKind::Load);
        assert_eq!(e.chain(), "tract could not type the model: inner cause");
        let e = Error::tract_run("run a batch of 8", std::io::Error::other("deeper"));
        assert_eq!(e.kind(), ErrorKind::Inference);
        assert_eq!(e.chain(), "tract could not run a batch of 8: deeper");
        assert_eq!(e.kind().as_str(), "inference");
        // A cause already quoted by the message is not repeated.
        let io = Error::io("read", "m.onnx", std::io::Error::other("gone"));
        assert_eq!(io.chain(), "could not read m.onnx: gone");
        assert_eq!(io.kind(), ErrorKind::Io);
    }
}
