"""``kinroots launch`` and ``kinroots scatter`` through typer's CliRunner."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from kinroots.cli import app

runner = CliRunner()
ROOT = Path(__file__).resolve().parent.parent
CASE = ROOT / "cases" / "lab_launched_ion_acoustic.toml"


def _rows(path: Path) -> list[dict[str, str]]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_launch_writes_table_summary_and_plot(tmp_path):
    res = runner.invoke(app, ["launch", str(CASE), "-o", str(tmp_path)])
    assert res.exit_code == 0, res.output
    rows = _rows(tmp_path / "launch.csv")
    assert rows and all(r["converged"] == "true" for r in rows)
    assert {"wavelength_m", "damping_length_cm", "handedness", "density_abs_Ar+"} <= set(rows[0])
    meta = json.loads((tmp_path / "launch.json").read_text())
    assert meta["failed_points"] == 0 and meta["k_box"] == [0.04, 2.0, -0.002, 0.012]
    # every frequency counted (issue 18.2), at the driving frequencies of the table
    assert meta["unverified_points"] == 0
    assert [c["freq_hz"] for c in meta["point_checks"]] == pytest.approx(
        [float(r["freq_hz"]) for r in rows], rel=1e-12)
    assert all(c["count"] == c["rows"] for c in meta["point_checks"])
    assert (tmp_path / "launch.png").read_bytes()[:4] == b"\x89PNG"
    assert not list(tmp_path.glob(".*.tmp"))


def test_scatter_writes_spectrum(tmp_path):
    res = runner.invoke(app, ["scatter", str(CASE), "--laser-wavelength", "10.6e-6",
                              "--angle", "1", "--points", "801", "-o", str(tmp_path)])
    assert res.exit_code == 0, res.output
    rows = _rows(tmp_path / "spectrum.csv")
    assert len(rows) > 700 and "alpha" in rows[0]
    meta = json.loads((tmp_path / "spectrum.json").read_text())
    assert 1.0 < meta["alpha_bragg"] < 3.0
    assert (tmp_path / "spectrum.png").stat().st_size > 1000


def test_bad_inputs_exit_2_without_traceback(tmp_path):
    text = CASE.read_text()
    no_launch = tmp_path / "no_launch.toml"
    no_launch.write_text(text.split("[launch]")[0])
    res = runner.invoke(app, ["launch", str(no_launch), "-o", str(tmp_path / "o")])
    assert res.exit_code == 2 and "launch" in res.output and "Traceback" not in res.output
    assert not (tmp_path / "o").exists()
    bad_nu = tmp_path / "bad_nu.toml"
    bad_nu.write_text(text.replace("collision_frequency = 0.0", "collision_frequency = -3.0"))
    res = runner.invoke(app, ["launch", str(bad_nu), "-o", str(tmp_path / "o")])
    assert res.exit_code == 2 and "species[1].collision_frequency" in res.output
    assert "-3.0" in res.output
    bad_f = tmp_path / "bad_f.toml"
    bad_f.write_text(text.replace("start = 0.5e6, stop = 6.0e6", "start = 6.0e6, stop = 0.5e6"))
    res = runner.invoke(app, ["launch", str(bad_f), "-o", str(tmp_path / "o")])
    assert res.exit_code == 2 and "launch.frequency" in res.output
    res = runner.invoke(app, ["scatter", str(CASE), "--angle", "0", "-o", str(tmp_path / "o")])
    assert res.exit_code == 2 and "--angle" in res.output and "Traceback" not in res.output
    coll = tmp_path / "coll.toml"
    coll.write_text(text.replace("collision_frequency = 0.0", "collision_frequency = 1e6"))
    res = runner.invoke(app, ["scatter", str(coll), "-o", str(tmp_path / "o")])
    assert res.exit_code == 2 and "collision_frequency" in res.output
    assert not (tmp_path / "o").exists()


def test_roots_table_carries_mode_identity(tmp_path):
    res = runner.invoke(app, ["roots", str(CASE), "--at", "0.3", "-o", str(tmp_path)])
    assert res.exit_code == 0, res.output
    rows = _rows(tmp_path / "roots.csv")
    assert rows[0]["electrostatic_fraction"] == "1.0"
    assert rows[0]["db_c_over_de"] == "0.0"
    assert float(rows[0]["density_abs_e"]) > 0.9


@pytest.mark.parametrize("wavelength", ["1e-300", "1e300", "10"])
def test_scatter_refuses_probes_outside_the_model(tmp_path, wavelength):
    # 1e-300 m overflowed (internal error) and 1e300 m / 10 m wrote NaN or a clipped
    # spectrum: the probe does not propagate in this plasma
    out = tmp_path / "o"
    res = runner.invoke(app, ["scatter", str(CASE), "--laser-wavelength", wavelength,
                              "-o", str(out)])
    assert res.exit_code == 2, res.output
    assert "--laser-wavelength" in res.output and "expected" in res.output
    assert "Traceback" not in res.output and not out.exists()
