"""Every demo notebook runs top to bottom on the installed icefield kernel, executed by
nbclient (the Jupyter project's notebook runner), and shows at least one SVG figure.
Every demo script runs headless with `icefield run --json`.
"""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

from helpers import KERNEL_NAME, REPO

DEMO = REPO / "notebooks-demo"
NOTEBOOKS = sorted(DEMO.glob("*.ipynb"))
SCRIPTS = sorted(DEMO.glob("*.ifld"))


def test_there_is_a_demo_notebook():
    # Not a skip: a missing demo must fail the run, not hide.
    assert NOTEBOOKS, f"no demo notebook (*.ipynb) in {DEMO}"


def _cells_of_script(script: Path) -> list[tuple[str, str]]:
    """The cells notebooks-demo/build_notebooks.py makes of a demo script."""
    import importlib.util

    spec = importlib.util.spec_from_file_location("build_notebooks", DEMO / "build_notebooks.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.cells_of(script.read_text(encoding="utf-8"))


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.name for p in NOTEBOOKS])
def test_notebook_matches_its_script(path: Path):
    # The script is the single source of a demo: a notebook edited by hand, or a script
    # changed without rebuilding the notebook, would show readers something else.
    script = path.with_suffix(".ifld")
    assert script.exists(), f"{path.name} has no script {script.name} beside it"
    notebook = nbformat.read(path, as_version=4)
    stored = [(cell.cell_type, cell.source) for cell in notebook.cells]
    assert stored == _cells_of_script(script), (
        f"{path.name} differs from {script.name}: run python notebooks-demo/build_notebooks.py"
    )


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.name for p in NOTEBOOKS])
def test_notebook_runs_and_shows_a_figure(path: Path):
    notebook = nbformat.read(path, as_version=4)
    client = NotebookClient(
        notebook,
        kernel_name=KERNEL_NAME,
        timeout=1800,
        allow_errors=False,
        resources={"metadata": {"path": str(DEMO)}},
    )
    client.execute()  # raises CellExecutionError on the first failing cell

    outputs = [o for cell in notebook.cells if cell.cell_type == "code" for o in cell.get("outputs", [])]
    errors = [o for o in outputs if o.get("output_type") == "error"]
    assert not errors, errors
    figures = [o for o in outputs if "image/svg+xml" in o.get("data", {})]
    assert figures, f"{path.name}: no image/svg+xml output"
    for figure in figures:
        assert figure["data"]["image/svg+xml"].lstrip().startswith("<svg"), path.name


@pytest.mark.parametrize("path", SCRIPTS, ids=[p.name for p in SCRIPTS])
def test_demo_script_runs_headless(path: Path, icefield_bin: str, tmp_path: Path):
    result = subprocess.run(
        [icefield_bin, "run", str(path), "--json", "--out", str(tmp_path)],
        capture_output=True,
        text=True,
        timeout=1800,
    )
    assert result.returncode == 0, result.stderr
    records = [json.loads(line) for line in result.stdout.splitlines()]
    assert records, f"{path.name} printed no results"
