"""Parameter paths: validation messages, with_parameter, tracing along a parameter."""

from __future__ import annotations

import math

import pytest

from kinroots.io.case import CaseError, load_case, parse_case
from kinroots.io.parameter_paths import ParameterError, parse_path
from kinroots.io.parameters import parameter_value, with_parameter
from kinroots.study.parameter_trace import trace_parameter
from kinroots.study.problem import survey

CASE = "cases/space_protons_alphas.toml"
MU0 = 4e-7 * math.pi * 1.00000000055  # CODATA 2018 μ0 (common practice, from memory)
EV = 1.602176634e-19  # exact SI value of the electronvolt


@pytest.fixture(scope="module")
def case():
    return load_case(CASE)


def test_unknown_path_suggests_the_closest(case):
    with pytest.raises(ParameterError, match="did you mean 'species.p.anisotropy'"):
        parse_path("species.p.anisotrophy", [s.name for s in case.plasma.species])
    with pytest.raises(ParameterError, match="unknown species 'q'"):
        parse_path("species.q.density", ["p", "e"])
    with pytest.raises(ParameterError, match="did you mean 'magnetic_field.B'"):
        parse_path("magnetic_field.b", ["p"])


def test_anisotropy_keeps_t_par(case):
    c = with_parameter(case, "species.p.anisotropy", 3.0)
    p = c.plasma.species_named("p")
    assert p.temperature_par == 10.0 and p.temperature_perp == pytest.approx(30.0, rel=1e-15)
    assert parameter_value(c, "species.p.anisotropy") == pytest.approx(3.0, rel=1e-15)


def test_beta_par_is_set_through_b(case):
    # β∥ = 2 μ0 n T∥ / B² (docs/design.md, conventions): recompute by hand from the new B.
    c = with_parameter(case, "species.p.beta_par", 2.0)
    n, t = 5.0e6, 10.0
    assert 2 * MU0 * n * t * EV / c.plasma.B**2 == pytest.approx(2.0, rel=1e-9)
    # temperatures untouched; the cyclotron unit follows the new B
    assert c.plasma.species_named("e").temperature_par == 12.0
    assert c.units.omega_unit == pytest.approx(
        case.units.omega_unit * c.plasma.B / case.plasma.B, rel=1e-12)


def test_invalid_value_is_refused_with_the_path(case):
    with pytest.raises(ParameterError, match=r"species.p.density = -1.0 gives an invalid"):
        with_parameter(case, "species.p.density", -1.0)


def test_sweep_table_errors_name_the_key(case):
    raw = dict(case.raw)
    raw["sweep"] = {"x": {"parameter": "species.p.anisotropie", "start": 1, "stop": 2,
                          "points": 3}, "grwoth_levels": [1e-3]}
    with pytest.raises(CaseError) as exc:
        parse_case(raw, "f.toml")
    text = "\n".join(exc.value.errors)
    assert "f.toml: sweep.x.parameter: got 'species.p.anisotropie'" in text
    assert "did you mean 'species.p.anisotropy'" in text
    assert "f.toml: sweep.grwoth_levels: unknown key (did you mean 'growth_levels'?)" in text


def test_trace_along_anisotropy_matches_fresh_survey(case):
    # Independent check: the traced root at the last value equals the root found by a new
    # argument-principle survey of the changed case (same window).
    k = 0.6
    s0 = survey(with_parameter(case, "species.p.anisotropy", 2.5), k)
    top = max(s0.values, key=lambda z: z.imag)
    branches = trace_parameter(case, "species.p.anisotropy", [2.5, 2.2, 1.9], k, starts=[top])
    b = branches[0]
    assert [p for p, _ in b.points] == [2.5, 2.2, 1.9]
    z_end = b.points[-1][1].value
    s1 = survey(with_parameter(case, "species.p.anisotropy", 1.9), k)
    nearest = min(s1.values, key=lambda z: abs(z - z_end))
    assert abs(nearest - z_end) < 1e-8 * abs(z_end)
    # less anisotropy drives less growth (Kennel & Petschek 1966 trend, from memory)
    assert z_end.imag < top.imag
