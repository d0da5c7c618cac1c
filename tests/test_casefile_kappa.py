"""Case-file keys of issue 13: ``distribution``, ``kappa``, ``[[species.components]]``.

Contract (issue 13): κ ≤ 1.5, a missing ``kappa``, weights not summing to 1 and a
negative f are input errors (exit 2, the key named); Krook collisions and magnetized
oblique propagation are refused for kappa species; moments of a component species
follow from its components.
"""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any

import pytest
from test_casefile import BASE  # sibling test module (rootdir import)
from test_cli_check import toml_document  # sibling test module
from typer.testing import CliRunner

from kinroots.cli import app
from kinroots.io.case import CaseError, parse_case
from kinroots.physics.plasma import EV, M_ELECTRON

runner = CliRunner()


def _case(electron: dict[str, Any], **top: Any) -> dict[str, Any]:
    data = copy.deepcopy(BASE)
    e = {k: v for k, v in data["species"][0].items() if k not in ("temperature",)}
    e.update(electron)
    data["species"][0] = e
    for key, value in top.items():
        section, _, name = key.partition("__")
        data[section][name] = value
    return data


KAPPA = {"temperature": 10.0, "distribution": "kappa", "kappa": 3.0}
CONE = {"components": [
    {"weight": 10.0 / 7.0, "temperature_par": 5.0, "temperature_perp": 10.0},
    {"weight": -3.0 / 7.0, "temperature_par": 5.0, "temperature_perp": 3.0},
]}


def test_kappa_and_components_parse() -> None:
    case = parse_case(_case(KAPPA, wave__angle=0.0), "t.toml")
    e = case.plasma.species[0]
    assert (e.distribution, e.kappa, e.temperature_par) == ("kappa", 3.0, 10.0)
    halo = {"components": [
        {"weight": 0.9, "temperature": 10.0, "drift": -1e5},
        {"weight": 0.1, "temperature_par": 80.0, "temperature_perp": 60.0, "drift": 9e5}]}
    e = parse_case(_case(halo), "t.toml").plasma.species[0]
    assert len(e.components) == 2
    # moments: mean drift Σ w V; T∥ = Σ w (T∥j + m (V_j − V)²); T⊥ = Σ w T⊥j (definitions)
    v = 0.9 * -1e5 + 0.1 * 9e5
    assert e.drift == pytest.approx(v)
    t_par = (0.9 * (10 + M_ELECTRON * (-1e5 - v) ** 2 / EV)
             + 0.1 * (80 + M_ELECTRON * (9e5 - v) ** 2 / EV))
    assert e.temperature_par == pytest.approx(t_par)
    assert e.temperature_perp == pytest.approx(0.9 * 10 + 0.1 * 60)
    assert parse_case(_case(CONE, wave__model="electrostatic"), "t.toml").plasma.species[0]


@pytest.mark.parametrize(("electron", "top", "needle"), [
    ({**KAPPA, "kappa": 1.5}, {}, "species[1].kappa: got 1.5"),
    ({"temperature": 10.0, "distribution": "kappa"}, {}, "species[1].kappa: missing"),
    ({"temperature": 10.0, "kappa": 3.0}, {}, "species[1].kappa: got 3.0, but"),
    ({"temperature": 10.0, "distribution": "kapa"}, {}, "did you mean 'kappa'"),
    ({"components": [{"weight": 0.5, "temperature": 1.0},
                     {"weight": 0.4, "temperature": 2.0}]}, {},
     "species[1].components: weights sum to 0.9"),
    ({"components": [{"weight": 2.0, "temperature": 3.0},
                      {"weight": -1.0, "temperature": 10.0}]}, {},
     "species[1].components: the distribution is negative near"),
    ({"temperature": 10.0, "components": [{"weight": 1.0, "temperature": 1.0}]}, {},
     "species[1].temperature: given together with"),
    ({"components": [{"weight": 1.0}]}, {}, "species[1].components[1].temperature: missing"),
    ({"components": [{"weight": 1.0, "temperature": 1.0, "temp": 2}]}, {},
     "species[1].components[1].temp: unknown key"),
    ({**KAPPA, "collision_frequency": 1e3}, {"wave__model": "electrostatic"},
     "species[1].collision_frequency: got 1000.0, but the Krook model"),
    (KAPPA, {"wave__angle": 45.0}, "species[1].distribution: got \"kappa\" with"),
])
def test_bad_input_exits_2_naming_the_key(tmp_path: Path, electron: dict[str, Any],
                                          top: dict[str, Any], needle: str) -> None:
    data = _case(electron, **top)
    with pytest.raises(CaseError) as err:
        parse_case(data, "t.toml")
    assert any(needle in e for e in err.value.errors), err.value.errors
    path = tmp_path / "bad.toml"
    path.write_text(toml_document(data))
    res = runner.invoke(app, ["check", str(path)])
    assert res.exit_code == 2
    assert needle in res.output
    assert "Traceback" not in res.output


def test_plasma_prints_the_kappa_debye_length(tmp_path: Path) -> None:
    """λ_D √((κ − 3/2)/(κ − 1/2)) (issue 13), in the JSON of `kinroots plasma`."""
    import json

    path = tmp_path / "k.toml"
    path.write_text(toml_document(_case(KAPPA, wave__angle=0.0)))
    res = runner.invoke(app, ["plasma", str(path), "--json"])
    assert res.exit_code == 0, res.output
    e = json.loads(res.output)["species"][0]
    assert e["distribution"] == "kappa"
    si = e["si"]
    assert si["kappa_debye_length"] == pytest.approx(si["debye_length"] * (1.5 / 2.5) ** 0.5)
    assert json.loads(res.output)["species"][1]["si"]["kappa_debye_length"] is None
