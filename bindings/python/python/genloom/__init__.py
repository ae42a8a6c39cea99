"""genloom: run GAN image generators exported to ONNX on a CPU, and gate their exports.

The pipeline mirrors the Rust crate: a path or bytes -> :class:`Model` (checked, with its
signature) -> :class:`Generator` (optimised plans, shareable between threads) -> float images
(NumPy, in the model's layout) -> 8-bit pixels (NumPy ``uint8`` ``[N, H, W, C]``).

>>> import genloom
>>> g = genloom.Generator("models-demo/tiles.onnx")
>>> z = g.sample_latents(seed=7, count=4)
>>> images = g.generate(z)
>>> pixels = g.to_pixels(images)
"""

import json as _json
import os as _os

from . import reference
from ._errors import (
    ArgumentError,
    CancelledError,
    GenloomError,
    InferenceError,
    IoError,
    LimitError,
    LoadError,
    NpyError,
    SignatureError,
)
from ._native import DEFAULT_SEED, VERSION, Generator, Model, latent_path, lerp, slerp
from . import _native

__version__ = VERSION

_MODEL_OPTIONS = ("latent_input", "label_input", "label_classes", "image_output", "layout", "range")

_CHECK_OPTIONS = (
    "max_batch",
    "count",
    "batch_atol",
    "batch_rtol",
    "parity_atol",
    "parity_rtol",
    "range_tolerance",
    "max_saturated",
    "min_diversity",
    "max_duplicates",
    "dead_ratio",
    "min_psnr",
    "min_ssim",
)


def _split(options, names, what):
    unknown = sorted(set(options) - set(names))
    if unknown:
        raise ArgumentError(
            f"unknown {what} option(s) {', '.join(unknown)}; expected some of {', '.join(names)}"
        )
    return {k: v for k, v in options.items() if v is not None}


def check(
    path,
    *,
    reference=None,
    labels=None,
    against=None,
    seed=DEFAULT_SEED,
    strict=False,
    skip=(),
    model_options=None,
    **thresholds,
):
    """Runs the release gate on the model at ``path`` and returns its report (schema
    ``genloom.check/1``) as a dict: the same report as ``genloom check --json``.

    ``reference=(latents, outputs)`` holds the training framework's outputs for those latents
    (``labels`` too, for a conditional model); ``against`` is the source an export was made
    from. The thresholds are keyword arguments named as the command's flags (``count``,
    ``max_batch``, ``batch_atol``, ``parity_atol``, ``min_psnr``, ...). A failed gate is a report,
    not an exception: :func:`passed` tells whether it passed.
    """
    options = _split(thresholds, _CHECK_OPTIONS, "check")
    options["seed"] = seed
    options["strict"] = strict
    load = _split(model_options or {}, _MODEL_OPTIONS, "model")
    if reference is not None:
        if not isinstance(reference, (tuple, list)) or len(reference) != 2:
            raise ArgumentError("reference is expected as a pair (latents, outputs) of arrays")
        reference = tuple(reference)
    text = _native.check(
        _os.fspath(path),
        options=options,
        reference=reference,
        labels=labels,
        against=None if against is None else _os.fspath(against),
        skip=list(skip),
        load=load,
    )
    return _json.loads(text)


def passed(report):
    """Whether a :func:`check` report passes the gate: no failed check, and no warning when
    the gate ran with ``strict=True`` (the rule of the command's exit status)."""
    return report["failed"] == 0 and not (report["strict"] and report["warned"] > 0)


def convert(
    path,
    to="f16",
    *,
    out,
    per_channel=True,
    keep_float=None,
    eval_seed=DEFAULT_SEED,
    eval_count=64,
    model_options=None,
):
    """Writes an ``f32``, ``f16`` or ``int8`` export of the model at ``path`` to ``out`` and
    returns its report (fidelity against the source included) as a dict, as
    ``genloom convert --report``. ``keep_float``: ONNX node names kept in f32 (``[]`` keeps
    none; ``None`` the default choice)."""
    load = _split(model_options or {}, _MODEL_OPTIONS, "model")
    text = _native.convert_model(
        _os.fspath(path),
        to=to,
        out=_os.fspath(out),
        per_channel=per_channel,
        keep_float=None if keep_float is None else list(keep_float),
        eval_seed=eval_seed,
        eval_count=eval_count,
        load=load,
    )
    return _json.loads(text)


def compare(reference, other, *, seed=DEFAULT_SEED, count=64):
    """Generates the same seeded latents with two models (paths) and returns their fidelity
    (PSNR, SSIM, largest difference) as a dict."""
    return _json.loads(_native.compare(_os.fspath(reference), _os.fspath(other), seed=seed, count=count))


def bench(path, *, micro_batches=None, threads=None, iters=40, count=512, f16_compute=False):
    """Measures the model at ``path`` (batch-1 latency, the fastest micro-batch, throughput per
    thread count) and returns the measurement as a dict. Heap figures are zero: the extension
    does not count allocations (the ``genloom bench`` command does)."""
    text = _native.bench(
        _os.fspath(path),
        micro_batches=None if micro_batches is None else list(micro_batches),
        threads=None if threads is None else list(threads),
        iters=iters,
        count=count,
        f16_compute=f16_compute,
    )
    return _json.loads(text)


__all__ = [
    "Model",
    "Generator",
    "lerp",
    "slerp",
    "latent_path",
    "check",
    "passed",
    "convert",
    "compare",
    "bench",
    "reference",
    "DEFAULT_SEED",
    "VERSION",
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
