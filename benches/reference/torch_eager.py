#!/usr/bin/env python3
"""Times the demo generator in PyTorch eager mode, for a side-by-side with `genloom bench`.

Run by hand (PyTorch is not needed by the tests):

    pip install -r models-demo/requirements.txt
    python benches/reference/torch_eager.py [--json]

The model is rebuilt from models-demo/models.py and its weights are read from
models-demo/tiles.onnx (the legacy exporter keeps PyTorch's parameter names), so no checkpoint
is needed. Eval mode, `torch.inference_mode()`, batch 1, 8 and 64, with 1 and 2 threads; the
figure per row is the median over repeated calls.
"""
import argparse
import json
import statistics
import sys
import time
from pathlib import Path

import numpy as np
import onnx
import torch
from onnx import numpy_helper

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "models-demo"))
from models import TileGenerator  # noqa: E402


def load_model():
    g = TileGenerator()
    weights = {t.name: torch.from_numpy(numpy_helper.to_array(t).copy()) for t in onnx.load(str(ROOT / "models-demo" / "tiles.onnx")).graph.initializer}
    state = g.state_dict()
    missing = [k for k in state if k not in weights and not k.endswith("num_batches_tracked")]
    if missing:
        raise SystemExit(f"tiles.onnx lacks weights {missing}")
    g.load_state_dict({k: weights.get(k, v) for k, v in state.items()})
    return g.eval()


def time_batch(g, batch, reps):
    z = torch.from_numpy(np.random.default_rng(0).standard_normal((batch, 64), dtype=np.float32))
    with torch.inference_mode():
        for _ in range(5):
            g(z)
        times = []
        for _ in range(reps):
            t = time.perf_counter()
            g(z)
            times.append(time.perf_counter() - t)
    return statistics.median(times) * 1e3


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--json", action="store_true")
    args = ap.parse_args()
    g = load_model()
    rows = []
    for threads in (1, 2):
        torch.set_num_threads(threads)
        for batch in (1, 8, 64):
            ms = time_batch(g, batch, reps=max(20, 400 // batch))
            rows.append({"threads": threads, "batch": batch, "ms_per_call": ms, "ms_per_image": ms / batch, "images_per_s": batch * 1e3 / ms})
    out = {"framework": f"torch {torch.__version__} eager, inference_mode", "model": "models-demo/tiles.onnx weights", "rows": rows}
    if args.json:
        print(json.dumps(out, indent=2))
    else:
        print(out["framework"])
        print(f"{'threads':>7} {'batch':>5} {'ms/call':>9} {'ms/image':>9} {'images/s':>9}")
        for r in rows:
            print(f"{r['threads']:>7} {r['batch']:>5} {r['ms_per_call']:>9.3f} {r['ms_per_image']:>9.3f} {r['images_per_s']:>9.0f}")


if __name__ == "__main__":
    main()
