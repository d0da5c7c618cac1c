"""``kinroots solve`` and ``kinroots roots`` through typer's CliRunner."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.roots import RootResult, Status
from kinroots.study.solve import solve

runner = CliRunner()


def _read_csv(path: Path) -> list[dict[str, str]]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_solve_default_case_writes_three_files(tmp_path):
    out = tmp_path / "run"
    res = runner.invoke(app, ["solve", "-o", str(out)])
    assert res.exit_code == 0, res.output
    rows = _read_csv(out / "branches.csv")
    assert rows and list(rows[0])[:9] == [
        "branch", "k", "omega_real", "omega_imag", "k_per_m", "freq_hz", "gamma_per_s",
        "residual", "converged",
    ]
    assert all(r["converged"] == "true" for r in rows)
    # full double precision: the text round-trips to the same float
    for r in rows[:5]:
        assert repr(float(r["omega_real"])) == r["omega_real"]
    summary = json.loads((out / "summary.json").read_text())
    assert summary["units"]["omega"] == "omega_pe"
    assert summary["least_damped"]["branch"] == 0
    assert summary["branches"][0]["end_reason"] in {"end of scan", "left the window"}
    assert "exp(i k.x - i omega t)" in json.dumps(summary["conventions"]) or summary[
        "conventions"]
    png = (out / "branches.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(out.glob(".*.tmp"))  # atomic writes leave no temporaries


def test_roots_at_one_k(tmp_path):
    res = runner.invoke(app, ["roots", "--at", "0.5", "-o", str(tmp_path)])
    assert res.exit_code == 0, res.output
    rows = _read_csv(tmp_path / "roots.csv")
    assert len(rows) == 1
    w = complex(float(rows[0]["omega_real"]), float(rows[0]["omega_imag"]))
    # default case has mobile hydrogen ions: close to, not equal to, the fixed-ion value
    assert abs(w - (1.4157 - 0.1533j)) < 2e-3
    assert rows[0]["verified"] == "true"
    assert (tmp_path / "map.png").read_bytes()[:4] == b"\x89PNG"
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["complete"] is True and summary["count"] == 1


@pytest.mark.parametrize(
    "args, needle",
    [
        (["solve", "no/such/case.toml"], "no/such/case.toml"),
        (["roots", "--at", "-1"], "--at"),
        (["roots", "--at", "inf"], "--at"),
    ],
)
def test_bad_input_exit_2_one_message_no_traceback(tmp_path, args, needle):
    res = runner.invoke(app, [*args, "-o", str(tmp_path / "o")])
    assert res.exit_code == 2
    assert "Traceback" not in res.output
    assert needle in res.output
    assert not (tmp_path / "o").exists()  # nothing half-written


def test_output_path_that_is_a_file_is_bad_input(tmp_path):
    target = tmp_path / "afile"
    target.write_text("x")
    res = runner.invoke(app, ["solve", "-o", str(target)])
    assert res.exit_code == 2
    assert "Traceback" not in res.output and "file" in res.output.lower()
    assert target.read_text() == "x"


def test_failed_point_exit_1_and_flagged_with_empty_values(tmp_path, monkeypatch):
    real_solve = solve

    def solve_with_a_failure(case, *, progress=None, **kwargs):
        sol = real_solve(case, progress=progress, **kwargs)
        b = sol.branches[0]
        k_fail = sorted(b.points)[3]
        b.points[k_fail] = RootResult(
            value=complex(1.2, -0.01), converged=False, status=Status.MAX_ITER,
            reason="injected: Newton did not converge", residual=0.5, step=0.1,
            iterations=12, evaluations=12, verified=False, multiplicity=1, method="trace",
        )
        return sol

    import kinroots.study.solve as solve_module

    monkeypatch.setattr(solve_module, "solve", solve_with_a_failure)
    res = runner.invoke(app, ["solve", "-o", str(tmp_path)])
    assert res.exit_code == 1, res.output
    assert "failed" in res.output
    rows = _read_csv(tmp_path / "branches.csv")
    bad = [r for r in rows if r["converged"] == "false"]
    assert len(bad) == 1
    for col in ("omega_real", "omega_imag", "freq_hz", "gamma_per_s", "residual"):
        assert bad[0][col] == ""
    assert bad[0]["reason"].startswith("injected")
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["failed_points"] == 1


def test_help_lists_commands_with_examples():
    res = runner.invoke(app, ["--help"])
    assert res.exit_code == 0
    for cmd in ("solve", "roots", "plasma", "check"):
        assert cmd in res.output
    for cmd in ("solve", "roots"):
        sub = runner.invoke(app, [cmd, "--help"])
        assert sub.exit_code == 0 and "Example" in sub.output


def test_roots_summary_reports_the_harmonics_used(tmp_path):
    # issue 14, item 8: summary.json must give the harmonics the evaluation keeps, known
    # before any evaluation (they depend on k only), not zeros
    import numpy as np

    from kinroots.io.case import load_case
    from kinroots.study.problem import dispersion_at

    cases = Path(__file__).resolve().parent.parent / "cases"
    case_path = cases / "ion_bernstein_perpendicular.toml"
    res = runner.invoke(app, ["roots", str(case_path), "--at", "1.0", "-o", str(tmp_path)])
    assert res.exit_code == 0 and res.exception is None, res.output
    reported = json.loads((tmp_path / "summary.json").read_text())["harmonics"]
    disp = dispersion_at(load_case(case_path), 1.0)
    disp(np.array([0.37 * disp.omega_ref + 0.01j * disp.omega_ref]))  # the builders' report
    assert reported == disp.harmonics
    assert all(n > 0 for n in reported.values())


def test_a_window_that_cannot_be_surveyed_says_so_once_and_plainly(tmp_path):
    # The hydrogen discharge with a window reaching Im ω = −ω_pe, where the ion Landau
    # term overflows double precision (issue 15): nothing can be found, and the run must
    # say why, once, in words (no Python None), with an exit code of 1.
    text = Path("cases/hydrogen_discharge.toml").read_text()
    text = (text.replace("real = [0.8, 3.0]", "real = [0.001, 3.0]")
            .replace("imag = [-0.4, 0.05]", "imag = [-1.0, 0.5]")
            .replace("points = 56", "points = 4"))
    case = tmp_path / "c.toml"
    case.write_text(text)
    res = CliRunner().invoke(app, ["solve", str(case), "-o", str(tmp_path / "o")],
                             terminal_width=200)
    assert res.exit_code == 1, res.output
    out = res.output
    assert "None" not in out
    assert out.count("survey incomplete at") == 1
    assert "branches.csv holds only its header" in out
    assert "4 of 4 k not verified" in out
    assert (tmp_path / "o" / "branches.csv").read_text().count("\n") == 1
    # the summary says so too, with the reason from the counts
    notes = json.loads((tmp_path / "o" / "summary.json").read_text())["notes"]
    assert notes[-1].startswith("no root found in the search window (k = ")


def test_runs_that_find_nothing_say_so(tmp_path):
    """Argon discharge, window wholly above the real axis (Im ω ≥ 0.01 ω_pi): a plasma of
    non-drifting isotropic Maxwellians has no growing root (C. S. Gardner, Phys. Fluids 6,
    839 (1963): monotonic distributions are stable), so the window holds none. solve,
    roots and launch (a k box beyond the ion acoustic wave's k) say so on the terminal and
    in the summary, once, exit 0 (issue 15.6)."""
    text = Path("cases/argon_ion_acoustic.toml").read_text()
    text = (text.replace("real = [0.005, 1.5]", "real = [0.5, 1.5]")
            .replace("imag = [-0.002, 0.1]", "imag = [0.01, 0.1]")
            .replace("points = 100", "points = 3").replace("stop = 2.0", "stop = 0.04"))
    case = tmp_path / "c.toml"
    case.write_text(text)
    for cmd, table, summary, words in (
        ("solve", "branches.csv", "summary.json",
         "no root in the search window (k = 0.02 to k = 0.04): the zero count on its "
         "boundary is 0 at every point"),
        ("roots", "roots.csv", "summary.json",
         "no root in the search window at k = 0.02: the zero count on its boundary is 0"),
    ):
        out = tmp_path / cmd
        res = CliRunner().invoke(app, [cmd, str(case), "-o", str(out)], terminal_width=300)
        assert res.exit_code == 0, res.output
        assert res.stdout.count(words) == 1, res.stdout
        assert "None" not in res.output
        assert json.loads((out / summary).read_text())["notes"][-1].startswith(words)
        assert (out / table).read_text().count("\n") == 1  # header only
    text = Path("cases/lab_launched_ion_acoustic.toml").read_text()
    text = (text.replace("k_real = [0.04, 2.0]", "k_real = [2.5, 3.0]")
            .replace("points = 12 }", "points = 3 }"))
    case.write_text(text)
    out = tmp_path / "launch"
    res = CliRunner().invoke(app, ["launch", str(case), "-o", str(out)], terminal_width=300)
    assert res.exit_code == 0, res.output
    words = "no wave in the k box (f = 500000 Hz to f = 6e+06 Hz): the zero count"
    assert res.stdout.count(words) == 1, res.stdout
    assert "flagged in the table" not in res.output
    assert json.loads((out / "launch.json").read_text())["notes"][-1].startswith(words)
