"""Writes the `onnx` package's operator conformance cases that genloom's web build can run.

The `onnx` package ships node test cases (`onnx.backend.test.case.node.collect_testcases`):
each is a small model, its inputs and the outputs the ONNX reference implementation gives.
This script keeps every case whose graph uses only operators of the web build's set (the list
in bindings/wasm/README.md, section "The web build's operators", read from that file so the
two cannot drift) and writes, per case, into FOLDER (default target/conformance-cases/, never
committed):

    NAME/model.onnx, NAME/input_K.npy, NAME/output_K.npy (numpy.save)

and FOLDER/index.json: for each written case its name, the operator under test, the graph's
operator types, the opset, and the dtype and shape of every input and output; the cases of the
set that could not be written, with the reason ("not a tensor", "dtype"); and the number of
cases left out because they use an operator outside the set.

Only what genloom's NPY reader gives to `genloom::conformance::run_graph` can be fed: float32,
float64, int64, int32 and uint8. (It widens int16 and int8 to int32, which would change the
graph's input type, and has no bool: those inputs are skipped as "dtype".) Expected outputs
are saved as the type run_graph returns: bool as uint8 (run_graph returns a bool output as
uint8) and float16 as float32 (run_graph casts float16 outputs to float32; the widening is
exact); outputs of other types are skipped as "dtype".

Usage: python3 tests/conformance/write_cases.py [FOLDER]
"""

import json
import re
import shutil
import sys
import warnings
from pathlib import Path

import numpy as np
import onnx
from onnx import numpy_helper
from onnx.backend.test.case.node import collect_testcases

ROOT = Path(__file__).resolve().parent.parent.parent
README = ROOT / "bindings" / "wasm" / "README.md"
DEFAULT_OUT = ROOT / "target" / "conformance-cases"

# What run_graph can be fed (genloom::npy::NpyData without widening).
FEEDABLE = {"float32", "float64", "int64", "int32", "uint8"}
# What run_graph returns, and the dtype the expected output is saved as.
READABLE = {
    "float32": "float32",
    "float64": "float64",
    "int64": "int64",
    "int32": "int32",
    "uint8": "uint8",
    "bool": "uint8",
    "float16": "float32",
}


def fail(message):
    print(f"write_cases.py: {message}", file=sys.stderr)
    sys.exit(1)


def web_operators():
    """The operator names listed in bindings/wasm/README.md ("registers only these N operators")."""
    text = README.read_text()
    m = re.search(r"registers only these (\d+) operators[^:]*:(.*?)\n- tract-nnef", text, re.S)
    if not m:
        fail(f"{README.relative_to(ROOT)} no longer lists the web build's operators where expected")
    names = set(re.findall(r"\b[A-Z][A-Za-z0-9]*\b", m.group(2)))
    if len(names) != int(m.group(1)):
        fail(f"{README.relative_to(ROOT)} says {m.group(1)} operators but lists {len(names)}")
    return names


def graph_ops(graph):
    """(domain, op_type) of every node, subgraphs included, in order."""
    out = []
    for n in graph.node:
        out.append((n.domain, n.op_type))
        for a in n.attribute:
            if a.HasField("g"):
                out += graph_ops(a.g)
            for g in a.graphs:
                out += graph_ops(g)
    return out


def operator_under_test(case, by_name):
    """The operator a case tests: its node's, or for a function's expansion the unexpanded case's."""
    m = re.fullmatch(r"(.*)_expanded(_ver\d+)?", case.name)
    if m and m.group(1) in by_name:
        base = by_name[m.group(1)].model.graph.node
        return base[0].op_type + " (expanded)"
    return case.model.graph.node[0].op_type


def value_kind(value_info):
    """'tensor', or which other kind of value a graph input or output is."""
    kind = value_info.type.WhichOneof("value")
    return {"tensor_type": "tensor"}.get(kind, kind.replace("_type", "") if kind else "untyped")


def as_array(value):
    if isinstance(value, onnx.TensorProto):
        return numpy_helper.to_array(value)
    if isinstance(value, np.generic):
        # Some cases give a 0-d input as a NumPy scalar.
        return np.asarray(value)
    return value


def describe(a):
    return {"dtype": str(a.dtype), "shape": list(a.shape)}


def check(case, inputs, outputs):
    """None when the case can be written, else the reason it cannot."""
    g = case.model.graph
    for v in list(g.input) + list(g.output):
        kind = value_kind(v)
        if kind != "tensor":
            return "not a tensor", f"`{v.name}` is a {kind}"
    for what, values in (("input", inputs), ("output", outputs)):
        for k, a in enumerate(values):
            if not isinstance(a, np.ndarray):
                return "not a tensor", f"{what} {k} is a {type(a).__name__}"
    for k, a in enumerate(inputs):
        if str(a.dtype) not in FEEDABLE:
            return "dtype", f"input {k} is {a.dtype}, which genloom's NPY input path does not carry"
    for k, a in enumerate(outputs):
        if str(a.dtype) not in READABLE:
            return "dtype", f"output {k} is {a.dtype}, which run_graph cannot return"
    if len(inputs) != len(g.input) or len(outputs) != len(g.output):
        return "arity", "the data set does not match the graph's inputs and outputs"
    return None


def prepare(out):
    if out.exists():
        if (out / "index.json").exists():
            shutil.rmtree(out)
        elif any(out.iterdir()):
            fail(f"{out} exists, is not empty and holds no index.json: not overwriting it")
    out.mkdir(parents=True, exist_ok=True)


def main():
    out = Path(sys.argv[1]) if len(sys.argv) > 1 else DEFAULT_OUT
    ops = web_operators()
    with warnings.catch_warnings():
        # The cases' own generators warn about overflowing casts (their expected values).
        warnings.simplefilter("ignore")
        cases = collect_testcases(None)
    by_name = {c.name: c for c in cases}
    prepare(out)
    written, skipped, outside = [], [], []
    for case in sorted(cases, key=lambda c: c.name):
        used = graph_ops(case.model.graph)
        foreign = sorted({t if d in ("", "ai.onnx") else f"{d}.{t}" for d, t in used
                          if d not in ("", "ai.onnx") or t not in ops})
        op = operator_under_test(case, by_name)
        if foreign or case.model.functions:
            outside.append({"name": case.name, "op": op,
                            "outside": foreign or ["model-local functions"]})
            continue
        op_types = list(dict.fromkeys(t for _, t in used))
        opset = max((o.version for o in case.model.opset_import if o.domain in ("", "ai.onnx")),
                    default=None)
        if len(case.data_sets) != 1:
            fail(f"{case.name} has {len(case.data_sets)} data sets; this script writes the first only")
        raw_inputs, raw_outputs = case.data_sets[0]
        inputs = [as_array(a) for a in raw_inputs]
        outputs = [as_array(a) for a in raw_outputs]
        why = check(case, inputs, outputs)
        if why:
            skipped.append({"name": case.name, "op": op, "op_types": op_types, "opset": opset,
                            "reason": why[0], "detail": why[1]})
            continue
        folder = out / case.name
        folder.mkdir()
        (folder / "model.onnx").write_bytes(case.model.SerializeToString())
        for k, a in enumerate(inputs):
            np.save(folder / f"input_{k}.npy", np.array(a, order="C"))
        out_info = []
        for k, a in enumerate(outputs):
            saved = np.array(a, dtype=READABLE[str(a.dtype)], order="C")
            np.save(folder / f"output_{k}.npy", saved)
            out_info.append({**describe(a), "saved_as": str(saved.dtype)})
        written.append({
            "name": case.name,
            "op": op,
            "op_types": op_types,
            "opset": opset,
            "inputs": [describe(a) for a in inputs],
            "outputs": out_info,
            "onnx_rtol": case.rtol,
            "onnx_atol": case.atol,
        })
    index = {
        "onnx_version": onnx.__version__,
        "numpy_version": np.__version__,
        "web_operators": sorted(ops),
        "total_cases": len(cases),
        "cases": written,
        "skipped": skipped,
        "outside_web_set": outside,
    }
    tmp = out / "index.json.tmp"
    tmp.write_text(json.dumps(index, indent=1) + "\n")
    tmp.replace(out / "index.json")
    print(f"write_cases.py: {len(cases)} cases in onnx {onnx.__version__}: {len(written)} written, "
          f"{len(skipped)} of the web set skipped, {len(outside)} outside the web set -> {out}")


if __name__ == "__main__":
    main()
