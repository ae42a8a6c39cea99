"""Errors: one base class, a subclass per kind, the runtime's message."""

import numpy as np
import pytest

import genloom

from conftest import TILES, TILES_KIND


@pytest.fixture(scope="module")
def gen():
    return genloom.Generator(TILES)


@pytest.fixture(scope="module")
def kind():
    return genloom.Generator(TILES_KIND)


def test_missing_file(tmp_path):
    missing = tmp_path / "nope.onnx"
    with pytest.raises(genloom.IoError) as e:
        genloom.Model(missing)
    assert isinstance(e.value, genloom.GenloomError) and isinstance(e.value, OSError)
    assert "nope.onnx" in str(e.value) and e.value.kind == "io"


def test_garbage_file(tmp_path):
    bad = tmp_path / "garbage.onnx"
    bad.write_bytes(b"\x00\x01 this is not a model \xff" * 10)
    with pytest.raises(genloom.LoadError) as e:
        genloom.Generator(bad)
    assert e.value.kind == "load" and str(e.value)


def test_garbage_bytes():
    with pytest.raises(genloom.LoadError):
        genloom.Model(b"<html>not found</html>")


def test_wrong_latent_shape(gen):
    with pytest.raises(genloom.ArgumentError) as e:
        gen.generate(np.zeros((2, 63), np.float32))
    assert "64" in str(e.value) and isinstance(e.value, ValueError)
    with pytest.raises(genloom.ArgumentError):
        gen.generate(np.zeros(64, np.float32))


def test_wrong_dtype(gen):
    with pytest.raises(genloom.ArgumentError) as e:
        gen.generate(np.zeros((2, 64), np.float64))
    assert "float64" in str(e.value) and "float32" in str(e.value)
    with pytest.raises(genloom.ArgumentError):
        gen.to_pixels(np.zeros((1, 3, 32, 32), np.float64))
    with pytest.raises(genloom.ArgumentError):
        gen.to_pixels(np.zeros((1, 32, 32, 3), np.float32))


def test_non_finite_latents(gen):
    z = np.zeros((1, 64), np.float32)
    z[0, 3] = np.nan
    with pytest.raises(genloom.ArgumentError):
        gen.generate(z)


def test_bad_labels(kind, gen):
    z = kind.sample_latents(0, 3)
    with pytest.raises(genloom.ArgumentError):
        kind.generate(z)  # missing
    with pytest.raises(genloom.ArgumentError):
        kind.generate(z, np.array([0, 1], np.int64))  # one short
    with pytest.raises(genloom.ArgumentError):
        kind.generate(z, np.array([0, 1, 99], np.int64))  # out of range
    with pytest.raises(genloom.ArgumentError):
        kind.generate(z, np.array([0.0, 1.0, 2.0]))  # floats
    with pytest.raises(genloom.ArgumentError):
        gen.generate(gen.sample_latents(0, 3), np.array([0, 1, 2]))  # unconditional model


def test_bad_options(gen):
    with pytest.raises(genloom.ArgumentError):
        gen.sample_latents(0, 2, rng="mersenne")
    with pytest.raises(genloom.ArgumentError):
        gen.sample_latents(0, 2, prior="cauchy")
    with pytest.raises(genloom.ArgumentError):
        gen.sample_latents(2**40, 2, rng="numpy")
    with pytest.raises(genloom.ArgumentError):
        genloom.Generator(TILES, micro_batch=0)
    with pytest.raises(genloom.ArgumentError):
        genloom.check(TILES, count=2)
    with pytest.raises(genloom.ArgumentError):
        genloom.check(TILES, no_such_threshold=1)
