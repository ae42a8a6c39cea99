"""Writes docs/conformance.md from the results of the operator conformance run.

Reads target/conformance-results.json (written by `cargo run -p genloom-tests --example
conformance`), sorts every case that did not pass into a cause (the rules below, written after
reading the failures of the run with onnx 1.23.2 and tract 0.23.9; a case no rule matches is
listed under "not yet explained", so a new kind of failure shows up rather than hiding in a
wrong group), and writes the page: the date and commands of the run, the totals, the
divergences caused by genloom's passes (first, since each is a genloom question), the causes
with their cases, and a table per operator.

Usage: python3 tests/conformance/table.py [RESULTS.json] [OUT.md] [--wall-seconds S]
"""

import collections
import datetime
import json
import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent.parent
DEFAULT_RESULTS = ROOT / "target" / "conformance-results.json"
DEFAULT_OUT = ROOT / "docs" / "conformance.md"

RUNTIME_OPERAND = re.compile(
    r"as a constant|to be a constant|must be constant|to be constant|input is variable"
    r"|is typable only if \w+ is a const|must be a const|Params are not const"
    r"|Neither sizes nor scales makes sense"
)

# Causes of a case not passing, first match wins. `test` sees the result entry. Each text says
# what was checked, so the page can be trusted without rerunning anything.
CAUSES = [
    {
        "key": "swish-alpha",
        "title": "Swish with `alpha` other than 1",
        "text": "tract-onnx builds `Swish` as SiLU (`x * sigmoid(x)`) and never reads `alpha`; the "
                "ONNX operator is `x * sigmoid(alpha * x)`. genloom refuses `alpha != 1` by name "
                "before tract (since commit 191ae54, after this run's first round found the case "
                "loading and giving wrong values, largest difference 0.81 with `alpha = 0.5`). "
                "The direct Swish case, `test_swish`, has `alpha = 1` and passes.",
        "test": lambda c: c["status"] != "pass" and "Swish" in c["op_types"],
    },
    {
        "key": "rounded-expected",
        "title": "Expected values written to 4 decimals in the test itself",
        "text": "The case's expected output is typed into its source as `[0.1511, 0.2841, "
                "0.3572]`; genloom gives 0.15105554, 0.28404441, 0.35722223, which is what "
                "`onnx.reference.ReferenceEvaluator` computes (to 1e-7). The onnx package's own "
                "tolerance for node cases (rtol 1e-3) accepts this; the 1e-4 used here does not.",
        "test": lambda c: c["status"] == "fail"
        and c["name"] == "test_averagepool_2d_ceil_last_window_starts_on_pad",
    },
    {
        "key": "reduce-max-empty",
        "title": "ReduceMax over an empty set gives the lowest float, not minus infinity",
        "text": "ONNX: \"Reduction over an empty set of values yields minus infinity (if "
                "supported by the datatype)\". tract gives -3.4028235e38 (f32's lowest finite "
                "value). Seen with the axes as initializers (as given, the run-time axes stop "
                "tract first).",
        "test": lambda c: c["status"] == "fail" and "ReduceMax" in c["op_types"]
        and "expected -inf" in (c["detail"] or ""),
    },
    {
        "key": "runtime-operand",
        "title": "An operand tract needs constant is a graph input in the test",
        "text": "The node tests feed axes, shapes, splits, pads, slice bounds, Resize scales and "
                "sizes, BatchNormalization parameters and quantization scales as graph inputs. "
                "tract types a graph only when these are constants; an exported model carries "
                "them as initializers. Each such case was run again with its operands as "
                "initializers (the inputs after the first; a lone integer input too): the "
                "column \"as initializers\" says how many then pass.",
        "test": lambda c: c["status"] == "error" and RUNTIME_OPERAND.search(c["detail"] or ""),
    },
    {
        "key": "shape-output",
        "title": "A graph output of tract's shape type (TDim) is not converted by run_graph",
        "text": "`Shape` computes tract's symbolic dimension type (TDim), and "
                "`genloom::conformance::run_graph` has no int64 form for a TDim output "
                "(\"an output is TDim, which has no NPY form here\"). A gap in genloom's "
                "conformance output path, not a measure of tract's Shape; in a generator, Shape "
                "feeds other nodes and is never an output.",
        "test": lambda c: c["status"] == "error" and "an output is TDim" in (c["detail"] or ""),
    },
    {
        "key": "resize-nearest-mode",
        "title": "Resize `nearest_mode` tract does not implement",
        "text": "tract 0.23.9 rounds nearest-neighbour Resize by `floor` or `round_prefer_ceil` "
                "only; these cases use `round_prefer_floor` (the ONNX default) or `ceil`. "
                "genloom refuses them by name before tract (its attribute rules). Still refused "
                "with the scales as initializers.",
        "test": lambda c: c["status"] == "error" and "nearest_mode is" in (c["detail"] or ""),
    },
    {
        "key": "resize-tf-crop",
        "title": "Resize `coordinate_transformation_mode = tf_crop_and_resize`",
        "text": "Not among the coordinate transformations tract implements; genloom refuses it "
                "by name before tract.",
        "test": lambda c: c["status"] == "error" and "tf_crop_and_resize" in (c["detail"] or ""),
    },
    {
        "key": "batchnorm-training",
        "title": "BatchNormalization in training mode",
        "text": "`training_mode = 1` with its three outputs (the running mean and variance): "
                "tract implements the inference form only (\"Op says 1, node says 3\"). "
                "Generators are exported in inference form; `genloom check` flags training-mode "
                "exports.",
        "test": lambda c: c["status"] == "error" and "Op says 1, node says 3" in (c["detail"] or ""),
    },
    {
        "key": "blocked-quantization",
        "title": "Blocked quantization (`block_size`, opset 21)",
        "text": "tract-onnx parses per-tensor and per-axis (De)QuantizeLinear, not the blocked "
                "form (\"blocked quantization is not supported\").",
        "test": lambda c: c["status"] == "error" and "blocked quantization" in (c["detail"] or ""),
    },
    {
        "key": "pad-wrap",
        "title": "Pad `mode = wrap` (opset 19)",
        "text": "tract-onnx knows the constant, reflect and edge modes only (\"Unsupported mode "
                "wrap\").",
        "test": lambda c: c["status"] == "error" and "Unsupported mode wrap" in (c["detail"] or ""),
    },
    {
        "key": "tract-symbol-scope",
        "title": "tract run-time error on Slice with run-time bounds and default axes",
        "text": "tract types and optimises the graph, then stops when running it: \"Symbol "
                "<Sym0> points to an invalid (dead ?) SymbolScope\". An error, not a panic; the "
                "same with passes off, and the case passes with its bounds as initializers. Not "
                "investigated further (tract's side).",
        "test": lambda c: c["status"] == "error" and "SymbolScope" in (c["detail"] or ""),
    },
]

UNEXPLAINED = {"key": "unexplained", "title": "Not yet explained",
               "text": "No rule of tests/conformance/table.py matches these: read their messages."}

SKIP_TEXT = {
    "float16": "float16 inputs: genloom's NPY input path has no float16",
    "bool": "bool inputs: genloom's NpyData has no bool (a uint8 input would change the "
            "graph's input type)",
    "int8": "int8 inputs: genloom's NPY reader widens int8 to int32, which would change the "
            "graph's input type",
    "int16": "int16 inputs: widened to int32 by genloom's NPY reader, as int8",
}


def skip_group(entry):
    """The dtype (or kind) a skipped case is skipped for."""
    m = re.search(r"(?:input|output) \d+ is (?:a )?(\w+)", entry["detail"] or "")
    if entry.get("skip_reason") == "not a tensor":
        return "not a tensor"
    return m.group(1) if m else entry["detail"]


def skip_text(group):
    if group == "not a tensor":
        return "inputs that are sequences or optionals, not tensors"
    if group == "object":
        return "string tensors"
    if group in SKIP_TEXT:
        return SKIP_TEXT[group]
    return f"{group}: a type genloom's NPY path does not carry"


def cause_of(entry):
    for cause in CAUSES:
        if cause["test"](entry):
            return cause
    return UNEXPLAINED


def md_escape(text):
    return (text or "").replace("|", "\\|").replace("\n", " ")


def names(cases):
    return ", ".join(f"`{c['name']}`" for c in cases)


def short(text, limit=160):
    text = md_escape(text)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def main():
    args = list(sys.argv[1:])
    wall = None
    if "--wall-seconds" in args:
        i = args.index("--wall-seconds")
        wall = float(args[i + 1])
        del args[i:i + 2]
    results_path = Path(args[0]) if args else DEFAULT_RESULTS
    out = Path(args[1]) if len(args) > 1 else DEFAULT_OUT
    doc = json.loads(results_path.read_text())
    cases = doc["cases"]
    run = [c for c in cases if c["status"] != "skipped"]
    skipped = [c for c in cases if c["status"] == "skipped"]
    status = collections.Counter(c["status"] for c in run)
    retried = [c for c in run if "as_initializers" in c]
    retried_pass = [c for c in retried if c["as_initializers"]["status"] == "pass"]
    when = datetime.datetime.fromtimestamp(doc["started_unix"], datetime.timezone.utc)
    outside = doc["outside_web_set"]
    of_set = len(cases)

    # Causes of every case that did not pass (as given).
    by_cause = collections.defaultdict(list)
    for c in run:
        if c["status"] != "pass":
            by_cause[cause_of(c)["key"]].append(c)
    # Failures in the initializer form, for the cases that errored as given.
    retry_fail = [c for c in retried if c["as_initializers"]["status"] != "pass"]

    # Divergences between passes on and off, in either form.
    divergences = []
    for c in run:
        for form, e in (("as given", c), ("as initializers", c.get("as_initializers"))):
            if e and e["differs"]:
                divergences.append((c, form, e))

    lines = []
    w = lines.append
    w("# Operator conformance: the onnx package's node tests")
    w("")
    w("Every operator test case the `onnx` package ships (`onnx.backend.test.case.node`) whose "
      "graph uses only operators of the web build's set (bindings/wasm/README.md), run through "
      "`genloom::conformance::run_graph` (genloom's load-time passes, its attribute rules, then "
      "tract: typed, optimised, run) twice, with the passes and without them, and compared with "
      "the outputs the test gives. Generated by `tests/conformance/table.py`; do not edit by "
      "hand.")
    w("")
    w(f"- Run: {when:%Y-%m-%d %H:%M} UTC, onnx {doc['onnx_version']}, tract 0.23.9 (the pinned "
      f"version), the `{doc['profile']}` cargo profile; the example took "
      f"{doc['elapsed_seconds']:.1f} s for {len(run)} cases"
      + (f", the whole command {wall:.0f} s on this 2-core machine." if wall is not None else "."))
    w("- Command: `bash tests/conformance/run.sh`, which runs")
    w("  1. `python3 tests/conformance/write_cases.py target/conformance-cases` (the cases, "
      "never committed),")
    w("  2. `cargo run -p genloom-tests --example conformance -- target/conformance-cases` "
      "(writes `target/conformance-results.json`),")
    w("  3. `python3 tests/conformance/table.py` (this page).")
    w(f"- Comparison: numpy.testing.assert_allclose's rule, `|actual - expected| <= "
      f"{doc['atol']:g} + {doc['rtol']:g} |expected|`, for floats (NaN equal to NaN), exact for "
      "integers; shapes and element types must match. The status is the passes-on run's.")
    w("")
    w("## Totals")
    w("")
    w(f"- {doc['total_cases']} node cases in onnx {doc['onnx_version']}; {len(outside)} use an "
      f"operator outside the web build's set; {of_set} use only the set's operators.")
    w(f"- Of those {of_set}: {len(skipped)} skipped (their inputs or outputs are types "
      f"genloom's NPY path does not carry, or not tensors), {len(run)} run.")
    w(f"- Of the {len(run)} run: **{status['pass']} pass**, {status['fail']} fail, "
      f"{status['error']} error, {status['panic']} panic.")
    w(f"- Of the {len(retried)} that errored and had an operand to move, run again with their "
      f"operands as initializers (the form exporters write): {len(retried_pass)} pass, "
      f"{len(retry_fail)} do not.")
    n_div = len({c["name"] for c, _, _ in divergences})
    changed = collections.Counter()
    for c in run:
        for e in (c, c.get("as_initializers")):
            for p in (e or {}).get("passes_changed") or []:
                changed[p] += 1
    w(f"- Cases where passes on and passes off differ: {n_div}. The passes changed the graph in "
      + (", ".join(f"{n} runs ({p})" for p, n in sorted(changed.items())) or "no run")
      + " (counted over the passes-on runs that completed: run_graph reports the passes only "
      "with its outputs).")
    w("")
    w("## Divergences caused by genloom's passes")
    w("")
    if not divergences:
        w("None: with the passes on and off every case gave the same status and the same output "
          "values, bit for bit (NaN payloads aside).")
    else:
        kinds = collections.Counter()
        for _, _, e in divergences:
            on_pass, off_pass = e["status"] == "pass", e["passes_off"]["status"] == "pass"
            if not e["status_divergence"]:
                kinds["values"] += 1
            elif on_pass and not off_pass:
                kinds["repaired"] += 1
            elif off_pass and not on_pass:
                kinds["broken"] += 1
            else:
                kinds["other"] += 1
        w(f"{n_div} cases differ ({len(divergences)} runs). The passes turn a pass into a "
          f"non-pass in {kinds['broken']}; the statuses agree but output values differ in "
          f"{kinds['values']}; the case passes with the passes and is refused without them in "
          f"{kinds['repaired']}; other status differences (fail against error): {kinds['other']}.")
        w("")
        w("| case | form | passes on | passes off | passes that changed the graph |")
        w("|---|---|---|---|---|")
        for c, form, e in divergences:
            on = e["status"] + (f" ({short(e['detail'], 100)})" if e["detail"] else "")
            off = e["passes_off"]["status"] + (
                f" ({short(e['passes_off']['detail'], 100)})" if e["passes_off"]["detail"] else "")
            if not e["status_divergence"]:
                off += f"; {short(e['difference'], 100)}"
            w(f"| `{c['name']}` | {form} | {on} | {off} | {', '.join(e['passes_changed']) or '-'} |")
        w("")
        explain_divergences(w, divergences)
    w("")
    w("## Why cases do not pass, by cause")
    w("")
    keys = [c["key"] for c in CAUSES] + [UNEXPLAINED["key"]]
    titles = {c["key"]: c for c in CAUSES + [UNEXPLAINED]}
    for key in keys:
        group = by_cause.get(key)
        if not group:
            continue
        cause = titles[key]
        st = collections.Counter(c["status"] for c in group)
        w(f"### {cause['title']} ({len(group)}: " + ", ".join(f"{v} {k}" for k, v in sorted(st.items())) + ")")
        w("")
        w(cause["text"])
        w("")
        if key == "runtime-operand":
            rp = [c for c in group if c.get("as_initializers", {}).get("status") == "pass"]
            w(f"As initializers: {len(rp)} of {len(group)} pass; the others:")
            w("")
            for c in group:
                a = c.get("as_initializers")
                if a is None:
                    w(f"- `{c['name']}`: not rerun (no operand to move)")
                elif a["status"] != "pass":
                    why = cause_of({**a, "name": c["name"], "op_types": c["op_types"]})
                    w(f"- `{c['name']}`: {a['status']}: {short(a['detail'], 200)}. "
                      f"**{why['title']}**: {why['text']}")
            if len(rp) == len(group):
                w("- none.")
            w("")
            by_op = collections.defaultdict(list)
            for c in group:
                by_op[c["op"]].append(c)
            w("<details><summary>the cases, by operator</summary>")
            w("")
            for op, cs in sorted(by_op.items()):
                w(f"- {op} ({len(cs)}): {names(cs)}")
            w("")
            w("</details>")
        else:
            for c in group:
                w(f"- `{c['name']}`: {short(c['detail'], 200)}")
        w("")
    w("### Skipped (not run)")
    w("")
    sk = collections.defaultdict(list)
    for c in skipped:
        sk[skip_group(c)].append(c)
    for group, cs in sorted(sk.items(), key=lambda kv: -len(kv[1])):
        ops = collections.Counter(c["op"] for c in cs)
        w(f"- {skip_text(group)} ({len(cs)}): " + ", ".join(f"{op} {n}" for op, n in sorted(ops.items())))
    w("")
    w("## Per operator")
    w("")
    w("Rows are the operator under test; \"(expanded)\" rows are the onnx package's expansion of "
      "a function operator (outside the set, such as SwiGLU) into the set's operators. Causes "
      "are the headings above.")
    w("")
    w("| operator | cases | skipped | run | pass | fail | error | as initializers: pass | causes of non-passes |")
    w("|---|---|---|---|---|---|---|---|---|")
    per_op = collections.defaultdict(list)
    for c in cases:
        per_op[c["op"]].append(c)
    for op in sorted(per_op, key=lambda o: (o.replace(" (expanded)", ""), o)):
        cs = per_op[op]
        r = [c for c in cs if c["status"] != "skipped"]
        st = collections.Counter(c["status"] for c in r)
        retried_op = [c for c in r if "as_initializers" in c]
        rpass = sum(1 for c in retried_op if c["as_initializers"]["status"] == "pass")
        causes = collections.Counter(cause_of(c)["key"] for c in r if c["status"] != "pass")
        w(f"| {op} | {len(cs)} | {len(cs) - len(r)} | {len(r)} | {st['pass']} | {st['fail']} | "
          f"{st['error'] + st['panic']} | {f'{rpass} of {len(retried_op)}' if retried_op else ''} | "
          + ", ".join(f"{k} ({v})" for k, v in sorted(causes.items())) + " |")
    w("")
    w("## Outside the web build's set")
    w("")
    ops_out = collections.Counter(o for c in outside for o in c["outside"])
    w(f"{len(outside)} cases use at least one operator the web build does not carry (native "
      "genloom may run some of them; this run does not try). The operators, with the number of "
      "cases using each: " + ", ".join(f"{o} {n}" for o, n in sorted(ops_out.items())) + ".")
    w("")
    text = "\n".join(lines)
    tmp = out.with_suffix(".md.tmp")
    tmp.write_text(text)
    tmp.replace(out)
    print(f"table.py: {len(run)} run ({status['pass']} pass), {n_div} divergences -> {out}")


def explain_divergences(w, divergences):
    """What each kind of divergence found so far is; a new kind is listed as unexplained."""
    matmul = [c for c, _, e in divergences if "a_rank > 1 || b_rank > 1" in (e["passes_off"]["detail"] or "")]
    resize = [c for c, _, e in divergences if "nearest_mode is `round_prefer_floor`" in (e["passes_off"]["detail"] or "")
              and e["status"] == "pass" and "resize-modes" in e["passes_changed"]]
    known = {c["name"] for c in matmul + resize}
    if matmul:
        w(f"- {names(matmul)}: the `matmul-vectors` pass writes a MatMul of two 1-D operands with "
          "matrices, numpy.matmul's semantics (a 0-d result, as the test expects). Without it "
          "tract refuses the graph (`a_rank > 1 || b_rank > 1`). The pass doing what it is for; "
          "the outputs with passes on match the reference.")
    if resize:
        w(f"- {len(resize)} Resize cases (linear and cubic, as initializers): the `resize-modes` "
          "pass writes the unused `nearest_mode = floor` into Resize nodes that do not "
          "interpolate by nearest neighbour. Without it genloom's attribute rule refuses the ONNX "
          "default `round_prefer_floor` (mirroring tract's parser, which would refuse it too). "
          "The pass doing what it is for; with passes on the outputs match the reference.")
    other = [(c, f, e) for c, f, e in divergences if c["name"] not in known]
    for c, form, e in other:
        w(f"- `{c['name']}` ({form}): not yet explained: {short(e['difference'], 300)}")


if __name__ == "__main__":
    main()
