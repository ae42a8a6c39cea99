"""The reference helper: a module's outputs written where `check --reference` reads them."""

import sys

import numpy as np

import genloom
from genloom import reference

from conftest import REFERENCE, TILES, TILES_KIND


class StandIn:
    """The torch-like interface `reference.save` uses: eval/train, `training`, a call. It
    replays the ONNX export through genloom, so the gate's parity check must pass."""

    def __init__(self, path, training=True):
        self.generator = genloom.Generator(path)
        self.training = training
        self.calls = []

    def eval(self):
        self.training = False
        return self

    def train(self, mode=True):
        self.training = mode
        return self

    def __call__(self, z, labels=None):
        self.calls.append(self.training)
        return self.generator.generate(np.asarray(z, np.float32), labels)


def test_the_package_does_not_import_torch():
    import subprocess

    code = "import sys, genloom, genloom.reference; print('torch' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_save_round_trips_through_the_gate(tmp_path):
    module = StandIn(TILES)
    z = np.load(REFERENCE / "latents.npy")[:8]
    latents, outputs = reference.save(module, z, tmp_path / "ref")
    assert module.calls == [False] and module.training  # ran in eval mode, mode restored
    assert np.array_equal(np.load(latents), z)
    assert np.load(outputs).shape == (8, 3, 32, 32)
    report = genloom.check(TILES, count=16, reference=(np.load(latents), np.load(outputs)))
    parity = [c for c in report["checks"] if c["id"] == "parity-framework"]
    assert parity[0]["status"] == "pass" and genloom.passed(report)


def test_save_with_labels_matches_the_command(tmp_path, cli):
    import json

    module = StandIn(TILES_KIND, training=False)
    z = np.load(REFERENCE / "latents.npy")[:8]
    y = np.arange(8) % 4
    files = reference.save(module, z, tmp_path, labels=y)
    assert len(files) == 3 and np.array_equal(np.load(files[2]), y)
    out = cli("check", TILES_KIND, "--json", "--count", 16, "--reference", files[0], files[1], "--labels-in", files[2])
    parity = [c for c in json.loads(out)["checks"] if c["id"] == "parity-framework"]
    assert parity[0]["status"] == "pass"
