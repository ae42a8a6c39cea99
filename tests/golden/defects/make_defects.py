#!/usr/bin/env python3
"""Produce small defective generators for testing `genloom check`.

Each model here is the good test generator `../models/nchw-tanh.onnx` with one
defect built in, aimed at one check of the release gate.  The script proves
with `onnx.reference.ReferenceEvaluator` that each defect shows, and writes
`manifest.json` with what it measured.  Only NumPy and the `onnx` package are
used.  The output is deterministic, byte for byte.

    python tests/golden/defects/make_defects.py            # regenerate in place
    python tests/golden/defects/make_defects.py --out DIR  # write somewhere else
    python tests/golden/defects/make_defects.py --check    # regenerate into a temp
                                                           # dir, compare byte for byte
"""

import os
import platform
import sys


def _pin_cpu_dispatch():
    """Same kernels on every x86-64 machine (see ../make_goldens.py); before numpy loads."""
    os.environ["OPENBLAS_NUM_THREADS"] = "1"
    os.environ["OMP_NUM_THREADS"] = "1"
    if platform.machine().lower() in ("x86_64", "amd64"):
        os.environ["NPY_ENABLE_CPU_FEATURES"] = "X86_V2"
        try:
            with open("/proc/cpuinfo", encoding="ascii", errors="replace") as f:
                has_avx2 = " avx2" in f.read()
        except OSError:
            has_avx2 = False
        if has_avx2:
            os.environ["OPENBLAS_CORETYPE"] = "Haswell"


if __name__ == "__main__":
    _pin_cpu_dispatch()

import argparse  # noqa: E402
import filecmp  # noqa: E402
import importlib.metadata  # noqa: E402
import io  # noqa: E402
import json  # noqa: E402
import math  # noqa: E402
import tempfile  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import onnx  # noqa: E402
from onnx import TensorProto, helper, numpy_helper  # noqa: E402
from onnx.reference import ReferenceEvaluator  # noqa: E402

HERE = Path(__file__).resolve().parent
SOURCE = HERE.parent / "models" / "nchw-tanh.onnx"
SOURCE_REL = "../models/nchw-tanh.onnx"
REQUIREMENTS = HERE.parent.parent / "requirements.txt"
# Files in this folder that the script does not produce.
NOT_GENERATED = {"README.md", "make_defects.py"}

OPSET, IR = 17, 8
FLOAT = TensorProto.FLOAT
MAX_BYTES = 100 * 1024


# --------------------------------------------------------------------------
# building blocks
# --------------------------------------------------------------------------

def load_source():
    m = onnx.load(str(SOURCE))
    w = {t.name: numpy_helper.to_array(t) for t in m.graph.initializer}
    assert sorted(w) == ["fc.bias", "fc.weight", "up.bias", "up.weight"], sorted(w)
    assert [n.op_type for n in m.graph.node] == \
        ["Gemm", "Constant", "Reshape", "Relu", "ConvTranspose", "Tanh"]
    return m, w


def init(name, arr):
    return numpy_helper.from_array(np.ascontiguousarray(arr), name)


def scalar(name, value, dtype=np.float32):
    return numpy_helper.from_array(np.array(value, dtype=dtype), name)


def vi(name, shape):
    return helper.make_tensor_value_info(name, FLOAT, shape)


def make(name, nodes, inits, inputs=None, outputs=None):
    inputs = [vi("z", ["N", 16])] if inputs is None else inputs
    outputs = [vi("image", ["N", 3, 8, 8])] if outputs is None else outputs
    # tract gives initializers nodes of their own: a node named like one fails to load.
    clash = {n.name for n in nodes} & {t.name for t in inits}
    assert not clash, clash
    g = helper.make_graph(nodes, name.replace("-", "_"), inputs, outputs, initializer=inits)
    m = helper.make_model(g, opset_imports=[helper.make_opsetid("", OPSET)],
                          producer_name="genloom-tests", producer_version="1")
    m.ir_version = IR
    return m


def gemm(z_name="z", out="h0"):
    return helper.make_node("Gemm", [z_name, "fc.weight", "fc.bias"], [out], name="fc")


def reshape(src="h0", out="h1"):
    return [
        helper.make_node("Constant", [], ["shape_n32x4x4"], name="shape_n32x4x4",
                         value=numpy_helper.from_array(np.array([-1, 32, 4, 4], np.int64),
                                                       "shape_n32x4x4_value")),
        helper.make_node("Reshape", [src, "shape_n32x4x4"], [out], name="reshape"),
    ]


def relu(src="h1", out="h2"):
    return helper.make_node("Relu", [src], [out], name="relu")


def up(src="h2", out="h3"):
    return helper.make_node("ConvTranspose", [src, "up.weight", "up.bias"], [out], name="up",
                            kernel_shape=[4, 4], strides=[2, 2], pads=[1, 1, 1, 1])


def tanh(src="h3", out="image"):
    return helper.make_node("Tanh", [src], [out], name="tanh")


def weight_inits(w, fc_weight=None):
    return [init("fc.weight", w["fc.weight"] if fc_weight is None else fc_weight),
            init("fc.bias", w["fc.bias"]), init("up.weight", w["up.weight"]),
            init("up.bias", w["up.bias"])]


def run(m, z=None):
    feeds = {} if z is None else {"z": np.ascontiguousarray(z, dtype=np.float32)}
    with np.errstate(invalid="ignore"):
        (y,) = ReferenceEvaluator(m).run(None, feeds)
    assert y.dtype == np.float32
    return y


def latents(seed, rows, dim=16):
    return np.random.default_rng(seed).standard_normal((rows, dim)).astype(np.float32)


def truncated_latents(seed, rows, dim=16):
    """N(0,1) latents with every |v| > 1 drawn again until none is left (the truncation trick)."""
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((rows, dim))
    while True:
        far = np.abs(x) > 1.0
        if not far.any():
            return x.astype(np.float32)
        x[far] = rng.standard_normal(int(far.sum()))


def evaluate(m, z, dtype=np.float32):
    """All graph outputs of m for latents z (fed as dtype), IEEE warnings silenced."""
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        return ReferenceEvaluator(m).run(None, {"z": np.ascontiguousarray(z, dtype=dtype)})


def retype(m, dtype):
    """m with every floating-point initializer, graph input and graph output turned into dtype."""
    floats = (FLOAT, TensorProto.FLOAT16, TensorProto.DOUBLE)
    elem = helper.np_dtype_to_tensor_dtype(np.dtype(dtype))
    c = onnx.ModelProto()
    c.CopyFrom(m)
    for t in c.graph.initializer:
        if t.data_type in floats:
            with np.errstate(over="ignore"):
                t.CopyFrom(numpy_helper.from_array(numpy_helper.to_array(t).astype(dtype), t.name))
    for v in list(c.graph.input) + list(c.graph.output):
        if v.type.tensor_type.elem_type in floats:
            v.type.tensor_type.elem_type = elem
    for n in c.graph.node:
        for a in n.attribute:
            assert a.type != onnx.AttributeProto.TENSOR or a.t.data_type not in floats, n.name
    return c


def npy_bytes(arr):
    """np.save output of a float32 C-order array."""
    arr = np.ascontiguousarray(arr, dtype=np.float32)
    buf = io.BytesIO()
    np.save(buf, arr, allow_pickle=False)
    return buf.getvalue()


def mean_pairwise(x):
    f = x.reshape(len(x), -1).astype(np.float64)
    d = [np.linalg.norm(f[i] - f[j]) for i in range(len(f)) for j in range(i + 1, len(f))]
    return float(np.mean(d))


def g3(x):
    """A figure for the manifest: 3 significant digits (robust to last-bit differences)."""
    return "%.3g" % x


def chi2_sf_even(x, k):
    """P(X > x) for X ~ chi-square with an even number k of degrees of freedom."""
    assert k % 2 == 0
    h = x / 2.0
    return math.exp(-h) * sum(h ** i / math.factorial(i) for i in range(k // 2))


# --------------------------------------------------------------------------
# the defects
# --------------------------------------------------------------------------

def build_all():
    """Returns [(file, model or raw bytes, manifest entry)]; the entry is None for a data file."""
    src, w = load_source()
    out = []
    ref_4 = latents(11, 4)

    def add(file, model, entry, checker="full_check"):
        if checker == "full_check":
            onnx.checker.check_model(model, full_check=True)
        else:  # refused by full_check on purpose: the plain check must pass, full must fail
            onnx.checker.check_model(model, full_check=False)
            try:
                onnx.checker.check_model(model, full_check=True)
                raise AssertionError(file + ": full_check accepted it")
            except onnx.shape_inference.InferenceError as exc:
                first = str(exc).strip().splitlines()[0]
                checker = checker + ": " + first[first.find("(op_type"):][:160]
        entry = dict(file=file, **entry)
        entry["checker"] = checker
        out.append((file, model, entry))

    # 1. batch-stats -> batch-independence --------------------------------
    nodes = [
        gemm(),
        helper.make_node("ReduceMean", ["h0"], ["h0_batch_mean"], name="batch_mean",
                         axes=[0], keepdims=1),
        helper.make_node("Mul", ["h0_batch_mean", "half"], ["h0_half_mean"], name="half_mean"),
        helper.make_node("Sub", ["h0", "h0_half_mean"], ["h0c"], name="subtract_batch_mean"),
    ] + reshape("h0c") + [relu(), up(), tanh()]
    m = make("batch-stats", nodes, weight_inits(w) + [scalar("half", 0.5)])
    alone = run(m, ref_4[:1])[0]
    in4 = run(m, ref_4)[0]
    d4 = float(np.abs(alone - in4).max())
    assert d4 > 1e-3, d4
    for n in (1, 2, 7):
        assert run(m, latents(12, n)).shape == (n, 3, 8, 8)
    singles = np.stack([run(m, ref_4[i:i + 1])[0] for i in range(4)])
    d_single = float(np.abs(singles[0] - singles[1]).max())
    assert d_single > 1e-2, d_single  # batch 1 still depends on z
    add("batch-stats.onnx", m, {
        "defect": "after the Gemm, half the batch mean is subtracted: h - 0.5 * ReduceMean(h, "
                  "axes=[0], keepdims=1), so each image depends on the other latents of its "
                  "batch (the factor 0.5 keeps a lone image dependent on its latent)",
        "fails": "batch-independence", "also_fails": [],
        "defect_node": "batch_mean (ReduceMean over axis 0) -> subtract_batch_mean (Sub)",
        "evidence": "default_rng(11) latents, batch of 4: image 0 alone vs image 0 in the batch "
                    "differ by max abs %s (> 1e-3); runs at batch 1, 2, 7; at batch 1 two "
                    "latents still give images differing by max abs %s"
                    % (g3(d4), g3(d_single)),
    })

    # 2. nan-typical -> finiteness ----------------------------------------
    T = 18.5
    p_nan = chi2_sf_even(T, 16)
    nodes = [
        gemm(),
        helper.make_node("ReduceSumSquare", ["z"], ["z_sq"], name="z_norm_sq",
                         axes=[1], keepdims=1),
        helper.make_node("Sub", ["nan_threshold", "z_sq"], ["nan_margin"], name="nan_margin"),
        helper.make_node("Sqrt", ["nan_margin"], ["nan_root"], name="nan_sqrt"),
        helper.make_node("Mul", ["nan_root", "tiny"], ["nan_term"], name="nan_scale"),
        helper.make_node("Add", ["h0", "nan_term"], ["h0n"], name="nan_inject"),
    ] + reshape("h0n") + [relu(), up(), tanh()]
    m = make("nan-typical", nodes,
             weight_inits(w) + [scalar("nan_threshold", T), scalar("tiny", 1e-30)])
    z = latents(5, 200)
    y = run(m, z)
    good = run(src, z)
    bad_rows = np.isnan(y).reshape(200, -1).any(axis=1)
    all_nan = np.isnan(y).reshape(200, -1).all(axis=1)
    frac = float(bad_rows.mean())
    assert 0.15 <= frac <= 0.5, frac
    assert np.array_equal(bad_rows, all_nan)  # a NaN image is NaN everywhere
    assert np.isfinite(y[~bad_rows]).all()
    assert np.array_equal(y[~bad_rows], good[~bad_rows])
    expect_rows = (z.astype(np.float64) ** 2).sum(1) > T
    assert np.array_equal(bad_rows, expect_rows)
    add("nan-typical.onnx", m, {
        "defect": "1e-30 * Sqrt(%s - ReduceSumSquare(z, axes=[1])) is added to the Gemm output: "
                  "for a latent with |z|^2 > %s the square root is NaN and the whole image is "
                  "NaN, otherwise the term is too small to change any float32 value" % (T, T),
        "fails": "finiteness", "also_fails": [],
        "defect_node": "nan_sqrt (Sqrt of nan_margin)",
        "evidence": "200 default_rng(5) latents: %d images (%s%%) are NaN in every pixel, "
                    "exactly those with |z|^2 > %s; the other %d are finite and bit-equal to "
                    "nchw-tanh's output; for N(0,1) latents P(chi2(16) > %s) = %s"
                    % (int(bad_rows.sum()), g3(100 * frac), T, int((~bad_rows).sum()), T,
                       g3(p_nan)),
        "note": "the multiplier is 1e-30, not 0: tract's declutter rewrites Mul by a uniform "
                "zero constant into zeros, which would delete the NaN. Checks that compare "
                "images (determinism, batch-independence, diversity, sensitivity) must treat "
                "NaN images explicitly (compare bit patterns or skip them) to pass here",
    })

    # 3. collapsed -> diversity -------------------------------------------
    nodes = [helper.make_node("Mul", ["z", "z_shrink"], ["zs"], name="shrink_latent"),
             gemm("zs")] + reshape() + [relu(), up(), tanh()]
    m = make("collapsed", nodes, weight_inits(w) + [scalar("z_shrink", 0.002)])
    z = latents(7, 32)
    y, good = run(m, z), run(src, z)
    ratio = mean_pairwise(y) / mean_pairwise(good)
    assert ratio < 0.01, ratio
    base = z[:1]
    effects = []
    for dim in range(16):
        zp = base.copy()
        zp[0, dim] += 1.0
        effects.append(float(np.abs(run(m, zp) - run(m, base)).max()))
    assert min(effects) > 0, effects
    add("collapsed.onnx", m, {
        "defect": "the latent is multiplied by 0.002 before the Gemm, so every seed draws "
                  "nearly the same image while each latent dimension keeps a small, non-zero "
                  "effect",
        "fails": "diversity", "also_fails": [],
        "defect_node": "shrink_latent (Mul by 0.002)",
        "evidence": "32 default_rng(7) latents: mean pairwise L2 distance is %s of nchw-tanh's "
                    "(< 1%%); +1.0 on each dimension of one latent changes the image by max "
                    "abs %s to %s (no dimension is dead)"
                    % (g3(ratio), g3(min(effects)), g3(max(effects))),
        "note": "a sensitivity check that judges dimensions relative to each other passes; one "
                "with an absolute threshold above about 1e-3 would call every dimension dead",
    })

    # 4. dead-half -> sensitivity -----------------------------------------
    W1 = w["fc.weight"].copy()
    W1[8:, :] = 0.0
    W1[:8, :] = (W1[:8, :].astype(np.float64) * math.sqrt(2.0)).astype(np.float32)
    nodes = [gemm()] + reshape() + [relu(), up(), tanh()]
    m = make("dead-half", nodes, weight_inits(w, fc_weight=W1))
    base = latents(8, 4)
    y0 = run(m, base)
    effects = []
    for dim in range(16):
        zp = base.copy()
        zp[:, dim] += 1.0
        effects.append(float(np.abs(run(m, zp) - y0).max()))
    assert effects[12] == 0.0 and all(e == 0.0 for e in effects[8:]), effects
    assert effects[3] > 1e-2 and all(e > 1e-2 for e in effects[:8]), effects
    z = latents(7, 32)
    spread, spread_good = float(run(m, z).std()), float(run(src, z).std())
    assert 0.8 < spread / spread_good < 1.25
    div = mean_pairwise(run(m, z)) / mean_pairwise(run(src, z))
    add("dead-half.onnx", m, {
        "defect": "the Gemm weight rows of latent dimensions 8..15 are zero (they have no "
                  "effect at all); the rows of dimensions 0..7 are scaled by sqrt(2) so the "
                  "output spread stays about the same",
        "fails": "sensitivity", "also_fails": [],
        "defect_node": "fc (Gemm), initializer fc.weight rows 8..15",
        "dead_dims": list(range(8, 16)),
        "evidence": "4 default_rng(8) latents, +1.0 on one dimension: dims 8..15 (dim 12 "
                    "included) change nothing (max abs exactly 0), dims 0..7 change the image by "
                    "max abs %s to %s (dim 3: %s); pixel std over 32 default_rng(7) samples is "
                    "%s of nchw-tanh's, mean pairwise distance %s of nchw-tanh's"
                    % (g3(min(effects[:8])), g3(max(effects[:8])), g3(effects[3]),
                       g3(spread / spread_good), g3(div)),
    })

    # 5. random-op -> structure -------------------------------------------
    nodes = [
        gemm(),
        helper.make_node("RandomNormalLike", ["h0"], ["noise"], name="noise",
                         mean=0.0, scale=0.01),
        helper.make_node("Add", ["h0", "noise"], ["h0n"], name="inject_noise"),
    ] + reshape("h0n") + [relu(), up(), tanh()]
    m = make("random-op", nodes, weight_inits(w))
    add("random-op.onnx", m, {
        "defect": "RandomNormalLike(h, mean 0, scale 0.01) is added to the Gemm output: noise "
                  "injected at inference",
        "fails": "structure", "also_fails": [],
        "defect_node": "noise (RandomNormalLike)",
        "evidence": "not evaluated (the output is random by design); onnx.checker full_check "
                    "accepts it",
        "note": "like ../models/random-normal.onnx but with scale 0.01 and a different "
                "purpose: here it is a structure failure. genloom's tract cannot load it "
                "('RandomNormalLike: expected attribute shape'), so the gate's pre-scan must "
                "report it",
    })

    # 6. dropout-train -> training-mode -----------------------------------
    nodes = [gemm()] + reshape() + [
        relu(),
        helper.make_node("Dropout", ["h2", "drop_ratio", "drop_training"], ["h2d", "h2d_mask"],
                         name="dropout"),
        up("h2d"), tanh(),
    ]
    m = make("dropout-train", nodes, weight_inits(w) + [
        scalar("drop_ratio", 0.5), scalar("drop_training", True, np.bool_)])
    onnx.checker.check_model(m, full_check=True)
    a, b, good = run(m, ref_4), run(m, ref_4), run(src, ref_4)
    assert not np.array_equal(a, b)
    assert not np.allclose(a, good, atol=1e-3)
    # What the Dropout node itself does in the reference: expose its output.
    probe = make("dropout-probe", nodes[:-2], weight_inits(w) + [
        scalar("drop_ratio", 0.5), scalar("drop_training", True, np.bool_)],
        outputs=[vi("h2", ["N", 32, 4, 4]), vi("h2d", ["N", 32, 4, 4])])
    with np.errstate(invalid="ignore"):
        h2, h2d = ReferenceEvaluator(probe).run(None, {"z": latents(13, 64)})
    pos = h2 > 0
    dropped = float((h2d[pos] == 0).mean())
    kept = h2d[pos] != 0
    assert 0.4 < dropped < 0.6, dropped
    assert np.allclose(h2d[pos][kept], 2.0 * h2[pos][kept], rtol=1e-6)
    add("dropout-train.onnx", m, {
        "defect": "Dropout(h, ratio = constant 0.5, training_mode = constant true) after the "
                  "Relu, its mask output unused: a training-mode node left in the export",
        "fails": "training-mode", "also_fails": ["determinism", "batch-independence"],
        "defect_node": "dropout (Dropout, input drop_training = true)",
        "evidence": "ReferenceEvaluator really drops: two runs on the same 4 latents differ, "
                    "and between 40% and 60% of the positive Relu outputs are zeroed, the "
                    "rest doubled (1/(1-0.5)); neither run matches nchw-tanh",
        "note": "also_fails is for an engine that runs the node as ONNX specifies (the "
                "reference draws with an unseeded numpy RandomState, so every run differs). "
                "genloom's tract refuses to run it ('Dropout in training mode with a non-zero "
                "ratio is not supported'), so under tract no run-time check can complete",
    })

    # 7. bn-train -> training-mode ----------------------------------------
    # Running statistics = the population statistics of h1 for z ~ N(0,1), and scale/bias
    # that undo them: the inference form (running stats) is the identity, so an engine
    # that ignores training_mode reproduces nchw-tanh.
    W = w["fc.weight"].astype(np.float64).reshape(16, 32, 16)  # [z, channel, position]
    B = w["fc.bias"].astype(np.float64).reshape(32, 16)
    mu = B.mean(axis=1)
    var = ((W ** 2).sum(axis=0) + (B - mu[:, None]) ** 2).mean(axis=1)
    eps = 1e-5
    bn_inits = [init("bn.scale", np.sqrt(var + eps).astype(np.float32)),
                init("bn.bias", mu.astype(np.float32)),
                init("bn.mean", mu.astype(np.float32)),
                init("bn.var", var.astype(np.float32))]

    def bn_model(name, training):
        nodes = [gemm()] + reshape() + [
            helper.make_node("BatchNormalization",
                             ["h1", "bn.scale", "bn.bias", "bn.mean", "bn.var"], ["h1b"],
                             name="bn", epsilon=eps, momentum=0.9, training_mode=training),
            relu("h1b"), up(), tanh()]
        return make(name, nodes, weight_inits(w) + bn_inits)

    m = bn_model("bn-train", 1)
    twin = bn_model("bn-inference", 0)
    alone = run(m, ref_4[:1])[0]
    in4 = run(m, ref_4)[0]
    d4 = float(np.abs(alone - in4).max())
    assert d4 > 1e-3, d4
    z = latents(7, 32)
    inf_err = float(np.abs(run(twin, z) - run(src, z)).max())
    assert inf_err < 1e-5, inf_err
    y32 = run(m, z)
    assert np.array_equal(y32, run(m, z))  # the reference is deterministic here
    assert np.isfinite(y32).all()
    for n in (1, 2, 7):
        assert run(m, latents(12, n)).shape == (n, 3, 8, 8)
    div_batch = mean_pairwise(y32) / mean_pairwise(run(src, z))
    singles = np.concatenate([run(m, z[i:i + 1]) for i in range(32)])
    div_single = mean_pairwise(singles) / mean_pairwise(run(src, z))
    assert div_batch > 0.5 and div_single > 0.3, (div_batch, div_single)
    effects = []
    for dim in range(16):
        zp = ref_4.copy()
        zp[:, dim] += 1.0
        effects.append(float(np.abs(run(m, zp) - run(m, ref_4)).max()))
    assert min(effects) > 1e-2, effects
    add("bn-train.onnx", m, checker="check_model without full_check (full_check refuses it "
        "on purpose: its shape inference wants 3 outputs with training_mode=1)", entry={
        "defect": "a BatchNormalization with training_mode=1 after the Reshape: it normalizes "
                  "with the statistics of the current batch instead of its running statistics",
        "fails": "training-mode", "also_fails": ["batch-independence"],
        "defect_node": "bn (BatchNormalization)",
        "defect_attribute": "training_mode=1",
        "evidence": "ReferenceEvaluator uses batch statistics: default_rng(11) image 0 alone vs "
                    "in a batch of 4 differs by max abs %s; it is deterministic, finite, runs at "
                    "batch 1, 2, 7, every dimension matters (+1.0 changes the image by max abs "
                    ">= %s), and 32 default_rng(7) samples keep %s of nchw-tanh's mean pairwise "
                    "distance in one batch, %s when run one at a time. With training_mode=0 the "
                    "same node reproduces nchw-tanh within %s"
                    % (g3(d4), g3(min(effects)), g3(div_batch), g3(div_single), g3(inf_err)),
        "note": "running mean/var are the population statistics of the Reshape output for "
                "z ~ N(0,1) and scale/bias undo them, so the inference form is the identity. "
                "tract ignores training_mode and uses the running statistics, so under "
                "genloom's engine batch-independence passes; only the static training-mode "
                "check can catch it there",
    })

    # 8. unsupported-attr -> structure ------------------------------------
    # A Resize(mode=cubic, coordinate_transformation_mode=tf_crop_and_resize) was the first
    # idea, but genloom's tract build implements that exactly, so it is no defect there.
    # LpPool (here with p=3) is standard ONNX since opset 1, the reference runs it, and
    # tract-onnx 0.23.9 has no LpPool at all (only GlobalLpPool).
    nodes = [gemm()] + reshape() + [
        relu(),
        helper.make_node("LpPool", ["h2"], ["h2p"], name="pool", p=3,
                         kernel_shape=[3, 3], strides=[1, 1], pads=[1, 1, 1, 1]),
        helper.make_node("Mul", ["h2p", "pool_gain"], ["h2s"], name="pool_scale"),
        up("h2s"), tanh(),
    ]
    m = make("unsupported-attr", nodes, weight_inits(w) + [scalar("pool_gain", 0.5)])
    y = run(m, z)
    assert y.shape == (32, 3, 8, 8) and np.isfinite(y).all()
    div = mean_pairwise(y) / mean_pairwise(run(src, z))
    assert div > 0.3, div
    add("unsupported-attr.onnx", m, {
        "defect": "an LpPool(p=3, kernel 3x3, stride 1, pads 1) smooths the Relu output before "
                  "the ConvTranspose: a well-formed standard op that genloom's engine does not "
                  "implement",
        "fails": "structure", "also_fails": [],
        "defect_node": "pool (LpPool)",
        "defect_attribute": "p=3 on LpPool; the op itself, with any attributes, is missing "
                            "from tract-onnx 0.23.9 (only GlobalLpPool is there)",
        "evidence": "well-formed: full_check passes and ReferenceEvaluator runs it: 32 "
                    "default_rng(7) latents give finite [32,3,8,8] images with %s of "
                    "nchw-tanh's mean pairwise distance" % g3(div),
        "note": "Resize(mode=cubic, coordinate_transformation_mode=tf_crop_and_resize, roi) "
                "was not used: genloom's tract build runs it and matches the ONNX reference",
    })

    # 9. no-latent -> structure -------------------------------------------
    z_const = latents(9000, 1)
    nodes = [gemm("z_const")] + reshape() + [relu(), up(), tanh()]
    m = make("no-latent", nodes, weight_inits(w) + [init("z_const", z_const)],
             inputs=[], outputs=[vi("image", [1, 3, 8, 8])])
    y = run(m)
    assert y.shape == (1, 3, 8, 8)
    assert np.array_equal(y, run(src, z_const))
    add("no-latent.onnx", m, {
        "defect": "the latent was traced away: the graph has no inputs, the Gemm reads a "
                  "constant initializer z_const [1,16], and the output is [1,3,8,8]",
        "fails": "structure", "also_fails": [],
        "defect_node": "fc (Gemm) input z_const (initializer)",
        "evidence": "the graph has 0 inputs; ReferenceEvaluator with no feeds gives one "
                    "[1,3,8,8] image, bit-equal to nchw-tanh at z = z_const (default_rng(9000))",
    })

    # 10. nan-large-latent -> finiteness ------------------------------------
    # zr = z * Sqrt(4 - mean(z^2)): a renormalisation that is fine for N(0,1) latents
    # (mean z^2 ~ 1) and NaN once mean(z^2) > 4, e.g. latents at 3x their norm (~ 9).
    LIMIT = 4.0
    nodes = [
        helper.make_node("Mul", ["z", "z"], ["z2"], name="renorm_square"),
        helper.make_node("ReduceMean", ["z2"], ["z2_mean"], name="renorm_mean",
                         axes=[1], keepdims=1),
        helper.make_node("Sub", ["renorm_limit", "z2_mean"], ["z_room"], name="renorm_margin"),
        helper.make_node("Sqrt", ["z_room"], ["z_gain"], name="renorm_sqrt"),
        helper.make_node("Mul", ["z", "z_gain"], ["zr"], name="renorm_scale"),
        gemm("zr"),
    ] + reshape() + [relu(), up(), tanh()]
    m = make("nan-large-latent", nodes, weight_inits(w) + [scalar("renorm_limit", LIMIT)])
    z = latents(14, 64)
    zt = truncated_latents(14, 64)
    assert np.abs(zt).max() <= 1.0
    assert np.isfinite(run(m, z)).all() and np.isfinite(run(m, zt)).all()
    share = {}
    for k in (3, 10):
        for label, base in (("typical", z), ("truncated", zt)):
            y = run(m, k * base)
            flat = np.isnan(y).reshape(len(y), -1)
            assert np.array_equal(flat.any(axis=1), flat.all(axis=1))  # NaN everywhere or nowhere
            assert np.isfinite(y[~flat.any(axis=1)]).all()
            predicted = ((k * base).astype(np.float32).astype(np.float64) ** 2).mean(1) > LIMIT
            assert np.array_equal(flat.any(axis=1), predicted), (k, label)
            share[(k, label)] = int(flat.any(axis=1).sum())
    assert share[(10, "typical")] == 64 and share[(10, "truncated")] == 64
    assert share[(3, "typical")] >= 58, share  # P(finite at 3x) = P(chi2(16) < 64/9) ~ 2.4%
    p_finite_3x = 1.0 - chi2_sf_even(16 * LIMIT / 9.0, 16)
    # What an engine whose Relu maps NaN to 0 returns at 3x: the Gemm output is NaN, Relu(NaN)
    # = 0 there, so the image is tanh(up.bias): finite.
    probe = make("renorm-probe", nodes[:-2], weight_inits(w) + [scalar("renorm_limit", LIMIT)],
                 outputs=[vi("h1", ["N", 32, 4, 4])])
    (h1,) = evaluate(probe, 3 * z)
    nan_rows = np.isnan(h1).reshape(64, -1).all(axis=1)
    assert nan_rows.sum() == share[(3, "typical")]
    tail = make("up-tanh", [up(), tanh()], weight_inits(w)[2:],  # also used by nan_case
                inputs=[vi("h2", ["N", 32, 4, 4])])
    with np.errstate(invalid="ignore"):
        (hidden,) = ReferenceEvaluator(tail).run(None, {"h2": np.fmax(h1, np.float32(0))})
    assert np.isfinite(hidden).all()
    add("nan-large-latent.onnx", m, {
        "defect": "the latent is renormalised before the Gemm: zr = z * Sqrt(4 - "
                  "ReduceMean(z*z, axes=[1], keepdims=1)); for N(0,1) latents mean(z^2) is "
                  "about 1 and all is finite, for latents at 3x their norm it is about 9 and "
                  "the square root, hence the whole image, is NaN",
        "fails": "finiteness", "also_fails": [],
        "defect_node": "renorm_sqrt",
        "evidence": "64 default_rng(14) latents and a truncated set (default_rng(14), every "
                    "|v| > 1 drawn again): every output finite at 1x. At 3x: %d of 64 typical "
                    "images NaN in every pixel, the others finite (NaN exactly where "
                    "mean((3z)^2) > 4; an N(0,1) latent stays finite at 3x with probability "
                    "P(chi2(16) < 64/9) = %s), %d of 64 truncated ones NaN. At 10x: "
                    "64 of 64 NaN in every pixel, typical and truncated. At 3x the Gemm output "
                    "of every NaN image is NaN in all 512 values; with NaN mapped to 0 by the "
                    "Relu the 3x images are finite"
                    % (share[(3, "typical")], g3(p_finite_3x), share[(3, "truncated")]),
        "note": "an engine whose Relu computes max(x, 0) with NaN -> 0 (genloom's tract "
                "build does, see tests/integration/check.rs) returns "
                "finite images at 3x: the NaN is made at renorm_sqrt and hidden mid-graph, so "
                "the gate must look at activations, not only at the images",
    })

    # 11-14. NaN made by Sqrt(h) for h < 0 and swallowed by an op that an engine may
    # implement as max/min with NaN -> number (Relu, Max, Clip, a final Clip).
    def nan_case(file, nodes, inits, before, hider, hide, about):
        m = make(file[:-5], nodes, weight_inits(w) + inits)
        z = latents(16, 64)
        y = run(m, z)
        nan_img = np.isnan(y).reshape(64, -1).any(axis=1)
        nan_val = float(np.isnan(y).mean())
        assert nan_img.mean() > 0.5 and nan_val > 0.1, (file, nan_img.mean(), nan_val)
        upto = [n for n in nodes if n.name != hider][:[n.name for n in nodes].index(hider)]
        probe = make(file[:-5] + "-probe", upto, weight_inits(w) + inits,
                     outputs=[vi(before, None)])
        (b,) = evaluate(probe, z)
        nan_before = float(np.isnan(b).mean())
        assert nan_before > 0.2, (file, nan_before)
        # What the image is if the hiding op maps NaN to a number (numpy fmax/fmin).
        hidden = hide(b)
        if hider != "final_clamp":
            with np.errstate(invalid="ignore"):
                (hidden,) = ReferenceEvaluator(tail).run(None, {"h2": hidden})
        assert hidden.shape == y.shape and np.isfinite(hidden).all()
        add(file, m, {
            "defect": about,
            "fails": "finiteness", "also_fails": [],
            "defect_node": "nan_sqrt",
            "evidence": "64 default_rng(16) latents: %d images (%s%%) have NaN, %s%% of all "
                        "output values are NaN; the input of %s (output of the op before it) "
                        "is NaN in %s%% of its values; with NaN mapped to a number there "
                        "(numpy fmax/fmin) every image is finite"
                        % (int(nan_img.sum()), g3(100 * nan_img.mean()), g3(100 * nan_val),
                           hider, g3(100 * nan_before)),
            "note": "ONNX operators are element-wise IEEE 754 arithmetic and the reference "
                    "evaluator propagates the NaN through %s; an engine that implements it as "
                    "max/min with NaN -> number hides it, so the gate must find it in the "
                    "activations and name nan_sqrt" % hider,
        })
        return m, y, b

    def finish(src, hider_nodes):
        return reshape(src) + hider_nodes + [up(), tanh()]

    sqrt_h0 = helper.make_node("Sqrt", ["h0"], ["h0s"], name="nan_sqrt")
    nan_case("nan-relu.onnx", [gemm(), sqrt_h0] + finish("h0s", [relu()]), [],
             "h1", "relu", lambda b: np.fmax(b, np.float32(0)),
             "Sqrt of the Gemm output (nan_sqrt: NaN where it is negative, about half the "
             "values), then the usual Reshape -> Relu -> ConvTranspose -> Tanh")
    nan_case("nan-max.onnx",
             [gemm(), sqrt_h0] + finish("h0s", [
                 helper.make_node("Max", ["h1", "zero"], ["h2"], name="max_zero")]),
             [scalar("zero", 0.0)],
             "h1", "max_zero", lambda b: np.fmax(b, np.float32(0)),
             "Sqrt of the Gemm output (nan_sqrt), then Reshape and, in place of the Relu, "
             "Max(h, 0) with a scalar zero initializer (max_zero)")
    nan_case("nan-clip.onnx",
             [gemm(), sqrt_h0] + finish("h0s", [
                 helper.make_node("Clip", ["h1", "clip_min", "clip_max"], ["h2"],
                                  name="clip6")]),
             [scalar("clip_min", 0.0), scalar("clip_max", 6.0)],
             "h1", "clip6", lambda b: np.fmin(np.fmax(b, np.float32(0)), np.float32(6)),
             "Sqrt of the Gemm output (nan_sqrt), then Reshape and, in place of the Relu, "
             "Clip(h, 0, 6) (clip6, min and max as scalar initializer inputs)")
    # The final clamp: h3 + 1e-30 * Sqrt(h3), then Clip(-1, 1) as the last op (no Tanh).
    nodes = [gemm()] + reshape() + [relu(), up(),
        helper.make_node("Sqrt", ["h3"], ["h3r"], name="nan_sqrt"),
        helper.make_node("Mul", ["h3r", "tiny"], ["h3t"], name="nan_scale"),
        helper.make_node("Add", ["h3", "h3t"], ["h3n"], name="nan_inject"),
        helper.make_node("Clip", ["h3n", "clamp_lo", "clamp_hi"], ["image"], name="final_clamp"),
    ]
    _, y, _ = nan_case(
        "nan-final-clamp.onnx", nodes,
        [scalar("tiny", 1e-30), scalar("clamp_lo", -1.0), scalar("clamp_hi", 1.0)],
        "h3n", "final_clamp", lambda b: np.fmin(np.fmax(b, np.float32(-1)), np.float32(1)),
        "gemm -> reshape -> relu -> up, then 1e-30 * Sqrt(h3) (nan_sqrt, nan_scale: NaN where "
        "h3 < 0) added to h3 (nan_inject), and the last op is Clip(-1, 1) (final_clamp) "
        "producing the image, no Tanh")
    # Where it is not NaN, the term is too small to matter: the image is Clip(h3, -1, 1).
    probe = make("final-clamp-probe", [gemm()] + reshape() + [relu(), up()], weight_inits(w),
                 outputs=[vi("h3", ["N", 3, 8, 8])])
    (h3,) = evaluate(probe, latents(16, 64))
    ok = ~np.isnan(y)
    assert np.array_equal(np.isnan(y), h3 < 0)
    assert np.array_equal(y[ok], np.clip(h3, -1, 1)[ok])
    out[-1][2]["note"] += ("; the multiplier is 1e-30, not 0, because tract folds a "
                           "multiplication by zero. Where h3 >= 0 the image is bit-equal to "
                           "Clip(h3, -1, 1), and it is NaN exactly where h3 < 0")

    # 15. f16-overflow -> passes the f32 gate; an activation past binary16's range ----------
    # amplify * 2^15 and attenuate * 2^-15 (powers of two: exact in float32, so the output is
    # bit-equal to nchw-tanh's; both factors are exact float16 values, so storing the
    # initializers as float16 changes nothing). attenuate sits before the Relu: after the
    # ConvTranspose it would scale up.bias too, and the output would not be nchw-tanh's.
    F16_MAX = float(np.finfo(np.float16).max)
    assert F16_MAX == 65504.0
    AMP = 2.0 ** 15
    f16_inits = weight_inits(w) + [scalar("amp_gain", AMP), scalar("att_gain", 1.0 / AMP)]
    nodes = [
        gemm(),
        helper.make_node("Mul", ["h0", "amp_gain"], ["h0a"], name="amplify"),
    ] + reshape("h0a") + [
        helper.make_node("Mul", ["h1", "att_gain"], ["h1a"], name="attenuate"),
        relu("h1a"), up(), tanh(),
    ]
    m = make("f16-overflow", nodes, f16_inits)
    z = latents(15, 64)
    y, good = run(m, z), run(src, z)
    diff = float(np.abs(y - good).max())
    assert diff < 1e-5 and np.array_equal(y, good), diff
    names = ["h0", "h0a", "h1", "h1a", "h2", "h3", "image"]
    probe = make("f16-probe", nodes, f16_inits,
                 outputs=[vi(n, None) for n in names])
    acts = dict(zip(names, evaluate(probe, z)))
    amp_max = float(np.abs(acts["h0a"]).max())
    assert amp_max > F16_MAX, amp_max
    assert float(np.abs(acts["h1"]).max()) == amp_max  # the Reshape is a view of it
    others = max(float(np.abs(acts[n]).max()) for n in ["h0", "h1a", "h2", "h3", "image"])
    assert others < 100, others
    # The same model in float16, initializers, input and outputs.
    for t in f16_inits:
        a = numpy_helper.to_array(t)
        assert np.isfinite(a.astype(np.float16)).all(), t.name
        if t.name in ("amp_gain", "att_gain"):
            assert a.astype(np.float16).astype(np.float32) == a, t.name
    stored = retype(retype(m, np.float16), np.float32)  # f16 weight storage, f32 compute
    y_stored = run(stored, z)
    assert np.isfinite(y_stored).all()
    stored_err = float(np.abs(y_stored - good).max())
    assert stored_err < 0.05, stored_err
    acts16 = dict(zip(names, evaluate(retype(probe, np.float16), z, np.float16)))
    assert all(a.dtype == np.float16 for a in acts16.values())
    amp_inf = float(np.isinf(acts16["h0a"]).mean())
    img_bad = float((~np.isfinite(acts16["image"])).mean())
    assert amp_inf > 0 and np.isfinite(acts16["h0"]).all(), amp_inf
    assert amp_inf > 0 or img_bad > 0
    add("f16-overflow.onnx", m, {
        "defect": "after the Gemm, amplify multiplies by 2^15 = 32768 and, after the "
                  "Reshape, attenuate multiplies by 2^-15: in float32 the image is unchanged, "
                  "but amplify's output goes past 65504, the largest finite IEEE 754 binary16 "
                  "value, so float16 compute overflows there",
        "fails": None, "also_fails": [],
        "f16_overflow_node": "amplify",
        "evidence": "64 default_rng(15) latents: the float32 output is bit-equal to "
                    "nchw-tanh's (max abs difference %s); max |amplify output| = %s > 65504 "
                    "(f16 headroom %s; the Reshape output is the same values); every other "
                    "node output stays within max abs %s. The model in float16 (initializers, "
                    "input, outputs): %s%% of amplify's outputs are inf and %s%% of the image "
                    "values are inf or NaN. Initializers stored as float16 and computed in "
                    "float32: finite, within %s of nchw-tanh"
                    % (g3(diff), g3(amp_max), g3(F16_MAX / amp_max), g3(others),
                       g3(100 * amp_inf), g3(100 * img_bad), g3(stored_err)),
        "note": "the f32 gate passes it; it is a fixture for the f16 warnings: f16 compute "
                "must refuse it, an f16 (weight storage) export must warn, naming amplify. "
                "Factors are powers of two, not 1e5 / 1e-5: 1e5 is past 65504 itself (inf as "
                "a float16 initializer), and 2^k keeps the float32 output exact",
    })

    # 16. range255-nhwc -> parity at a [0, 255] output range ---------------------------
    nodes = [gemm()] + reshape() + [relu(), up(), tanh(out="h4"),
        helper.make_node("Mul", ["h4", "to255_gain"], ["h5"], name="to255_mul"),
        helper.make_node("Add", ["h5", "to255_offset"], ["h6"], name="to255_add"),
        helper.make_node("Transpose", ["h6"], ["image"], name="to_nhwc", perm=[0, 2, 3, 1]),
    ]
    m = make("range255-nhwc", nodes,
             weight_inits(w) + [scalar("to255_gain", 127.5), scalar("to255_offset", 127.5)],
             outputs=[vi("image", ["N", 8, 8, 3])])
    z = latents(21, 16)
    y32 = run(m, z)
    (y64,) = evaluate(retype(m, np.float64), z, np.float64)
    assert y64.dtype == np.float64 and y32.shape == (16, 8, 8, 3)
    ref = y64.astype(np.float32)
    assert np.isfinite(ref).all() and ref.min() >= 0 and ref.max() <= 255
    good = run(src, z)
    assert np.allclose(y32, 127.5 * good.transpose(0, 2, 3, 1) + 127.5, atol=1e-4, rtol=0)
    par = float(np.abs(y32 - ref).max())
    assert par < 1e-3, par
    off = ref.copy()
    off[3] += np.float32(0.5)
    off_err = float(np.abs(y32 - off).max())
    off_other = float(np.abs(np.delete(y32 - off, 3, axis=0)).max())
    assert 0.49 < off_err < 0.51 and off_other == par, (off_err, off_other)
    files = {"range255-z.npy": z, "range255-out.npy": ref, "range255-off.npy": off}
    add("range255-nhwc.onnx", m, {
        "defect": "none: nchw-tanh with its output mapped to [0, 255] (to255_mul * 127.5, "
                  "to255_add + 127.5) and transposed to NHWC (to_nhwc, perm [0,2,3,1]), image "
                  "[N,8,8,3]; a parity-framework fixture that must pass",
        "fails": None, "also_fails": [],
        "reference_latents": "range255-z.npy",
        "reference_outputs": "range255-out.npy",
        "reference_off": "range255-off.npy",
        "evidence": "16 default_rng(21) latents (range255-z.npy, float32 [16,16]); "
                    "range255-out.npy is the ReferenceEvaluator output of the model with "
                    "initializers, input and output in float64, cast to float32 [16,8,8,3], "
                    "values in [%s, %s]; the float32 ReferenceEvaluator output differs from "
                    "it by max abs %s. range255-off.npy is range255-out.npy with 0.5 (half an "
                    "8-bit level) added to every value of image 3: max abs %s from the float32 "
                    "output (%s outside image 3)"
                    % (g3(ref.min()), g3(ref.max()), g3(par), g3(off_err), g3(off_other)),
        "note": "range255-off.npy is a reference that must be refused by parity-framework: "
                "half an 8-bit level is a real defect at this range",
    })
    for name, arr in files.items():
        out.append((name, npy_bytes(arr), None))

    # 17. good --------------------------------------------------------------
    raw = SOURCE.read_bytes()
    good_model = onnx.load_from_string(raw)
    onnx.checker.check_model(good_model, full_check=True)
    out.append(("good.onnx", raw, {
        "file": "good.onnx",
        "defect": "none: a byte-identical copy of %s" % SOURCE_REL,
        "fails": None, "also_fails": [],
        "evidence": "copied byte for byte; passes onnx.checker full_check",
        "checker": "full_check",
    }))
    return out


# --------------------------------------------------------------------------
# driver
# --------------------------------------------------------------------------

def generate(out_dir):
    out_dir.mkdir(parents=True, exist_ok=True)
    entries = []
    for file, model, entry in build_all():
        data = model if isinstance(model, bytes) else model.SerializeToString()
        assert len(data) < MAX_BYTES, (file, len(data))
        if not isinstance(model, bytes):
            assert model.ir_version == IR and model.opset_import[0].version == OPSET
        with open(out_dir / file, "wb") as f:
            f.write(data)
        if entry is None:  # a data file (.npy) that a model entry names
            continue
        entry["bytes"] = len(data)
        entries.append(entry)
    manifest = {
        "source": "derived from %s with onnx %s (onnx.helper, onnx.checker, "
                  "onnx.reference.ReferenceEvaluator) and numpy %s; opset %d, IR %d"
                  % (SOURCE_REL, onnx.__version__, np.__version__, OPSET, IR),
        "fields": {
            "file": "model file in this folder",
            "defect": "what is wrong with it",
            "fails": "the one release-gate check id it is built to fail (null: passes all)",
            "also_fails": "other check ids it fails too, as far as the ONNX reference shows",
            "defect_node": "node (and attribute) that carries the defect",
            "evidence": "what make_defects.py asserted, with measured figures (3 significant "
                        "digits)",
            "f16_overflow_node": "node whose float32 output goes past 65504, the largest finite "
                                 "IEEE 754 binary16 value (f16-overflow only)",
            "reference_latents, reference_outputs, reference_off": "float32 .npy files "
                "(numpy.save) in this folder: latents, framework reference outputs the model "
                "must match, and a reference off by a real defect that parity must refuse "
                "(range255-nhwc only)",
            "checker": "how onnx.checker was run on it",
            "bytes": "file size",
        },
        "models": entries,
    }
    with open(out_dir / "manifest.json", "w", encoding="utf-8", newline="\n") as f:
        f.write(json.dumps(manifest, indent=1, ensure_ascii=True))
        f.write("\n")


def _listing(root):
    return {p.name for p in root.iterdir()
            if p.is_file() and p.name not in NOT_GENERATED and not p.name.startswith(".")}


def run_check(committed):
    with tempfile.TemporaryDirectory(prefix="genloom-defects-") as tmp:
        tmp = Path(tmp)
        generate(tmp)
        fresh, have = _listing(tmp), _listing(committed)
        problems = []
        for name in sorted(fresh | have):
            if name not in have:
                problems.append("missing (not committed): " + name)
            elif name not in fresh:
                problems.append("stale (not produced by the script): " + name)
            elif not filecmp.cmp(tmp / name, committed / name, shallow=False):
                problems.append("differs: " + name)
    for p in problems:
        print(p)
    if problems:
        print("defect check FAILED: %d file(s) differ" % len(problems))
        return 1
    print("defect check OK: %d files identical" % len(fresh))
    return 0


def check_versions():
    bad = []
    for line in REQUIREMENTS.read_text(encoding="utf-8").splitlines():
        line = line.split("#", 1)[0].strip()
        if "==" not in line:
            continue
        pkg, ver = [s.strip() for s in line.split("==", 1)]
        if pkg not in ("numpy", "onnx", "protobuf"):
            continue
        try:
            have = importlib.metadata.version(pkg)
        except importlib.metadata.PackageNotFoundError:
            have = None
        if have != ver:
            bad.append("%s: pinned %s, installed %s" % (pkg, ver, have))
    return bad


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--out", type=Path, default=HERE,
                    help="output folder (default: this script's folder)")
    ap.add_argument("--check", action="store_true",
                    help="regenerate into a temp dir and compare byte for byte with --out")
    ap.add_argument("--ignore-versions", action="store_true",
                    help="run even if numpy/onnx/protobuf differ from tests/requirements.txt")
    args = ap.parse_args(argv)
    bad = check_versions()
    if bad and not args.ignore_versions:
        for b in bad:
            print("version mismatch: " + b, file=sys.stderr)
        print("install tests/requirements.txt or pass --ignore-versions", file=sys.stderr)
        return 2
    out = args.out.resolve()
    if args.check:
        return run_check(out)
    generate(out)
    listing = _listing(out)
    print("wrote %d defect models, %d .npy files and manifest.json"
          % (sum(n.endswith(".onnx") for n in listing), sum(n.endswith(".npy") for n in listing)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
