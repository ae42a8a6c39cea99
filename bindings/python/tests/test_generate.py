"""Generation: the pictures equal the Rust API's (through the command), bit for bit."""

import json
import threading

import numpy as np
import pytest

import genloom

from conftest import REFERENCE, TILES, TILES_KIND

PIL = pytest.importorskip("PIL.Image")


def _pngs(folder):
    files = sorted(folder.glob("*.png"))
    return np.stack([np.asarray(PIL.open(f).convert("RGB")) for f in files])


def test_model_signature_and_info():
    m = genloom.Model(TILES)
    sig = m.signature
    assert sig["latent"]["dim"] == 64
    assert sig["image"]["layout"] == "NCHW"
    assert isinstance(m.info, dict)
    assert genloom.Model(TILES.read_bytes()).signature == sig


def test_pictures_equal_the_command_bit_for_bit(cli, tmp_path):
    g = genloom.Generator(TILES, micro_batch=4)
    cli("sample", TILES, "-n", 6, "-s", 9, "-o", tmp_path, "--micro-batch", 4, "--no-provenance")
    images = g.generate(g.sample_latents(9, 6))
    assert images.dtype == np.float32 and images.shape == (6, 3, 32, 32)
    pixels = g.to_pixels(images)
    assert pixels.dtype == np.uint8 and pixels.shape == (6, 32, 32, 3)
    assert np.array_equal(pixels, _pngs(tmp_path))


def test_conditional_pictures_equal_the_command(cli, tmp_path):
    g = genloom.Generator(TILES_KIND)
    labels = np.arange(5) % 4
    cli("sample", TILES_KIND, "-n", 5, "-s", 1, "--label", "cycle", "-o", tmp_path, "--micro-batch", 8)
    pixels = g.to_pixels(g.generate(g.sample_latents(1, 5), labels))
    assert np.array_equal(pixels, _pngs(tmp_path))


def test_floats_match_the_pytorch_reference():
    g = genloom.Generator(TILES)
    z = np.load(REFERENCE / "latents.npy")
    out = g.generate(z)
    torch_out = np.load(REFERENCE / "tiles.torch.npy")
    tolerance = json.loads((REFERENCE / "manifest.json").read_text())["tolerance"]
    assert np.max(np.abs(out - torch_out)) <= tolerance


def test_micro_batch_and_threads_do_not_change_the_floats():
    z = np.load(REFERENCE / "latents.npy")
    a = genloom.Generator(TILES, micro_batch=8).generate(z)
    b = genloom.Generator(TILES, micro_batch=8, threads=2).generate(z)
    assert np.array_equal(a, b)


def test_threads_sharing_a_generator_give_the_serial_results():
    g = genloom.Generator(TILES, micro_batch=4)
    seeds = list(range(8))
    serial = [g.generate(g.sample_latents(s, 5)) for s in seeds]
    results = [None] * len(seeds)
    errors = []

    def work(i):
        try:
            results[i] = g.generate(g.sample_latents(seeds[i], 5))
        except Exception as e:  # pragma: no cover - reported below
            errors.append(e)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(len(seeds))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    for a, b in zip(serial, results):
        assert np.array_equal(a, b)


def test_progress_callback_and_cancel():
    g = genloom.Generator(TILES, micro_batch=2)
    z = g.sample_latents(0, 7)
    seen = []
    g.generate(z, progress=lambda done, total: seen.append((done, total)))
    assert seen == [(2, 7), (4, 7), (6, 7), (7, 7)]
    with pytest.raises(genloom.CancelledError):
        g.generate(z, progress=lambda done, total: done < 4)

    def boom(done, total):
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        g.generate(z, progress=boom)


def test_non_contiguous_latents_are_accepted():
    g = genloom.Generator(TILES)
    z = np.asfortranarray(g.sample_latents(3, 4))
    assert np.array_equal(g.generate(z), g.generate(np.ascontiguousarray(z)))


def test_ctrl_c_cancels_between_micro_batches():
    import _thread

    g = genloom.Generator(TILES, micro_batch=1)
    seen = []

    def progress(done, total):
        seen.append(done)
        if done == 3:
            _thread.interrupt_main()  # as Ctrl-C: SIGINT's flag, checked at the next boundary

    with pytest.raises(KeyboardInterrupt):
        g.generate(g.sample_latents(0, 50), progress=progress)
    assert seen == [1, 2, 3]


def test_signature_overrides():
    m = genloom.Model(TILES, range="sigmoid")
    assert m.signature["image"]["range"] == {"lo": 0.0, "hi": 1.0}
    with pytest.raises(genloom.ArgumentError):
        genloom.Model(TILES, layout="chwn")
