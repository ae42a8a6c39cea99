#!/usr/bin/env bash
# The operator conformance run in one command: writes the onnx package's node test cases of
# the web build's operators (tests/conformance/write_cases.py), runs them through genloom's
# passes and tract, with and without the passes (the `conformance` example of genloom-tests,
# dev profile), and writes docs/conformance.md (tests/conformance/table.py).
#
# Usage: bash tests/conformance/run.sh [FOLDER]   (FOLDER defaults to target/conformance-cases)
# GENLOOM_CONFORMANCE_PAGE sets where the table goes (default docs/conformance.md; the test
# command writes it under target/ so that a run never edits the repository). The run fails when
# a case panics, or when the passes make a case worse (pass without them, not with them, or
# other values): either is a genloom bug.
set -euo pipefail
cd "$(dirname "$0")/../.."
folder="${1:-target/conformance-cases}"
python="${PYTHON:-python3}"
start=$(date +%s)
"$python" tests/conformance/write_cases.py "$folder"
# Built with the whole workspace selected, so its dependencies resolve the same features as
# `cargo test --workspace --all-targets` and that build of tract is reused (with `-p` alone,
# cargo unifies features over fewer packages and compiles tract again).
cargo build --workspace --examples
target/debug/examples/conformance "$folder" target/conformance-results.json
end=$(date +%s)
page="${GENLOOM_CONFORMANCE_PAGE:-docs/conformance.md}"
"$python" tests/conformance/table.py target/conformance-results.json "$page" \
    --wall-seconds "$((end - start))"
echo "conformance: $((end - start)) s for the cases and the run; see $page"
"$python" - target/conformance-results.json <<'PY'
import json, sys
cases = [c for c in json.load(open(sys.argv[1]))["cases"] if c["status"] != "skipped"]
panics = [c["name"] for c in cases if c["status"] == "panic" or c["passes_off"]["status"] == "panic"]
worse = [c["name"] for c in cases
         if (c["passes_off"]["status"] == "pass" and c["status"] != "pass")
         or (c["status"] == "pass" and c["passes_off"]["status"] == "pass" and c["differs"])]
print(f"conformance gate: {len(cases)} cases, {sum(c['status'] == 'pass' for c in cases)} pass; "
      f"{len(panics)} panic, {len(worse)} made worse by the passes")
if panics or worse:
    print("panics:", panics, "\nmade worse by the passes:", worse)
    sys.exit(1)
PY
