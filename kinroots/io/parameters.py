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




_Corner = list[tuple[str, ParameterPath, float]]


def _corner_settings(case: Case) -> list[_Corner]:
    """Every combination of axis ends of ``[sweep]`` and ``[threshold]``:
    (table key, parameter, value) for each axis."""
    out: list[_Corner] = []
    groups: list[list[tuple[str, ParameterPath, tuple[float, ...]]]] = []
    if case.sweep is not None:
        groups.append([(name, ax.path, (ax.start, ax.stop))
                       for name, ax in (("sweep.x", case.sweep.x), ("sweep.y", case.sweep.y))
                       if ax is not None])
    if case.threshold is not None:
        t = case.threshold
        groups.append([("threshold.across", t.across.path, (t.across.start, t.across.stop)),
                       ("threshold.bracket", t.path, t.bracket)])
    for axes in groups:
        combos: list[list[tuple[str, ParameterPath, float]]] = [[]]
        for name, path, ends in axes:
            combos = [c + [(name, path, v)] for c in combos for v in ends]
        out.extend(combos)
    return out


def with_parameters(case: Case, settings: list[tuple[ParameterPath, float]]) -> Case:
    """`with_parameter` for several settings; ``beta_par`` paths last (they read T∥, n)."""
    for path, value in sorted(settings, key=lambda t: t[0].quantity == "beta_par"):
        case = with_parameter(case, path, value)
    return case


def check_study_ranges(case: Case) -> tuple[list[str], list[str]]:
    """Errors and warnings of the plasmas at every corner of ``[sweep]`` / ``[threshold]``.

    The limits of the case file are intervals, so a linear or log grid whose corners
    are valid cases is valid at every point.  Returns messages naming the table keys
    and values; the warnings are those (e.g. quasi-neutrality) that the base case does
    not already give.
    """
    errors: list[str] = []
    warnings: list[str] = []
    src = str(case.source) if case.source else "case"
    refused: set[str] = set()
    for combo in _corner_settings(case):
        what = ", ".join(f"{name} = {v:g}" for name, _, v in combo)
        try:
            corner = with_parameters(case, [(path, v) for _, path, v in combo])
        except ParameterError as exc:
            if str(exc) not in refused:  # one message per distinct reason
                refused.add(str(exc))
                key, value = next(((name, v) for name, path, v in combo
                                   if str(exc).startswith(f"{path.text} = ")),
                                  (combo[-1][0], combo[-1][2]))
                others = [f"{n} = {v:g}" for n, _, v in combo if n != key]
                errors.append(f"{src}: {key}: value {value!r} refused"
                              + (f" (with {', '.join(others)})" if others else "")
                              + f": {exc}")
            continue
        for w in corner.warnings:
            if w not in case.warnings and w not in refused:
                refused.add(w)
                warnings.append(f"at {what}: {w}")
    return errors, warnings
