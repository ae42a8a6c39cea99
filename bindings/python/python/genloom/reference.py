"""Reference outputs from the training framework, for ``genloom check --reference``.

:func:`save` runs a PyTorch module (the generator as trained) on given latents and writes the
NPY files the gate compares an export with. torch is imported only when a module is run, so
the package never depends on it.
"""

import os
import sys

import numpy as np

LATENTS = "latents.npy"
OUTPUTS = "outputs.npy"
LABELS = "labels.npy"


def _as_numpy(value):
    """A torch tensor (or anything with ``detach``/``cpu``/``numpy``) or array as NumPy."""
    if hasattr(value, "detach"):
        value = value.detach()
    if hasattr(value, "cpu"):
        value = value.cpu()
    if hasattr(value, "numpy"):
        value = value.numpy()
    return np.asarray(value)


def _run(module, latents, labels):
    """Runs ``module`` in eval mode without gradients, restoring its training flag after.

    A ``torch.nn.Module`` gets torch tensors under ``torch.inference_mode()``; anything else
    with the same interface (``eval``, ``train``, called with the inputs) gets NumPy arrays.
    torch is imported here only when the caller has imported it already (a torch module exists
    only then), so this package never loads it on its own.
    """
    torch = None
    if "torch" in sys.modules:
        import torch  # noqa: F811 (already loaded by the caller)

        if not isinstance(module, torch.nn.Module):
            torch = None
    was_training = bool(getattr(module, "training", False))
    if hasattr(module, "eval"):
        module.eval()
    try:
        if torch is None:
            out = module(latents) if labels is None else module(latents, labels)
        else:
            device = next((p.device for p in module.parameters()), torch.device("cpu"))
            z = torch.from_numpy(latents).to(device)
            y = None if labels is None else torch.from_numpy(labels).to(device)
            with torch.inference_mode():
                out = module(z) if y is None else module(z, y)
    finally:
        if was_training and hasattr(module, "train"):
            module.train(True)
    if isinstance(out, (tuple, list)):
        out = out[0]
    return _as_numpy(out)


def save(module, latents, path, labels=None):
    """Runs ``module`` (eval mode, no gradients) on ``latents`` (and ``labels`` for a
    conditional generator) and writes ``latents.npy``, ``outputs.npy`` (and ``labels.npy``)
    into the folder ``path``, created when missing.

    Returns the paths written, in the order ``genloom check --reference LATENTS OUTPUTS
    [--labels-in LABELS]`` takes them, so ``genloom.check(model, reference=...)`` or the
    command can use them. Latents are written as float32 ``[count, dim]``, outputs as float32
    in the module's output layout, labels as int64.
    """
    z = np.ascontiguousarray(_as_numpy(latents), dtype=np.float32)
    if z.ndim != 2:
        raise ValueError(f"latents have shape {z.shape}, expected [count, dim]")
    y = None
    if labels is not None:
        y = np.ascontiguousarray(_as_numpy(labels), dtype=np.int64)
        if y.shape != (z.shape[0],):
            raise ValueError(f"labels have shape {y.shape}, expected ({z.shape[0]},): one per latent")
    out = np.ascontiguousarray(_run(module, z, y), dtype=np.float32)
    if out.shape[:1] != (z.shape[0],):
        raise ValueError(f"the module returned shape {out.shape}, expected one output per latent ({z.shape[0]})")
    os.makedirs(path, exist_ok=True)
    written = [(os.path.join(path, LATENTS), z), (os.path.join(path, OUTPUTS), out)]
    if y is not None:
        written.append((os.path.join(path, LABELS), y))
    for file, array in written:
        tmp = file + ".tmp"
        with open(tmp, "wb") as f:
            np.save(f, array)
        os.replace(tmp, file)
    return tuple(file for file, _ in written)


__all__ = ["save", "LATENTS", "OUTPUTS", "LABELS"]
