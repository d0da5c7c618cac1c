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
