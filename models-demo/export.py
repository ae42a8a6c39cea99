"""Export the trained generators to ONNX, once with each PyTorch exporter.

    python models-demo/export.py     # needs checkpoints/tiles.pt and checkpoints/tiles-kind.pt

Writes, next to this file:
    tiles.onnx, tiles-kind.onnx                  legacy TorchScript exporter, opset 17, one file each
    tiles-dynamo.onnx (+ tiles-dynamo.onnx.data)  default (torch.export) exporter, weights external
    tiles-kind-dynamo.onnx (+ .onnx.data)

Inputs are `z` float32 [N, 64] (and `kind` int64 [N]); the output is `image` float32
[N, 3, 32, 32]; the batch axis is symbolic and named "N" in every file.
"""

from __future__ import annotations

import contextlib
import os
import warnings
from pathlib import Path

import onnx
import torch

from models import LATENT, NUM_KINDS, KindTileGenerator, TileGenerator

HERE = Path(__file__).resolve().parent
OUT = HERE  # where the .onnx files go (train.py --quick points this and CHECKPOINTS elsewhere)
CHECKPOINTS = HERE / "checkpoints"
LEGACY_OPSET = 17
EXTERNAL_THRESHOLD_BYTES = 64
NAMES = ["tiles", "tiles-kind"]


def load_generator(name: str, checkpoints: Path | None = None) -> torch.nn.Module:
    model = KindTileGenerator() if name == "tiles-kind" else TileGenerator()
    state = torch.load((checkpoints or CHECKPOINTS) / f"{name}.pt", map_location="cpu", weights_only=True)
    model.load_state_dict(state)
    return model.eval()


def example_inputs(name: str, batch: int = 3):
    g = torch.Generator().manual_seed(0)
    z = torch.randn(batch, LATENT, generator=g)
    if name == "tiles-kind":
        return z, torch.arange(batch, dtype=torch.int64) % NUM_KINDS
    return (z,)


def io_names(name: str):
    return (["z", "kind"] if name == "tiles-kind" else ["z"]), ["image"]


def _rename_batch_dim(model: onnx.ModelProto, new: str = "N") -> None:
    """Give the symbolic batch axis of every graph input/output the same name."""
    for vi in list(model.graph.input) + list(model.graph.output):
        dim = vi.type.tensor_type.shape.dim[0]
        if dim.dim_param or not dim.HasField("dim_value"):
            dim.dim_param = new


def export_legacy(model: torch.nn.Module, name: str) -> Path:
    path = OUT / f"{name}.onnx"
    inputs, outputs = io_names(name)
    axes = {n: {0: "N"} for n in inputs + outputs}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        torch.onnx.export(
            model,
            example_inputs(name),
            str(path),
            dynamo=False,
            opset_version=LEGACY_OPSET,
            input_names=inputs,
            output_names=outputs,
            dynamic_axes=axes,
            do_constant_folding=True,
        )
    m = onnx.load(str(path))
    onnx.checker.check_model(m, full_check=True)
    return path


def export_dynamo(model: torch.nn.Module, name: str) -> tuple[Path, Path]:
    path = OUT / f"{name}-dynamo.onnx"
    data_name = f"{name}-dynamo.onnx.data"
    inputs, outputs = io_names(name)
    batch = torch.export.Dim("N", min=1, max=4096)
    shapes = tuple({0: batch} for _ in inputs)
    for stale in (path, OUT / data_name):
        if stale.exists():
            stale.unlink()
    with warnings.catch_warnings():
        # "axis name N will not be used, since it shares the same shape constraints with another
        # axis N": z and kind share the one batch Dim, which is what we want
        warnings.simplefilter("ignore", UserWarning)
        program = torch.onnx.export(
            model,
            example_inputs(name),
            str(path),
            dynamo=True,
            input_names=inputs,
            output_names=outputs,
            dynamic_shapes=shapes,
            external_data=True,
        )
    written = sorted(p.name for p in OUT.glob(f"{name}-dynamo.onnx*"))
    m = onnx.load(str(path), load_external_data=False)
    inline = [t.name for t in m.graph.initializer if t.data_location != onnx.TensorProto.EXTERNAL]
    print(f"  {name}-dynamo: exporter wrote {written}; {len(m.graph.initializer) - len(inline)}/"
          f"{len(m.graph.initializer)} initializers external, inline: {inline}; "
          f"opset {[(o.domain or 'ai.onnx', o.version) for o in m.opset_import]}")
    del program

    # Re-save with every weight in one external file of a fixed name, so the runtime's
    # external-data path is always exercised whatever the exporter chose to inline, and name
    # the batch axis "N". Tensors under 64 bytes (int64 axes for Unsqueeze) stay inline:
    # ONNX shape inference, and so `onnx.checker` with full_check, cannot read those from
    # external data.
    m = onnx.load(str(path), load_external_data=True)
    for p in OUT.glob(f"{name}-dynamo.onnx*"):
        if p.name != path.name:
            p.unlink()
    _rename_batch_dim(m)
    # The exporter records each node's Python stack trace and class path in metadata_props,
    # machine paths included: drop them, so the file names nothing of the machine it came from.
    for node in m.graph.node:
        del node.metadata_props[:]
    # onnx checks whether `location` already exists relative to the working directory, not to
    # the model file, so save from the output folder
    with contextlib.chdir(OUT):
        onnx.save_model(
            m,
            path.name,
            save_as_external_data=True,
            all_tensors_to_one_file=True,
            location=data_name,
            size_threshold=EXTERNAL_THRESHOLD_BYTES,
            convert_attribute=False,
        )
    os.chmod(OUT / data_name, 0o644)
    check = onnx.load(str(path), load_external_data=False)
    locations = set()
    for t in check.graph.initializer:
        if t.data_type == onnx.TensorProto.FLOAT:
            assert t.data_location == onnx.TensorProto.EXTERNAL, f"weight {t.name} is not external"
        locations.update(e.value for e in t.external_data if e.key == "location")
    assert locations == {data_name}, locations
    onnx.checker.check_model(str(path), full_check=True)
    assert os.path.getsize(OUT / data_name) > 0
    return path, OUT / data_name


def describe(path: Path) -> str:
    m = onnx.load(str(path), load_external_data=False)

    def shape(vi):
        dims = [d.dim_param or d.dim_value for d in vi.type.tensor_type.shape.dim]
        return f"{vi.name}:{onnx.TensorProto.DataType.Name(vi.type.tensor_type.elem_type).lower()}{dims}"

    ops = {}
    for n in m.graph.node:
        ops[n.op_type] = ops.get(n.op_type, 0) + 1
    opset = [(o.domain or "ai.onnx", o.version) for o in m.opset_import]
    return (f"{path.name}: opset {opset}, inputs {[shape(v) for v in m.graph.input]}, "
            f"outputs {[shape(v) for v in m.graph.output]}, ops {ops}")


def main() -> None:
    for name in NAMES:
        if not (CHECKPOINTS / f"{name}.pt").exists():
            print(f"skip {name}: no checkpoint")
            continue
        model = load_generator(name)
        legacy = export_legacy(model, name)
        dyn, _ = export_dynamo(model, name)
        for p in (legacy, dyn):
            print("  " + describe(p))


if __name__ == "__main__":
    main()
