#!/usr/bin/env bash
# One run, one table: genloom (release build) against PyTorch eager on the demo model.
# Needs PyTorch (pip install -r models-demo/requirements.txt); run by hand, not in CI:
#     bash benches/reference/compare.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
cargo build --release -q -p genloom-cli
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
./target/release/genloom bench models-demo/tiles.onnx --threads 1,2 --json > "$tmp/genloom.json"
python3 benches/reference/torch_eager.py --json > "$tmp/torch.json"
python3 - "$tmp/genloom.json" "$tmp/torch.json" <<'PY'
import json, sys, datetime
g = json.load(open(sys.argv[1]))["rows"][0]
t = json.load(open(sys.argv[2]))
one = [r for r in t["rows"] if r["threads"] == 1]
best_t = min(one, key=lambda r: r["ms_per_image"])
print(f"Demo model `tiles`, this machine, {datetime.date.today()} (`bash benches/reference/compare.sh`):\n")
print("| | batch-1 latency (ms) | best ms per tile, 1 thread | tiles/s, 1 thread | tiles/s, 2 threads |")
print("|---|---|---|---|---|")
tp = dict((str(k), v) for k, v in g["throughput"])
print(f"| genloom | {g['batch1_p50_ms']:.3f} | {g['best_p50_ms_per_image']:.3f} (micro-batch {g['best_micro_batch']}) | {tp.get('1', 0):.0f} | {tp.get('2', 0):.0f} |")
b1 = [r for r in one if r["batch"] == 1][0]
two = {r["batch"]: r for r in t["rows"] if r["threads"] == 2}
print(f"| {t['framework']} | {b1['ms_per_call']:.3f} | {best_t['ms_per_image']:.3f} (batch {best_t['batch']}) | {1e3 / best_t['ms_per_image']:.0f} | {max(r['images_per_s'] for r in two.values()):.0f} |")
PY
