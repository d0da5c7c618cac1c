"""A search window chosen from the plasma when a case gives none (issue 15, item 3)."""

from __future__ import annotations

import json
import math
import tomllib
from pathlib import Path

import pytest
from scipy import constants
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.io.case import case_from_dict
from kinroots.physics.plasma import Plasma, Species
from kinroots.physics.scales import characteristic_frequencies
from kinroots.study.problem import window, window_choice, with_window
from kinroots.study.solve import solve

CASES = Path(__file__).resolve().parent.parent / "cases"
runner = CliRunner()


def _without_search(name: str, points: int | None = None) -> tuple[dict, dict]:
    data = tomllib.loads((CASES / name).read_text())
    data.pop("launch", None)
    if points is not None and isinstance(data["scan"]["k"], dict):
        data["scan"]["k"]["points"] = points
    bare = {k: v for k, v in data.items() if k != "search"}
    return data, bare


def test_characteristic_frequencies_against_the_formulas():
    # independent route: plasma and cyclotron frequencies from scipy.constants
    # (CODATA), the light wave w^2 = w_p^2 + k^2 c^2 and the upper-hybrid frequency
    # (Stix 1992, Waves in Plasmas, ch. 1, from memory)
    n, b, k = 1e18, 0.1, 300.0
    e, me, eps0, c = (constants.e, constants.m_e, constants.epsilon_0, constants.c)
    wpe = math.sqrt(n * e * e / (eps0 * me))
    wce = e * b / me
    plasma = Plasma((Species("e", -1, me, n, 10.0, 10.0),), b)
    got = {s.name: s.centre for s in characteristic_frequencies(plasma, k, 30.0, True)}
    assert got["plasma frequency of e"] == pytest.approx(wpe, rel=1e-6)
    assert got["cyclotron frequency of e"] == pytest.approx(wce, rel=1e-6)
    assert got["light wave"] == pytest.approx(math.sqrt(wpe**2 + (k * c) ** 2), rel=1e-6)
    assert got["upper-hybrid frequency"] == pytest.approx(math.hypot(wpe, wce), rel=1e-6)
    # R cutoff: a zero of Stix's R = 1 - w_pe^2 / (w (w - |W_e|)) for electrons alone
    # (Stix 1992 eq. 1-19, from memory)
    w_r = got["R cutoff"]
    assert 1.0 - wpe**2 / (w_r * (w_r - wce)) == pytest.approx(0.0, abs=1e-9)


def test_a_case_without_search_gets_a_window_recorded_and_printed(tmp_path):
    data, bare = _without_search("hydrogen_discharge.toml", points=4)
    case = case_from_dict(bare)
    assert case.search_real is None and case.search_imag is None
    choice = window_choice(case)
    assert choice.chosen and choice.evaluations > 0
    assert window(case) == (*choice.real, *choice.imag)
    assert choice.real[0] < choice.real[1] and choice.imag[0] < 0 < choice.imag[1]
    # an explicit [search] still wins
    explicit = case_from_dict(data)
    assert window(explicit) == (*data["search"]["real"], *data["search"]["imag"])
    assert not window_choice(explicit).chosen
    # the fixed case used by sweeps carries the same window in its TOML data
    fixed = with_window(case)
    assert fixed.raw["search"] == {"real": list(choice.real), "imag": list(choice.imag)}
    assert window_choice(fixed).chosen

    import kinroots

    assert kinroots.solve(bare).search_window.real == choice.real  # same rule, same window
    assert kinroots.roots(case, 0.3).search_window is choice  # cached on the case

    path = tmp_path / "bare.toml"
    text = (CASES / "hydrogen_discharge.toml").read_text()
    head, _, tail = text.partition("[search]")
    tail = tail[tail.find("\n["):] if "\n[" in tail else ""
    path.write_text(head + tail)
    assert "search" not in tomllib.loads(path.read_text())
    out = tmp_path / "run"
    res = runner.invoke(app, ["solve", str(path), "-o", str(out)])
    assert res.exit_code in (0, 1), res.output
    assert "search window chosen from the plasma" in res.output
    sw = json.loads((out / "summary.json").read_text())["search_window"]
    assert sw["chosen_from_plasma"] is True and sw["normalized"] is True
    assert sw["real"] == list(choice.real) and sw["imag"] == list(choice.imag)
    assert "Re omega" in sw["rule"] and "Im omega" in sw["rule"]


def _by_k(sol) -> dict[float, list[complex]]:
    out: dict[float, list[complex]] = {}
    for b in sol.branches:
        for k, r in b.points.items():
            if r.converged:
                out.setdefault(float(k), []).append(r.value)
    return out


# Cases whose chosen window must hold, at every k, every growing root of the explicit run
# and the least-damped root of both runs together (README "Choosing the window")
DEFAULT_WINDOW_CASES = [
    "argon_ion_acoustic.toml", "hydrogen_discharge.toml", "electron_beam_plasma.toml",
    "core_halo_electrons.toml", "hydrogen_cold_ions.toml", "ion_bernstein_perpendicular.toml",
    "weibel_hot_electrons.toml", "sweep_proton_anisotropy.toml", "space_protons_alphas.toml",
    "magnetized_oblique_electron_waves.toml", "solar_wind_kappa_langmuir.toml",
    "whistler_anisotropy_solar_wind.toml", "counterstreaming_filamentation.toml",
    "lab_launched_ion_acoustic.toml", "solar_wind_kappa_whistler.toml",
]


@pytest.mark.slow
@pytest.mark.parametrize("name", DEFAULT_WINDOW_CASES)
def test_chosen_window_holds_the_least_damped_and_every_growing_root(name):
    data, bare = _without_search(name, points=7)
    explicit, chosen = solve(case_from_dict(data)), solve(case_from_dict(bare))
    found = _by_k(chosen)
    for k, vals in _by_k(explicit).items():
        here = found.get(k, [])
        # the least-damped root of the plasma, as far as either window can tell: the
        # explicit window's, unless the chosen window holds a less damped one
        least = max(vals + here, key=lambda v: v.imag)
        need = [least] + [v for v in vals if v.imag > 0]
        for v in need:
            assert any(abs(v - g) <= 1e-6 * max(1.0, abs(v)) for g in here), (
                name, k, v, window_choice(case_from_dict(bare)).rule)
