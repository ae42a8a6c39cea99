"""Latents: NumPy-compatible mode against NumPy itself, portable mode against the command."""

import numpy as np
import pytest

import genloom

from conftest import TILES


@pytest.fixture(scope="module")
def gen():
    return genloom.Generator(TILES)


@pytest.mark.parametrize("seed,count", [(0, 1), (7, 5), (123456789, 3), (2**32 - 1, 2)])
def test_numpy_latents_equal_randomstate_bit_for_bit(gen, seed, count):
    z = gen.sample_latents(seed, count, rng="numpy")
    expected = np.random.RandomState(seed).standard_normal((count, 64)).astype(np.float32)
    assert z.dtype == np.float32 and z.shape == (count, 64)
    assert np.array_equal(z.view(np.uint32), expected.view(np.uint32))


def test_numpy_latents_first_index_continues_the_stream(gen):
    z = gen.sample_latents(11, 2, first_index=3, rng="numpy")
    expected = np.random.RandomState(11).standard_normal((5, 64)).astype(np.float32)[3:]
    assert np.array_equal(z, expected)


def test_portable_latents_equal_the_command(gen, cli, tmp_path):
    out = tmp_path / "z.npy"
    cli("sample", TILES, "-n", 6, "-s", 42, "--latents-out", out, "-o", tmp_path / "pics", "--micro-batch", 8)
    assert np.array_equal(gen.sample_latents(42, 6), np.load(out))


def test_truncated_latents_equal_the_command(gen, cli, tmp_path):
    out = tmp_path / "z.npy"
    cli("sample", TILES, "-n", 4, "-s", 5, "--truncation", 1.5, "--psi", 0.7, "--latents-out", out,
        "-o", tmp_path / "pics", "--micro-batch", 8)
    z = gen.sample_latents(5, 4, truncation=1.5, psi=0.7)
    assert np.array_equal(z, np.load(out))


def test_interpolation_helpers():
    a = np.zeros(8, np.float32)
    b = np.ones(8, np.float32)
    assert np.allclose(genloom.lerp(a, b, 0.25), 0.25)
    c = np.eye(2, dtype=np.float32)
    mid = genloom.slerp(c[0], c[1], 0.5)
    assert np.allclose(mid, [np.sqrt(0.5), np.sqrt(0.5)], atol=1e-6)
    path = genloom.latent_path(np.stack([a, b]), steps=4, interpolation="lerp")
    assert path.shape == (5, 8) and np.allclose(path[-1], 1.0)
