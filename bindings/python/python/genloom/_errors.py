"""The exceptions genloom raises: one base class, one subclass per kind of runtime error.

Every exception carries the runtime's message (with its causes) and ``kind``, the runtime's
short name for the kind (``load``, ``signature``, ``argument``, ``npy``, ``inference``,
``cancelled``, ``limits`` or ``io``).
"""


class GenloomError(Exception):
    """Base class of every error genloom raises."""

    kind = "error"


class LoadError(GenloomError):
    """The model could not be read or prepared (bad bytes, malformed graph, an operator or a
    shape the engine refuses)."""

    kind = "load"


class SignatureError(GenloomError):
    """The model loaded but does not look like a supported generator."""

    kind = "signature"


class ArgumentError(GenloomError, ValueError):
    """A value given by the caller is outside what is accepted (wrong shape, dtype, option)."""

    kind = "argument"


class NpyError(GenloomError):
    """An NPY file or buffer could not be read."""

    kind = "npy"


class InferenceError(GenloomError):
    """Running the model failed, or its output broke the signature."""

    kind = "inference"


class CancelledError(GenloomError):
    """The caller cancelled (a progress callback returned False)."""

    kind = "cancelled"


class LimitError(GenloomError):
    """A request went past a limit."""

    kind = "limits"


class IoError(GenloomError, OSError):
    """A file could not be read or written, or an image could not be encoded."""

    kind = "io"


__all__ = [
    "GenloomError",
    "LoadError",
    "SignatureError",
    "ArgumentError",
    "NpyError",
    "InferenceError",
    "CancelledError",
    "LimitError",
    "IoError",
]
