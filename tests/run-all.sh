#!/usr/bin/env bash
# Runs every icefield test: builds the release binary, runs `cargo test --workspace`,
# makes the project-local `.venv`, installs the kernel spec into it, then runs the
# Python protocol, CLI and notebook tests (pytest) against that installed kernel.
#   bash tests/run-all.sh [extra pytest arguments]
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$ROOT"
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$ROOT/target}"
VENV="${ICEFIELD_VENV:-$ROOT/.venv}"
export ICEFIELD_VENV="$VENV"

echo "== cargo build --release --workspace"
cargo build --release --workspace

# A failing Rust test does not hide the Python results: both run, and the script
# fails if either did.
echo "== cargo test --workspace"
rust_status=0
cargo test --workspace --no-fail-fast || rust_status=$?

echo "== python virtualenv"
bash "$ROOT/tests/ensure-venv.sh"

BIN="$CARGO_TARGET_DIR/release/icefield"
echo "== icefield install --sys-prefix (into $VENV)"
VIRTUAL_ENV="$VENV" "$BIN" install --sys-prefix

# The tests must use this build's kernel spec: the venv's Jupyter data folder is put
# first on the search path, and conftest.py checks the spec starts $ICEFIELD_BIN.
export ICEFIELD_BIN="$BIN"
export JUPYTER_PATH="$VENV/share/jupyter${JUPYTER_PATH:+:$JUPYTER_PATH}"
export JUPYTER_PLATFORM_DIRS=1
export VIRTUAL_ENV="$VENV"
export PATH="$VENV/bin:$PATH"

echo "== pytest tests/"
py_status=0
"$VENV/bin/python" -m pytest "$ROOT/tests" "$@" || py_status=$?
if [ "$py_status" -eq 5 ]; then
    echo "run-all: pytest collected no tests; that is a failure, not a pass" >&2
    py_status=1
fi
if [ "$rust_status" -ne 0 ]; then
    echo "run-all: cargo test failed (exit $rust_status)" >&2
fi
if [ "$py_status" -ne 0 ]; then
    echo "run-all: pytest failed (exit $py_status)" >&2
fi
if [ "$rust_status" -ne 0 ] || [ "$py_status" -ne 0 ]; then
    exit 1
fi
echo "run-all: all tests passed"
