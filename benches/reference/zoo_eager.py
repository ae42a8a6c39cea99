#!/usr/bin/env python3
"""Times every model-zoo family in PyTorch eager mode, for the side-by-side of `zoo.sh`.

Run by hand (PyTorch is not needed by the tests):

    pip install -r tests/zoo/requirements.txt
    python benches/reference/zoo_eager.py --json

Each family is rebuilt exactly as tests/zoo/make_zoo.py builds it (same seed, same BatchNorm
calibration), in eval mode under `torch.inference_mode()`, at 1 thread, batch 1 and the batches
of `--batches`; the figure per row is the median over repeated calls.
"""
import argparse
import json
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests" / "zoo"))
import make_zoo  # noqa: E402


def time_batch(model, fam, batch, reps, torch):
    g = torch.Generator().manual_seed(7)
    z = torch.randn((batch,) + fam["zshape"], generator=g)
    args = (z, torch.arange(batch) % 4) if fam["labels"] else (z,)
    with torch.inference_mode():
        for _ in range(3):
            model(*args)
        times = []
        for _ in range(reps):
            t = time.perf_counter()
            model(*args)
            times.append(time.perf_counter() - t)
    return statistics.median(times) * 1e3


def main():
    import torch

    ap = argparse.ArgumentParser()
    ap.add_argument("--json", action="store_true")
    ap.add_argument("--batches", default="1,2,4,8,16")
    args = ap.parse_args()
    torch.set_num_threads(1)
    families = make_zoo.build_families()
    out = {"framework": f"torch {torch.__version__} eager, inference_mode, 1 thread", "families": {}}
    for name, fam in families.items():
        torch.manual_seed(fam["seed"])
        model = fam["make"]()
        make_zoo.calibrate(model, fam, torch)
        model.eval()
        rows = []
        for batch in [int(b) for b in args.batches.split(",")]:
            ms = time_batch(model, fam, batch, max(10, 200 // batch), torch)
            rows.append({"batch": batch, "ms_per_call": ms, "ms_per_image": ms / batch})
        out["families"][name] = rows
        print(f"torch: {name} done", file=sys.stderr)
    if args.json:
        print(json.dumps(out, indent=2))
    else:
        for name, rows in out["families"].items():
            print(name, " ".join(f"b{r['batch']}={r['ms_per_image']:.3f}" for r in rows))


if __name__ == "__main__":
    main()
