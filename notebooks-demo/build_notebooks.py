#!/usr/bin/env python3
"""Build each demo notebook from its script, so the two never drift apart.

A demo script `NAME.ifld` is the single source. Lines that start with `##` are
prose: each run of them becomes one Markdown cell (the `##` and one space are
stripped). Every other run of lines becomes one code cell; blank lines at the
edges of a cell are dropped. The notebook `NAME.ipynb` (nbformat 4) is then
executed with nbclient against the installed `icefield` kernel and saved with
its outputs, so a reader sees the plots before running anything.

Usage: python notebooks-demo/build_notebooks.py [--no-execute] [SCRIPT.ifld ...]
"""

import pathlib
import sys

import nbformat
from nbclient import NotebookClient

HERE = pathlib.Path(__file__).resolve().parent


def cells_of(script_text):
    """Split a demo script into (kind, text) cells, kind in {"markdown", "code"}."""
    cells = []
    kind, lines = None, []

    def flush():
        body = "\n".join(lines).strip("\n")
        if body.strip():
            cells.append((kind, body))

    for line in script_text.splitlines():
        this = "markdown" if line.startswith("##") else "code"
        if this != kind:
            if kind is not None:
                flush()
            kind, lines = this, []
        lines.append(line[3:] if line.startswith("## ") else line[2:] if this == "markdown" else line)
    if kind is not None:
        flush()
    return cells


def notebook_of(script_path):
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "icefield", "display_name": "icefield (spin ice)", "language": "icefield"}
    nb.metadata["language_info"] = {"name": "icefield", "file_extension": ".ifld"}
    for kind, text in cells_of(script_path.read_text(encoding="utf-8")):
        if kind == "markdown":
            nb.cells.append(nbformat.v4.new_markdown_cell(text))
        else:
            nb.cells.append(nbformat.v4.new_code_cell(text))
    return nb


def main(argv):
    execute = "--no-execute" not in argv
    scripts = [pathlib.Path(a) for a in argv if not a.startswith("--")] or sorted(HERE.glob("*.ifld"))
    for script in scripts:
        nb = notebook_of(script)
        if execute:
            NotebookClient(nb, timeout=1200, kernel_name="icefield", resources={"metadata": {"path": str(script.parent)}}).execute()
        out = script.with_suffix(".ipynb")
        nbformat.validate(nb)
        nbformat.write(nb, out)
        print(f"wrote {out} ({len(nb.cells)} cells{', executed' if execute else ''})")


if __name__ == "__main__":
    main(sys.argv[1:])
