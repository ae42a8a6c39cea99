#!/usr/bin/env bash
# One run, one table: genloom (release build) against PyTorch eager on every model-zoo family,
# at 1 thread, batch 1 and each one's best batch, plus the time `genloom check` takes.
# Needs PyTorch (pip install -r tests/zoo/requirements.txt); run by hand, not in CI:
#     bash benches/reference/zoo.sh
# GENLOOM_BIN picks another build (e.g. target/debug/genloom: the dev profile, whose
# dependencies, tract included, are optimised; only genloom's own code is not).
set -euo pipefail
cd "$(dirname "$0")/../.."
bin="${GENLOOM_BIN:-target/release/genloom}"
if [ -z "${GENLOOM_BIN:-}" ]; then cargo build --release -q -p genloom-cli; fi
export GENLOOM_BIN="$bin"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
python3 benches/reference/zoo_eager.py --json > "$tmp/torch.json"
python3 - "$tmp" <<'PY'
import json, os, subprocess, sys, time, datetime
from pathlib import Path
tmp = Path(sys.argv[1])
manifest = json.load(open("tests/zoo/manifest.json"))
torch = json.load(open(tmp / "torch.json"))
rows = []
for file, entry in sorted(manifest["files"].items()):
    fam = entry["family"]
    path = f"tests/zoo/{file}"
    rng = entry["check_range"]
    sig = [f"--range={rng[0]},{rng[1]}"] if entry.get("declared_range") is None else []
    out = subprocess.run([os.environ["GENLOOM_BIN"], "bench", path, "--threads", "1", "--micro-batch", "1,2,4,8,16",
                          "--iters", "40", "--count", "64", "--profile", "--json"] + sig,
                         capture_output=True, text=True, check=True)
    g = json.loads(out.stdout)["rows"][0]
    ref = [f"tests/zoo/{fam}.latents.npy", f"tests/zoo/{entry['reference']}"]
    labels = ["--labels-in", f"tests/zoo/{fam}.labels.npy"] if any(i["name"] == "label" for i in entry["inputs"]) else []
    t = time.perf_counter()
    subprocess.run([os.environ["GENLOOM_BIN"], "check", path, "--reference", *ref, *labels, "--json"] + sig,
                   capture_output=True, text=True)
    check_s = time.perf_counter() - t
    tr = torch["families"][fam]
    t1 = [r for r in tr if r["batch"] == 1][0]["ms_per_image"]
    tbest = min(tr, key=lambda r: r["ms_per_image"])
    top = g["profile"]["by_op"][0] if g.get("profile") else {"op": "?", "share": 0}
    rows.append((file, g["batch1_p50_ms"], t1, g["best_p50_ms_per_image"], g["best_micro_batch"],
                 tbest["ms_per_image"], tbest["batch"], check_s, top))
print(f"Model zoo, this machine (2 cores), 1 thread, {datetime.date.today()} (`bash benches/reference/zoo.sh`, genloom {os.environ['GENLOOM_BIN']}; {torch['framework']}):\n")
print("| export | genloom batch 1 (ms) | PyTorch batch 1 (ms) | genloom best (ms/image, batch) | PyTorch best (ms/image, batch) | `genloom check` (s) | costliest operator (batch 1) |")
print("|---|---|---|---|---|---|---|")
for f, g1, t1, gb, gbb, tb, tbb, cs, top in rows:
    print(f"| {f} | {g1:.3f} | {t1:.3f} | {gb:.3f} ({gbb}) | {tb:.3f} ({tbb}) | {cs:.1f} | {top['op']} {100 * top['share']:.0f}% |")
PY
