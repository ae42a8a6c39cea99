"""Procedural board tiles for the genloom demo.

Four terrain kinds, 32x32 RGB, drawn from seeded NumPy noise only (no data is
downloaded or read):

    0 meadow    greens, grass grain and a few flowers
    1 shallows  blues / teal with ripple highlights
    2 dunes     sand yellows with warped wave stripes
    3 scree     greys / browns, shaded stones and speckle

Every tile gets multi-octave value noise, per-tile palette jitter, a random
90-degree rotation and flip of its texture, and a bevel (lighter top/left,
darker bottom/right border) drawn after the rotation so the light always comes
from the top left.

Images are float32 NCHW in [-1, 1] (the generators' Tanh output space).

    python models-demo/dataset.py      # writes dataset-preview.png and reference/kind-means.json
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

KINDS = ["meadow", "shallows", "dunes", "scree"]
SIZE = 32
BEVEL = (0.34, 0.20, 0.09)  # strength of the bevel rows, outermost first

TRAIN_SEED = 1234
PREVIEW_SEED = 7
MEANS_SEED = 4242
MEANS_SAMPLES_PER_KIND = 4096

_YY, _XX = np.mgrid[0:SIZE, 0:SIZE].astype(np.float32)


# ----------------------------------------------------------------------------
# noise
# ----------------------------------------------------------------------------
def value_noise(rng: np.random.Generator, n: int, cells: int) -> np.ndarray:
    """Value noise on a `cells` x `cells` lattice, smoothstep-interpolated, (n, 32, 32) in [0, 1]."""
    lattice = rng.random((n, cells + 1, cells + 1), dtype=np.float32)
    u = (np.arange(SIZE, dtype=np.float32) + 0.5) * (cells / SIZE)
    i0 = np.floor(u).astype(np.int64)
    f = u - i0
    f = f * f * (3.0 - 2.0 * f)
    i1 = i0 + 1
    a = lattice[:, i0[:, None], i0[None, :]]
    b = lattice[:, i0[:, None], i1[None, :]]
    c = lattice[:, i1[:, None], i0[None, :]]
    d = lattice[:, i1[:, None], i1[None, :]]
    fx = f[None, None, :]
    fy = f[None, :, None]
    top = a + (b - a) * fx
    bottom = c + (d - c) * fx
    return top + (bottom - top) * fy


def fbm(rng: np.random.Generator, n: int, cells=(2, 4, 8, 16), gain: float = 0.55) -> np.ndarray:
    """Multi-octave value noise, normalised per tile to [0, 1]."""
    total = np.zeros((n, SIZE, SIZE), dtype=np.float32)
    amp = 1.0
    for c in cells:
        total += amp * value_noise(rng, n, c)
        amp *= gain
    lo = total.min(axis=(1, 2), keepdims=True)
    hi = total.max(axis=(1, 2), keepdims=True)
    return (total - lo) / np.maximum(hi - lo, 1e-6)


# ----------------------------------------------------------------------------
# palettes
# ----------------------------------------------------------------------------
def jittered(rng: np.random.Generator, n: int, base, spread: float = 0.045, brightness=None) -> np.ndarray:
    """Per-tile copies of an RGB colour, (n, 3, 1, 1), with channel jitter and an optional shared brightness."""
    col = np.asarray(base, dtype=np.float32)[None, :] + rng.uniform(-spread, spread, (n, 3)).astype(np.float32)
    if brightness is not None:
        col = col * brightness[:, None]
    return np.clip(col, 0.0, 1.0)[:, :, None, None]


def lerp(a, b, t):
    return a + (b - a) * t


def _brightness(rng, n, amount=0.08):
    return rng.uniform(1.0 - amount, 1.0 + amount, n).astype(np.float32)


def _direction(rng, n):
    theta = rng.uniform(-0.6, 0.6, n).astype(np.float32)  # mostly horizontal bands; rotation varies it
    return np.cos(theta)[:, None, None], np.sin(theta)[:, None, None]


# ----------------------------------------------------------------------------
# kinds (each returns (n, 3, 32, 32) in [0, 1], before rotation and bevel)
# ----------------------------------------------------------------------------
def meadow(rng: np.random.Generator, n: int) -> np.ndarray:
    br = _brightness(rng, n)
    dark = jittered(rng, n, (0.17, 0.40, 0.12), brightness=br)
    light = jittered(rng, n, (0.47, 0.72, 0.24), brightness=br)
    t = fbm(rng, n)[:, None]
    grain = value_noise(rng, n, 16)[:, None]  # grass grain
    img = lerp(dark, light, np.clip(0.75 * t + 0.35 * (grain - 0.5), 0.0, 1.0))
    # a few flowers: single bright pixels with a faint halo
    flowers = (rng.random((n, SIZE, SIZE)) < 0.006)[:, None]
    petal = jittered(rng, n, (0.97, 0.90, 0.45), spread=0.05)
    img = np.where(flowers, petal, img)
    return img


def shallows(rng: np.random.Generator, n: int) -> np.ndarray:
    br = _brightness(rng, n)
    deep = jittered(rng, n, (0.05, 0.28, 0.50), brightness=br)
    shoal = jittered(rng, n, (0.16, 0.60, 0.68), brightness=br)
    foam = jittered(rng, n, (0.78, 0.93, 0.96), spread=0.03)
    t = fbm(rng, n)[:, None]
    cx, cy = _direction(rng, n)
    freq = rng.uniform(3.0, 5.0, (n, 1, 1)).astype(np.float32)
    warp = fbm(rng, n, cells=(2, 4))
    phase = 2 * np.pi * (freq * (_XX * cx + _YY * cy) / SIZE + 1.2 * warp)
    ripple = np.clip((np.sin(phase) - 0.55) / 0.45, 0.0, 1.0)[:, None]
    img = lerp(deep, shoal, t)
    return lerp(img, foam, 0.65 * ripple * (0.4 + 0.6 * t))


def dunes(rng: np.random.Generator, n: int) -> np.ndarray:
    br = _brightness(rng, n)
    shadow = jittered(rng, n, (0.74, 0.56, 0.27), brightness=br)
    crest = jittered(rng, n, (0.97, 0.86, 0.55), brightness=br)
    t = fbm(rng, n)[:, None]
    cx, cy = _direction(rng, n)
    freq = rng.uniform(2.0, 3.5, (n, 1, 1)).astype(np.float32)
    warp = fbm(rng, n, cells=(2, 4))
    s = 0.5 + 0.5 * np.sin(2 * np.pi * (freq * (_XX * cx + _YY * cy) / SIZE + 0.8 * warp))
    s = (s ** 1.6)[:, None]  # sharp crests, wide troughs
    img = lerp(shadow, crest, np.clip(0.7 * s + 0.3 * t, 0.0, 1.0))
    grain = rng.uniform(-0.025, 0.025, (n, 1, SIZE, SIZE)).astype(np.float32)
    return img + grain


def scree(rng: np.random.Generator, n: int) -> np.ndarray:
    br = _brightness(rng, n)
    ground_dark = jittered(rng, n, (0.27, 0.25, 0.23), brightness=br)
    ground_light = jittered(rng, n, (0.46, 0.42, 0.38), brightness=br)
    t = fbm(rng, n)[:, None]
    img = lerp(ground_dark, ground_light, t)
    # stones: shaded discs, greys to browns
    max_stones = 11
    count = rng.integers(5, max_stones + 1, n)
    for k in range(max_stones):
        active = (k < count)[:, None, None]
        cx = rng.uniform(-2, SIZE + 2, (n, 1, 1)).astype(np.float32)
        cy = rng.uniform(-2, SIZE + 2, (n, 1, 1)).astype(np.float32)
        r = rng.uniform(2.0, 5.0, (n, 1, 1)).astype(np.float32)
        stretch = rng.uniform(0.7, 1.3, (n, 1, 1)).astype(np.float32)
        dx = (_XX - cx) * stretch
        dy = (_YY - cy) / stretch
        d = np.sqrt(dx * dx + dy * dy) / r
        inside = (d < 1.0) & active
        mix = rng.random((n, 1)).astype(np.float32)
        grey = rng.uniform(0.45, 0.72, (n, 1)).astype(np.float32)
        col = np.concatenate([grey + 0.05 * mix, grey - 0.01 * mix, grey - 0.10 * mix], axis=1)
        # light from the top left, dark rim
        shade = 1.0 + 0.30 * np.clip(-(dx + dy) / (r * 1.4), -1.0, 1.0) - 0.35 * np.clip((d - 0.7) / 0.3, 0.0, 1.0)
        stone = np.clip(col[:, :, None, None] * shade[:, None], 0.0, 1.0)
        img = np.where(inside[:, None], stone, img)
    speckle = rng.uniform(-0.07, 0.07, (n, 1, SIZE, SIZE)).astype(np.float32)
    return img + speckle


_DRAW = [meadow, shallows, dunes, scree]


# ----------------------------------------------------------------------------
# rotation, bevel
# ----------------------------------------------------------------------------
def rotate_flip(rng: np.random.Generator, img: np.ndarray) -> np.ndarray:
    n = img.shape[0]
    k = rng.integers(0, 4, n)
    flip = rng.random(n) < 0.5
    out = np.empty_like(img)
    for q in range(4):
        sel = k == q
        out[sel] = np.rot90(img[sel], q, axes=(2, 3))
    out[flip] = out[flip][:, :, :, ::-1]
    return out


def bevel_map() -> np.ndarray:
    """(32, 32) map: > 0 lightens (top/left border), < 0 darkens (bottom/right border)."""
    y, x = _YY.astype(np.int64), _XX.astype(np.int64)
    edges = np.stack([y, x, SIZE - 1 - y, SIZE - 1 - x])  # top, left, bottom, right
    depth = edges.min(axis=0)
    which = edges.argmin(axis=0)
    strength = np.zeros((SIZE, SIZE), dtype=np.float32)
    for i, s in enumerate(BEVEL):
        strength[depth == i] = s
    sign = np.where(which < 2, 1.0, -1.0).astype(np.float32)
    return strength * sign


_BEVEL = bevel_map()


def apply_bevel(img: np.ndarray) -> np.ndarray:
    b = _BEVEL[None, None]
    return np.where(b > 0, img + b * (1.0 - img), img * (1.0 + b))


# ----------------------------------------------------------------------------
# public API
# ----------------------------------------------------------------------------
def generate_kind(kind: int, n: int, seed: int) -> np.ndarray:
    """n tiles of one kind, float32 (n, 3, 32, 32) in [-1, 1]. Independent of other kinds' counts."""
    rng = np.random.default_rng([seed, kind])
    img = _DRAW[kind](rng, n).astype(np.float32)
    img = rotate_flip(rng, np.clip(img, 0.0, 1.0))
    img = apply_bevel(img)
    return np.clip(img * 2.0 - 1.0, -1.0, 1.0).astype(np.float32)


def generate(n_per_kind: int, seed: int = TRAIN_SEED, chunk: int = 4096):
    """All four kinds, in kind order: (images float32 (4n, 3, 32, 32) in [-1, 1], kinds int64 (4n,))."""
    images, kinds = [], []
    for kind in range(len(KINDS)):
        parts = []
        for start in range(0, n_per_kind, chunk):
            m = min(chunk, n_per_kind - start)
            parts.append(generate_kind(kind, m, seed + 7919 * (start // chunk)))
        images.append(np.concatenate(parts))
        kinds.append(np.full(n_per_kind, kind, dtype=np.int64))
    return np.concatenate(images), np.concatenate(kinds)


def to_uint8(images: np.ndarray) -> np.ndarray:
    """[-1, 1] NCHW float -> uint8 NHWC."""
    return np.clip(np.rint((images + 1.0) * 127.5), 0, 255).astype(np.uint8).transpose(0, 2, 3, 1)


def save_grid(images: np.ndarray, rows: int, cols: int, path: Path, scale: int = 3, gap: int = 2) -> None:
    """Save images ([-1, 1] NCHW, row-major) as a grid PNG, upscaled by nearest neighbour."""
    from PIL import Image

    tiles = to_uint8(images[: rows * cols])
    h = w = SIZE * scale
    canvas = np.full((rows * h + (rows + 1) * gap, cols * w + (cols + 1) * gap, 3), 24, dtype=np.uint8)
    for i, tile in enumerate(tiles):
        r, c = divmod(i, cols)
        big = tile.repeat(scale, axis=0).repeat(scale, axis=1)
        y0 = gap + r * (h + gap)
        x0 = gap + c * (w + gap)
        canvas[y0 : y0 + h, x0 : x0 + w] = big
    Image.fromarray(canvas).save(path, optimize=True)


def kind_means(samples_per_kind: int = MEANS_SAMPLES_PER_KIND, seed: int = MEANS_SEED) -> dict:
    means = []
    for kind in range(len(KINDS)):
        img = generate_kind(kind, samples_per_kind, seed)
        means.append([round(float(v), 6) for v in img.mean(axis=(0, 2, 3))])
    return {
        "kinds": KINDS,
        "mean_rgb": means,
        "space": "model output [-1,1]",
        "samples_per_kind": samples_per_kind,
        "seed": seed,
    }


def main() -> None:
    cols = 8
    preview = np.concatenate([generate_kind(k, cols, PREVIEW_SEED) for k in range(len(KINDS))])
    save_grid(preview, len(KINDS), cols, HERE / "dataset-preview.png")
    ref = HERE / "reference"
    ref.mkdir(exist_ok=True)
    means = kind_means()
    (ref / "kind-means.json").write_text(json.dumps(means, indent=2) + "\n")
    for name, m in zip(KINDS, means["mean_rgb"]):
        print(f"{name:9s} mean rgb {m}")
    arr = np.asarray(means["mean_rgb"])
    dist = np.sqrt(((arr[:, None] - arr[None]) ** 2).sum(-1))
    print(f"smallest distance between kind means: {dist[np.triu_indices(4, 1)].min():.3f}")
    print("wrote dataset-preview.png, reference/kind-means.json")


if __name__ == "__main__":
    main()
