"""kinroots sweep / threshold: files, bad input (exit 2), resume after SIGKILL."""

from __future__ import annotations

import csv
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
import xarray as xr
from typer.testing import CliRunner

from kinroots.cli import app

runner = CliRunner()
CASE = Path("cases/sweep_proton_anisotropy.toml")


def small_case_text(points_x: int = 2, points_y: int = 2, k_points: int = 3) -> str:
    text = CASE.read_text()
    text = text.replace("k = { start = 0.1, stop = 1.2, points = 8 }",
                        f"k = {{ start = 0.2, stop = 0.8, points = {k_points} }}")
    text = text.replace('start = 0.5, stop = 3.0, points = 6, spacing = "log"',
                        f'start = 1.0, stop = 2.0, points = {points_x}, spacing = "log"')
    text = text.replace("start = 1.2, stop = 2.4, points = 6",
                        f"start = 1.3, stop = 2.2, points = {points_y}")
    assert text.count(f"points = {points_x}") >= 1
    return text


def _rows(path: Path) -> list[dict[str, str]]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_bad_parameter_path_exit_2(tmp_path):
    f = tmp_path / "bad.toml"
    f.write_text(small_case_text().replace('"species.p.beta_par"', '"species.p.betapar"'))
    res = runner.invoke(app, ["sweep", str(f), "-o", str(tmp_path / "out")])
    assert res.exit_code == 2
    assert f"{f}: sweep.x.parameter: got 'species.p.betapar'" in res.output
    assert "did you mean 'species.p.beta_par'" in res.output
    assert "Traceback" not in res.output and not (tmp_path / "out").exists()


def test_value_out_of_range_exit_2(tmp_path):
    f = tmp_path / "bad.toml"
    f.write_text(small_case_text().replace("bracket = [1.05, 2.5]", "bracket = [-1.0, 2.5]"))
    res = runner.invoke(app, ["threshold", str(f), "-o", str(tmp_path / "out")])
    assert res.exit_code == 2
    assert "threshold.bracket: value -1.0 refused" in res.output
    assert "Traceback" not in res.output


def test_missing_sweep_table_exit_2(tmp_path):
    res = runner.invoke(app, ["sweep", "cases/space_protons_alphas.toml", "-o",
                              str(tmp_path / "o")])
    assert res.exit_code == 2 and "sweep: missing; expected a [sweep] table" in res.output


def test_sweep_writes_tables_netcdf_plot_and_refuses_changed_case(tmp_path):
    f = tmp_path / "c.toml"
    f.write_text(small_case_text(2, 1))
    out = tmp_path / "out"
    res = runner.invoke(app, ["sweep", str(f), "-o", str(out), "--workers", "1"])
    assert res.exit_code == 0, res.output
    rows = _rows(out / "sweep.csv")
    assert len(rows) == 2 and all(r["converged"] == "true" for r in rows)
    ds = xr.open_dataset(out / "sweep.nc", engine="scipy")
    assert ds["growth_max"].dims == ("species_p_beta_par", "species_p_anisotropy")
    assert ds["growth_per_s"].attrs["units"] == "1/s"
    assert float(ds["growth_max"][1, 0]) == float(rows[1]["growth_max"])
    ds.close()
    assert (out / "sweep.png").stat().st_size > 1000
    f.write_text(small_case_text(2, 1).replace("density = 1.0e6\ntemperature = 2.5",
                                               "density = 1.0e6\ntemperature = 3.0"))
    res = runner.invoke(app, ["sweep", str(f), "-o", str(out)])
    assert res.exit_code == 2 and "holds points of a different case" in res.output


@pytest.mark.slow
def test_resume_after_sigkill_gives_the_uninterrupted_rows(tmp_path):
    f = tmp_path / "c.toml"
    f.write_text(small_case_text(3, 4))  # 12 points: room to interrupt
    cmd = [sys.executable, "-m", "kinroots", "sweep", str(f), "--workers", "1", "-o"]
    # uninterrupted reference
    ref = subprocess.run(cmd + [str(tmp_path / "ref")], capture_output=True, timeout=600)
    assert ref.returncode == 0, ref.stderr.decode()
    # interrupted run: SIGKILL once at least two points are committed
    out = tmp_path / "cut"
    proc = subprocess.Popen(cmd + [str(out)], stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)
    db = out / "points.sqlite"
    deadline = time.time() + 300
    n = 0
    while time.time() < deadline and proc.poll() is None:
        time.sleep(0.05)
        if db.exists():
            try:
                n = sqlite3.connect(db).execute("SELECT COUNT(*) FROM points").fetchone()[0]
            except sqlite3.OperationalError:
                n = 0
            if n >= 2:
                break
    assert proc.poll() is None, "the run finished before it could be interrupted"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    assert 2 <= n < 12 and not (out / "sweep.csv").exists()
    res = subprocess.run(cmd + [str(out)], capture_output=True, timeout=600)
    assert res.returncode == 0, res.stderr.decode()
    assert "resuming" in res.stderr.decode()
    assert (out / "sweep.csv").read_text() == (tmp_path / "ref" / "sweep.csv").read_text()


def test_threshold_command_draws_curve(tmp_path):
    f = tmp_path / "c.toml"
    text = small_case_text(2, 2).replace("bracket = [1.05, 2.5]", "bracket = [1.1, 2.2]")
    text = text.replace("\n[threshold]\n", "\n[threshold]\nacross = { parameter = "
                        '"species.p.beta_par", start = 1.0, stop = 1.0, points = 1 }\n')
    f.write_text(text)
    out = tmp_path / "out"
    res = runner.invoke(app, ["threshold", str(f), "-o", str(out), "--workers", "1"])
    assert res.exit_code == 0, res.output
    rows = _rows(out / "threshold.csv")
    # Hellinger et al. (2006) proton-cyclotron fit, from memory: 1 + 0.43/(1.0004)^0.42
    assert float(rows[0]["threshold"]) == pytest.approx(1.4299, rel=0.02)
    assert (out / "threshold.png").exists()


def test_sweep_flags_and_warns_when_the_k_scan_ends_on_the_maximum(tmp_path):
    f = tmp_path / "c.toml"
    # T⊥/T∥ = 2 at β∥p = 1: proton-cyclotron growth peaks near k d_p ≈ 0.5 (from memory)
    f.write_text(small_case_text(1, 1).replace("start = 0.2, stop = 0.8, points = 3",
                                               "start = 0.1, stop = 0.3, points = 3")
                 .replace("start = 1.3, stop = 2.2", "start = 2.0, stop = 2.2"))
    out = tmp_path / "out"
    res = runner.invoke(app, ["sweep", str(f), "-o", str(out), "--workers", "1"])
    assert res.exit_code == 0, res.output
    row = _rows(out / "sweep.csv")[0]
    assert row["k_at_edge"] == "true" and row["angle_at_edge"] == "false"
    assert float(row["growth_k"]) == pytest.approx(0.3)
    text = " ".join(res.output.split())  # the console wraps long lines
    assert "warning" in text and "extend [scan] k" in text
    assert float(row["growth_handedness"]) < -0.9  # proton-cyclotron wave: left-handed


def test_sweep_and_threshold_tables_name_their_parameters(tmp_path):
    f = tmp_path / "c.toml"
    f.write_text(small_case_text(2, 1))
    out = tmp_path / "out"
    res = runner.invoke(app, ["sweep", str(f), "-o", str(out), "--workers", "1"])
    assert res.exit_code in (0, 1), res.output
    header = (out / "sweep.csv").read_text().splitlines()[0].split(",")
    assert header[:4] == ["i", "j", "species_p_beta_par", "species_p_anisotropy"]
    assert "x" not in header and "y" not in header
    rows = _rows(out / "sweep.csv")
    assert [float(r["species_p_beta_par"]) for r in rows] == pytest.approx([1.0, 2.0])
    assert [float(r["species_p_anisotropy"]) for r in rows] == pytest.approx([1.3, 1.3])


def test_scheduler_without_dask_names_the_extra(tmp_path, monkeypatch):
    """--scheduler without dask.distributed installed (issue 17.5): exit 2 and a message
    naming the extra, before any point is solved."""
    monkeypatch.setitem(sys.modules, "dask.distributed", None)  # import raises ImportError
    case = tmp_path / "c.toml"
    case.write_text(small_case_text())
    res = CliRunner().invoke(app, ["sweep", str(case), "-o", str(tmp_path / "o"),
                                   "--scheduler", "tcp://127.0.0.1:1", "--no-plot"])
    assert res.exit_code == 2, res.output
    assert "option --scheduler" in res.output and "kinroots[dask]" in res.output
    assert "Traceback" not in res.output
    assert not (tmp_path / "o" / "sweep.csv").exists()
