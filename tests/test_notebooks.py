"""Every notebook in notebooks/ executes without error (nbclient, kernel "python3").

The notebooks are committed with their outputs stripped and use only the public API
(``import kinroots``); this test runs them from the repository root (they find the
``cases/`` folder from the working directory upwards, so they also run from notebooks/),
120 s per cell, and fails on the first cell that raises.  Each notebook is meant to run
in well under 60 s.
"""

from __future__ import annotations

import json
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
NOTEBOOKS_DIR = REPO / "notebooks"
NOTEBOOKS = sorted(NOTEBOOKS_DIR.glob("*.ipynb"))


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_is_committed_without_outputs(path):
    nb = json.loads(path.read_text(encoding="utf-8"))
    for cell in nb["cells"]:
        if cell["cell_type"] == "code":
            assert cell.get("outputs") == [], f"{path.name}: outputs not stripped"
            assert cell.get("execution_count") is None, f"{path.name}: execution count kept"


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_uses_only_the_public_api(path):
    nb = json.loads(path.read_text(encoding="utf-8"))
    code = "\n".join("".join(c["source"]) for c in nb["cells"] if c["cell_type"] == "code")
    assert "import kinroots" in code
    for bad in ("from kinroots.", "import kinroots.", "../"):
        assert bad not in code, f"{path.name}: {bad!r} (use the public names of kinroots)"


@pytest.mark.slow
@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_executes(path):
    import nbclient  # test extra: a missing package must fail, not skip
    import nbformat
    nb = nbformat.read(path, as_version=4)
    client = nbclient.NotebookClient(
        nb, timeout=120, kernel_name="python3", allow_errors=False,
        resources={"metadata": {"path": str(REPO)}},
    )
    start = time.perf_counter()
    client.execute()  # raises CellExecutionError if any cell raises
    elapsed = time.perf_counter() - start
    errors = [o for c in nb.cells for o in c.get("outputs", []) if o.get("output_type") == "error"]
    assert not errors
    print(f"{path.name}: {elapsed:.1f} s")
