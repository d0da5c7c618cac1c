"""Launched waves (complex k at real ω): consistency with the temporal roots, tables."""

from __future__ import annotations

import math

import numpy as np
import pytest

from kinroots.io.case import load_case, parse_case
from kinroots.io.tables import rows_to_csv
from kinroots.roots import RootResult, Status, polish
from kinroots.study import launch
from kinroots.study.problem import SpatialFunction, function_at, spatial_roots

CASE = "cases/lab_launched_ion_acoustic.toml"


def _temporal(case, k: float, guess: complex) -> complex:
    r = polish(function_at(case, k), guess, rtol=1e-13)
    assert r.converged
    return r.value


def _spatial_vs_temporal(case, omega: float, k_guess: complex) -> None:
    r = polish(SpatialFunction(case, omega), k_guess, rtol=1e-13)
    assert r.converged
    kr = r.value.real
    w0 = _temporal(case, kr, omega + 0j)
    h = 1e-4 * kr
    vg = (_temporal(case, kr + h, w0).real - _temporal(case, kr - h, w0).real) / (2 * h)
    # weak damping: Im k ≈ −γ/v_g (Gaster's relation; common practice), corrections of
    # order (γ/ω)·(k v_g'/v_g) — well under 1 % here (γ/ω ~ 1e-3)
    assert r.value.imag == pytest.approx(-w0.imag / vg, rel=1e-2)
    assert abs(w0.real - omega) < 1e-2 * omega


def test_spatial_matches_temporal_collisionless():
    case = load_case(CASE)
    _spatial_vs_temporal(case, 0.4, 0.42 + 0.002j)


def test_spatial_matches_temporal_with_krook_collisions():
    raw = dict(load_case(CASE).raw)
    species = [dict(s) for s in raw["species"]]
    species[1]["collision_frequency"] = 0.002 * load_case(CASE).units.omega_unit
    raw["species"] = species
    case = parse_case(raw, "collisional")
    _spatial_vs_temporal(case, 0.4, 0.42 + 0.004j)


def test_launch_traces_the_ion_acoustic_wave():
    case = load_case(CASE)
    res = launch.launch(case)
    assert res.failed_points == 0 and len(res.branches) == 1
    rows = launch.launch_rows(res)
    assert len(rows) == len(case.launch.frequencies_hz)
    # the driving frequencies written as the case gives them (0.5e6, not 499999.9999999999)
    assert [r["freq_hz"] for r in rows] == list(case.launch.frequencies_hz)
    assert rows[0]["freq_hz"] == 0.5e6
    for r in rows:
        assert r["converged"]
        assert r["wavelength_m"] == pytest.approx(2 * math.pi / r["k_real_per_m"])
        assert r["phase_speed_m_per_s"] == pytest.approx(2 * math.pi * r["freq_hz"]
                                                         / r["k_real_per_m"])
        assert r["damping_length_cm"] == pytest.approx(100 / r["k_imag_per_m"])
        assert r["electrostatic_fraction"] == 1.0
    damping = [r["damping_length_m"] for r in rows]
    assert all(b < a for a, b in zip(damping, damping[1:], strict=False))
    # ion acoustic speed sqrt(T_e/m_i)/sqrt(1 + k²λ²) at the lowest frequency (common
    # practice); the ion pressure 3T_i/T_e = 6 % raises it by ~3 %, hence 5 %
    cs = math.sqrt(2.5 * 1.602176634e-19 / (39.948 * 1.66053906660e-27))
    k = rows[0]["k_real"]
    assert rows[0]["phase_speed_m_per_s"] == pytest.approx(cs / math.sqrt(1 + k * k), rel=0.05)


def test_failed_point_has_empty_cells():
    case = load_case(CASE)
    bad = RootResult(value=0.5 + 0.1j, converged=False, status=Status.NOT_ATTEMPTED,
                     reason="test", residual=float("nan"), step=float("nan"), iterations=0,
                     evaluations=0, verified=False, multiplicity=1, method="trace")
    row = launch.launch_row(case, 0, 0.4, bad)
    text = rows_to_csv([row], launch.launch_columns(case))
    header, line = text.strip().split("\n")
    cells = dict(zip(header.split(","), line.split(","), strict=True))
    assert cells["converged"] == "false"
    for col in ("k_real", "wavelength_m", "damping_length_m", "e_z_re", "density_abs_e"):
        assert cells[col] == ""
    assert np.isfinite(row["freq_hz"])


def test_every_frequency_is_counted_and_rows_agree_with_an_independent_survey():
    """Issue 18.1/18.2 for launch: at every frequency the zero count of the k box equals
    the rows (each row verified by that rule), no k appears twice at one frequency, and an
    independent survey of the box (argument principle plus polishing) finds as many roots
    at the first, middle and last frequency."""
    case = load_case(CASE)
    res = launch.launch(case)
    assert len(res.point_checks) == len(case.launch.frequencies_hz)
    assert res.unverified_points == 0
    rows = launch.launch_rows(res)
    assert all(r["verified"] for r in rows)
    by_w: dict[float, list[complex]] = {}
    for r in rows:
        by_w.setdefault(r["omega"], []).append(complex(r["k_real"], r["k_imag"]))
    for c in res.point_checks:
        ks = by_w.get(c.param, [])
        assert c.count == c.rows == len(ks)
        for i, a in enumerate(ks):
            assert all(abs(a - b) > 1e-6 * abs(a) for b in ks[i + 1:])
    ws = sorted(by_w)
    for w in (ws[0], ws[len(ws) // 2], ws[-1]):
        s = spatial_roots(case, w, res.box)
        assert s.complete and len(s.values) == len(by_w[w])
