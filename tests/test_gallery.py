"""The gallery notebooks: in step with their generator, small, and runnable from a fresh kernel.

Each notebook is executed top to bottom with nbclient in a new kernel (about 5 s each);
any cell error fails the test. Checks are internal-consistency checks (common practice,
no source).
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

GALLERY = Path(__file__).resolve().parent.parent / "gallery"
NOTEBOOKS = sorted(GALLERY.glob("*.ipynb"))
MAX_BYTES = 2 * 1024 * 1024


def _generator(monkeypatch):
    spec = importlib.util.spec_from_file_location("make_gallery", GALLERY / "make_gallery.py")
    module = importlib.util.module_from_spec(spec)
    monkeypatch.setitem(sys.modules, "make_gallery", module)  # dataclasses look their module up here
    spec.loader.exec_module(module)
    return module


def test_there_are_at_least_four_notebooks():
    assert len(NOTEBOOKS) >= 4


def test_notebooks_match_their_generator(monkeypatch):
    gen = _generator(monkeypatch)
    studies = {s.file_name: s for s in gen._studies()}
    assert sorted(studies) == [p.name for p in NOTEBOOKS]
    for path in NOTEBOOKS:
        saved = nbformat.read(str(path), as_version=4)
        built = gen.build_notebook(studies[path.name])
        assert [c.source for c in saved.cells] == [c.source for c in built.cells], path.name
        assert [c.cell_type for c in saved.cells] == [c.cell_type for c in built.cells], path.name


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_saved_notebook_is_small_executed_and_error_free(path):
    assert path.stat().st_size < MAX_BYTES
    nb = nbformat.read(str(path), as_version=4)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert all(c.execution_count is not None for c in code), "notebook saved without running"
    for cell in code:
        assert not any(o.output_type == "error" for o in cell.outputs)
    kinds = {k for c in code for o in c.outputs for k in o.get("data", {})}
    assert "image/png" in kinds and "text/html" in kinds  # plots and the 3D view were saved
    assert nb.cells[-1].cell_type == "markdown"
    assert "Model estimates" in nb.cells[-1].source
    assert "What to conclude" in nb.cells[-1].source


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_notebook_runs_from_a_fresh_kernel(path, tmp_path):
    nb = nbformat.read(str(path), as_version=4)
    for cell in nb.cells:
        if cell.cell_type == "code":
            cell.outputs = []
            cell.execution_count = None
    client = nbclient.NotebookClient(nb, timeout=120, kernel_name="python3", resources={"metadata": {"path": str(tmp_path)}})
    client.execute()  # raises CellExecutionError on the first failing cell
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs if o.output_type == "error"]
    assert not errors
