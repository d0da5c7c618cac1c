"""Hostile and extreme input (issue 19): one clear message and exit 2, never a traceback.

Each test names the defect class it guards.  The limits themselves are documented in
`kinroots.io.limits` and the README; the tests check that the commands enforce them
before any computation.
"""

from __future__ import annotations

import json
import os
import tomllib
from pathlib import Path
from typing import Any

import pytest
from test_cli_check import toml_document  # sibling test module (rootdir import)
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.io.limits import MAX_CASE_BYTES, MAX_DEPTH

CASES = Path(__file__).resolve().parent.parent / "cases"
runner = CliRunner()


def base(name: str = "argon_ion_acoustic.toml") -> dict[str, Any]:
    return tomllib.loads((CASES / name).read_text(encoding="utf-8"))


def invoke(*args: str) -> Any:
    result = runner.invoke(app, list(args))
    text = result.stdout + result.stderr
    assert "Traceback" not in text, text
    assert result.exception is None or isinstance(result.exception, SystemExit), (
        repr(result.exception), text)
    return result


def check_refuses(tmp_path: Path, data: dict[str, Any], *needles: str) -> str:
    path = tmp_path / "case.toml"
    path.write_text(toml_document(data), encoding="utf-8")
    result = invoke("check", str(path))
    assert result.exit_code == 2, result.stdout + result.stderr
    errors = [ln for ln in result.stderr.splitlines() if ln.startswith("error: ")]
    assert errors, result.stderr
    for needle in needles:
        assert any(needle in e for e in errors), (needle, errors)
    return result.stderr


@pytest.mark.parametrize(("where", "value", "needle"), [
    (("species", 0, "temperature"), 1e-300, "species[1].temperature"),
    (("species", 0, "temperature"), 1e300, "species[1].temperature"),
    (("species", 1, "mass"), 1e-300, "species[2].mass"),
    (("species", 1, "mass"), 1e30, "species[2].mass"),
    (("species", 0, "charge"), 1e300, "species[1].charge"),
    (("species", 0, "density"), 1e-300, "species[1].density"),
    (("species", 0, "collision_frequency"), 1e300, "species[1].collision_frequency"),
    (("magnetic_field", "B"), 1e300, "magnetic_field.B"),
    (("magnetic_field", "B"), 1e-300, "magnetic_field.B"),
    (("scan", "k", "stop"), 1e300, "scan.k.stop"),
    (("scan", "k", "points"), 10**9, "scan.k.points"),
    (("scan", "k", "points"), 10**30, "scan.k.points"),
    (("search", "real"), [0.0, 1e300], "search.real"),
    (("solver", "tolerance"), 0.5, "solver.tolerance"),
    (("species", 1, "name"), "=cmd", "species[2].name"),
    (("species", 1, "name"), "a\nb", "species[2].name"),
    (("species", 1, "name"), "a\x00b", "species[2].name"),
    (("title",), "bell \x07 and escape \x1b[31m", "title"),
])
def test_extreme_values_refused_by_check(tmp_path: Path, where: tuple, value: Any,
                                         needle: str) -> None:
    data = base()
    node: Any = data
    for part in where[:-1]:
        node = node.setdefault(part, {}) if isinstance(part, str) else node[part]
    node[where[-1]] = value
    check_refuses(tmp_path, data, needle)


def test_electrons_faster_than_light_refused(tmp_path: Path) -> None:
    # w = sqrt(2T/m) >= c for T >= m c^2 / 2 = 255.5 keV (electron rest energy 511 keV,
    # CODATA): the non-relativistic model cannot describe them.
    data = base()
    data["species"][0]["temperature"] = 3e5
    check_refuses(tmp_path, data, "species[1].temperature", "non-relativistic")


def test_absurd_but_computable_values_warn(tmp_path: Path) -> None:
    data = base("ion_bernstein_perpendicular.toml")
    data["magnetic_field"]["B"] = 1e6
    path = tmp_path / "case.toml"
    path.write_text(toml_document(data), encoding="utf-8")
    result = invoke("check", str(path))
    assert result.exit_code == 0
    assert "magnetic_field.B = 1e+06 T is outside the usual range" in result.stderr


def test_non_regular_and_oversized_files_refused(tmp_path: Path) -> None:
    assert "not a regular file" in invoke("check", "/dev/zero").stderr
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    result = invoke("check", str(fifo))  # would block forever if opened
    assert result.exit_code == 2 and "not a regular file" in result.stderr
    big = tmp_path / "big.toml"
    big.write_bytes(b"#" * (MAX_CASE_BYTES + 1))
    result = invoke("check", str(big))
    assert result.exit_code == 2 and str(MAX_CASE_BYTES) in result.stderr


def test_huge_integer_and_deep_nesting_refused(tmp_path: Path) -> None:
    path = tmp_path / "case.toml"
    path.write_text(f"title = 'x'\nn = {'9' * 5000}\n", encoding="utf-8")
    result = invoke("check", str(path))
    assert result.exit_code == 2 and "not usable TOML" in result.stderr
    for depth in (MAX_DEPTH + 2, 5000):
        path.write_text("title = 'x'\nn = " + "[" * depth + "]" * depth + "\n")
        result = invoke("check", str(path))
        assert result.exit_code == 2 and "nested" in result.stderr


@pytest.mark.parametrize(("axis", "needle"), [
    ({"parameter": "species.p.anisotropy", "start": -1.0, "stop": 2.0, "points": 3},
     "temperature_perp"),
    ({"parameter": "wave.angle", "start": 0.0, "stop": 270.0, "points": 3}, "wave.angle"),
    ({"parameter": "species.p.drift", "start": 0.0, "stop": 4e8, "points": 3}, "drift"),
    ({"parameter": "species.p.temperature", "start": 1.0, "stop": 1e9, "points": 3},
     "temperature"),
])
def test_check_refuses_sweeps_that_make_invalid_plasmas(tmp_path: Path, axis: dict,
                                                        needle: str) -> None:
    data = base("sweep_proton_anisotropy.toml")
    data["sweep"] = {"x": axis}
    data.pop("threshold")
    check_refuses(tmp_path, data, "sweep.x", needle)


def test_check_refuses_threshold_bracket_and_cyclotron_units_at_b_zero(tmp_path: Path) -> None:
    data = base("sweep_proton_anisotropy.toml")
    data["threshold"]["bracket"] = [-2.0, 3.0]
    check_refuses(tmp_path, data, "threshold.bracket")
    data = base("sweep_proton_anisotropy.toml")
    data["sweep"]["x"] = {"parameter": "magnetic_field.B", "start": 0.0, "stop": 1e-8,
                          "points": 3}
    check_refuses(tmp_path, data, "sweep.x", "magnetic_field.B")


def test_check_warns_about_quasi_neutrality_at_sweep_ends(tmp_path: Path) -> None:
    data = base("sweep_proton_anisotropy.toml")
    name = data["species"][-1]["name"]
    n = data["species"][-1]["density"]
    data["sweep"]["y"] = {"parameter": f"species.{name}.density", "start": n,
                          "stop": 2 * n, "points": 2}
    data.pop("threshold", None)
    path = tmp_path / "case.toml"
    path.write_text(toml_document(data), encoding="utf-8")
    result = invoke("check", str(path))
    assert result.exit_code == 0, result.stderr
    assert "not quasi-neutral" in result.stderr and "sweep.y" in result.stderr


def small_case(tmp_path: Path, **changes: Any) -> Path:
    """The argon case on three k points, with top-level changes (title, names)."""
    data = base()
    data["scan"]["k"]["points"] = 3
    for key, value in changes.items():
        if key == "name":
            data["species"][1]["name"] = value
            data["units"]["frequency"] = f"plasma:{value}"
        else:
            data[key] = value
    path = tmp_path / "case.toml"
    path.write_text(toml_document(data), encoding="utf-8")
    return path


def test_user_text_is_shown_literally(tmp_path: Path) -> None:
    """Rich markup and matplotlib mathtext in a title or name are data, not commands."""
    title = r"$\notacommand$ [bold]x[/italic] [/] [link=http://x]y[/link]"
    path = small_case(tmp_path, title=title, name="π$\\alpha$[/][bold]x[/italic]")
    result = invoke("plasma", str(path))
    assert result.exit_code == 0 and "[bold]x[/italic]" in result.stdout
    for cmd, out in (("solve", "branches.png"), ("roots", "map.png")):
        result = invoke(cmd, str(path), "-o", str(tmp_path / cmd))
        assert result.exit_code in (0, 1), result.stderr
        assert (tmp_path / cmd / out).stat().st_size > 0
    summary = json.loads((tmp_path / "solve" / "summary.json").read_text(encoding="utf-8"))
    assert summary["title"] == title
    header = (tmp_path / "solve" / "branches.csv").read_text(encoding="utf-8").splitlines()[0]
    assert "density_abs_π$\\alpha$[/][bold]x[/italic]" in header


def test_internal_error_exits_3_with_saved_traceback(monkeypatch: pytest.MonkeyPatch,
                                                     tmp_path: Path) -> None:
    import kinroots.study.solve as solve_module

    def broken(*args: Any, **kwargs: Any) -> None:
        raise ZeroDivisionError("planted")

    monkeypatch.setattr(solve_module, "solve", broken)
    result = invoke("solve", str(small_case(tmp_path)), "-o", str(tmp_path / "out"))
    assert result.exit_code == 3
    line = result.stderr.strip().splitlines()[-1]
    assert "internal error (ZeroDivisionError: planted)" in line
    log = Path(line.rsplit("traceback saved to ", 1)[1])
    try:
        assert "Traceback" in log.read_text(encoding="utf-8")
    finally:
        log.unlink()


def test_ctrl_c_exits_130(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    import kinroots.study.problem as problem_module

    def interrupted(*args: Any, **kwargs: Any) -> None:
        raise KeyboardInterrupt

    monkeypatch.setattr(problem_module, "survey", interrupted)
    result = invoke("roots", str(small_case(tmp_path)), "-o", str(tmp_path / "out"))
    assert result.exit_code == 130 and "interrupted" in result.stderr


def test_at_nan_and_unwritable_output_refused_before_work(tmp_path: Path) -> None:
    path = small_case(tmp_path)
    for at in ("nan", "inf", "1e300", "0"):
        result = invoke("roots", str(path), "--at", at, "-o", str(tmp_path / "out"))
        assert result.exit_code == 2 and "--at" in result.stderr
        assert not (tmp_path / "out").exists()
    for cmd in ("solve", "roots"):
        result = invoke(cmd, str(path), "-o", str(path / "inside-a-file"))
        assert result.exit_code == 2, (cmd, result.stderr)
        assert "output" in result.stderr


def test_output_set_is_replaced_whole_or_not_at_all(monkeypatch: pytest.MonkeyPatch,
                                                    tmp_path: Path) -> None:
    import hashlib

    import kinroots.plots.branches as branches_module

    path, out = small_case(tmp_path), tmp_path / "out"
    assert invoke("solve", str(path), "-o", str(out)).exit_code in (0, 1)
    manifest = json.loads((out / "solve-manifest.json").read_text(encoding="utf-8"))
    assert set(manifest["files"]) == {"branches.csv", "branches.units.csv", "summary.json",
                                      "branches.png"}
    for name, info in manifest["files"].items():
        assert hashlib.sha256((out / name).read_bytes()).hexdigest() == info["sha256"]
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    def broken(*args: Any, **kwargs: Any) -> None:
        raise OSError("disk full (planted)")

    monkeypatch.setattr(branches_module, "plot_branches", broken)
    result = invoke("solve", str(path), "-o", str(out))
    assert result.exit_code == 3
    Path(result.stderr.rsplit("traceback saved to ", 1)[1].strip()).unlink()
    visible = {p.name: p.read_bytes() for p in out.iterdir() if not p.name.startswith(".")}
    assert visible == before  # the previous run's set, untouched
    monkeypatch.undo()
    assert invoke("solve", str(path), "-o", str(out)).exit_code in (0, 1)
    assert not [p for p in out.iterdir() if p.name.startswith(".")]  # staged files gone
    new = json.loads((out / "solve-manifest.json").read_text(encoding="utf-8"))
    assert new["run_id"] != manifest["run_id"]


def test_ctrl_c_during_solve_keeps_the_points_done(monkeypatch: pytest.MonkeyPatch,
                                                   tmp_path: Path) -> None:
    import csv
    import signal

    import kinroots.study.solve as solve_module

    data = base()
    data["scan"]["k"]["points"] = 30
    data["solver"] = {"resurvey_every": 5}
    path = tmp_path / "case.toml"
    path.write_text(toml_document(data), encoding="utf-8")
    original = solve_module.solve

    def solve_with_ctrl_c(case: Any, *, progress: Any = None, **kwargs: Any) -> Any:
        def progress_then_ctrl_c(done: int, total: int) -> None:
            if done == 1:
                os.kill(os.getpid(), signal.SIGINT)  # the real signal, once
            progress(done, total)

        return original(case, progress=progress_then_ctrl_c, **kwargs)

    monkeypatch.setattr(solve_module, "solve", solve_with_ctrl_c)
    out = tmp_path / "out"
    result = invoke("solve", str(path), "-o", str(out))
    assert result.exit_code == 130, result.stderr
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["interrupted"] is True
    with open(out / "branches.csv", newline="", encoding="utf-8") as fh:
        ks = {float(r["k"]) for r in csv.DictReader(fh)}
    assert ks and max(ks) < data["scan"]["k"]["stop"]  # the points before Ctrl-C only
    assert len(summary["point_checks"]) == 6  # first k + one batch of 5


@pytest.mark.skipif(os.name != "posix", reason="flock")
def test_second_run_on_a_busy_folder_is_refused(tmp_path: Path) -> None:
    import fcntl

    out = tmp_path / "out"
    out.mkdir()
    fd = os.open(out, os.O_RDONLY)  # another run holds the folder
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        result = invoke("solve", str(small_case(tmp_path)), "-o", str(out))
        assert result.exit_code == 2 and "another kinroots run" in result.stderr
        assert not list(out.iterdir())
    finally:
        os.close(fd)
    result = invoke("solve", str(small_case(tmp_path)), "-o", str(out))
    assert result.exit_code in (0, 1)  # free again; and released after each run:
    assert invoke("solve", str(small_case(tmp_path)), "-o", str(out)).exit_code in (0, 1)
