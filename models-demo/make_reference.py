"""Reference inputs and outputs for the exported generators, and the sample grids.

    python models-demo/make_reference.py   # needs checkpoints/*.pt and the exported .onnx files

Writes reference/:
    latents.npy               float32 (16, 64)  numpy.random.default_rng(2026).standard_normal
    labels.npy                int64   (16,)     arange(16) % 4
    <name>.torch.npy          float32 (16, 3, 32, 32)  PyTorch eval-mode output
    <name>.onnxref.npy        float32 (16, 3, 32, 32)  onnx.reference.ReferenceEvaluator on <name>.onnx
    manifest.json             what each file is, input names, measured errors
for <name> in tiles, tiles-dynamo, tiles-kind, tiles-kind-dynamo; and the grids
tiles-samples.png, tiles-kind-samples.png next to this file.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import onnx
import torch
from onnx.reference import ReferenceEvaluator

import dataset
from export import load_generator

HERE = Path(__file__).resolve().parent
OUT = HERE  # train.py --quick points OUT, REF and CHECKPOINTS elsewhere
REF = HERE / "reference"
CHECKPOINTS = HERE / "checkpoints"
LATENT_SEED = 2026
COUNT = 16
TOLERANCE = 1e-4
SAMPLE_SEED = 7

EXPORTS = {
    "tiles": ("tiles", "legacy TorchScript exporter (dynamo=False), single file"),
    "tiles-dynamo": ("tiles", "default torch.export exporter, weights in tiles-dynamo.onnx.data"),
    "tiles-kind": ("tiles-kind", "legacy TorchScript exporter (dynamo=False), single file"),
    "tiles-kind-dynamo": ("tiles-kind", "default torch.export exporter, weights in tiles-kind-dynamo.onnx.data"),
}


def reference_inputs():
    latents = np.random.default_rng(LATENT_SEED).standard_normal((COUNT, 64), dtype=np.float32)
    labels = (np.arange(COUNT) % 4).astype(np.int64)
    return latents, labels


def torch_output(model, conditional: bool, latents: np.ndarray, labels: np.ndarray) -> np.ndarray:
    with torch.no_grad():
        z = torch.from_numpy(latents)
        out = model(z, torch.from_numpy(labels)) if conditional else model(z)
    return out.numpy().astype(np.float32)


def save_samples(models: dict) -> None:
    rng = np.random.default_rng(SAMPLE_SEED)
    if "tiles" in models:
        z = rng.standard_normal((32, 64), dtype=np.float32)
        out = torch_output(models["tiles"], False, z, np.zeros(32, dtype=np.int64))
        dataset.save_grid(out, 4, 8, OUT / "tiles-samples.png")
    if "tiles-kind" in models:
        z = np.tile(rng.standard_normal((8, 64), dtype=np.float32), (4, 1))  # same 8 latents per row
        k = np.repeat(np.arange(4), 8).astype(np.int64)
        out = torch_output(models["tiles-kind"], True, z, k)
        dataset.save_grid(out, 4, 8, OUT / "tiles-kind-samples.png")


def kind_colour_check(model) -> dict:
    """Mean colour of 512 generated tiles per kind against the dataset's kind means."""
    stored = HERE / "reference" / "kind-means.json"
    means = json.loads(stored.read_text()) if stored.exists() else dataset.kind_means()
    target = np.asarray(means["mean_rgb"], dtype=np.float64)
    rng = np.random.default_rng(11)
    got = []
    for k in range(4):
        z = rng.standard_normal((512, 64), dtype=np.float32)
        out = torch_output(model, True, z, np.full(512, k, dtype=np.int64))
        got.append(out.mean(axis=(0, 2, 3)))
    got = np.asarray(got, dtype=np.float64)
    dist = np.sqrt(((got[:, None] - target[None]) ** 2).sum(-1))
    nearest = dist.argmin(axis=1)
    return {
        "generated_mean_rgb": [[round(float(v), 4) for v in row] for row in got],
        "distance_to_own_kind_mean": [round(float(dist[k, k]), 4) for k in range(4)],
        "nearest_kind": [means["kinds"][i] for i in nearest],
    }


def main() -> None:
    REF.mkdir(parents=True, exist_ok=True)
    latents, labels = reference_inputs()
    np.save(REF / "latents.npy", latents)
    np.save(REF / "labels.npy", labels)

    models = {}
    manifest = {
        "latents": {"file": "latents.npy", "dtype": "float32", "shape": list(latents.shape),
                    "made_by": f"numpy.random.default_rng({LATENT_SEED}).standard_normal((16, 64), dtype=float32)"},
        "labels": {"file": "labels.npy", "dtype": "int64", "shape": list(labels.shape),
                   "made_by": "numpy.arange(16) % 4", "kinds": dataset.KINDS},
        "tolerance": TOLERANCE,
        "models": {},
    }
    worst = 0.0
    for export_name, (model_name, how) in EXPORTS.items():
        path = OUT / f"{export_name}.onnx"
        if not path.exists() or not (CHECKPOINTS / f"{model_name}.pt").exists():
            print(f"skip {export_name}: missing {path.name} or checkpoint")
            continue
        conditional = model_name == "tiles-kind"
        if model_name not in models:
            models[model_name] = load_generator(model_name, CHECKPOINTS)
        expected = torch_output(models[model_name], conditional, latents, labels)

        feeds = {"z": latents}
        if conditional:
            feeds["kind"] = labels
        evaluator = ReferenceEvaluator(str(path))  # resolves external data next to the file
        (got,) = evaluator.run(["image"], feeds)
        got = np.asarray(got, dtype=np.float32)
        assert got.shape == (COUNT, 3, 32, 32), got.shape
        err = float(np.abs(got - expected).max())
        worst = max(worst, err)
        print(f"{export_name:18s} ReferenceEvaluator vs torch: max abs error {err:.3e}")
        assert err <= TOLERANCE, f"{export_name}: {err} > {TOLERANCE}"
        np.save(REF / f"{export_name}.torch.npy", expected)
        np.save(REF / f"{export_name}.onnxref.npy", got)

        m = onnx.load(str(path), load_external_data=False)
        data_files = sorted({e.value for t in m.graph.initializer for e in t.external_data if e.key == "location"})
        manifest["models"][export_name] = {
            "onnx": path.name,
            "external_data": data_files,
            "exporter": how,
            "opset": {(o.domain or "ai.onnx"): o.version for o in m.opset_import},
            "inputs": {"z": "float32 [N, 64]", **({"kind": "int64 [N]"} if conditional else {})},
            "outputs": {"image": "float32 [N, 3, 32, 32]"},
            "feeds": {"z": "latents.npy", **({"kind": "labels.npy"} if conditional else {})},
            "torch": f"{export_name}.torch.npy",
            "onnxref": f"{export_name}.onnxref.npy",
            "max_abs_err_onnxref_vs_torch": err,
        }

    if "tiles-kind" in models:
        check = kind_colour_check(models["tiles-kind"])
        manifest["tiles_kind_colour_check"] = check
        print(f"tiles-kind mean colours per kind: {check['generated_mean_rgb']}, "
              f"nearest dataset kind: {check['nearest_kind']}")
    (REF / "manifest.json").write_text(json.dumps(manifest, indent=2) + "\n")
    save_samples(models)
    print(f"worst ReferenceEvaluator vs torch error: {worst:.3e} (tolerance {TOLERANCE})")


if __name__ == "__main__":
    main()
