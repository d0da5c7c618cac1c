"""Case files (kinroots.io.case): validation messages name file, key path, value, expectation.

Expected values are independent of kinroots: numpy.linspace/geomspace for the k grid,
scipy.constants for masses; the error classes come from the case-file contract in
docs/design.md ("User-facing contract") and casefile.DEFAULTS.
"""

from __future__ import annotations

import copy
import tomllib
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import constants

from kinroots.io.case import (
    DEFAULTS,
    Case,
    CaseError,
    default_case_path,
    load_case,
    parse_case,
)

BASE_TOML = """
title = "test plasma"
[magnetic_field]
B = 0.1
[[species]]
name = "e"
charge = -1
mass = "electron"
density = 1.0e18
temperature = 10.0
[[species]]
name = "D+"
charge = 1
mass = 2.014
density = 1.0e18
temperature_par = 2.0
temperature_perp = 3.0
[wave]
model = "electromagnetic"
angle = 45.0
[scan]
k = { start = 0.1, stop = 2.0, points = 20 }
[units]
frequency = "plasma:e"
length = "debye:e"
[search]
real = [0.01, 3.0]
imag = [-0.5, 0.5]
"""
BASE: dict[str, Any] = tomllib.loads(BASE_TOML)


def mutated(**changes: Any) -> dict[str, Any]:
    """BASE with changes at dotted paths ('species.1.density' = second species); a value
    of ``...`` deletes the key."""
    data = copy.deepcopy(BASE)
    for dotted, value in changes.items():
        *parents, last = dotted.split("__")
        node: Any = data
        for part in parents:
            node = node[int(part)] if part.isdigit() else node[part]
        key: Any = int(last) if last.isdigit() else last
        if value is ...:
            del node[key]
        else:
            node[key] = value
    return data


def errors_of(data: dict[str, Any]) -> list[str]:
    with pytest.raises(CaseError) as info:
        parse_case(data, "case.toml")
    assert info.value.errors, "CaseError without messages"
    return info.value.errors


def one_error(data: dict[str, Any], *needles: str) -> str:
    errs = errors_of(data)
    assert len(errs) == 1, errs
    msg = errs[0]
    assert msg.startswith("case.toml: "), msg
    for needle in needles:
        assert needle in msg, (needle, msg)
    return msg


def test_base_case_is_valid() -> None:
    case = parse_case(copy.deepcopy(BASE), "case.toml")
    assert isinstance(case, Case)
    assert case.title == "test plasma"
    assert case.model == "electromagnetic" and case.angle_deg == 45.0
    assert case.plasma.B == 0.1
    d = case.plasma.species[1]
    assert d.mass == pytest.approx(2.014 * constants.atomic_mass, rel=1e-15)  # scipy CODATA
    assert (d.temperature_par, d.temperature_perp, d.drift) == (2.0, 3.0, 0.0)
    assert case.plasma.species[0].mass == constants.m_e
    # grid values as the user writes them: the correctly rounded decimals i/10, not
    # linspace's 0.30000000000000004 (issue 17)
    assert case.k_values.tolist() == [i / 10 for i in range(1, 21)]
    assert case.search_real == (0.01, 3.0) and case.search_imag == (-0.5, 0.5)
    assert case.warnings == ()
    assert not case.k_values.flags.writeable
    with pytest.raises(AttributeError):
        case.title = "x"  # type: ignore[misc]


def test_defaults_apply() -> None:
    data = mutated(magnetic_field=..., units=..., wave__angle=..., wave__model="electrostatic")
    case = parse_case(data, "c")
    assert case.plasma.B == DEFAULTS["magnetic_field.B"] == 0.0
    assert case.angle_deg == DEFAULTS["wave.angle"]
    assert case.units.frequency_spec == "plasma:e" and case.units.length_spec == "debye:e"
    assert case.solver.tolerance == DEFAULTS["solver.tolerance"]
    assert case.solver.harmonic_tolerance == DEFAULTS["solver.harmonic_tolerance"]
    assert case.solver.resurvey_every == DEFAULTS["solver.resurvey_every"]
    assert case.scan.spacing == DEFAULTS["scan.k.spacing"]


def test_default_units_pick_first_electron() -> None:
    data = mutated(units=...)
    data["species"].reverse()
    assert parse_case(data, "c").units.frequency_spec == "plasma:e"


def test_log_spacing_and_solver() -> None:
    data = mutated(scan__k__spacing="log")
    data["solver"] = {"tolerance": 1e-8, "harmonic_tolerance": 1e-12, "resurvey_every": 0}
    case = parse_case(data, "c")
    np.testing.assert_allclose(case.k_values, np.geomspace(0.1, 2.0, 20), rtol=1e-12)
    assert case.k_values[0] == 0.1 and case.k_values[-1] == 2.0
    assert case.solver.resurvey_every == 0 and case.solver.tolerance == 1e-8


# one test per error class: message names key path and value ---------------------------

ERROR_CASES: list[tuple[str, dict[str, Any], tuple[str, ...]]] = [
    ("missing title", {"title": ...}, ("title", "missing")),
    ("missing model", {"wave__model": ...}, ("wave.model", "missing")),
    ("missing density", {"species__1__density": ...}, ("species[2].density", "missing")),
    # [search] is optional (a window is chosen from the plasma), but an empty window is not
    ("empty window", {"search__imag": [0.1, 0.1]}, ("search.imag", "[0.1, 0.1]", "min < max")),
    (
        "unknown key",
        {"species__0__temprature": 3.0},
        ("species[1].temprature", "did you mean 'temperature'"),
    ),
    (
        "unknown top",
        {"magnetic_feild": {"B": 1.0}},
        ("magnetic_feild", "did you mean 'magnetic_field'"),
    ),
    ("bool is not a number", {"species__0__density": True}, ("species[1].density", "True")),
    ("string number", {"magnetic_field__B": "1.0"}, ("magnetic_field.B", "'1.0'")),
    ("density <= 0", {"species__1__density": -1.0}, ("species[2].density", "-1.0", "1e+35]")),
    ("temperature <= 0", {"species__0__temperature": 0.0}, ("species[1].temperature", "0.0")),
    ("t_perp <= 0", {"species__1__temperature_perp": -3}, ("species[2].temperature_perp", "-3")),
    ("charge 0", {"species__0__charge": 0}, ("species[1].charge", "0", "|x| in [1e-06, 1e+06]")),
    ("mass <= 0", {"species__1__mass": -2.0}, ("species[2].mass", "-2.0")),
    (
        "mass name",
        {"species__1__mass": "protn"},
        ("species[2].mass", "'protn'", "did you mean 'proton'"),
    ),
    (
        "unknown unit species",
        {"units__frequency": "plasma:ee"},
        ("units.frequency", "'ee'", "did you mean 'e'"),
    ),
    ("unknown unit kind", {"units__length": "debey:e"}, ("units.length", "'debey:e'", "'debye:e'")),
    (
        "cyclotron with B=0",
        {"magnetic_field__B": 0.0, "units__frequency": "cyclotron:e"},
        ("units.frequency", "'cyclotron:e'", "magnetic field"),
    ),
    (
        "gyroradius with B=0",
        {"magnetic_field__B": 0.0, "units__length": "gyroradius:D+"},
        ("units.length", "'gyroradius:D+'", "magnetic field"),
    ),
    ("duplicate species", {"species__1__name": "e"}, ("species[2].name", "'e'", "species[1]")),
    ("points < 1", {"scan__k__points": 0}, ("scan.k.points", "0", ">= 1")),
    ("points float", {"scan__k__points": 10.0}, ("scan.k.points", "10.0", "integer")),
    ("start >= stop", {"scan__k__start": 2.0}, ("scan.k", "start = 2.0", "stop = 2.0")),
    ("k <= 0", {"scan__k__start": -0.1}, ("scan.k.start", "-0.1", "in [1e-08, 1e+08]")),
    ("log with k = 0", {"scan__k__start": 0.0, "scan__k__spacing": "log"}, ("scan.k.start", "0.0")),
    ("bad spacing", {"scan__k__spacing": "logarithmic"}, ("scan.k.spacing", "'logarithmic'")),
    ("window min >= max", {"search__real": [3.0, 1.0]}, ("search.real", "[3.0, 1.0]", "min < max")),
    ("window shape", {"search__imag": [0.1]}, ("search.imag", "[0.1]")),
    (
        "both temperatures",
        {"species__0__temperature_par": 1.0},
        ("species[1]", "'temperature_par'", "either"),
    ),
    (
        "half anisotropic",
        {"species__1__temperature_perp": ...},
        ("species[2].temperature_perp", "missing"),
    ),
    ("nan", {"species__0__density": float("nan")}, ("species[1].density", "nan")),
    ("inf", {"magnetic_field__B": float("inf")}, ("magnetic_field.B", "inf")),
    ("negative B", {"magnetic_field__B": -1.0}, ("magnetic_field.B", "-1.0")),
    (
        "bad model",
        {"wave__model": "electrostatics"},
        ("wave.model", "'electrostatics'", "did you mean 'electrostatic'"),
    ),
    ("angle range", {"wave__angle": 200.0}, ("wave.angle", "200.0", "[0, 180]")),
    ("title type", {"title": 3}, ("title", "3", "string")),
    ("species not a list", {"species": {"name": "e"}}, ("species", "{'name': 'e'}")),
    ("drift >= c", {"species__0__drift": 3.1e8}, ("species[1].drift", "310000000.0")),
    ("solver tolerance", {"solver": {"tolerance": 0}}, ("solver.tolerance", "0")),
    ("resurvey", {"solver": {"resurvey_every": -1}}, ("solver.resurvey_every", "-1")),
]


@pytest.mark.parametrize(
    "changes, needles", [c[1:] for c in ERROR_CASES], ids=[c[0] for c in ERROR_CASES]
)
def test_error_names_key_and_value(changes: dict[str, Any], needles: tuple[str, ...]) -> None:
    one_error(mutated(**changes), *needles)


def test_all_errors_reported_at_once() -> None:
    data = mutated(
        title=..., species__0__density=-1, scan__k__points=0, search__real=[1, 0], wave__mode="x"
    )
    errs = errors_of(data)
    for key in ("title", "species[1].density", "scan.k.points", "search.real", "wave.mode"):
        assert any(f": {key}:" in e for e in errs), (key, errs)


# file-level errors --------------------------------------------------------------------


def test_file_errors(tmp_path: Path) -> None:
    with pytest.raises(CaseError, match="file not found"):
        load_case(tmp_path / "nope.toml")
    with pytest.raises(CaseError, match="directory"):
        load_case(tmp_path)
    bad = tmp_path / "latin1.toml"
    bad.write_bytes('title = "caf\u00e9"'.encode("latin-1"))
    with pytest.raises(CaseError, match="UTF-8"):
        load_case(bad)
    broken = tmp_path / "broken.toml"
    broken.write_text('title = "x"\n[wave\nmodel = 1\n', encoding="utf-8")
    with pytest.raises(CaseError) as info:
        load_case(broken)
    # tomllib reports position as "(at line L, column C)" (Python standard library)
    assert str(broken) in info.value.errors[0] and "line 2" in info.value.errors[0]


def test_quasi_neutrality_and_current_warnings() -> None:
    case = parse_case(mutated(species__1__density=1.1e18), "c")
    assert len(case.warnings) == 1 and "quasi-neutral" in case.warnings[0]
    assert "0.0476" in case.warnings[0]  # |1.0 − 1.1| / 2.1
    case = parse_case(mutated(species__0__drift=1e5), "c")
    assert len(case.warnings) == 1 and "current" in case.warnings[0]
    # exactly neutral and current-free within 1e-6: silent
    case = parse_case(mutated(species__1__density=1.0e18 * (1 + 1e-7)), "c")
    assert case.warnings == ()


def test_default_case_path_and_contents() -> None:
    path = default_case_path()
    assert path.is_file() and path.name == "default.toml"
    case = load_case(path)
    assert case.source == path and case.plasma.B == 0.0 and case.model == "electrostatic"
    assert case.warnings == ()
    e, h = case.plasma.species
    assert (e.temperature_par, h.temperature_par, e.density) == (2.0, 0.2, 1e16)
    assert case.k_values[0] == 0.1 and case.k_values[-1] == 0.65 and len(case.k_values) == 56
    # Langmuir root near ω ≈ sqrt(1 + 3k²) ω_pe (Bohm–Gross, common practice) is inside
    bohm_gross = np.sqrt(1 + 3 * 0.1**2)
    assert case.search_real[0] < bohm_gross < case.search_real[1]
    # the ion acoustic branch, ω ≈ k sqrt((Te + 3Ti)/m_i) (common practice), is kept out of
    # this window on purpose (it lives on ion scales; see cases/hydrogen_cold_ions.toml)
    cs = np.sqrt((2.0 + 3 * 0.2) * constants.e / constants.m_p) / (case.units.speed_unit)
    assert 0.65 * cs < case.search_real[0]


def test_grids_written_as_the_user_writes_them() -> None:
    """Grid points are the decimals a user would type (issue 17): 0.2, not linspace's
    0.19999999999999998; a log axis keeps its ends exactly and its
    interior within 1e-12 of numpy.geomspace."""
    from kinroots.io.grid import spaced_grid

    users = [(2 + 18 * i) / 100 for i in range(12)]  # 0.02, 0.2, 0.38, ... correctly rounded
    assert np.linspace(0.02, 2.0, 12).tolist() != users  # the rounding being fixed
    assert spaced_grid(0.02, 2.0, 12).tolist() == users
    assert spaced_grid(0.5e6, 6.0e6, 12).tolist() == [5e5 * i for i in range(1, 13)]
    log = spaced_grid(0.5, 3.0, 6, "log")
    np.testing.assert_allclose(log, np.geomspace(0.5, 3.0, 6), rtol=1e-12)
    assert (log[0], log[-1]) == (0.5, 3.0)
    assert spaced_grid(7.0, 9.0, 1).tolist() == [7.0]

    data = mutated()
    data["launch"] = {"frequency": {"start": 0.5e6, "stop": 6.0e6, "points": 12}}
    case = parse_case(data, "c")
    assert case.launch is not None
    assert list(case.launch.frequencies_hz) == [5e5 * i for i in range(1, 13)]
