"""Output files: atomic writers respect the umask (issue 18 item 8)."""

from __future__ import annotations

import math
import os
import stat

import pytest

from kinroots.io.tables import atomic_write_bytes, write_csv, write_json


def test_written_files_follow_the_umask(tmp_path):
    old = os.umask(0o022)
    try:
        write_csv(tmp_path / "t.csv", [{"branch": 0, "k": 0.1}], columns=("branch", "k"))
        write_json(tmp_path / "s.json", {"a": 1})
        atomic_write_bytes(tmp_path / "f.png", b"x")
        os.umask(0o077)
        atomic_write_bytes(tmp_path / "private.bin", b"x")
    finally:
        os.umask(old)
    for name in ("t.csv", "s.json", "f.png"):
        assert stat.S_IMODE((tmp_path / name).stat().st_mode) == 0o644
    assert stat.S_IMODE((tmp_path / "private.bin").stat().st_mode) == 0o600


def test_every_table_column_has_its_unit_beside_it(tmp_path):
    import csv as _csv

    from typer.testing import CliRunner

    from kinroots.cli import app

    res = CliRunner().invoke(app, ["solve", "-o", str(tmp_path), "--no-plot"])
    assert res.exit_code == 0, res.output
    with open(tmp_path / "branches.csv", newline="") as fh:
        header = next(_csv.reader(fh))
    with open(tmp_path / "branches.units.csv", newline="") as fh:
        units = {r["column"]: r["unit"] for r in _csv.DictReader(fh)}
    assert list(units) == header
    # the default case: ω in ω_pe, k in 1/λ_De (its [units] table)
    assert units["omega_real"] == units["omega_imag"] == "omega_pe"
    assert units["k"] == "1/lambda_De"
    assert (units["k_per_m"], units["freq_hz"], units["gamma_per_s"]) == ("1/m", "Hz", "1/s")
    assert units["density_phase_deg_e"] == "degree" and units["residual"] == "1"


def test_column_units_of_study_and_lab_tables():
    from kinroots.io.tables import column_units
    from kinroots.physics.spectrum import SPECTRUM_COLUMNS
    from kinroots.study.launch import LAUNCH_COLUMNS
    from kinroots.study.sweep import THRESHOLD_COLUMNS

    u = dict(column_units(LAUNCH_COLUMNS, frequency="omega_pi", length="lambda_De"))
    assert (u["omega"], u["k_imag"], u["k_imag_per_m"], u["damping_length_m"],
            u["damping_length_cm"], u["phase_speed_m_per_s"]) == (
        "omega_pi", "1/lambda_De", "1/m", "m", "cm", "m/s")
    u = dict(column_units(SPECTRUM_COLUMNS, frequency="omega_pe", length="lambda_De"))
    assert (u["wavelength_shift_nm"], u["frequency_shift_hz"], u["spectral_density_s"],
            u["relative_power_per_nm"], u["alpha"]) == ("nm", "Hz", "s", "1/nm", "1")
    u = dict(column_units(THRESHOLD_COLUMNS, frequency="Omega_cp", length="d_p",
                          parameters={"threshold": "1", "across": "T"}))
    assert (u["across"], u["growth_level"], u["growth_k"], u["growth_angle"]) == (
        "T", "Omega_cp", "1/d_p", "degree")


@pytest.mark.parametrize("name", ["hydrogen_discharge", "whistler_anisotropy_solar_wind"])
def test_relative_error_is_the_error_and_comparable_between_models(name):
    # ES D is O(1) near its roots; the scaled EM determinant is not (residuals 1e-16 vs
    # ~1e7): relative_error = |Newton correction at the value| / |ω| means the same in
    # both.  Independent check: the root polished further (rtol 1e-15) moves by no
    # more than a few times the estimate (or rounding).
    from pathlib import Path

    from kinroots import load_case
    from kinroots.roots import polish
    from kinroots.study.problem import function_at, survey
    from kinroots.study.rows import survey_rows

    case = load_case(Path(__file__).resolve().parent.parent / "cases" / f"{name}.toml")
    k = float(case.k_values[len(case.k_values) // 2])
    s = survey(case, k)
    rows = [r for r in survey_rows(case, k, s) if r["converged"]]
    assert rows
    for r in rows:
        w = complex(r["omega_real"], r["omega_imag"])
        assert 0 <= r["relative_error"] <= 10 * case.solver.tolerance
        better = polish(function_at(case, k), w, rtol=1e-15).value
        assert abs(better - w) / abs(w) <= 10 * r["relative_error"] + 1e-13


def test_rounding_noise_is_marked_not_passed_off_as_data(tmp_path):
    # Langmuir wave at k λ_De = 0.1: the true damping, about −1.5e-9 s⁻¹ (mpmath, issue
    # 18), is 1e-18 ω_pe, far below what a root known to 1e-10 resolves: the row and
    # summary.json say so.  A purely growing Weibel root's ω_r is rounding noise.
    import csv as _csv
    import json

    from typer.testing import CliRunner

    from kinroots.cli import app
    from kinroots.study.rows import below_resolution

    res = CliRunner().invoke(app, ["solve", "-o", str(tmp_path / "d"), "--no-plot"],
                             terminal_width=200)
    assert res.exit_code == 0, res.output
    with open(tmp_path / "d" / "branches.csv", newline="") as fh:
        first = next(_csv.DictReader(fh))
    assert float(first["k"]) == pytest.approx(0.1) and first["below_resolution"] == "imag"
    least = json.loads((tmp_path / "d" / "summary.json").read_text())["least_damped"]
    assert least["below_resolution"] == "imag" and least["gamma_resolution_per_s"] > 0
    # the unresolved damping is not written as a number in the summary: 0 and empty
    assert least["omega_imag"] == 0.0 and least["gamma_per_s"] is None
    assert "below resolution" in least["unresolved"] and least["omega_real"] > 1.0
    assert below_resolution(complex(-5.12e-204, 0.0913), 1e-13, 1e-10) == "real"
    assert below_resolution(complex(1.0, -0.02), 1e-13, 1e-10) == ""
    res = CliRunner().invoke(app, ["solve", "cases/weibel_hot_electrons.toml", "-o",
                                   str(tmp_path / "w"), "--no-plot"], terminal_width=200)
    assert res.exit_code == 0, res.output
    assert "purely growing" in res.output and "e-2" not in res.output.split("fastest")[1][:80]
    with open(tmp_path / "w" / "branches.csv", newline="") as fh:
        rows = list(_csv.DictReader(fh))
    assert rows and all(r["below_resolution"] == "real" for r in rows)
    top = json.loads((tmp_path / "w" / "summary.json").read_text())["fastest_growing"]
    assert top["omega_real"] == 0.0 and top["freq_hz"] is None and top["omega_imag"] > 0
    assert "purely growing" in top["unresolved"]


@pytest.mark.slow
def test_relative_residuals_of_the_example_cases_are_at_rounding():
    # The bound the README states: electromagnetic below 1e-11 (σ_min/σ_max of S), and
    # electrostatic below 1e-9 except next to a pole of D (k∥ = 0 harmonics), where D is
    # steep and relative_error, not the residual, says how accurate the root is.
    from pathlib import Path

    from kinroots import load_case
    from kinroots.study.problem import survey
    from kinroots.study.rows import survey_rows

    for path in sorted((Path(__file__).resolve().parent.parent / "cases").glob("*.toml")):
        case = load_case(path)
        near_poles = case.plasma.magnetized and case.angle_deg == 90.0
        bound = 1e-11 if case.model == "electromagnetic" else 1e-9
        for k in (case.k_values[0], case.k_values[-1]):
            for r in survey_rows(case, float(k), survey(case, float(k))):
                if not r["converged"]:
                    continue
                assert r["relative_residual"] is not None, (path.stem, k)
                if not near_poles:
                    assert r["relative_residual"] < bound, (path.stem, k, r)
                assert r["relative_error"] <= 10 * case.solver.tolerance, (path.stem, k)


def _row(branch, k, w, hand=-1.0):
    return {"branch": branch, "k": k, "omega_real": w.real, "omega_imag": w.imag,
            "converged": True, "handedness": hand, "electrostatic_fraction": 0.0,
            "magnetic_compressibility": 0.0}


def test_pieces_of_one_wave_across_a_gap_are_linked():
    # A constructed left-hand wave ω_r = k runs along the window's bottom edge
    # (Im ω ≥ −0.02), leaves it after k = 0.7 and re-enters at k = 1.0, where the tracer
    # sees a new branch (3): one wave.  A right-hand branch (1) that ends inside the
    # window, and a right-hand root entering near the edge (2), are waves of their own.
    from types import SimpleNamespace

    from kinroots.study.rows import link_waves, wave_name

    case = SimpleNamespace(search_real=(0.0, 2.0), search_imag=(-0.02, 0.4),
                           model="electromagnetic")
    rows = [_row(0, k, complex(k, -0.0199 + 0.0001 * (0.7 - k))) for k in (0.5, 0.6, 0.7)]
    rows += [_row(3, k, complex(k, -0.0199 + 0.001 * (k - 1.0))) for k in (1.0, 1.1, 1.2)]
    rows += [_row(1, k, complex(k + 0.5, 0.1), hand=1.0) for k in (0.5, 0.6, 0.7, 0.8)]
    rows += [_row(2, k, complex(k + 0.5, -0.0199), hand=1.0) for k in (1.0, 1.1)]
    waves = link_waves(case, rows)
    assert waves[0] == waves[3] == 0           # the left-hand pieces: one wave
    assert waves[1] == 1 and waves[2] == 2     # not an edge exit / wrong sense: their own
    assert wave_name(case, [r for r in rows if r["branch"] in (0, 3)]) == "left-hand"
    assert wave_name(case, [r for r in rows if r["branch"] == 1]) == "right-hand"


def test_wave_names_of_linear_and_purely_growing_transverse_modes():
    # Rule in rows.wave_name (README, Output): a transverse (electrostatic fraction < 0.1)
    # wave that does not rotate is "transverse, linear"; Re ω below resolution on every
    # row makes it "purely growing" (Weibel, filamentation) or "purely damped".
    from types import SimpleNamespace

    from kinroots.study.rows import wave_name

    em = SimpleNamespace(model="electromagnetic")
    lin = [_row(0, k, complex(1.0 + k, -0.01), hand=None) for k in (0.1, 0.2)]
    assert wave_name(em, lin) == "transverse, linear"
    grow = [dict(_row(0, k, complex(1e-30, 0.01 * k), hand=None), below_resolution="real")
            for k in (0.1, 0.2, 0.3)]
    assert wave_name(em, grow) == "purely growing, transverse, linear"
    damp = [dict(r, omega_imag=-r["omega_imag"], magnetic_compressibility=0.9) for r in grow]
    assert wave_name(em, damp) == "purely damped, compressive"
    mixed = grow[:2] + [dict(grow[2], below_resolution="")]
    assert wave_name(em, mixed) == "transverse, linear"
    es = SimpleNamespace(model="electrostatic")
    assert wave_name(es, lin) == "electrostatic"
    half = [dict(r, electrostatic_fraction=0.5) for r in lin]
    assert wave_name(em, half) == "unidentified"


@pytest.mark.slow
def test_the_left_hand_wave_of_the_space_case_is_one_wave():
    # Issue 18: in cases/space_protons_alphas.toml the left-hand wave is branch 0 for
    # k d_p 0.1–0.26 and branch 2 for 0.4–0.96 (it dips below the window in between).
    from pathlib import Path

    from kinroots import load_case
    from kinroots.study.rows import branch_rows
    from kinroots.study.solve import solve

    case = load_case(Path(__file__).resolve().parent.parent / "cases"
                     / "space_protons_alphas.toml")
    rows = branch_rows(solve(case))
    wave = {r["branch"]: (r["wave"], r["wave_name"]) for r in rows}
    assert wave[0] == wave[2] == (0, "left-hand")
    assert wave[1] == (1, "right-hand")


def test_electrostatic_waves_named_langmuir_and_ion_acoustic():
    # Rule in rows._electrostatic_name (README, Output). Rows built from the textbook
    # dispersion relations (Chen, Introduction to Plasma Physics and Controlled Fusion,
    # 3rd ed. 2016, ch. 4, chapter from memory): Bohm–Gross ω² = ω_pe² + 3k²v_th² (v_th² = T/m) and
    # the ion acoustic ω = k c_s / (1 + k²λ_De²)^½, c_s = (T_e/m_i)^½; plasma parameters
    # from scipy.constants, not from kinroots.
    from pathlib import Path

    from scipy import constants as sc

    from kinroots import load_case
    from kinroots.study.rows import wave_name

    root = Path(__file__).resolve().parent.parent
    case = load_case(root / "cases" / "hydrogen_discharge.toml")  # 1e16 m^-3, 2 / 0.2 eV
    n, te = 1e16, 2.0 * sc.e
    wpe = math.sqrt(n * sc.e**2 / (sc.epsilon_0 * sc.m_e))
    lde = math.sqrt(sc.epsilon_0 * te / (n * sc.e**2))
    cs = math.sqrt(te / sc.m_p)

    def rows(w_of_k):
        out = []
        for kl in (0.1, 0.2, 0.3):
            k = kl / lde
            out.append(dict(_row(0, kl, complex(w_of_k(k) / case.units.omega_unit, -1e-3)),
                            k_per_m=k))
        return out

    assert wave_name(case, rows(lambda k: math.sqrt(wpe**2 + 3 * k**2 * te / sc.m_e))) \
        == "Langmuir"
    assert wave_name(case, rows(lambda k: k * cs / math.sqrt(1 + (k * lde) ** 2))) \
        == "ion acoustic"
    # between the two (an electron acoustic wave would be here): no name claimed
    assert wave_name(case, rows(lambda k: 0.2 * wpe)) == "electrostatic"
