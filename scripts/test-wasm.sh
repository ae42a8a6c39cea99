#!/usr/bin/env bash
# Builds and tests the WebAssembly package (bindings/wasm), installing what is missing: the wasm32
# target and wasm-bindgen-cli (through build.sh), the npm tools (`npm ci`: playwright-core,
# binaryen), and Debian's chromium. Steps:
#   1. build.sh: the package for pages (pkg-web/) and for Node (pkg-node/), simd128, wasm-opt;
#   2. clippy of the crate for wasm32, all targets (bindings/wasm is its own workspace, outside
#      the root's clippy);
#   3. the crate's native unit tests, only with GENLOOM_WASM_NATIVE=1: this workspace resolves
#      other features than the root's, so a native build here compiles tract again (about 8
#      minutes on 2 cores); the Node tests check the same rules through the package;
#   4. native genloom writes what the JS tests expect (target/wasm-golden/golden.json), with
#      the root workspace's example `wasm-golden` (built by `cargo build --workspace
#      --all-targets`, which is fresh after the root's `cargo test --workspace --all-targets`);
#   5. Node's test runner: the package against native, errors, memory; the demo page in
#      Chromium (screenshots in target/wasm-screenshots/);
#   6. the size and speed figures (printed, not asserted).
# Ends with "wasm tests: N passed, M failed" and exits non-zero on any failure.
# GENLOOM_WASM_CLIPPY=0 skips step 2.
set -euo pipefail
cd "$(dirname "$0")/.."
root=$(pwd)
wasm=bindings/wasm
start=$(date +%s)
step() { printf '\n== %s (%ss)\n' "$*" "$(( $(date +%s) - start ))"; }
passed=0
failed=0

step "tools: node, npm packages, chromium"
if ! command -v node >/dev/null || ! command -v npm >/dev/null; then
  apt-get update && apt-get install -y nodejs npm
fi
node --version
if ! (cd "$wasm" && npm ls --depth=0 >/dev/null 2>&1); then
  (cd "$wasm" && npm ci --no-audit --no-fund)
else
  echo "  npm packages present"
fi
if [ ! -x /usr/bin/chromium ]; then
  apt-get update && apt-get install -y chromium
fi
/usr/bin/chromium --version 2>/dev/null | grep -v '^\s*$' || true

step "build the package (bindings/wasm/build.sh)"
bash "$wasm/build.sh"

# The crate is its own workspace: its cargo commands run from its folder (.cargo/config.toml
# there shares target/ and sets simd128 for wasm32).
if [ "${GENLOOM_WASM_CLIPPY:-1}" != "0" ]; then
  step "cargo clippy for wasm32, all targets (warnings are errors)"
  (cd "$wasm" && cargo clippy --all-targets --target wasm32-unknown-unknown --quiet -- -D warnings)
fi

if [ "${GENLOOM_WASM_NATIVE:-0}" = "1" ]; then
  step "the crate's native unit tests"
  log=$(mktemp)
  if (cd "$wasm" && cargo test --lib 2>&1) | tee "$log"; then :; else failed=$((failed + 1)); fi
  read -r p f < <(sed -n 's/^test result: .* \([0-9]*\) passed; \([0-9]*\) failed.*/\1 \2/p' "$log" | awk '{p+=$1; f+=$2} END {print p+0, f+0}')
  passed=$((passed + p))
  failed=$((failed + f))
  rm -f "$log"
fi

step "native expectations (target/wasm-golden/golden.json)"
golden="$root/target/wasm-golden/golden.json"
cargo build --workspace --all-targets --quiet
"$root/target/debug/examples/wasm-golden" "$golden"
export GENLOOM_WASM_GOLDEN=$golden

step "node --test: package vs native, errors, memory, the page in Chromium"
tap=$(mktemp)
set +e
(cd "$wasm" && node --test \
  --test-reporter=spec --test-reporter-destination=stdout \
  --test-reporter=tap --test-reporter-destination="$tap" \
  test/native.test.mjs test/errors.test.mjs test/memory.test.mjs test/browser.test.mjs)
node_rc=$?
set -e
p=$(sed -n 's/^# pass \([0-9]*\)$/\1/p' "$tap" | tail -1)
f=$(sed -n 's/^# fail \([0-9]*\)$/\1/p' "$tap" | tail -1)
c=$(sed -n 's/^# cancelled \([0-9]*\)$/\1/p' "$tap" | tail -1)
rm -f "$tap"
passed=$((passed + ${p:-0}))
failed=$((failed + ${f:-0} + ${c:-0}))
if [ "$node_rc" -ne 0 ] && [ "${f:-0}" -eq 0 ] && [ "${c:-0}" -eq 0 ]; then failed=$((failed + 1)); fi
echo "screenshots: target/wasm-screenshots/"

step "sizes and speed (measured, not asserted)"
(cd "$wasm" && node test/bench.mjs --budget-ms 400) || echo "  (the figures could not be measured)"

step "done"
echo "wasm tests: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
