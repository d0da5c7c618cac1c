"""Scalar case parameters named in plain words, changed one at a time.

A *parameter path* names one number of a case:

================================  ==========================================  ======
path                              meaning                                     unit
================================  ==========================================  ======
``magnetic_field.B``              field strength                              T
``wave.angle``                    angle between k and B (z)                   deg
``species.<name>.density``        number density                              m^-3
``species.<name>.temperature``    isotropic temperature (sets T∥ = T⊥)        eV
``species.<name>.temperature_par`` T∥ (T⊥ unchanged)                          eV
``species.<name>.temperature_perp`` T⊥ (T∥ unchanged)                         eV
``species.<name>.anisotropy``     T⊥/T∥ at fixed T∥ (sets T⊥)                 1
``species.<name>.drift``          drift speed along z                         m/s
``species.<name>.beta_par``       β∥ of that species, set through B           1
================================  ==========================================  ======

``beta_par`` choice: β∥s = 2 μ0 n_s T∥s / B² is set by changing **B** at fixed densities
and temperatures.  Every β of every species then scales by the same factor, so the
temperature ratios of the case (e.g. T_e = T∥p) are kept — what an anisotropy–β∥ plane
of a solar-wind-like plasma assumes.  v_A/c changes as √β⁻¹; it stays ≪ 1 for the usual
cases.

Normalized units: a changed case is re-validated from its TOML data, so its
:class:`~kinroots.physics.plasma.Normalization` is rebuilt from the *same unit specifications*
on the new plasma (``cyclotron:p`` follows the new B, ``inertial:p`` the new density).
The k scan and the search window keep their numbers in those units.  Tables carry SI
columns beside the normalized ones for this reason.
"""

from __future__ import annotations

import copy
import math
from typing import Any

from kinroots.io.case import Case, CaseError, parse_case
from kinroots.io.parameter_paths import ParameterError, ParameterPath, parse_path
from kinroots.physics.plasma import EV, MU0

__all__ = [
    "parameter_value",
    "with_parameter",
]


def _path_of(case: Case, path: str | ParameterPath) -> ParameterPath:
    if isinstance(path, ParameterPath):
        return path
    return parse_path(path, [s.name for s in case.plasma.species])


def parameter_value(case: Case, path: str | ParameterPath) -> float:
    """The current value of a parameter of ``case`` (in the unit of the path)."""
    p = _path_of(case, path)
    if p.species is None:
        return case.plasma.B if p.quantity == "B" else case.angle_deg
    s = case.plasma.species_named(p.species)
    if p.quantity == "density":
        return s.density
    if p.quantity in ("temperature", "temperature_par"):
        return s.temperature_par
    if p.quantity == "temperature_perp":
        return s.temperature_perp
    if p.quantity == "anisotropy":
        return s.temperature_perp / s.temperature_par
    if p.quantity == "drift":
        return s.drift
    beta = s.beta_par(case.plasma.B)
    return math.nan if beta is None else beta


def _species_entry(raw: dict[str, Any], name: str) -> dict[str, Any]:
    for entry in raw["species"]:
        if isinstance(entry, dict) and entry.get("name") == name:
            return entry
    raise ParameterError(f"species {name!r} not found")  # unreachable for a valid case


def _set_pair(entry: dict[str, Any], t_par: float, t_perp: float) -> None:
    entry.pop("temperature", None)
    entry["temperature_par"] = float(t_par)
    entry["temperature_perp"] = float(t_perp)


def with_parameter(case: Case, path: str | ParameterPath, value: float) -> Case:
    """A copy of ``case`` with one parameter changed, re-validated.

    Parameters
    ----------
    case : Case
        Validated case.
    path : str or ParameterPath
        See the module table.
    value : float
        New value in the unit of the path.

    Returns
    -------
    Case
        Parsed again from the changed TOML data (so units, k values and warnings are
        those of the new plasma); ``source`` is kept.

    Raises
    ------
    ParameterError
        Unknown path, non-finite value, ``beta_par`` without a magnetic field, or a value
        the case validation refuses (its message is given).

    Examples
    --------
    >>> from kinroots.io.case import load_case
    >>> c = load_case("cases/space_protons_alphas.toml")   # doctest: +SKIP
    >>> with_parameter(c, "species.p.anisotropy", 2.0).plasma.species[0].temperature_perp
    ... # doctest: +SKIP
    20.0
    """
    p = _path_of(case, path)
    v = float(value)
    if not math.isfinite(v):
        raise ParameterError(f"{p.text} = {value!r}: expected a finite number")
    raw = copy.deepcopy(case.raw)
    if p.species is None:
        if p.quantity == "B":
            raw.setdefault("magnetic_field", {})["B"] = v
        else:
            raw.setdefault("wave", {})["angle"] = v
    else:
        entry = _species_entry(raw, p.species)
        s = case.plasma.species_named(p.species)
        q = p.quantity
        if q == "density":
            entry["density"] = v
        elif q == "temperature":
            entry.pop("temperature_par", None)
            entry.pop("temperature_perp", None)
            entry["temperature"] = v
        elif q == "temperature_par":
            _set_pair(entry, v, s.temperature_perp)
        elif q == "temperature_perp":
            _set_pair(entry, s.temperature_par, v)
        elif q == "anisotropy":
            _set_pair(entry, s.temperature_par, v * s.temperature_par)
        elif q == "drift":
            entry["drift"] = v
        else:  # beta_par, through B
            if not case.plasma.magnetized:
                raise ParameterError(f"{p.text}: needs a magnetic field (β∥ is set through "
                                     "B), but magnetic_field.B = 0")
            if not v > 0:
                raise ParameterError(f"{p.text} = {value!r}: expected a number > 0")
            raw.setdefault("magnetic_field", {})["B"] = math.sqrt(
                2.0 * MU0 * s.density * s.temperature_par * EV / v)
    source = str(case.source) if case.source is not None else "case"
    try:
        new = parse_case(raw, source)
    except CaseError as exc:
        detail = "; ".join(e.split(": ", 1)[-1] for e in exc.errors)
        raise ParameterError(f"{p.text} = {value!r} gives an invalid case: {detail}") from None
    if case.source is not None:
        from dataclasses import replace

        new = replace(new, source=case.source)
    return new


