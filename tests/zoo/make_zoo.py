#!/usr/bin/env python3
"""Build genloom's model zoo: small generator families exported to ONNX by PyTorch, with reference
outputs from PyTorch and from `onnx.reference.ReferenceEvaluator`, plus hand-built graph patterns.

The zoo is for the runtime's tests: every family below uses the operators a kind of image
generator brings (ConvTranspose, conditional BatchNorm, self-attention, Einsum modulation,
PixelShuffle, Resize/Upsample, Clip), at the demo's scale (board tiles for the tile game), with
seeded random weights: the operators matter, not what the models draw.

    python tests/zoo/make_zoo.py                   # regenerate tests/zoo in place
    python tests/zoo/make_zoo.py --out DIR         # write somewhere else
    python tests/zoo/make_zoo.py --check           # regenerate into a temp dir and compare
    python tests/zoo/make_zoo.py --genloom target/debug/genloom   # try every file in genloom
                                                   # (prints a table; writes nothing)

Needs the pinned packages of tests/zoo/requirements.txt (PyTorch for the families); the
script refuses other versions of them unless --ignore-versions is given.
"""

import os
import platform
import sys


def _pin_cpu_dispatch():
    """Same pinning as tests/golden/make_goldens.py: NumPy at its baseline SIMD level and one
    OpenBLAS kernel family, single-threaded, so the reference-evaluator outputs (computed with
    NumPy) do not depend on the CPU model. Must run before numpy is imported."""
    os.environ["OPENBLAS_NUM_THREADS"] = "1"
    os.environ["OMP_NUM_THREADS"] = "1"
    os.environ["MKL_NUM_THREADS"] = "1"
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
import contextlib  # noqa: E402
import hashlib  # noqa: E402
import importlib.metadata  # noqa: E402
import io  # noqa: E402
import json  # noqa: E402
import re  # noqa: E402
import shutil  # noqa: E402
import subprocess  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
import traceback  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import onnx  # noqa: E402
from onnx import TensorProto, helper, numpy_helper  # noqa: E402
from onnx.reference import ReferenceEvaluator  # noqa: E402
from onnx.reference.op_run import OpRun  # noqa: E402

HERE = Path(__file__).resolve().parent

# The versions the committed files were made with (tests/zoo/requirements.txt). onnx and protobuf
# fix the model bytes, numpy the reference outputs, torch/onnxscript/onnx-ir the exported graphs.
PINNED = {
    "torch": "2.15.0",
    "onnxscript": "0.7.2",
    "onnx-ir": "1.1.0",
    "onnx": "1.23.2",
    "numpy": "2.4.6",
    "protobuf": "7.36.2",
}
# Files in tests/zoo that the script does not write.
HAND_WRITTEN = {"make_zoo.py", "README.md", "requirements.txt"}

LEGACY_OPSET = 17
OLD_OPSET = 9  # the `*-op9.onnx` files: the legacy exporter writes onnx::Upsample there
BATCH = "N"
Z = 32  # latent size of every family
CALIBRATION_BATCHES = 8  # x 64 latents: BatchNorm running statistics
CALIBRATION_BATCH = 64
# Reference samples per family: 8 for the 32x32 families; one for dcgan64 and dcgan128, because
# 8 RGB 128x128 float32 images are 1.5 MiB per array, each family has three arrays (PyTorch + one
# per exporter), and the whole folder must stay under 4 MiB (README.md, "Size").
DEFAULT_COUNT = 8

# Declared value range of each output ([lo, hi]; None = unbounded).
TANH = [-1.0, 1.0]
SIGMOID = [0.0, 1.0]

# A range for genloom's gate where the model declares none (stylegen: no output activation).
# genloom refuses a model whose range it cannot tell; [-4, 4] holds stylegen's outputs (manifest
# families.stylegen.spread_64) with room. Written to the manifest as `check_range`.
CHECK_RANGE_UNBOUNDED = [-4.0, 4.0]

# The ONNX equality tolerance the script asserts between PyTorch and the reference evaluator
# (except where an exporter changes the maths on purpose: the opset-9 bilinear Upsample).
TORCH_VS_REF_TOL = 1e-4


# --------------------------------------------------------------------------------------------
# Versions


def installed_versions(names):
    out = {}
    for name in names:
        try:
            out[name] = importlib.metadata.version(name)
        except importlib.metadata.PackageNotFoundError:
            out[name] = None
    return out


def version_problems(names):
    problems = []
    for name, got in installed_versions(names).items():
        want = PINNED[name]
        # PyTorch's wheels carry a local tag (+cpu, +cu132): the release is what counts
        if got is None or got.split("+")[0] != want:
            problems.append(f"{name} {got} installed, the zoo is pinned to {want}")
    return problems


def source_string():
    v = installed_versions(PINNED)
    return (f"PyTorch {v['torch']} (eval mode; exporters of torch.onnx), onnxscript {v['onnxscript']}, "
            f"onnx-ir {v['onnx-ir']}, onnx {v['onnx']} (helper, checker, ReferenceEvaluator), "
            f"numpy {v['numpy']}, protobuf {v['protobuf']}")


# --------------------------------------------------------------------------------------------
# Small helpers (ONNX side, no torch)


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def save_npy(path: Path, array: np.ndarray) -> None:
    np.save(path, np.ascontiguousarray(array), allow_pickle=False)


def save_model(model: onnx.ModelProto, path: Path) -> None:
    data = model.SerializeToString()
    for marker in (str(HERE.parent.parent).encode(), b"site-packages", b".py\", line"):
        assert marker not in data, f"{path.name}: the model holds a machine path or stack trace ({marker!r})"
    onnx.save_model(model, str(path), save_as_external_data=False)


def all_op_types(model: onnx.ModelProto) -> list:
    """Sorted unique op_types of the graph, its subgraphs and its local functions."""
    seen = set()

    def graph_ops(graph):
        for node in graph.node:
            seen.add(node.op_type if node.domain in ("", "ai.onnx") else f"{node.domain}::{node.op_type}")
            for attr in node.attribute:
                if attr.type == onnx.AttributeProto.GRAPH:
                    graph_ops(attr.g)
                for g in attr.graphs:
                    graph_ops(g)

    graph_ops(model.graph)
    for fn in model.functions:
        for node in fn.node:
            seen.add(node.op_type if node.domain in ("", "ai.onnx") else f"{node.domain}::{node.op_type}")
    return sorted(seen)


def einsum_equations(model: onnx.ModelProto) -> list:
    eqs = []
    nodes = list(model.graph.node) + [n for fn in model.functions for n in fn.node]
    for node in nodes:
        if node.op_type == "Einsum":
            for attr in node.attribute:
                if attr.name == "equation":
                    eqs.append(attr.s.decode())
    return sorted(set(eqs))


def default_opset(model: onnx.ModelProto) -> int:
    for o in model.opset_import:
        if o.domain in ("", "ai.onnx"):
            return o.version
    raise ValueError("model has no default-domain opset")


def value_info_json(vi) -> dict:
    dims = [d.dim_param if d.dim_param else (d.dim_value if d.HasField("dim_value") else None)
            for d in vi.type.tensor_type.shape.dim]
    return {"name": vi.name, "type": TensorProto.DataType.Name(vi.type.tensor_type.elem_type).lower(),
            "shape": dims}


def graph_inputs(model):
    names = {t.name for t in model.graph.initializer}
    return [vi for vi in model.graph.input if vi.name not in names]


def rename_batch_dim(model: onnx.ModelProto, name: str = BATCH) -> None:
    """Give the symbolic first axis of every graph input/output one name ("N"), as
    models-demo/export.py does (torch 2.15's default exporter already uses the Dim's name, "N";
    this keeps the files right if an exporter names it after its own symbol, s0 or s77)."""
    old = set()
    for vi in list(model.graph.input) + list(model.graph.output):
        dim = vi.type.tensor_type.shape.dim[0]
        if dim.dim_param or not dim.HasField("dim_value"):
            if dim.dim_param:
                old.add(dim.dim_param)
            dim.dim_param = name
    # the same symbol in intermediate shapes, so the file uses one name for one axis
    for vi in model.graph.value_info:
        for dim in vi.type.tensor_type.shape.dim:
            if dim.dim_param in old:
                dim.dim_param = name


class Upsample(OpRun):
    """Upsample (opsets 7 and 9) for the reference evaluator. onnx 1.23.2's own reference
    Upsample implements only mode "nearest" with integer scales given as an input (opset 9): it
    raises for mode "linear" and for the opset-7 `scales` attribute. The Resize-10 specification
    replaced Upsample with the same maths (output size floor(input size x scale), coordinates
    x_in = x_out / scale, i.e. Resize-11's coordinate_transformation_mode "asymmetric"), so this
    evaluates Upsample as the reference evaluator's own Resize with that mode (nearest_mode
    "floor"); for nearest with integer scales it agrees with the stock np.repeat implementation,
    which the patterns assert."""

    op_domain = ""

    def _run(self, x, scales=None, mode=None):  # opset 9: `scales` input; opset 7: attribute
        scales = np.asarray(scales, dtype=np.float32)
        mode = mode or "nearest"
        node = helper.make_node("Resize", ["x", "", "scales"], ["y"], mode=mode,
                                coordinate_transformation_mode="asymmetric", nearest_mode="floor")
        elem = helper.np_dtype_to_tensor_dtype(x.dtype)
        inputs = [helper.make_tensor_value_info("x", elem, None),
                  helper.make_tensor_value_info("scales", TensorProto.FLOAT, None)]
        graph = helper.make_graph([node], "upsample", inputs, [helper.make_tensor_value_info("y", elem, None)])
        resize = helper.make_model(graph, opset_imports=[helper.make_opsetid("", 13)])
        return (ReferenceEvaluator(resize).run(None, {"x": x, "scales": scales})[0],)


UPSAMPLE_NOTE = ("reference evaluator run with one operator supplied, Upsample (make_zoo.py class Upsample): "
                 "onnx 1.23.2's own reference Upsample raises for mode 'linear' and for the opset-7 "
                 "`scales` attribute; the supplied one is the evaluator's Resize with "
                 "coordinate_transformation_mode 'asymmetric' (x_in = x_out / scale), nearest_mode 'floor'")


def reference_run(model: onnx.ModelProto, feeds: dict) -> np.ndarray:
    """onnx.reference.ReferenceEvaluator on the model; for graphs with Upsample, with the one
    operator above supplied (every other operator is the evaluator's own)."""
    uses_upsample = "Upsample" in all_op_types(model)
    out = ReferenceEvaluator(model, new_ops=[Upsample] if uses_upsample else None).run(None, feeds)[0]
    return np.asarray(out)


def max_abs_diff(a: np.ndarray, b: np.ndarray) -> float:
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    if a.shape != b.shape:
        return float("inf")
    d = np.atleast_1d(np.abs(a - b))
    d[np.isnan(d)] = np.inf  # NaN against a number counts as infinitely far
    return float(d.max()) if d.size else 0.0


# --------------------------------------------------------------------------------------------
# The families (PyTorch). Imported lazily so --help and the patterns need no torch.


def build_families():
    import torch
    import torch.nn.functional as F
    from torch import nn
    from torch.nn.utils.parametrizations import spectral_norm

    class DCGAN(nn.Module):
        """DCGAN-style: [N, Z, 1, 1] -> ConvTranspose 4x4 (stride 1, then 2) + BatchNorm + ReLU
        stack -> ConvTranspose to RGB -> Tanh. No biases before BatchNorm."""

        def __init__(self, chans):
            super().__init__()
            layers, cin = [], Z
            for i, c in enumerate(chans):
                first = i == 0
                layers += [nn.ConvTranspose2d(cin, c, 4, 1 if first else 2, 0 if first else 1, bias=False),
                           nn.BatchNorm2d(c), nn.ReLU(True)]
                cin = c
            self.body = nn.Sequential(*layers)
            self.head = nn.ConvTranspose2d(cin, 3, 4, 2, 1, bias=False)
            self.final = nn.Tanh()

        def forward(self, z):
            return self.final(self.head(self.body(z)))

    class CondBatchNorm(nn.Module):
        """Class-conditional BatchNorm: BatchNorm without its own affine, then a per-sample gain
        and bias computed from a conditioning vector (gain = 1 + Linear(c), bias = Linear(c))."""

        def __init__(self, ch, cond):
            super().__init__()
            self.bn = nn.BatchNorm2d(ch, affine=False)
            self.gain = spectral_norm(nn.Linear(cond, ch, bias=False))
            self.bias = spectral_norm(nn.Linear(cond, ch, bias=False))

        def forward(self, x, c):
            g = 1.0 + self.gain(c)
            b = self.bias(c)
            return self.bn(x) * g[:, :, None, None] + b[:, :, None, None]

    class ResBlock(nn.Module):
        """Up-sampling residual block: CBN-ReLU-up-conv3x3-CBN-ReLU-conv3x3, skip up-conv1x1."""

        def __init__(self, cin, cout, cond):
            super().__init__()
            self.cbn1 = CondBatchNorm(cin, cond)
            self.conv1 = spectral_norm(nn.Conv2d(cin, cout, 3, 1, 1))
            self.cbn2 = CondBatchNorm(cout, cond)
            self.conv2 = spectral_norm(nn.Conv2d(cout, cout, 3, 1, 1))
            self.skip = spectral_norm(nn.Conv2d(cin, cout, 1))

        def forward(self, x, c):
            h = F.relu(self.cbn1(x, c))
            h = F.interpolate(h, scale_factor=2.0, mode="nearest")
            h = self.conv1(h)
            h = F.relu(self.cbn2(h, c))
            h = self.conv2(h)
            return h + self.skip(F.interpolate(x, scale_factor=2.0, mode="nearest"))

    class SelfAttention(nn.Module):
        """Self-attention over the H*W positions: 1x1 convolutions for query, key and value,
        softmax over the key positions, output 1x1 conv, scaled by a learned gamma and added
        to the input. Products written with torch.einsum."""

        def __init__(self, ch):
            super().__init__()
            self.q = spectral_norm(nn.Conv2d(ch, ch // 4, 1, bias=False))
            self.k = spectral_norm(nn.Conv2d(ch, ch // 4, 1, bias=False))
            self.v = spectral_norm(nn.Conv2d(ch, ch // 2, 1, bias=False))
            self.o = spectral_norm(nn.Conv2d(ch // 2, ch, 1, bias=False))
            # learned; trained generators start it at 0. The zoo's random weights set it non-zero
            # so the attention branch reaches the output.
            self.gamma = nn.Parameter(torch.tensor(0.7))

        def forward(self, x):
            b, c, h, w = x.shape
            q = self.q(x).flatten(2)  # [b, c/4, n]
            k = self.k(x).flatten(2)  # [b, c/4, n]
            v = self.v(x).flatten(2)  # [b, c/2, n]
            attn = torch.softmax(torch.einsum("bci,bcj->bij", q, k), dim=-1)  # over key positions j
            out = torch.einsum("bcj,bij->bci", v, attn).reshape(b, c // 2, h, w)
            return x + self.gamma * self.o(out)

    class ResGen(nn.Module):
        """Residual generator: z [N, 32] split in 4 chunks of 8 (hierarchical latent: chunk 0
        feeds the first Linear, chunk i the conditioning of block i, concatenated with the
        shared class embedding of `label`), 3 up-sampling residual blocks 4 -> 8 -> 16 -> 32,
        self-attention at 16x16, BatchNorm-ReLU-conv3x3-Tanh. Spectral norm on every conv and
        linear layer except the last conv (left plain so its gain can be set; see calibrate).

        Widths 8 -> 32 -> 8 -> 8: the first block's second 3x3 convolution has 32 x 32 x 9 =
        9216 weights, more than the 8192-element input limit of the default exporter's constant
        folding (onnxscript's optimizer), so its spectral-norm subgraph stays in the graph as the
        exporter writes it for demo-size layers; the smaller layers' ones get folded."""

        CHANS, CHUNK, EMBED, CLASSES = (8, 32, 8, 8), 8, 8, 4

        def __init__(self):
            super().__init__()
            chans, chunk, cond = self.CHANS, self.CHUNK, self.CHUNK + self.EMBED
            self.embed = nn.Embedding(self.CLASSES, self.EMBED)
            self.linear = spectral_norm(nn.Linear(chunk, chans[0] * 4 * 4))
            self.blocks = nn.ModuleList([ResBlock(a, b, cond) for a, b in zip(chans, chans[1:])])
            self.attn = SelfAttention(chans[2])
            self.bn = nn.BatchNorm2d(chans[3])
            self.head = nn.Conv2d(chans[3], 3, 3, 1, 1)
            self.final = nn.Tanh()

        def forward(self, z, label):
            chunks = torch.split(z, self.CHUNK, dim=1)
            e = self.embed(label)
            h = self.linear(chunks[0]).reshape(-1, self.CHANS[0], 4, 4)
            for i, block in enumerate(self.blocks):
                h = block(h, torch.cat([chunks[i + 1], e], dim=1))
                if i == 1:
                    h = self.attn(h)
            return self.final(self.head(F.relu(self.bn(h))))

    class PixelNorm(nn.Module):
        """x / sqrt(mean(x^2) + eps) over the features of each sample (style-based mapping input)."""

        def forward(self, x):
            return x * torch.rsqrt(x.pow(2).mean(dim=1, keepdim=True) + 1e-8)

    class ModConv(nn.Module):
        """Modulated convolution: style s = affine(w) scales the input channels, a plain
        convolution with the shared weight follows, and demodulation divides each output channel
        by the norm of the per-sample modulated weight, rsqrt(sum_{i,h,w} (W[o,i,h,w] s[b,i])^2 + eps).
        This equals convolving with the per-sample weights W[o,i,h,w] s[b,i] / norm (the
        modulate-demodulate formula of style-based generators) and keeps the batch axis free,
        which the grouped-convolution form (groups = batch) does not in ONNX."""

        def __init__(self, cin, cout, k, wdim, demod=True):
            super().__init__()
            self.weight = nn.Parameter(torch.randn(cout, cin, k, k))
            self.scale = 1.0 / (cin * k * k) ** 0.5  # equalised learning-rate scale
            self.affine = nn.Linear(wdim, cin)
            # styles around 1 that vary with w: weights N(0, 0.25/wdim) (nn.Linear's default uniform
            # init gave styles 1 +- 0.03 and nearly identical images for every latent), bias 1
            nn.init.normal_(self.affine.weight, 0.0, 0.5 / wdim ** 0.5)
            nn.init.ones_(self.affine.bias)
            self.demod = demod
            self.pad = k // 2

        def forward(self, x, w):
            s = self.affine(w)  # [b, i]
            weight = self.weight * self.scale
            x = torch.einsum("bihw,bi->bihw", x, s)
            y = F.conv2d(x, weight, padding=self.pad)
            if self.demod:
                wmod = torch.einsum("oihw,bi->boihw", weight, s)
                d = torch.rsqrt(wmod.pow(2).sum(dim=(2, 3, 4)) + 1e-8)  # [b, o]
                y = torch.einsum("bohw,bo->bohw", y, d)
            return y

    class StyleLayer(nn.Module):
        """ModConv 3x3 + constant noise (a fixed buffer, one learned scale) + bias + LeakyReLU."""

        def __init__(self, cin, cout, res, wdim, gen):
            super().__init__()
            self.conv = ModConv(cin, cout, 3, wdim)
            self.register_buffer("noise", torch.randn(1, 1, res, res, generator=gen))
            self.noise_strength = nn.Parameter(torch.tensor(0.2))  # one learned scale per layer
            self.bias = nn.Parameter(0.1 * torch.randn(1, cout, 1, 1))

        def forward(self, x, w):
            y = self.conv(x, w) + self.noise_strength * self.noise + self.bias
            return F.leaky_relu(y, 0.2)

    class ToRGB(nn.Module):
        def __init__(self, cin, wdim):
            super().__init__()
            self.conv = ModConv(cin, 3, 1, wdim, demod=False)
            self.bias = nn.Parameter(torch.zeros(1, 3, 1, 1))

        def forward(self, x, w):
            return self.conv(x, w) + self.bias

    class StyleGen(nn.Module):
        """Style-based: z -> pixel norm -> 3-layer MLP (LeakyReLU) -> w; a learned constant 4x4
        input; one style layer per resolution 4, 8, 16, 32 with bilinear 2x up-sampling between
        (F.interpolate, align_corners=False); to-RGB at every resolution, summed as a skip path
        (rgb = up(rgb) + to_rgb(x)). No output activation."""

        CH = 8

        def __init__(self):
            super().__init__()
            ch = self.CH
            gen = torch.Generator().manual_seed(1717)  # the constant noise buffers
            self.mapping = nn.Sequential(PixelNorm(),
                                         nn.Linear(Z, Z), nn.LeakyReLU(0.2),
                                         nn.Linear(Z, Z), nn.LeakyReLU(0.2),
                                         nn.Linear(Z, Z), nn.LeakyReLU(0.2))
            for m in self.mapping:
                if isinstance(m, nn.Linear):  # He-style N(0, 2/fan_in): w keeps the scale of z
                    nn.init.normal_(m.weight, 0.0, (2.0 / Z) ** 0.5)
                    nn.init.zeros_(m.bias)
            self.const = nn.Parameter(torch.randn(1, ch, 4, 4))
            self.layers = nn.ModuleList([StyleLayer(ch, ch, r, Z, gen) for r in (4, 8, 16, 32)])
            self.to_rgb = nn.ModuleList([ToRGB(ch, Z) for _ in range(4)])
            self.final = nn.Identity()

        def forward(self, z):
            w = self.mapping(z)
            x = self.const.expand(z.shape[0], -1, -1, -1)
            rgb = None
            for i, (layer, to_rgb) in enumerate(zip(self.layers, self.to_rgb)):
                if i > 0:
                    x = F.interpolate(x, scale_factor=2.0, mode="bilinear", align_corners=False)
                x = layer(x, w)
                y = to_rgb(x, w)
                if rgb is None:
                    rgb = y
                else:
                    rgb = F.interpolate(rgb, scale_factor=2.0, mode="bilinear", align_corners=False) + y
            return self.final(rgb)

        def head_params(self):
            # the output is linear in every to-RGB weight and bias together
            return [p for t in self.to_rgb for p in (t.conv.weight, t.bias)]

    class SubPixel(nn.Module):
        """Sub-pixel: Linear -> reshape [N, 8, 4, 4] -> (conv3x3 to 4C, PixelShuffle(2),
        BatchNorm, ReLU) x 2 -> conv3x3 to 12, PixelShuffle(2) -> Sigmoid, 32x32 RGB."""

        def __init__(self):
            super().__init__()
            self.linear = nn.Linear(Z, 8 * 4 * 4)
            self.bn0 = nn.BatchNorm1d(8 * 4 * 4)
            self.stages = nn.Sequential(
                nn.Conv2d(8, 32, 3, 1, 1), nn.PixelShuffle(2), nn.BatchNorm2d(8), nn.ReLU(True),   # 8x8
                nn.Conv2d(8, 32, 3, 1, 1), nn.PixelShuffle(2), nn.BatchNorm2d(8), nn.ReLU(True),   # 16x16
            )
            self.head = nn.Conv2d(8, 12, 3, 1, 1)
            self.shuffle = nn.PixelShuffle(2)  # 32x32
            self.final = nn.Sigmoid()

        def forward(self, z):
            h = F.relu(self.bn0(self.linear(z))).reshape(-1, 8, 4, 4)
            return self.final(self.shuffle(self.head(self.stages(h))))

    class UpConv(nn.Module):
        """nn.Upsample(2, nearest or bilinear) + conv3x3 + BatchNorm + ReLU stages, Tanh."""

        def __init__(self, mode):
            super().__init__()
            self.linear = nn.Linear(Z, 8 * 4 * 4)
            self.bn0 = nn.BatchNorm1d(8 * 4 * 4)
            kw = {} if mode == "nearest" else {"align_corners": False}
            chans = [8, 8, 8, 8]
            layers = []
            for cin, cout in zip(chans, chans[1:]):
                layers += [nn.Upsample(scale_factor=2, mode=mode, **kw), nn.Conv2d(cin, cout, 3, 1, 1, bias=False),
                           nn.BatchNorm2d(cout), nn.ReLU(True)]
            self.body = nn.Sequential(*layers)
            self.head = nn.Conv2d(chans[-1], 3, 3, 1, 1)
            self.final = nn.Tanh()

        def forward(self, z):
            h = F.relu(self.bn0(self.linear(z))).reshape(-1, 8, 4, 4)
            return self.final(self.head(self.body(h)))

    class Clamp(nn.Module):
        def forward(self, x):
            return torch.clamp(x, -1.0, 1.0)

    class ClipGen(nn.Module):
        """Conv generator bounded by torch.clamp(x, -1, 1) (ONNX Clip) instead of Tanh:
        z reshaped to [N, Z, 1, 1] inside, ConvTranspose stack to 32x32, conv3x3 to RGB, clamp."""

        def __init__(self):
            super().__init__()
            self.body = nn.Sequential(
                nn.ConvTranspose2d(Z, 8, 4, 1, 0, bias=False), nn.BatchNorm2d(8), nn.ReLU(True),    # 4x4
                nn.ConvTranspose2d(8, 8, 4, 2, 1, bias=False), nn.BatchNorm2d(8), nn.ReLU(True),    # 8x8
                nn.ConvTranspose2d(8, 8, 4, 2, 1, bias=False), nn.BatchNorm2d(8), nn.ReLU(True),    # 16x16
                nn.ConvTranspose2d(8, 8, 4, 2, 1, bias=False), nn.BatchNorm2d(8), nn.ReLU(True),    # 32x32
            )
            self.head = nn.Conv2d(8, 3, 3, 1, 1)
            self.final = Clamp()

        def forward(self, z):
            return self.final(self.head(self.body(z[:, :, None, None])))

    # name: (constructor, seed, latent shape per sample, conditional, declared range,
    #        target std of the pre-activation output, reference count, exporters, description)
    fams = {
        "dcgan64": dict(make=lambda: DCGAN([8, 8, 8, 8]), seed=101, zshape=(Z, 1, 1), labels=False,
                        range=TANH, pre_std=0.6, count=1, size=64,
                        what="DCGAN-style ConvTranspose + BatchNorm + ReLU stack, Tanh, 64x64 RGB"),
        "dcgan128": dict(make=lambda: DCGAN([8, 8, 8, 8, 8]), seed=102, zshape=(Z, 1, 1), labels=False,
                         range=TANH, pre_std=0.6, count=1, size=128,
                         what="DCGAN-style ConvTranspose + BatchNorm + ReLU stack, 8 channels, Tanh, 128x128 RGB"),
        "resgen": dict(make=ResGen, seed=103, zshape=(Z,), labels=True, range=TANH, pre_std=0.6,
                       count=DEFAULT_COUNT, size=32,
                       what="residual generator: class-conditional BatchNorm from a label embedding and "
                            "z chunks, self-attention (einsum), spectral norm, Tanh, 32x32"),
        "stylegen": dict(make=StyleGen, seed=104, zshape=(Z,), labels=False, range=None, pre_std=0.35,
                         count=DEFAULT_COUNT, size=32,
                         what="style-based: mapping MLP with pixel norm, constant 4x4 input, modulated "
                              "convolution with demodulation (einsum), constant noise, bilinear "
                              "up-sampling, to-RGB skips; no output activation, 32x32"),
        "subpixel": dict(make=SubPixel, seed=105, zshape=(Z,), labels=False, range=SIGMOID, pre_std=1.5,
                         count=DEFAULT_COUNT, size=32,
                         what="sub-pixel: Linear, reshape, conv + PixelShuffle(2) stages, Sigmoid, 32x32"),
        "upconv-nearest": dict(make=lambda: UpConv("nearest"), seed=106, zshape=(Z,), labels=False,
                               range=TANH, pre_std=0.6, count=DEFAULT_COUNT, size=32, old_opset=True,
                               what="nn.Upsample(nearest) + conv stages, Tanh, 32x32"),
        "upconv-bilinear": dict(make=lambda: UpConv("bilinear"), seed=107, zshape=(Z,), labels=False,
                                range=TANH, pre_std=0.6, count=DEFAULT_COUNT, size=32, old_opset=True,
                                what="nn.Upsample(bilinear, align_corners=False) + conv stages, Tanh, 32x32"),
        "clipgen": dict(make=ClipGen, seed=108, zshape=(Z,), labels=False, range=TANH, pre_std=0.6,
                        count=DEFAULT_COUNT, size=32,
                        what="ConvTranspose generator bounded by torch.clamp(x, -1, 1) (Clip), 32x32"),
    }
    return fams


# --------------------------------------------------------------------------------------------
# Building, calibrating and exporting one family


def calibrate(model, fam, torch):
    """BatchNorm running statistics: a few hundred seeded latents through the model with the
    BatchNorm layers in train mode and momentum None (cumulative average over all batches), the
    rest (spectral-norm parametrizations included) in eval mode so their power iteration does
    not move while the statistics are taken. Then set the output layer's gain so the
    pre-activation output has a standard deviation of fam["pre_std"]: diverse, in range, not
    saturated."""
    from torch import nn

    g = torch.Generator().manual_seed(fam["seed"] + 1)

    def batches():
        for _ in range(CALIBRATION_BATCHES):
            z = torch.randn((CALIBRATION_BATCH,) + fam["zshape"], generator=g)
            if fam["labels"]:
                yield z, torch.randint(0, 4, (CALIBRATION_BATCH,), generator=g)
            else:
                yield (z,)

    model.eval()
    bns = [m for m in model.modules() if isinstance(m, nn.modules.batchnorm._BatchNorm)]
    for bn in bns:
        bn.momentum = None
        bn.reset_running_stats()
        bn.train()
    with torch.no_grad():
        for args in batches():
            model(*args)
    model.eval()

    # output gain: measured on fresh latents, pre-activation (final layer replaced by identity)
    final = model.final
    model.final = nn.Identity()
    with torch.no_grad():
        outs = [model(*args) for _, args in zip(range(4), batches())]
    std = float(torch.cat(outs).std())
    params = model.head_params() if hasattr(model, "head_params") else \
        [p for p in (model.head.weight, model.head.bias) if p is not None]
    with torch.no_grad():
        for p in params:
            p.mul_(fam["pre_std"] / std)
    model.final = final
    return std


def output_spread(model, fam, torch) -> dict:
    """How diverse and how bounded the outputs are, over 64 seeded latents (PyTorch, eval)."""
    g = torch.Generator().manual_seed(fam["seed"] + 3)
    z = torch.randn((64,) + fam["zshape"], generator=g)
    args = (z, torch.arange(64) % 4) if fam["labels"] else (z,)
    with torch.no_grad():
        out = model(*args).numpy().astype(np.float64).reshape(64, -1)
    sq = (out * out).sum(1)
    d2 = np.maximum(sq[:, None] + sq[None, :] - 2 * out @ out.T, 0) / out.shape[1]
    pairs = np.sqrt(d2[np.triu_indices(64, 1)])
    return {"mean_pair_rms": round(float(pairs.mean()), 4), "min": round(float(out.min()), 4),
            "max": round(float(out.max()), 4), "abs_p99_9": round(float(np.percentile(np.abs(out), 99.9)), 4)}


def reference_inputs(name, fam, index):
    rng = np.random.default_rng(2026 + index)
    latents = rng.standard_normal((fam["count"],) + fam["zshape"], dtype=np.float32)
    labels = (np.arange(fam["count"]) % 4).astype(np.int64) if fam["labels"] else None
    return latents, labels


@contextlib.contextmanager
def quiet_stdout():
    """Send file descriptor 1 to /dev/null (the legacy exporter prints from C++ too)."""
    sys.stdout.flush()
    saved = os.dup(1)
    try:
        with open(os.devnull, "w") as null:
            os.dup2(null.fileno(), 1)
            yield
    finally:
        sys.stdout.flush()
        os.dup2(saved, 1)
        os.close(saved)


def export_legacy(model, args, in_names, opset, torch):
    buf = io.BytesIO()
    axes = {n: {0: BATCH} for n in in_names + ["image"]}
    # the legacy exporter prints its whole TorchScript graph when it fails: keep that off the log
    with warnings.catch_warnings(record=True) as caught, quiet_stdout():
        warnings.simplefilter("always")
        torch.onnx.export(model, args, buf, dynamo=False, opset_version=opset, input_names=in_names,
                          output_names=["image"], dynamic_axes=axes, do_constant_folding=True)
    notes = sorted({str(w.message).splitlines()[0] for w in caught
                    if "Upsample" in str(w.message) or "opset" in str(w.message).lower()})
    model_proto = onnx.load_from_string(buf.getvalue())
    rename_batch_dim(model_proto)
    return model_proto, notes


def export_dynamo(model, args, in_names, torch):
    batch = torch.export.Dim(BATCH, min=1, max=4096)
    shapes = tuple({0: batch} for _ in in_names)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        program = torch.onnx.export(model, args, None, dynamo=True, input_names=in_names,
                                    output_names=["image"], dynamic_shapes=shapes, verbose=False)
    # model_proto carries every weight inline: one self-contained file, no .onnx.data
    model_proto = program.model_proto
    rename_batch_dim(model_proto)
    strip_node_metadata(model_proto)
    return model_proto


def strip_node_metadata(model: onnx.ModelProto) -> None:
    """The default exporter annotates every node with metadata_props: Python stack traces (with
    absolute paths of this machine and this script's line numbers), FX node text and module
    names. They change nothing in the computation; drop them so the files hold no machine paths
    and do not change when this script is edited."""
    graphs = [model.graph]
    while graphs:
        g = graphs.pop()
        for node in g.node:
            del node.metadata_props[:]
            node.doc_string = ""
            for attr in node.attribute:
                if attr.type == onnx.AttributeProto.GRAPH:
                    graphs.append(attr.g)
                graphs.extend(attr.graphs)
    for fn in model.functions:
        for node in fn.node:
            del node.metadata_props[:]
            node.doc_string = ""


def error_text(exc: BaseException) -> str:
    """The exception as recorded in the manifest: its type and message, without the Python stack
    the legacy exporter appends ("(node defined in ...") and without machine paths or this
    script's line numbers (TorchScript's "# FILE:LINE:COL" source notes are dropped, other paths
    cut to the part after site-packages/ or the repository), so the text is the same on every
    machine and after edits to this script. At most 40 lines."""
    text = f"{type(exc).__name__}: {exc}"
    text = text.split("\n    (node defined in")[0]
    text = re.sub(r"\s+# [^\s()']+\.py:\d+:\d+", "", text)
    text = re.sub(r"[^\s'\"(]*/site-packages/", "", text)
    text = text.replace(str(HERE.parent.parent) + os.sep, "")
    lines = [ln.rstrip() for ln in text.splitlines()]
    return "\n".join(lines[:40]) + ("\n[...]" if len(lines) > 40 else "")


def make_family(name, fam, index, out: Path, torch, log):
    from torch.nn.utils import parametrize

    t0 = time.perf_counter()
    torch.manual_seed(fam["seed"])
    model = fam["make"]()
    pre_std = calibrate(model, fam, torch)
    model.eval()

    spread = output_spread(model, fam, torch)
    latents, labels = reference_inputs(name, fam, index)
    save_npy(out / f"{name}.latents.npy", latents)
    if labels is not None:
        save_npy(out / f"{name}.labels.npy", labels)
    in_names = ["z", "label"] if fam["labels"] else ["z"]
    with torch.no_grad():
        targs = [torch.from_numpy(latents)] + ([torch.from_numpy(labels)] if labels is not None else [])
        torch_out = model(*targs).numpy().astype(np.float32)
    save_npy(out / f"{name}.torch.npy", torch_out)

    feeds = {"z": latents}
    if labels is not None:
        feeds["label"] = labels

    # example inputs for tracing: batch 3 (not 0 or 1, which torch.export specialises)
    g = torch.Generator().manual_seed(fam["seed"] + 2)
    example = (torch.randn((3,) + fam["zshape"], generator=g),)
    if fam["labels"]:
        example = example + (torch.tensor([0, 1, 3], dtype=torch.int64),)

    # The legacy exporter cannot export a spectral-norm parametrization: it gets its own copy with
    # W / sigma baked into the weight (same values; only the parametrization is gone). The copy is
    # a fresh instance loaded from the state dict, not copy.deepcopy: a deep copy shares the
    # parametrized module classes with the original, and remove_parametrizations deletes the
    # `weight` property from that class, which would break the original for the default exporter.
    legacy_model = model
    workarounds = {}
    if any(parametrize.is_parametrized(m) for m in model.modules()):
        torch.manual_seed(fam["seed"])
        legacy_model = fam["make"]()
        legacy_model.load_state_dict(model.state_dict())
        legacy_model.eval()  # eval: the parametrization must not run a power-iteration step now
        for m in legacy_model.modules():
            if parametrize.is_parametrized(m, "weight"):
                parametrize.remove_parametrizations(m, "weight", leave_parametrized=True)
        with torch.no_grad():
            baked = legacy_model(*targs).numpy()
        d = max_abs_diff(baked, torch_out)
        assert d <= 1e-6, f"{name}: removing the spectral-norm parametrizations changed the output by {d}"

    def legacy(opset):
        try:
            return export_legacy(legacy_model, example, in_names, opset, torch)
        except Exception as exc:
            if "batch_norm for unknown channel size" not in str(exc):
                raise
            # The legacy exporter cannot write BatchNorm without affine parameters (affine=False,
            # the conditional BatchNorm's inner norm) when the channel count is not static in its
            # trace. Retry with affine weight 1 and bias 0: the same values.
            workarounds[opset] = error_text(exc)
            for m in legacy_model.modules():
                if isinstance(m, torch.nn.modules.batchnorm._BatchNorm) and not m.affine:
                    m.affine = True
                    m.weight = torch.nn.Parameter(torch.ones(m.num_features))
                    m.bias = torch.nn.Parameter(torch.zeros(m.num_features))
            with torch.no_grad():
                d = max_abs_diff(legacy_model(*targs).numpy(), torch_out)
            assert d <= 1e-6, f"{name}: affine BatchNorm changed the output by {d}"
            return export_legacy(legacy_model, example, in_names, opset, torch)

    exports = [("legacy", lambda: legacy(LEGACY_OPSET)),
               ("dynamo", lambda: (export_dynamo(model, example, in_names, torch), []))]
    if fam.get("old_opset"):
        exports.append(("op9", lambda: legacy(OLD_OPSET)))

    entries = {}
    for exporter, run in exports:
        fname = f"{name}-{exporter}.onnx"
        entry = {"family": name, "exporter": {"legacy": "legacy TorchScript (dynamo=False)",
                                              "dynamo": "default torch.export (dynamo=True)",
                                              "op9": "legacy TorchScript (dynamo=False), opset 9"}[exporter]}
        try:
            te = time.perf_counter()
            proto, notes = run()
            export_s = time.perf_counter() - te
        except Exception as exc:  # record the exporter's failure instead of hiding it
            entry["error"] = error_text(exc)
            entries[fname] = entry
            log(f"  {fname}: EXPORT FAILED: {entry['error'].splitlines()[0]}")
            continue
        ops = all_op_types(proto)
        if exporter == "op9":
            assert "Upsample" in ops, f"{fname}: no Upsample node in the opset-9 export: {ops}"
            assert "Resize" not in ops, f"{fname}: Resize in the opset-9 export"
        # the wheel's local tag (2.15.0+cu132, +cpu) says which build, not which exporter: keep the
        # release only, so CPU and CUDA wheels of one release write the same bytes
        proto.producer_version = proto.producer_version.split("+")[0]
        path = out / fname
        save_model(proto, path)
        onnx.checker.check_model(str(path), full_check=True)
        loaded = onnx.load(str(path))
        tr = time.perf_counter()
        ref = reference_run(loaded, feeds).astype(np.float32)
        ref_s = time.perf_counter() - tr
        save_npy(out / f"{name}-{exporter}.onnxref.npy", ref)
        diff = max_abs_diff(torch_out, ref)
        entry.update({
            "file": fname,
            "opset": default_opset(loaded),
            "opset_import": {(o.domain or "ai.onnx"): o.version for o in loaded.opset_import},
            "ops": ops,
            "einsum_equations": einsum_equations(loaded),
            "inputs": [value_info_json(v) for v in graph_inputs(loaded)],
            "outputs": [value_info_json(v) for v in loaded.graph.output],
            "declared_range": fam["range"],
            "check_range": fam["range"] if fam["range"] is not None else CHECK_RANGE_UNBOUNDED,
            "reference": f"{name}-{exporter}.onnxref.npy",
            "max_abs_diff_torch_vs_onnxref": diff,
            "bytes": path.stat().st_size,
            "sha256": sha256(path),
            "source": source_string(),
        })
        if notes:
            entry["exporter_warnings"] = notes
        if "Upsample" in ops:
            entry["reference_note"] = UPSAMPLE_NOTE
        if exporter == "op9" and "bilinear" in name:
            entry["note"] = ("opset 9 has no half-pixel resampling: Upsample mode 'linear' maps output to input "
                             "coordinates as x_out / scale (asymmetric), where PyTorch's align_corners=False "
                             "uses (x_out + 0.5) / scale - 0.5; this file computes a different image than "
                             "PyTorch (max_abs_diff_torch_vs_onnxref). Compare it with its .onnxref.npy.")
        if exporter in ("legacy", "op9") and workarounds.get(entry["opset"]):
            entry["first_attempt_error"] = workarounds[entry["opset"]]
            entry["workaround"] = ("BatchNorm(affine=False) exported as affine with weight 1, bias 0 "
                                   "(same values) after the first attempt failed")
        entries[fname] = entry
        log(f"  {fname}: opset {entry['opset']}, {path.stat().st_size} bytes, ops {ops}, "
            f"torch vs ref {diff:.3g} (export {export_s:.1f} s, reference {ref_s:.1f} s)")
        if exporter != "op9" or name != "upconv-bilinear":
            assert diff <= TORCH_VS_REF_TOL, f"{fname}: PyTorch and the reference evaluator differ by {diff}"

    family = {
        "what": fam["what"],
        "seed": fam["seed"],
        "latents": f"{name}.latents.npy",
        "labels": f"{name}.labels.npy" if labels is not None else None,
        "torch_output": f"{name}.torch.npy",
        "reference_count": fam["count"],
        "latents_rule": f"numpy.random.default_rng({2026 + index}).standard_normal({(fam['count'],) + fam['zshape']}, "
                        f"dtype=float32)",
        "labels_rule": "arange(count) % 4" if labels is not None else None,
        "declared_range": fam["range"],
        "output_shape": list(torch_out.shape),
        "torch_output_min_max": [float(torch_out.min()), float(torch_out.max())],
        "pre_activation_std_before_gain": pre_std,
        "spread_64": spread,
        "parameters": sum(p.numel() for p in model.parameters()),
        "files": sorted(entries),
    }
    log(f"  {name}: {time.perf_counter() - t0:.1f} s, torch output in "
        f"[{torch_out.min():.3f}, {torch_out.max():.3f}], std {torch_out.std():.3f}")
    return family, entries


# --------------------------------------------------------------------------------------------
# Patterns: tiny hand-built graphs (onnx.helper) for load-time rewrites


def _vi(name, shape, elem=TensorProto.FLOAT):
    return helper.make_tensor_value_info(name, elem, shape)


def _init(name, array):
    return numpy_helper.from_array(np.asarray(array), name)


def _model(nodes, inputs, outputs, inits, opset, name):
    graph = helper.make_graph(nodes, name, inputs, outputs, initializer=inits)
    m = helper.make_model(graph, opset_imports=[helper.make_opsetid("", opset)],
                          producer_name="genloom tests/zoo/make_zoo.py")
    m.ir_version = 8 if opset >= 13 else 7 if opset >= 12 else 6 if opset >= 10 else 4
    return m


def pattern_const_matmul_1d(rng):
    """Spectral norm computed in-graph from initializers only, as the default exporter writes it
    for torch.nn.utils.parametrizations.spectral_norm: W_mat = reshape(W, [out, -1]); one
    power-iteration step v = normalize(W_mat^T u) (MatMul 1-D x 2-D), u = normalize(W_mat v)
    (MatMul 2-D x 1-D), normalize(x) = x / max(||x||, eps) as torch.nn.functional.normalize;
    sigma = u . (W_mat v) (MatMul 1-D x 1-D, torch.vdot); output Conv(x, W / sigma, b).
    Everything but the Conv is constant."""
    w = rng.standard_normal((8, 4, 3, 3), dtype=np.float32)
    u = rng.standard_normal(8, dtype=np.float32)
    v = rng.standard_normal(36, dtype=np.float32)
    b = rng.standard_normal(8, dtype=np.float32) * np.float32(0.1)
    nodes = [
        helper.make_node("Reshape", ["W", "mat_shape"], ["W_mat"]),
        helper.make_node("MatMul", ["u0", "W_mat"], ["Wt_u"]),          # 1-D x 2-D -> [36]
        helper.make_node("ReduceL2", ["Wt_u"], ["Wt_u_norm"], keepdims=1),
        helper.make_node("Max", ["Wt_u_norm", "eps"], ["Wt_u_den"]),
        helper.make_node("Div", ["Wt_u", "Wt_u_den"], ["v1"]),
        helper.make_node("MatMul", ["W_mat", "v1"], ["W_v"]),           # 2-D x 1-D -> [8]
        helper.make_node("ReduceL2", ["W_v"], ["W_v_norm"], keepdims=1),
        helper.make_node("Max", ["W_v_norm", "eps"], ["W_v_den"]),
        helper.make_node("Div", ["W_v", "W_v_den"], ["u1"]),
        helper.make_node("MatMul", ["W_mat", "v1"], ["W_v2"]),          # 2-D x 1-D -> [8]
        helper.make_node("MatMul", ["u1", "W_v2"], ["sigma"]),          # 1-D x 1-D -> scalar
        helper.make_node("Div", ["W", "sigma"], ["W_scaled"]),
        helper.make_node("Conv", ["x", "W_scaled", "B"], ["y"], pads=[1, 1, 1, 1]),
    ]
    inits = [_init("W", w), _init("u0", u), _init("B", b), _init("mat_shape", np.array([8, -1], np.int64)),
             _init("eps", np.array([1e-12], np.float32))]
    m = _model(nodes, [_vi("x", [BATCH, 4, 8, 8])], [_vi("y", [BATCH, 8, 8, 8])], inits, 17, "const_matmul_1d")
    return m, {"x": rng.standard_normal((2, 4, 8, 8), dtype=np.float32)}, \
        "Conv with weight W / sigma, sigma from a power-iteration step over initializers (MatMul 1-D x 2-D, " \
        "2-D x 1-D, 1-D x 1-D); the whole weight subgraph is constant"


def pattern_matmul_1d_runtime(rng):
    """MatMul with 1-D operands that depend on the input: must not be folded, must stay correct.
    v = mean of x over the batch ([8]); a = W v (2-D x 1-D); s = v . v (1-D x 1-D);
    y = (x W^T + a) / (1 + s)."""
    w = rng.standard_normal((6, 8), dtype=np.float32)
    nodes = [
        helper.make_node("ReduceMean", ["x"], ["v"], axes=[0], keepdims=0),     # [8], runtime
        helper.make_node("MatMul", ["W", "v"], ["a"]),                           # 2-D x 1-D
        helper.make_node("MatMul", ["v", "v"], ["s"]),                           # 1-D x 1-D
        helper.make_node("MatMul", ["x", "Wt"], ["xw"]),                         # [N, 6]
        helper.make_node("Add", ["xw", "a"], ["xwa"]),
        helper.make_node("Add", ["s", "one"], ["den"]),
        helper.make_node("Div", ["xwa", "den"], ["y"]),
    ]
    inits = [_init("W", w), _init("Wt", np.ascontiguousarray(w.T)), _init("one", np.array(1.0, np.float32))]
    m = _model(nodes, [_vi("x", [BATCH, 8])], [_vi("y", [BATCH, 6])], inits, 17, "matmul_1d_runtime")
    return m, {"x": rng.standard_normal((3, 8), dtype=np.float32)}, \
        "MatMul 2-D x 1-D and 1-D x 1-D on a value computed from the input (not constant)"


def pattern_upsample(rng, opset, mode):
    """Upsample (deprecated since opset 10) doubling H and W: at opset 9 the scales are an
    initializer input, at opset 7 an attribute."""
    if opset >= 9:
        nodes = [helper.make_node("Upsample", ["x", "scales"], ["y"], mode=mode)]
        inits = [_init("scales", np.array([1.0, 1.0, 2.0, 2.0], np.float32))]
    else:
        nodes = [helper.make_node("Upsample", ["x"], ["y"], mode=mode, scales=[1.0, 1.0, 2.0, 2.0])]
        inits = []
    m = _model(nodes, [_vi("x", [BATCH, 3, 4, 4])], [_vi("y", [BATCH, 3, 8, 8])], inits, opset,
               f"upsample_op{opset}_{mode}")
    where = "initializer input" if opset >= 9 else "attribute"
    return m, {"x": rng.standard_normal((2, 3, 4, 4), dtype=np.float32)}, \
        f"opset {opset} Upsample mode {mode}, scales [1,1,2,2] as an {where}"


def einsum_slug(eq: str) -> str:
    lhs, rhs = eq.split("->")
    return "einsum-" + "_".join(lhs.split(",")) + "-to-" + (rhs if rhs else "scalar")


def pattern_einsum(rng, eq):
    """One Einsum node, every operand a graph input of fixed small shape: each index letter gets
    its own size (2 for the first, then 3, 4, 5...), so a wrong axis mapping changes the shape."""
    lhs, rhs = eq.split("->")
    sizes = {}
    for ch in eq:
        if ch.isalpha() and ch not in sizes:
            sizes[ch] = 2 + len(sizes)
    operands = lhs.split(",")
    names = [f"in{i}" for i in range(len(operands))]
    feeds = {n: rng.standard_normal([sizes[c] for c in op], dtype=np.float32) for n, op in zip(names, operands)}
    out_shape = [sizes[c] for c in rhs]
    nodes = [helper.make_node("Einsum", names, ["y"], equation=eq)]
    m = _model(nodes, [_vi(n, list(feeds[n].shape)) for n in names], [_vi("y", out_shape)], [], 17,
               einsum_slug(eq).replace("-", "_"))
    return m, feeds, f"Einsum {eq!r}"


# Einsum equations the patterns always cover, besides those found in the exported families:
# batched matrix product, a channel broadcast, the weight modulation, and two forms a rewrite
# into MatMul/Mul would not handle (a diagonal and a trace: a repeated index in one operand).
EINSUM_FIXED = {
    "bij,bjk->bik": "batched matrix product (attention)",
    "bchw,bc->bchw": "per-sample channel scaling (style modulation of activations)",
    "oihw,bi->boihw": "per-sample weight modulation",
    "ii->i": "unusual: diagonal (repeated index in one operand)",
    "ii->": "unusual: trace (repeated index, summed)",
}


def make_patterns(out: Path, export_equations: dict, log) -> dict:
    pdir = out / "patterns"
    pdir.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(77)
    builders = [
        ("const-matmul-1d", lambda: pattern_const_matmul_1d(rng)),
        ("matmul-1d-runtime", lambda: pattern_matmul_1d_runtime(rng)),
        ("upsample-op9-nearest", lambda: pattern_upsample(rng, 9, "nearest")),
        ("upsample-op9-linear", lambda: pattern_upsample(rng, 9, "linear")),
        ("upsample-op7-nearest", lambda: pattern_upsample(rng, 7, "nearest")),
    ]
    equations = dict(EINSUM_FIXED)
    for eq, files in export_equations.items():
        note = "written by the exporter in " + ", ".join(sorted(files))
        equations[eq] = f"{equations[eq]}; {note}" if eq in equations else note
    for eq in sorted(equations):
        builders.append((einsum_slug(eq), (lambda e: lambda: pattern_einsum(rng, e))(eq)))

    entries = {}
    for name, build in builders:
        model, feeds, what = build()
        path = pdir / f"{name}.onnx"
        save_model(model, path)
        onnx.checker.check_model(str(path), full_check=True)
        loaded = onnx.load(str(path))
        out_arr = reference_run(loaded, feeds).astype(np.float32)
        if name.startswith("upsample-") and name.endswith("-nearest"):
            # the supplied Upsample agrees with onnx's stock one (np.repeat) where that one works
            stock = np.repeat(np.repeat(feeds["x"], 2, axis=2), 2, axis=3)
            assert np.array_equal(out_arr, stock), name
        save_npy(pdir / f"{name}.onnxref.npy", out_arr)
        inputs = {}
        for n, arr in feeds.items():
            save_npy(pdir / f"{name}.{n}.npy", arr)
            inputs[n] = {"file": f"{name}.{n}.npy", "shape": list(arr.shape), "type": str(arr.dtype)}
        entry = {
            "file": f"patterns/{name}.onnx",
            "what": what,
            "opset": default_opset(loaded),
            "ops": all_op_types(loaded),
            "inputs": inputs,
            "input_decl": [value_info_json(v) for v in graph_inputs(loaded)],
            "output": {"file": f"{name}.onnxref.npy", "shape": list(out_arr.shape)},
            "bytes": path.stat().st_size,
            "sha256": sha256(path),
            "source": ("onnx.helper (graph), onnx.reference.ReferenceEvaluator (output), "
                       "numpy default_rng(77) (inputs); " + source_string()),
        }
        if "Upsample" in entry["ops"]:
            entry["reference_note"] = UPSAMPLE_NOTE
        eqs = einsum_equations(loaded)
        if eqs:
            entry["einsum_equations"] = eqs
            entry["why"] = equations[eqs[0]]
        entries[name] = entry
        log(f"  patterns/{name}: ops {entry['ops']}, output {list(out_arr.shape)}")
    return entries


# --------------------------------------------------------------------------------------------
# Driver


def generate(out: Path, log, only=None, patterns=True) -> dict:
    import torch

    torch.set_num_threads(1)
    torch.use_deterministic_algorithms(True)
    out.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    fams = build_families()
    manifest = {
        "source": source_string(),
        "generated_by": "python tests/zoo/make_zoo.py",
        "batch_axis": BATCH,
        "legacy_opset": LEGACY_OPSET,
        "families": {},
        "files": {},
        "patterns": {},
    }
    for index, (name, fam) in enumerate(fams.items()):
        if only and name not in only:
            continue
        log(f"{name}:")
        family, entries = make_family(name, fam, index, out, torch, log)
        manifest["families"][name] = family
        manifest["files"].update(entries)
    equations = {}
    for fname, entry in manifest["files"].items():
        for eq in entry.get("einsum_equations", []):
            equations.setdefault(eq, set()).add(fname)
    manifest["einsum_equations_in_exports"] = {eq: sorted(f) for eq, f in sorted(equations.items())}
    if patterns:
        log("patterns:")
        manifest["patterns"] = make_patterns(out, equations, log)
    text = json.dumps(manifest, indent=1, sort_keys=True) + "\n"
    for marker in (str(HERE.parent.parent), str(out), "site-packages"):
        assert marker not in text, f"manifest.json holds a machine path ({marker})"
    (out / "manifest.json").write_text(text)
    log(f"done in {time.perf_counter() - t0:.1f} s")
    return manifest


def regenerate_in_place(log) -> None:
    """Generate into a temporary folder, then put each file in place by copying it to
    `NAME.tmp` (git ignores *.tmp) beside its target and renaming, and delete the files the
    script no longer writes: the zoo is never half-written for long, no file is ever partly
    written, and the hand-written files are never touched."""
    with tempfile.TemporaryDirectory(prefix="genloom-zoo-") as tmp:
        tmp = Path(tmp)
        generate(tmp, log)
        new = generated_files(tmp)
        old = generated_files(HERE)
        for rel in sorted(new):
            target = HERE / rel
            target.parent.mkdir(parents=True, exist_ok=True)
            staging = target.with_name(target.name + ".tmp")
            shutil.copyfile(tmp / rel, staging)
            os.replace(staging, target)
        for rel in sorted(old - new):
            (HERE / rel).unlink()


def generated_files(root: Path) -> set:
    return {str(p.relative_to(root)) for p in root.rglob("*")
            if p.is_file() and p.name not in HAND_WRITTEN and "__pycache__" not in p.parts
            and not p.name.endswith(".tmp")}


def onnx_weight_diff(a: Path, b: Path):
    """None if the two models differ in anything but initializer values, else the largest
    absolute difference between their float initializers (folded weights can differ in the last
    bits on another CPU)."""
    ma, mb = onnx.load(str(a)), onnx.load(str(b))
    ia = {t.name: numpy_helper.to_array(t) for t in ma.graph.initializer}
    ib = {t.name: numpy_helper.to_array(t) for t in mb.graph.initializer}
    if ia.keys() != ib.keys():
        return None
    del ma.graph.initializer[:]
    del mb.graph.initializer[:]
    if ma.SerializeToString() != mb.SerializeToString():
        return None
    worst = 0.0
    for k in ia:
        if ia[k].dtype != ib[k].dtype or ia[k].shape != ib[k].shape:
            return None
        if ia[k].dtype.kind != "f":
            if not np.array_equal(ia[k], ib[k]):
                return None
            continue
        worst = max(worst, max_abs_diff(ia[k], ib[k]))
    return worst


def manifests_agree(a, b) -> bool:
    """Equal but for file sizes and hashes, and measured floats within 1e-5."""
    if isinstance(a, dict) and isinstance(b, dict):
        keys = (a.keys() | b.keys()) - {"sha256", "bytes"}
        return all(k in a and k in b and manifests_agree(a[k], b[k]) for k in keys)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(manifests_agree(x, y) for x, y in zip(a, b))
    if isinstance(a, float) or isinstance(b, float):
        return isinstance(a, (int, float)) and isinstance(b, (int, float)) and abs(a - b) <= 1e-5
    return a == b


def check(log) -> int:
    """Regenerate into a temp dir; compare every file byte for byte. Where the bytes differ, a
    .npy within 1e-6 of the committed one, an .onnx whose graph is byte-equal and whose weights
    are within 1e-6, and then a manifest.json that differs only in those files' hashes and
    measured errors are reported as 'close' (allowed: another CPU can round PyTorch's kernels and
    folded weights differently in the last bit); anything else that differs fails. manifest.json
    is compared last."""
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        generate(tmp, log=lambda s: None)
        new, old = generated_files(tmp), generated_files(HERE)
        bad, close = [], []
        for rel in sorted(new | old, key=lambda r: (r == "manifest.json", r)):
            if rel not in old:
                bad.append(f"missing in tests/zoo: {rel}")
            elif rel not in new:
                bad.append(f"stale (not generated any more): {rel}")
            elif (tmp / rel).read_bytes() != (HERE / rel).read_bytes():
                if rel.endswith(".npy"):
                    a, b = np.load(tmp / rel), np.load(HERE / rel)
                    if a.shape == b.shape and a.dtype == b.dtype and max_abs_diff(a, b) <= 1e-6:
                        close.append(f"{rel} (max abs diff {max_abs_diff(a, b):.3g})")
                        continue
                if rel == "manifest.json" and close and manifests_agree(json.loads((tmp / rel).read_text()),
                                                                        json.loads((HERE / rel).read_text())):
                    close.append(f"{rel} (same apart from the sizes, hashes and measured errors of close files)")
                    continue
                if rel.endswith(".onnx"):
                    d = onnx_weight_diff(tmp / rel, HERE / rel)
                    if d is not None and d <= 1e-6:
                        close.append(f"{rel} (same graph, weights within {d:.3g})")
                        continue
                bad.append(f"differs: {rel}")
        for line in close:
            log(f"close (within 1e-6, not byte-equal): {line}")
        for line in bad:
            log(line)
        log(f"{len(new)} generated files, {len(bad)} problems, {len(close)} close")
        return 1 if bad else 0


def _run_timed(cmd):
    """Run under /usr/bin/time -f %e; return (exit code, stdout, stderr without the time line, seconds)."""
    r = subprocess.run(["/usr/bin/time", "-f", "%e"] + cmd, capture_output=True, text=True)
    lines = r.stderr.rstrip().splitlines()
    secs = lines[-1] if lines else "?"
    rest = [ln for ln in lines[:-1] if not ln.startswith("Command exited with non-zero status")]
    return r.returncode, r.stdout, "\n".join(rest), secs


def _verdict(code, out, err):
    """'pass' or the failing/warning checks with their first message, from the text report."""
    if code == 0:
        warns = [ln.strip() for ln in out.splitlines() if ln.strip().startswith("warn ")]
        return "pass" + (f" ({'; '.join(warns)})" if warns else "")
    failed = [ln.strip() for ln in out.splitlines() if ln.strip().startswith("FAIL ")]
    text = "; ".join(failed) if failed else (err.strip() or out.strip())
    text = " ".join(text.split())
    return f"exit {code}: " + (text[:300] + " [...]" if len(text) > 300 else text)


def try_genloom(binary: str, root: Path, log) -> int:
    """Run `genloom inspect`, then `genloom check --reference` against the PyTorch outputs and
    against the reference evaluator's, on every ONNX file of the manifest; print a Markdown table
    (file names relative to the zoo; nothing is written)."""
    manifest = json.loads((root / "manifest.json").read_text())
    rows = ["| file | loads (inspect) | check vs PyTorch (`NAME.torch.npy`) | s | "
            "check vs reference evaluator (`*.onnxref.npy`) | s |", "|---|---|---|---|---|---|"]
    results = {}

    def rel(text):
        return text.replace(str(root) + os.sep, "")

    for fname, entry in sorted(manifest["files"].items()):
        if "error" in entry:
            rows.append(f"| {fname} | not exported | - | - | - | - |")
            continue
        fam = manifest["families"][entry["family"]]
        path = str(root / fname)
        extra = []
        note = ""
        code, out, err, _ = _run_timed([binary, "inspect", path])
        if code != 0 and entry["declared_range"] is None:
            lo, hi = entry["check_range"]
            extra = [f"--range={lo:g},{hi:g}"]
            note = f"without `--range`: {' '.join(rel(err).split())} With `{extra[0]}`: "
            code, out, err, _ = _run_timed([binary, "inspect", path] + extra)
        loads = "yes" if code == 0 else "no: " + " ".join(rel(err).split())
        if code == 0:
            passes = [ln.strip() for ln in out.splitlines() if "->" in ln and "nodes)" in ln]
            if passes:
                loads += " (passes: " + "; ".join(p.split(":")[0] for p in passes) + ")"
        cells = []
        for ref in (fam["torch_output"], entry["reference"]):
            cmd = [binary, "check", path, "--reference", str(root / fam["latents"]), str(root / ref)] + extra
            if fam["labels"]:
                cmd += ["--labels-in", str(root / fam["labels"])]
            c, o, e, secs = _run_timed(cmd)
            cells += [rel(_verdict(c, o, e)), secs]
            results.setdefault(fname, []).append({"cmd": [rel(x) for x in cmd], "exit": c, "out": rel(o), "err": rel(e),
                                                  "seconds": secs})
        rows.append("| " + " | ".join([fname, note + loads] + cells).replace("\n", " ") + " |")
    log("\n".join(rows))
    dump = os.environ.get("ZOO_GENLOOM_DUMP")
    if dump:  # full outputs, for reading; never inside tests/zoo
        Path(dump).write_text(json.dumps(results, indent=1))
    return 0


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--out", type=Path, help="write here instead of tests/zoo")
    ap.add_argument("--check", action="store_true", help="regenerate into a temp dir and compare")
    ap.add_argument("--ignore-versions", action="store_true", help="run with other package versions")
    ap.add_argument("--only", nargs="*", help="families to build (development; the manifest then lists only those)")
    ap.add_argument("--genloom", metavar="BINARY", help="try every file in this genloom binary; print a table")
    args = ap.parse_args()

    if args.genloom:
        return try_genloom(args.genloom, args.out or HERE, print)
    problems = version_problems(PINNED)
    if problems and not args.ignore_versions:
        for p in problems:
            print(p, file=sys.stderr)
        print("install tests/zoo/requirements.txt or pass --ignore-versions", file=sys.stderr)
        return 2
    if args.only and not args.out:
        ap.error("--only needs --out (it writes a partial manifest)")
    if args.check:
        return check(print)
    t0 = time.perf_counter()
    try:
        if args.out:
            generate(args.out, print, only=args.only)
        else:
            regenerate_in_place(print)
    except Exception:
        traceback.print_exc()
        return 1
    print(f"total {time.perf_counter() - t0:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
