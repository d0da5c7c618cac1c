"""Command-line conventions and packaging files (issue 17, items 3 and 5).

Help texts keep every word, ``--version``, ``-q``/``-v``, a case read from stdin ('-'),
and the LICENSE / CITATION.cff / CHANGELOG.md files matching pyproject.toml.
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

import pytest
import typer
from typer.testing import CliRunner

from kinroots import __version__
from kinroots.cli import app

ROOT = Path(__file__).resolve().parent.parent
CASE = ROOT / "cases" / "argon_ion_acoustic.toml"
runner = CliRunner()


def _commands() -> dict[str, typer.core.TyperCommand]:
    return dict(typer.main.get_command(app).commands)  # type: ignore[attr-defined]


@pytest.mark.parametrize("name", sorted(_commands()))
def test_help_keeps_every_bracketed_word(name: str) -> None:
    """Each ``[table]`` named in a command's docstring is in its rendered help, and no
    help line is longer than the terminal width asked for (clean wrapping)."""
    command = _commands()[name]
    doc = command.help or ""
    res = runner.invoke(app, [name, "--help"], terminal_width=80)
    assert res.exit_code == 0
    words = re.findall(r"\[[a-z_]+\]", doc)
    for word in words:
        assert word in res.output, f"{name} --help lost {word}"
    assert max(len(line) for line in res.output.splitlines()) <= 80
    # Value placeholders are words, not Python types or NaN defaults.
    assert "list[" not in res.output and "nan" not in res.output.split()
    # Paragraphs are re-wrapped: a line never ends mid-sentence after one short word.
    body = re.split(r"\n(?:Arguments|Options):|Example:", res.output)[0]
    assert not any(0 < len(line.strip()) <= 12 and not line.strip().endswith(".")
                   and "Usage" not in line
                   for line in body.splitlines()[2:])


def test_some_help_has_bracketed_words() -> None:
    """The check above is not vacuous: sweep, threshold and launch name their tables."""
    for name, table in (("sweep", "[sweep]"), ("threshold", "[threshold]"),
                        ("launch", "[launch]")):
        res = runner.invoke(app, [name, "--help"], terminal_width=100)
        assert table in res.output


def test_version_option() -> None:
    res = runner.invoke(app, ["--version"])
    assert res.exit_code == 0
    assert res.output.strip() == f"kinroots {__version__}"


def test_case_from_stdin() -> None:
    text = CASE.read_text(encoding="utf-8")
    res = runner.invoke(app, ["check", "-"], input=text)
    assert res.exit_code == 0, res.output
    assert res.stdout.startswith("ok\n")
    assert "Argon discharge" in res.stdout


def test_bad_case_from_stdin_names_stdin() -> None:
    res = runner.invoke(app, ["check", "-"], input="title = \n")
    assert res.exit_code == 2
    assert "<stdin>: not valid TOML" in res.stderr
    assert "Traceback" not in res.output


def test_quiet_and_verbose() -> None:
    quiet = runner.invoke(app, ["-q", "check"])
    assert quiet.exit_code == 0 and quiet.stderr == ""
    normal = runner.invoke(app, ["check"])
    assert "embedded default case" in normal.stderr
    verbose = runner.invoke(app, ["-v", "check", str(CASE)])
    assert verbose.exit_code == 0 and "case: " in verbose.stderr
    both = runner.invoke(app, ["-q", "-v", "check"])
    assert both.exit_code == 2 and "expected at most one" in both.stderr


def test_packaging_files_match_pyproject() -> None:
    yaml = pytest.importorskip("yaml")
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    assert project["license"] == "MIT"
    assert (ROOT / "LICENSE").read_text().startswith("MIT License")
    cff = yaml.safe_load((ROOT / "CITATION.cff").read_text())
    assert cff["cff-version"] == "1.2.0"
    assert cff["version"] == project["version"] == __version__
    assert cff["license"] == "MIT" and cff["authors"] and cff["title"]
    assert "## [Unreleased]" in (ROOT / "CHANGELOG.md").read_text()


def test_results_on_stdout_diagnostics_on_stderr(tmp_path) -> None:
    res = runner.invoke(app, ["-q", "solve", "-o", str(tmp_path), "--no-plot"])
    assert res.exit_code == 0, res.output
    assert "fastest growing" in res.stdout and "least damped" in res.stdout
    assert "branches.csv" in res.stdout  # the files written are a result too
    assert res.stderr == ""  # -q: no progress, no notes
