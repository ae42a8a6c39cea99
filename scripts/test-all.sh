#!/usr/bin/env bash
# Installs what the tests need (only what is missing) and runs every check of the workspace:
# formatting, lints, docs, the golden data's reproducibility, and all tests.
set -euo pipefail
cd "$(dirname "$0")/.."
PY=${GENLOOM_PYTHON:-python3}
export GENLOOM_PYTHON=$PY
start=$(date +%s)
step() { printf '\n== %s (%ss)\n' "$*" "$(( $(date +%s) - start ))"; }

step "Python packages for the outside references (tests/requirements.txt)"
if ! "$PY" - tests/requirements.txt <<'PYEOF'
import sys, importlib.metadata as md
ok = True
for line in open(sys.argv[1]):
    line = line.split("#")[0].strip()
    if not line:
        continue
    name, want = line.split("==")
    try:
        have = md.version(name)
    except md.PackageNotFoundError:
        have = None
    if have != want:
        print(f"  {name}: have {have}, want {want}")
        ok = False
sys.exit(0 if ok else 1)
PYEOF
then
  "$PY" -m pip install --quiet --disable-pip-version-check -r tests/requirements.txt
else
  echo "  all pinned versions present"
fi

step "Rust components"
for c in rustfmt clippy; do
  if ! cargo "${c/rustfmt/fmt}" --version >/dev/null 2>&1; then rustup component add "$c"; fi
done

step "cargo fmt --check"
cargo fmt --all --check

step "cargo clippy (all targets, warnings are errors)"
cargo clippy --workspace --all-targets --quiet -- -D warnings

step "cargo doc (warnings are errors)"
RUSTDOCFLAGS="-D warnings" cargo doc --workspace --no-deps --quiet

step "golden data regenerates byte for byte from the outside references"
"$PY" tests/golden/make_goldens.py --check
"$PY" tests/golden/defects/make_defects.py --check

step "verify.py self-test (NumPy and Pillow judges)"
"$PY" -m unittest discover -s tests/py -q

step "cargo test (unit, integration, CLI, doc tests)"
cargo test --workspace --all-targets
cargo test --workspace --doc

step "operator conformance: the onnx package's node cases through the passes and tract"
GENLOOM_CONFORMANCE_PAGE=target/conformance.md PYTHON="$PY" bash tests/conformance/run.sh

step "Python package: pip install ./bindings/python, then pytest (scripts/test-python.sh)"
PYTHON="$PY" bash scripts/test-python.sh

step "C ABI: C programs against the library, under valgrind and AddressSanitizer"
bash scripts/test-c.sh

step "WebAssembly package: Node tests and the demo page in Chromium (scripts/test-wasm.sh)"
bash scripts/test-wasm.sh

# Fuzzing, bounded: FUZZ_SECONDS per target (default here 45). Without a sanitizer, which
# halves the cold build; panics, hangs and memory blow-ups are still caught, and the C ABI's
# unsafe code is checked under valgrind and AddressSanitizer above (and Miri, by hand). By hand,
# `bash scripts/test-fuzz.sh` fuzzes with AddressSanitizer. GENLOOM_FUZZ=0 skips this step.
if [ "${GENLOOM_FUZZ:-1}" != "0" ]; then
  step "fuzz every target for ${FUZZ_SECONDS:-45} s (scripts/test-fuzz.sh)"
  if ! rustup toolchain list | grep -q '^nightly'; then
    rustup toolchain install nightly --profile minimal
  fi
  FUZZ_SECONDS=${FUZZ_SECONDS:-45} FUZZ_BUILD_FLAGS="${FUZZ_BUILD_FLAGS:---sanitizer none --debug-assertions}" \
    bash scripts/test-fuzz.sh
fi

step "done"
