"""Shared fixtures: the repository's demo models and the `genloom` command to compare with."""

import os
import pathlib
import shutil
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[3]
DEMO = ROOT / "models-demo"
REFERENCE = DEMO / "reference"
TILES = DEMO / "tiles.onnx"
TILES_KIND = DEMO / "tiles-kind.onnx"


def _cli():
    given = os.environ.get("GENLOOM_CLI")
    if given:
        return pathlib.Path(given)
    for profile in ("debug", "release"):
        p = ROOT / "target" / profile / "genloom"
        if p.exists():
            return p
    found = shutil.which("genloom")
    return pathlib.Path(found) if found else None


@pytest.fixture(scope="session")
def cli():
    """Runs the `genloom` command (the Rust API's own front end) and returns its stdout."""
    exe = _cli()
    if exe is None:
        pytest.fail("the genloom command is not built: run `cargo build -p genloom-cli` (scripts/test-python.sh does)")

    def run(*args, ok_codes=(0,)):
        r = subprocess.run([str(exe), *map(str, args)], capture_output=True, text=True)
        assert r.returncode in ok_codes, f"genloom {' '.join(map(str, args))} exited {r.returncode}: {r.stderr}"
        return r.stdout

    return run
