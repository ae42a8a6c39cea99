#!/usr/bin/env python3
"""Writes the three trimmed tract crates that the WebAssembly build links instead of the
registry's: target/tract-web/tract-onnx, tract-nnef and tract-core.

Why: a .wasm keeps every function that can be reached, and two things in tract reach almost
all of it. tract-onnx's `onnx()` registers a builder for each of its 183 ONNX operators
(spectral ops that pull in rustfft, tree ensembles, recurrent layers, attention blocks...),
and tract-nnef registers a model transform at start-up (through `inventory`) that can build
any tract-core op from NNEF text. Native builds do not care; the web page downloads them.

What this script changes, and nothing else:
- tract-onnx: the operator register keeps only WEB_OPERATORS below, the operators image
  generators are made of. A model with any other operator is refused at load time with a
  message naming it (genloom checks the register before tract parses the model).
- tract-nnef: the start-up registration of its "patch" transform is compiled out.
- tract-core: the start-up registrations of its named model transforms (batchify, block_quant,
  set_symbols...) and of its config-file runtime are compiled out. genloom never looks
  transforms or runtimes up by name: it calls the float-precision translator directly.
- both: lints about code left unused are allowed.

The sources are the registry's, at the version the root Cargo.lock pins (cargo checks their
checksums when it downloads them); `cargo metadata` at the repository root says where they
are. The output folder is rewritten only when the sources or this script change (a stamp file
holds their digest), so cargo does not rebuild tract for nothing.

Usage: python3 bindings/wasm/tract-patch/prepare.py   (build.sh and test-wasm.sh run it)
"""

import hashlib
import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent.parent.parent
OUT = ROOT / "target" / "tract-web"

# The ONNX operators the web build carries, by family as tract-onnx files them. Chosen for the
# generator half of a GAN: convolutions and their transposes, the usual normalisations and
# activations, the shape ops exporters emit around them, resizing and pixel shuffle, label
# embeddings (Gather), our fp16 and int8 exports (Cast, DequantizeLinear), and attention blocks
# built from MatMul and Softmax.
WEB_OPERATORS = {
    # graph basics
    "Constant", "Identity",
    # shapes and data movement
    "Concat", "ConstantOfShape", "Expand", "Flatten", "Gather", "Pad", "Range", "Reshape",
    "Shape", "Slice", "Split", "Squeeze", "Tile", "Transpose", "Unsqueeze",
    "DepthToSpace", "Resize",
    # element types
    "Cast", "CastLike", "QuantizeLinear", "DequantizeLinear",
    # comparisons, as exporters emit them for shape arithmetic
    "Equal", "Greater", "Less", "Where", "Not",
    # arithmetic
    "Add", "Sub", "Mul", "Div", "Sum", "Max", "Min", "Mean", "Abs", "Neg", "Sign",
    "Reciprocal", "Pow", "Sqrt", "Rsqrt", "Exp", "Log", "Erf", "Sin", "Cos", "Tanh",
    "Floor", "Ceil", "Round", "Clip", "MatMul", "Gemm",
    # layers
    "Conv", "ConvTranspose", "BatchNormalization", "InstanceNormalization",
    "LayerNormalization", "GroupNormalization", "AveragePool", "GlobalAveragePool",
    "Dropout", "ReduceMean", "ReduceSum", "ReduceMax", "ReduceL2", "Softmax",
    # activations
    "Relu", "LeakyRelu", "PRelu", "Elu", "Selu", "Celu", "Sigmoid", "HardSigmoid",
    "HardSwish", "Softplus", "Softsign", "Gelu", "Swish", "Mish",
}

CRATES = ("tract-onnx", "tract-nnef", "tract-core")


def fail(message):
    print(f"prepare.py: {message}", file=sys.stderr)
    sys.exit(1)


def pinned_version():
    text = (HERE.parent / "Cargo.toml").read_text()
    m = re.search(r'^tract-onnx = \{ version = "=([0-9.]+)"', text, re.M)
    if not m:
        fail("cannot read the pinned tract-onnx version from bindings/wasm/Cargo.toml")
    return m.group(1)


def registry_sources(version):
    """The registry folders of the pinned crates, from the root workspace's lock file."""
    out = subprocess.run(
        ["cargo", "metadata", "--format-version", "1", "--locked",
         "--manifest-path", str(ROOT / "Cargo.toml")],
        check=True, capture_output=True, text=True).stdout
    found = {}
    for p in json.loads(out)["packages"]:
        if p["name"] in CRATES and p["version"] == version and (p.get("source") or "").startswith("registry+"):
            found[p["name"]] = Path(p["manifest_path"]).parent
    missing = [c for c in CRATES if c not in found]
    if missing:
        fail(f"the root Cargo.lock has no registry {', '.join(missing)} {version}; "
             "bindings/wasm/Cargo.toml and the root must pin the same tract")
    return found


def digest(paths):
    h = hashlib.sha256(Path(__file__).read_bytes())
    for base in paths:
        for f in sorted(base.rglob("*")):
            if f.is_file():
                h.update(str(f.relative_to(base)).encode())
                h.update(f.read_bytes())
    return h.hexdigest()


def statement_end(text, start):
    """Index just past the `;` that ends the call opening at `start` (balanced parentheses,
    string literals skipped; tract's register calls hold no char literal with a parenthesis)."""
    depth = 0
    i = start
    while i < len(text):
        c = text[i]
        if c == '"':
            i += 1
            while text[i] != '"':
                i += 2 if text[i] == "\\" else 1
        elif c == "(":
            depth += 1
        elif c == ")":
            depth -= 1
            if depth == 0:
                rest = text[i + 1:]
                semi = len(rest) - len(rest.lstrip())
                if rest[semi:semi + 1] == ";":
                    return i + 1 + semi + 1
                return i + 1  # the last expression of a block, no `;`
        i += 1
    fail("unbalanced reg.insert( call")


def trim_onnx(crate):
    kept = set()
    dropped = set()
    call = re.compile(r'reg\.insert\(\s*"([A-Za-z0-9]+)"')
    for f in sorted((crate / "src" / "ops").rglob("*.rs")):
        text = f.read_text()
        pieces = []
        pos = 0
        for m in call.finditer(text):
            if m.start() < pos:
                continue
            name = m.group(1)
            end = statement_end(text, m.start())
            if name in WEB_OPERATORS:
                kept.add(name)
                continue
            dropped.add(name)
            pieces.append(text[pos:m.start()])
            pieces.append(f"/* {name}: not in genloom's web build */")
            pos = end
        if pos:
            pieces.append(text[pos:])
            f.write_text("".join(pieces))
    unknown = WEB_OPERATORS - kept
    if unknown:
        fail(f"tract-onnx registers no operator named {sorted(unknown)}")
    return len(kept), len(dropped)


def trim_nnef(crate):
    f = crate / "src" / "transform.rs"
    text = f.read_text()
    marker = 'inventory::submit! {\n    ModelTransformFactory {\n        name: "patch",'
    if text.count(marker) != 1:
        fail("tract-nnef's registration of the `patch` transform is not where it was; "
             "update bindings/wasm/tract-patch/prepare.py for this tract version")
    f.write_text(text.replace(marker, "#[cfg(any())]\n" + marker))


# The start-up registrations tract-core 0.23.9 makes at the top level of its files, by the
# first words of their line; each must be found exactly this many times.
CORE_REGISTRATIONS = {
    "register_simple_model_transform!(": 4,
    "register_model_transform!(": 5,
    "inventory::submit! {": 3,
    "register_runtime!(DeployRuntime": 1,
}


def trim_core(crate):
    found = dict.fromkeys(CORE_REGISTRATIONS, 0)
    for f in sorted((crate / "src").rglob("*.rs")):
        lines = f.read_text().split("\n")
        out = []
        for line in lines:
            for start in CORE_REGISTRATIONS:
                if line.startswith(start):
                    found[start] += 1
                    out.append("#[cfg(any())]")
            out.append(line)
        if len(out) != len(lines):
            f.write_text("\n".join(out))
    if found != CORE_REGISTRATIONS:
        fail(f"tract-core's start-up registrations are not what they were ({found}); "
             "update bindings/wasm/tract-patch/prepare.py for this tract version")


def allow_unused(crate):
    lib = crate / "src" / "lib.rs"
    lib.write_text("#![allow(dead_code, unused_imports, unused_variables, unused_mut)]\n" + lib.read_text())


def main():
    version = pinned_version()
    sources = registry_sources(version)
    stamp = OUT / "stamp"
    want = f"{version} {digest([sources[c] for c in CRATES])}"
    if stamp.is_file() and stamp.read_text() == want and all((OUT / c / "Cargo.toml").is_file() for c in CRATES):
        print(f"  target/tract-web: trimmed tract {version} is up to date")
        return
    # Written beside, then moved into place: a failed run leaves no half-trimmed crate.
    work = OUT.with_name(OUT.name + ".partial")
    for d in (work, OUT):
        if d.exists():
            shutil.rmtree(d)
    work.mkdir(parents=True)
    for c in CRATES:
        shutil.copytree(sources[c], work / c)
        allow_unused(work / c)
    kept, dropped = trim_onnx(work / "tract-onnx")
    trim_nnef(work / "tract-nnef")
    trim_core(work / "tract-core")
    (work / "stamp").write_text(want)
    work.rename(OUT)
    print(f"  target/tract-web: tract {version}, {kept} ONNX operators kept, {dropped} left out; "
          "start-up transforms of nnef and core compiled out")


if __name__ == "__main__":
    main()
