#!/usr/bin/env bash
# The Python package tests (bindings/python): builds and installs the package with pip (maturin,
# the dev profile, sharing target/ with `cargo test --workspace`), builds the `genloom` command the
# tests compare with, installs pytest when missing, then runs pytest on bindings/python/tests.
# Run from anywhere: `bash scripts/test-python.sh [pytest arguments]`. Set GENLOOM_PY_REINSTALL=0
# to keep an installed package (skip pip install). Exits non-zero on any failure.
set -euo pipefail
cd "$(dirname "$0")/.."

PYTHON=${PYTHON:-python3}

if ! "$PYTHON" -c 'import pytest' 2>/dev/null; then
  "$PYTHON" -m pip install --quiet --root-user-action=ignore pytest
fi
if ! "$PYTHON" -c 'import numpy' 2>/dev/null; then
  "$PYTHON" -m pip install --quiet --root-user-action=ignore numpy
fi

# The command the tests compare with (fresh after `cargo test --workspace`).
cargo build --quiet --workspace --all-targets

if [[ ${GENLOOM_PY_REINSTALL:-1} != 0 ]] || ! "$PYTHON" -c 'import genloom._native' 2>/dev/null; then
  start=$(date +%s)
  # pip builds a local folder in place, so maturin's cargo uses the workspace's target/.
  "$PYTHON" -m pip install --quiet --root-user-action=ignore --force-reinstall --no-deps ./bindings/python
  echo "python package built and installed in $(($(date +%s) - start)) s"
fi

cd bindings/python/tests
"$PYTHON" -m pytest -q "$@"
