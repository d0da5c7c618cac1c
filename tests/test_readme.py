"""Every example in the README runs as printed.

The README is the first thing a user copies from: each shell command in its plain code
blocks (lines starting with ``.venv/bin/kinroots``) runs here from the repository root, with
its output folders moved into a temporary directory, and must exit 0.  The case-file
example is the file ``cases/hydrogen_discharge.toml`` word for word, and that file is
checked and solved too (it is the embedded default case as a file).  The Python example
is run by ``tests/test_readme_python.py``.  A ``--scheduler tcp://...`` address is
replaced by the address of a local Dask cluster started for the test.
"""

from __future__ import annotations

import os
import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
README = ROOT / "README.md"
KINROOTS = Path(sys.executable).parent / "kinroots"

pytestmark = pytest.mark.slow


def _blocks(language: str) -> list[str]:
    """Fenced code blocks of the README whose info string is ``language`` ('' = none)."""
    blocks: list[str] = []
    current: list[str] | None = None
    info = ""
    for line in README.read_text(encoding="utf-8").splitlines():
        if line.startswith("```"):
            if current is None:
                current, info = [], line[3:].strip()
            else:
                if info == language:
                    blocks.append("\n".join(current) + "\n")
                current = None
        elif current is not None:
            current.append(line)
    return blocks


def _commands() -> list[str]:
    lines = []
    for block in _blocks(""):
        for line in block.splitlines():
            line = line.strip()
            if line.startswith(".venv/bin/kinroots "):
                lines.append(re.sub(r"\s+#.*$", "", line))
    return lines


def _env() -> dict[str, str]:
    return dict(os.environ, MPLBACKEND="Agg", COLUMNS="100")


def test_readme_lists_commands():
    commands = _commands()
    # The README documents every command of the tool; each must appear in an example.
    used = {shlex.split(c)[1] for c in commands}
    assert {"check", "plasma", "solve", "roots", "launch", "scatter", "sweep",
            "threshold"} <= used, used


def test_readme_case_example_is_a_shipped_case():
    blocks = _blocks("toml")
    assert blocks, "the README shows no case file"
    shipped = ROOT / "cases" / "hydrogen_discharge.toml"
    body = "\n".join(
        line for line in shipped.read_text(encoding="utf-8").splitlines()
        if not line.startswith("#")
    ).strip()
    assert blocks[0].strip() == body, (
        "the README's case example and cases/hydrogen_discharge.toml (without its leading "
        "comment lines) differ")


def test_readme_commands_run(tmp_path):
    from dask.distributed import LocalCluster

    commands = _commands()
    assert commands
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                      dashboard_address=None) as cluster:
        outputs: set[str] = set()  # folders written by earlier commands (-o)
        for line in commands:
            args = shlex.split(line)[1:]
            for i, a in enumerate(args):
                if i > 0 and args[i - 1] in ("-o", "--output"):
                    outputs.add(a)
                if a in outputs:  # written above, or read back (e.g. `report out`)
                    args[i] = str(tmp_path / a)
                if a.startswith("tcp://"):
                    args[i] = cluster.scheduler_address
            res = subprocess.run([str(KINROOTS), *args], cwd=ROOT, env=_env(),
                                 capture_output=True, text=True, timeout=600)
            assert res.returncode == 0, f"{line}\nexit {res.returncode}\n{res.stdout}\n{res.stderr}"


def test_make_run_command(tmp_path):
    # `make run` is `kinroots solve --default -o kinroots-out` (Makefile)
    makefile = (ROOT / "Makefile").read_text(encoding="utf-8")
    m = re.search(r"^run:.*\n\t\$\(VENV\)/bin/kinroots (.*) -o \$\(OUT\)$", makefile, re.M)
    assert m, "the Makefile's run target changed: update this test"
    res = subprocess.run([str(KINROOTS), *shlex.split(m.group(1)), "-o", str(tmp_path / "o")],
                         cwd=ROOT, env=_env(), capture_output=True, text=True, timeout=600)
    assert res.returncode == 0, res.stdout + res.stderr
    assert (tmp_path / "o" / "branches.csv").is_file()


def test_readme_case_is_the_default_case():
    from kinroots import load_case
    from kinroots.io.case import default_case_path

    shipped = load_case(ROOT / "cases" / "hydrogen_discharge.toml")
    default = load_case(default_case_path())
    assert shipped.plasma == default.plasma
    assert list(shipped.k_values) == list(default.k_values)
    assert (shipped.search_real, shipped.search_imag) == (default.search_real, default.search_imag)


def test_readme_threshold_example_needs_no_sweep():
    import tomllib

    from kinroots.io.case import parse_case

    (block,) = [b for b in _blocks("toml") if "[threshold]" in b]
    raw = tomllib.loads((ROOT / "cases" / "sweep_proton_anisotropy.toml").read_text())
    raw.pop("sweep")
    raw["threshold"] = tomllib.loads(block)["threshold"]
    case = parse_case(raw, "README threshold example")
    assert case.sweep is None
    assert case.threshold.across.path.text == "species.p.beta_par"
    assert case.threshold.across.points == 6
