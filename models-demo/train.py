"""Train the two demo generators on CPU, export them to ONNX and write the reference data.

    python models-demo/train.py            # full run: tiles, then tiles-kind, export, reference
    python models-demo/train.py --quick    # smoke run: a few tiny steps, same outputs
    python models-demo/train.py --only tiles-kind

Generator weights go to checkpoints/<name>.pt (ignored by git); the ONNX files and
reference/ are rebuilt from them by export.py and make_reference.py.
"""

from __future__ import annotations

import argparse
import json
import os
import time
from pathlib import Path

# OpenMP workers that spin while waiting collapse when another process shares the two cores
# (a 5x slowdown measured here); sleeping workers keep the step time steady.
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

import numpy as np
import torch
from torch import nn

import dataset
from models import (
    KindTileDiscriminator,
    KindTileGenerator,
    TileDiscriminator,
    TileGenerator,
    count_params,
    dcgan_init,
)

HERE = Path(__file__).resolve().parent
CHECKPOINTS = HERE / "checkpoints"
SEEDS = {"tiles": 2026, "tiles-kind": 2027}
EPOCHS = {"tiles": 10, "tiles-kind": 8}
BATCH = 64
LR = 2e-4
BETAS = (0.5, 0.999)
MODE_SEEKING_WEIGHT = 5.0


THREADS = 2


def setup_torch(seed: int) -> None:
    torch.set_num_threads(THREADS)
    torch.manual_seed(seed)
    np.random.seed(seed)
    try:
        torch.use_deterministic_algorithms(True)
        # filling fresh buffers with NaN (the deterministic-mode default) costs ~20% here and
        # changes no result
        torch.utils.deterministic.fill_uninitialized_memory = False
    except Exception as e:  # pragma: no cover - older torch
        print(f"deterministic algorithms unavailable: {e}")


def diversity_floor(images: torch.Tensor, kinds: torch.Tensor, pairs: int = 2048) -> float:
    """Mean |x1 - x2| over pairs of real tiles of the same kind, over E|z1 - z2| = 2 / sqrt(pi)."""
    diffs = []
    for k in range(int(kinds.max()) + 1):
        x = images[kinds == k][: 2 * pairs]
        h = x.shape[0] // 2
        diffs.append((x[:h] - x[h : 2 * h]).abs().mean().item())
    return float(np.mean(diffs) / (2.0 / np.sqrt(np.pi)))


def train_one(name: str, images: torch.Tensor, kinds: torch.Tensor, epochs: int, max_steps: int | None,
              max_minutes: float, seed: int) -> dict:
    conditional = name == "tiles-kind"
    setup_torch(seed)
    G = KindTileGenerator() if conditional else TileGenerator()
    D = KindTileDiscriminator() if conditional else TileDiscriminator()
    dcgan_init(G)
    dcgan_init(D)
    print(f"[{name}] generator params {count_params(G):,}, discriminator params {count_params(D):,}")
    opt_g = torch.optim.Adam(G.parameters(), lr=LR, betas=BETAS)
    opt_d = torch.optim.Adam(D.parameters(), lr=LR, betas=BETAS)
    bce = nn.BCEWithLogitsLoss()  # non-saturating GAN loss: G maximises log D(G(z))

    gen = torch.Generator().manual_seed(seed)
    fixed_z = torch.randn(32, G.latent, generator=gen)
    fixed_k = torch.arange(32) // 8
    n = images.shape[0]
    steps_per_epoch = n // BATCH
    total_steps = epochs * steps_per_epoch if max_steps is None else max_steps
    print(f"[{name}] {n} images, batch {BATCH}, {total_steps} steps ({total_steps / steps_per_epoch:.2f} epochs)")

    half = BATCH // 2
    tau = 0.0
    if conditional:
        tau = diversity_floor(images, kinds)
        print(f"[{name}] mode-seeking floor: mean |x1 - x2| / mean |z1 - z2| of real same-kind pairs = {tau:.3f}")
    ones = torch.ones(BATCH)
    zeros = torch.zeros(BATCH)
    start = time.time()
    step = 0
    stopped_early = False
    epoch = 0
    while step < total_steps:
        perm = torch.randperm(n, generator=gen)
        sums = np.zeros(5)
        count = 0
        for b in range(steps_per_epoch):
            if step >= total_steps:
                break
            idx = perm[b * BATCH : (b + 1) * BATCH]
            real = images[idx]
            k = kinds[idx]
            z = torch.randn(BATCH, G.latent, generator=gen)
            if conditional:
                kf = torch.cat([k[:half], k[:half]])  # fakes in same-kind pairs (i, i + half)
                fake = G(z, kf)
            else:
                fake = G(z)

            d_real = D(real, k) if conditional else D(real)
            d_fake = D(fake.detach(), kf) if conditional else D(fake.detach())
            loss_d = bce(d_real, ones) + bce(d_fake, zeros)
            opt_d.zero_grad(set_to_none=True)
            loss_d.backward()
            opt_d.step()

            d_gen = D(fake, kf) if conditional else D(fake)
            loss_g = bce(d_gen, ones)
            ratio = torch.zeros(())
            if conditional:
                # mode seeking (Mao et al. 2019), as a hinge: two latents with the same kind must
                # give tiles at least as different as two real tiles of that kind
                ratio = (fake[:half] - fake[half:]).abs().mean((1, 2, 3)) / (z[:half] - z[half:]).abs().mean(1)
                loss_g = loss_g + MODE_SEEKING_WEIGHT * torch.relu(tau - ratio).mean()
                ratio = ratio.mean()
            opt_g.zero_grad(set_to_none=True)
            loss_g.backward()
            opt_g.step()

            sums += [loss_d.item(), loss_g.item(), torch.sigmoid(d_real).mean().item(),
                     torch.sigmoid(d_fake).mean().item(), ratio.item()]
            count += 1
            step += 1
            if step % 100 == 0 or step == total_steps:
                m = sums / count
                print(f"[{name}] epoch {epoch + 1} step {step}/{total_steps} loss_d {m[0]:.3f} loss_g {m[1]:.3f} "
                      f"D(real) {m[2]:.2f} D(fake) {m[3]:.2f}" + (f" diversity {m[4]:.3f}" if conditional else "")
                      + f" elapsed {time.time() - start:.0f}s", flush=True)
                sums[:] = 0
                count = 0
            if time.time() - start > max_minutes * 60:
                stopped_early = True
                break
        epoch += 1
        G.eval()
        with torch.no_grad():
            preview = G(fixed_z, fixed_k) if conditional else G(fixed_z)
        G.train()
        CHECKPOINTS.mkdir(parents=True, exist_ok=True)
        dataset.save_grid(preview.numpy(), 4, 8, CHECKPOINTS / f"progress-{name}.png")
        if stopped_early:
            print(f"[{name}] wall-clock cap of {max_minutes} min reached at step {step}")
            break

    elapsed = time.time() - start
    G.eval()
    CHECKPOINTS.mkdir(parents=True, exist_ok=True)
    torch.save(G.state_dict(), CHECKPOINTS / f"{name}.pt")
    info = {
        "model": name,
        "generator_params": count_params(G),
        "discriminator_params": count_params(D),
        "images": n,
        "batch": BATCH,
        "steps": step,
        "epochs": round(step / steps_per_epoch, 3),
        "train_seconds": round(elapsed, 1),
        "stopped_by_time_cap": stopped_early,
        "threads": THREADS,
        "torch": torch.__version__,
    }
    (CHECKPOINTS / f"{name}.json").write_text(json.dumps(info, indent=2) + "\n")
    print(f"[{name}] done: {step} steps in {elapsed:.0f}s ({elapsed / 60:.1f} min)")
    return info


def main() -> None:
    global THREADS, CHECKPOINTS
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--quick", action="store_true", help="smoke run: tiny data, 20 steps per model")
    ap.add_argument("--only", choices=["tiles", "tiles-kind"], help="train just one model")
    ap.add_argument("--epochs", type=int, help=f"epochs for every model (default {EPOCHS})")
    ap.add_argument("--threads", type=int, default=THREADS, help="torch CPU threads (default 2)")
    ap.add_argument("--per-kind", type=int, default=8192, help="training tiles per kind")
    ap.add_argument("--max-minutes", type=float, default=13.0,
                    help="stop a model's training after this much wall-clock time (safety cap)")
    ap.add_argument("--no-export", action="store_true", help="train only; skip export and reference data")
    args = ap.parse_args()

    THREADS = args.threads
    if args.quick:
        # smoke run: everything goes under checkpoints/quick/ (ignored by git), nothing committed
        # is touched
        CHECKPOINTS = HERE / "checkpoints" / "quick"
        print(f"--quick: writing under {CHECKPOINTS.relative_to(HERE)}/ only")
    per_kind = 64 if args.quick else args.per_kind
    max_steps = 20 if args.quick else None
    t0 = time.time()
    imgs, kinds = dataset.generate(per_kind, seed=dataset.TRAIN_SEED)
    print(f"dataset: {imgs.shape} in {time.time() - t0:.1f}s")
    images = torch.from_numpy(imgs)
    labels = torch.from_numpy(kinds)

    names = [args.only] if args.only else ["tiles", "tiles-kind"]
    for name in names:
        epochs = args.epochs or EPOCHS[name]
        train_one(name, images, labels, epochs, max_steps, args.max_minutes, SEEDS[name])

    if not args.quick:
        dataset.main()  # preview and kind means (make_reference compares against them)
    if not args.no_export:
        import export
        import make_reference

        export.OUT = make_reference.OUT = CHECKPOINTS.parent if not args.quick else CHECKPOINTS
        export.CHECKPOINTS = make_reference.CHECKPOINTS = CHECKPOINTS
        make_reference.REF = make_reference.OUT / "reference"
        export.main()
        make_reference.main()


if __name__ == "__main__":
    main()
