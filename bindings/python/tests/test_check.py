"""The gate, the conversion report and the bench from Python against the command's JSON."""

import json

import numpy as np

import genloom

from conftest import REFERENCE, TILES, TILES_KIND


def _without_times(report):
    report = dict(report)
    report.pop("elapsed_ms", None)
    return report


def test_check_report_equals_the_command(cli):
    out = cli("check", TILES, "--json", "--count", 16, "--seed", 3)
    py = genloom.check(TILES, count=16, seed=3)
    assert py["schema"] == "genloom.check/1"
    assert _without_times(py) == _without_times(json.loads(out))
    assert genloom.passed(py)


def test_check_with_reference_equals_the_command(cli):
    latents, outputs = REFERENCE / "latents.npy", REFERENCE / "tiles-kind.torch.npy"
    labels = REFERENCE / "labels.npy"
    out = cli("check", TILES_KIND, "--json", "--count", 16, "--reference", latents, outputs, "--labels-in", labels)
    py = genloom.check(TILES_KIND, count=16, reference=(np.load(latents), np.load(outputs)), labels=np.load(labels))
    assert _without_times(py) == _without_times(json.loads(out))
    parity = [c for c in py["checks"] if c["id"] == "parity-framework"]
    assert parity and parity[0]["status"] == "pass"


def test_check_with_strict_and_thresholds_equals_the_command(cli):
    out = cli("check", TILES, "--json", "--count", 16, "--strict", "--min-diversity", 0.5, "--max-batch", 4,
              ok_codes=(0, 1))
    py = genloom.check(TILES, count=16, strict=True, min_diversity=0.5, max_batch=4)
    assert _without_times(py) == _without_times(json.loads(out))


def test_convert_report_and_compare(cli, tmp_path):
    out = tmp_path / "tiles.f16.onnx"
    report = genloom.convert(TILES, "f16", out=out, eval_count=16)
    assert report["precision"] == "f16" and out.exists()
    assert report["fidelity"]["psnr_db"] > 60
    cli_report = tmp_path / "cli.json"
    cli("convert", TILES, "--to", "f16", "--out", tmp_path / "cli.onnx", "--report", cli_report, "--count", 16)
    assert report == json.loads(cli_report.read_text())
    assert (tmp_path / "cli.onnx").read_bytes() == out.read_bytes()
    fidelity = genloom.compare(TILES, out, count=8)
    assert fidelity["psnr_db"] > 60


def test_bench_returns_a_measurement():
    m = genloom.bench(TILES, micro_batches=[1, 4], threads=[1], iters=2, count=8)
    assert m["best_micro_batch"] in (1, 4) and m["batch1_p50_ms"] > 0


def test_check_against_and_skip_equal_the_command(cli, tmp_path):
    export = tmp_path / "tiles.int8.onnx"
    genloom.convert(TILES, "int8", out=export, eval_count=8)
    out = cli("check", export, "--json", "--count", 16, "--against", TILES, "--skip", "sensitivity", ok_codes=(0, 1))
    py = genloom.check(export, count=16, against=TILES, skip=["sensitivity"])
    assert _without_times(py) == _without_times(json.loads(out))
    assert any(c["id"] == "parity-export" for c in py["checks"])
