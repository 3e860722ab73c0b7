#!/usr/bin/env bash
# Creates or updates the project-local virtualenv `.venv` (repository root) from
# tests/requirements.txt. Nothing is installed outside `.venv`.
#   ICEFIELD_VENV  another virtualenv folder (default: <repo>/.venv)
#   PYTHON         the interpreter that creates it (default: python3.11, else python3)
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
VENV="${ICEFIELD_VENV:-$ROOT/.venv}"
REQUIREMENTS="$ROOT/tests/requirements.txt"
CONSTRAINTS="$ROOT/tests/constraints.txt"

if [ ! -x "$VENV/bin/python" ]; then
    PYTHON="${PYTHON:-}"
    if [ -z "$PYTHON" ]; then
        for candidate in python3.11 python3; do
            if command -v "$candidate" >/dev/null 2>&1; then
                PYTHON="$candidate"
                break
            fi
        done
    fi
    if [ -z "$PYTHON" ]; then
        echo "ensure-venv: no python3.11 or python3 on PATH" >&2
        exit 1
    fi
    echo "ensure-venv: creating $VENV with $("$PYTHON" --version 2>&1)"
    "$PYTHON" -m venv "$VENV"
fi

# pip runs only when the pinned sets changed since the last successful install.
STAMP="$VENV/.icefield-requirements.sha256"
WANT="$(cat "$REQUIREMENTS" "$CONSTRAINTS" | sha256sum | cut -d' ' -f1)"
if [ "$(cat "$STAMP" 2>/dev/null || true)" != "$WANT" ]; then
    echo "ensure-venv: installing tests/requirements.txt into $VENV"
    "$VENV/bin/python" -m pip install --disable-pip-version-check --quiet -r "$REQUIREMENTS"
    echo "$WANT" >"$STAMP"
else
    echo "ensure-venv: $VENV is up to date"
fi
