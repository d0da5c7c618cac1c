"""The code base is ruff clean (configuration in pyproject.toml): checked in CI."""

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def test_ruff_clean():
    exe = shutil.which("ruff", path=str(Path(sys.executable).parent)) or shutil.which("ruff")
    if exe is None:
        pytest.fail("ruff is not installed: it is part of the test extra")
    res = subprocess.run(
        [exe, "check", "kinroots", "tests", "benchmarks", "docs"],
        cwd=ROOT, capture_output=True, text=True,
    )
    assert res.returncode == 0, res.stdout + res.stderr


@pytest.mark.slow
def test_mypy_clean(tmp_path):
    # Configuration in pyproject.toml ([tool.mypy]); the cache stays out of the tree.
    res = subprocess.run(
        [sys.executable, "-m", "mypy", "--cache-dir", str(tmp_path / "mypy-cache"), "kinroots"],
        cwd=ROOT, capture_output=True, text=True,
    )
    assert res.returncode == 0, res.stdout + res.stderr


@pytest.mark.parametrize("path", sorted((ROOT / "benchmarks").glob("bench_*.py")),
                         ids=lambda p: p.stem)
def test_benchmarks_import(path, monkeypatch):
    # `make bench` is not run in CI: at least every benchmark must still import (its
    # imports and module-level set-up), without running its main().  As a script, its
    # own folder is on sys.path.
    import runpy

    monkeypatch.syspath_prepend(str(path.parent))
    runpy.run_path(str(path), run_name="bench_import_check")
