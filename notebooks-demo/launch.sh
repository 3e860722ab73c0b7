#!/usr/bin/env bash
# Sets up and runs the icefield demo.
#   bash notebooks-demo/launch.sh [JupyterLab options, e.g. --no-browser]
#       builds the release binary, makes the project-local `.venv` from
#       tests/requirements.txt, registers the icefield kernel in that venv only
#       (`icefield install --sys-prefix`) and starts JupyterLab on notebooks-demo/.
#   bash notebooks-demo/launch.sh --batch
#       instead runs every notebooks-demo/*.ifld headless with `icefield run`;
#       figures go to $ICEFIELD_DEMO_OUT (default: <target dir>/notebooks-demo).
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$ROOT"
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$ROOT/target}"
VENV="${ICEFIELD_VENV:-$ROOT/.venv}"
export ICEFIELD_VENV="$VENV"

batch=false
lab_args=()
for arg in "$@"; do
    if [ "$arg" = "--batch" ]; then
        batch=true
    else
        lab_args+=("$arg")
    fi
done

cargo build --release -p icefield-kernel
BIN="$CARGO_TARGET_DIR/release/icefield"

if "$batch"; then
    out="${ICEFIELD_DEMO_OUT:-$CARGO_TARGET_DIR/notebooks-demo}"
    shopt -s nullglob
    scripts=("$ROOT"/notebooks-demo/*.ifld)
    if [ "${#scripts[@]}" -eq 0 ]; then
        echo "launch: no notebooks-demo/*.ifld scripts to run" >&2
        exit 1
    fi
    failed=0
    for script in "${scripts[@]}"; do
        echo "== icefield run $script"
        "$BIN" run "$script" --out "$out" || { echo "launch: $script failed" >&2; failed=1; }
    done
    exit "$failed"
fi

bash "$ROOT/tests/ensure-venv.sh"
VIRTUAL_ENV="$VENV" "$BIN" install --sys-prefix
export JUPYTER_PATH="$VENV/share/jupyter${JUPYTER_PATH:+:$JUPYTER_PATH}"
export VIRTUAL_ENV="$VENV"
export PATH="$VENV/bin:$PATH"
# Stored figures are SVG, which JupyterLab shows only in trusted notebooks (otherwise
# it falls back to the text rendering). These are the project's own demo notebooks,
# so they are signed for this user.
shopt -s nullglob
notebooks=("$ROOT"/notebooks-demo/*.ipynb)
if [ "${#notebooks[@]}" -gt 0 ]; then
    "$VENV/bin/jupyter" trust "${notebooks[@]}"
fi
if [ "$(id -u)" -eq 0 ]; then
    # JupyterLab refuses to run as root unless told; CI and these machines are root.
    lab_args+=("--allow-root")
fi
exec "$VENV/bin/jupyter" lab --notebook-dir="$ROOT/notebooks-demo" "${lab_args[@]}"
