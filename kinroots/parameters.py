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
:class:`~kinroots.plasma.Normalization` is rebuilt from the *same unit specifications*
on the new plasma (``cyclotron:p`` follows the new B, ``inertial:p`` the new density).
The k scan and the search window keep their numbers in those units.  Tables carry SI
columns beside the normalized ones for this reason.
"""

from __future__ import annotations

import copy
import difflib
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from kinroots.casefile import Case, CaseError, parse_case
from kinroots.plasma import EV, MU0

__all__ = [
    "PLASMA_PATHS",
    "SPECIES_QUANTITIES",
    "ParameterError",
    "ParameterPath",
    "parameter_value",
    "parse_path",
    "trace_parameter",
    "with_parameter",
]

#: Paths that do not name a species, with their units.
PLASMA_PATHS: dict[str, str] = {"magnetic_field.B": "T", "wave.angle": "deg"}
#: Per-species quantities (``species.<name>.<quantity>``), with their units.
SPECIES_QUANTITIES: dict[str, str] = {
    "density": "m^-3",
    "temperature": "eV",
    "temperature_par": "eV",
    "temperature_perp": "eV",
    "anisotropy": "1",
    "drift": "m/s",
    "beta_par": "1",
}


class ParameterError(ValueError):
    """A parameter path or value that cannot be used (message says why)."""


@dataclass(frozen=True)
class ParameterPath:
    """A validated parameter path.

    Attributes
    ----------
    text : str
        The path as written, e.g. ``"species.p.anisotropy"``.
    species : str or None
        Species name for per-species paths.
    quantity : str
        ``"B"``, ``"angle"`` or one of :data:`SPECIES_QUANTITIES`.
    unit : str
        Unit of the value (``"1"`` for ratios).
    """

    text: str
    species: str | None
    quantity: str
    unit: str

    @property
    def label(self) -> str:
        """Axis label, e.g. ``"species.p.beta_par"`` or ``"magnetic_field.B [T]"``."""
        return self.text if self.unit == "1" else f"{self.text} [{self.unit}]"

    @property
    def safe_name(self) -> str:
        """The path with dots replaced, usable as a netCDF / column name."""
        return self.text.replace(".", "_").replace("-", "_").replace("+", "plus")


def _all_paths(names: Sequence[str]) -> list[str]:
    return list(PLASMA_PATHS) + [f"species.{n}.{q}" for n in names for q in SPECIES_QUANTITIES]


def parse_path(path: Any, species_names: Sequence[str]) -> ParameterPath:
    """Validate a parameter path against the species of a case.

    Raises
    ------
    ParameterError
        Unknown path or species, with a "did you mean" hint.
    """
    if not isinstance(path, str) or not path.strip():
        raise ParameterError(f"got {path!r}, expected a parameter path such as "
                             "'species.<name>.density' or 'magnetic_field.B'")
    if path in PLASMA_PATHS:
        return ParameterPath(path, None, path.split(".")[1], PLASMA_PATHS[path])
    if path.startswith("species."):
        name, sep, quantity = path[len("species."):].rpartition(".")
        if sep and name in species_names and quantity in SPECIES_QUANTITIES:
            return ParameterPath(path, name, quantity, SPECIES_QUANTITIES[quantity])
        if sep and name not in species_names:
            close = difflib.get_close_matches(name, list(species_names), n=1, cutoff=0.5)
            hint = (f"did you mean {close[0]!r}?" if close
                    else "species: " + ", ".join(repr(n) for n in species_names))
            raise ParameterError(f"got {path!r}: unknown species {name!r} ({hint})")
        if sep:
            close = difflib.get_close_matches(quantity, list(SPECIES_QUANTITIES), n=1,
                                              cutoff=0.5)
            hint = (f"did you mean 'species.{name}.{close[0]}'?" if close
                    else "quantities: " + ", ".join(SPECIES_QUANTITIES))
            raise ParameterError(f"got {path!r}: unknown species quantity {quantity!r} ({hint})")
    close = difflib.get_close_matches(path, _all_paths(species_names), n=1, cutoff=0.6)
    hint = (f"did you mean {close[0]!r}?" if close
            else "expected 'magnetic_field.B', 'wave.angle' or 'species.<name>.<quantity>' "
            "with quantity one of " + ", ".join(SPECIES_QUANTITIES))
    raise ParameterError(f"got {path!r}: unknown parameter path ({hint})")


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
    >>> from kinroots.casefile import load_case
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


def trace_parameter(
    case: Case,
    path: str | ParameterPath,
    values: Sequence[float],
    k: float,
    starts: Sequence[complex] | None = None,
) -> list[Any]:
    """Follow roots at fixed normalized ``k`` while one case parameter changes.

    Parameters
    ----------
    case : Case
        Validated case (its search window bounds the branches).
    path : str or ParameterPath
        Parameter to vary.
    values : sequence of float
        Strictly monotonic parameter values (increasing or decreasing).
    k : float
        Normalized wavenumber (units of the case at each parameter value).
    starts : sequence of complex, optional
        Normalized roots at ``values[0]``; default: every root of a survey there.

    Returns
    -------
    list of kinroots.roots.Branch
        One per start; ``points`` hold ``(value, RootResult)`` with the *actual*
        parameter values (the tracer runs on −value for decreasing values and the sign
        is restored here).

    Notes
    -----
    ``family(p)`` rebuilds the case at p (:func:`with_parameter`) and returns its
    normalized dispersion function at k; the Tracer's predictor–corrector does the rest.
    """
    from kinroots.roots import Tracer
    from kinroots.scan import function_at, survey, window

    p = _path_of(case, path)
    vals = [float(v) for v in values]
    if len(vals) < 1:
        raise ParameterError("trace_parameter: expected at least one parameter value")
    diffs = np.diff(vals)
    sign = 1.0 if len(vals) == 1 or np.all(diffs > 0) else -1.0
    if len(vals) > 1 and not (np.all(diffs > 0) or np.all(diffs < 0)):
        raise ParameterError("trace_parameter: values must be strictly monotonic")

    def family(q: float) -> Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]:
        return function_at(with_parameter(case, p, sign * q), k)

    first = with_parameter(case, p, vals[0])
    if starts is None:
        roots: list[Any] = [r for r in survey(first, k).roots if r.converged]
    else:
        roots = [complex(z) for z in starts]
    tracer = Tracer(family, box=window(case), param=sign * vals[0],
                    rtol=case.solver.tolerance)
    for r in roots:
        tracer.add_branch(r)
    for v in vals[1:]:
        if not tracer.active:
            break
        tracer.advance_to(sign * v)
    for b in tracer.branches:
        b.points = [(sign * q, r) for q, r in b.points]
        b.path = [(sign * q, z) for q, z in b.path]
        if b.end_param is not None:
            b.end_param = sign * b.end_param
    return tracer.branches


# --------------------------------------------------------------------------------------
# [sweep] and [threshold] tables (validated here, called from kinroots.casefile)
# --------------------------------------------------------------------------------------

_SPACINGS = ("linear", "log")
_AXIS_KEYS = ("parameter", "start", "stop", "points", "spacing")
SWEEP_KEYS = ("x", "y", "growth_levels", "angles")
THRESHOLD_KEYS = ("growth", "parameter", "bracket", "across", "angles")


@dataclass(frozen=True)
class SweepAxis:
    """One swept parameter: ``points`` values from ``start`` to ``stop``."""

    path: ParameterPath
    start: float
    stop: float
    points: int
    spacing: str = "linear"

    @property
    def values(self) -> np.ndarray:
        """The grid values (read-only array)."""
        if self.points == 1:
            v = np.array([self.start])
        elif self.spacing == "log":
            v = np.geomspace(self.start, self.stop, self.points)
        else:
            v = np.linspace(self.start, self.stop, self.points)
        v.setflags(write=False)
        return v


@dataclass(frozen=True)
class SweepSpec:
    """The ``[sweep]`` table: one or two axes, contour levels, angles for the growth search.

    ``growth_levels`` and the growth search work in the case's normalized frequency unit.
    ``angles`` (degrees) replaces ``wave.angle`` in the maximum-growth search when given.
    """

    x: SweepAxis
    y: SweepAxis | None = None
    growth_levels: tuple[float, ...] = ()
    angles: tuple[float, ...] | None = None

    @property
    def axes(self) -> tuple[SweepAxis, ...]:
        return (self.x,) if self.y is None else (self.x, self.y)

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(a.points for a in self.axes)


@dataclass(frozen=True)
class ThresholdSpec:
    """The ``[threshold]`` table.

    Attributes
    ----------
    growth : float
        Level of the maximum growth rate (normalized frequency unit), e.g. 1e-3 Ω_p.
    path : ParameterPath
        The parameter bracketed for the marginal value.
    bracket : (float, float)
        Interval in which that parameter is sought.
    across : SweepAxis
        Values of the other parameter at which the marginal value is found.
    angles : tuple of float or None
        Angles (degrees) of the maximum-growth search; None: ``wave.angle``.
    """

    growth: float
    path: ParameterPath
    bracket: tuple[float, float]
    across: SweepAxis
    angles: tuple[float, ...] | None = None


def _check_axis(chk: Any, tab: Any, where: str, names: Sequence[str]) -> SweepAxis | None:
    expected_tab = ("a table {parameter = \"<path>\", start, stop, points, "
                    "spacing = \"linear\"|\"log\"}")
    if not isinstance(tab, dict):
        chk.bad(where, tab, expected_tab)
        return None
    chk.unknown_keys(tab, _AXIS_KEYS, where)
    n0 = len(chk.errors)
    path: ParameterPath | None = None
    if "parameter" not in tab:
        chk.missing(f"{where}.parameter", "a parameter path such as 'species.<name>.density'")
    else:
        try:
            path = parse_path(tab["parameter"], names)
        except ParameterError as exc:
            chk.error(f"{where}.parameter", str(exc))
    start = chk.number(tab, "start", f"{where}.start", "a finite number")
    stop = chk.number(tab, "stop", f"{where}.stop", "a finite number")
    points = chk.integer(tab, "points", f"{where}.points", "an integer >= 1", minimum=1)
    spacing = chk.choice(tab, "spacing", f"{where}.spacing", _SPACINGS, default="linear",
                         required=False)
    if len(chk.errors) > n0 or path is None:
        return None
    assert start is not None and stop is not None and points is not None
    if points > 1 and not start != stop:
        chk.error(where, f"got start = stop = {start!r}, expected two different values")
        return None
    if spacing == "log" and not (start > 0 and stop > 0):
        chk.error(where, f"got start = {start!r}, stop = {stop!r} with spacing \"log\", "
                  "expected both > 0")
        return None
    return SweepAxis(path, start, stop, points, str(spacing))


def _check_angles(chk: Any, tab: dict[str, Any], where: str) -> tuple[float, ...] | None:
    if "angles" not in tab:
        return None
    value = tab["angles"]
    expected = "a non-empty array of increasing angles in degrees, each in [0, 180]"
    if (not isinstance(value, list) or not value
            or any(isinstance(v, bool) or not isinstance(v, int | float) for v in value)):
        chk.bad(where, value, expected)
        return None
    out = tuple(float(v) for v in value)
    if (not all(math.isfinite(v) and 0 <= v <= 180 for v in out)
            or any(b <= a for a, b in zip(out, out[1:], strict=False))):
        chk.bad(where, value, expected)
        return None
    return out


def check_study_tables(
    chk: Any, data: dict[str, Any], names: Sequence[str]
) -> tuple[SweepSpec | None, ThresholdSpec | None]:
    """Validate ``[sweep]`` and ``[threshold]`` (messages through the case checker ``chk``).

    Called by :func:`kinroots.casefile.parse_case`; both tables are optional.
    """
    sweep: SweepSpec | None = None
    tab = chk.table(data, "sweep", "sweep", required=False)
    if tab is not None:
        chk.unknown_keys(tab, SWEEP_KEYS, "sweep")
        n0 = len(chk.errors)
        x = (_check_axis(chk, tab["x"], "sweep.x", names) if "x" in tab
             else chk.missing("sweep.x", "a table {parameter, start, stop, points}"))
        y = _check_axis(chk, tab["y"], "sweep.y", names) if "y" in tab else None
        if x is not None and y is not None and x.path.text == y.path.text:
            chk.error("sweep.y.parameter", f"got {y.path.text!r}, the same as "
                      "sweep.x.parameter; expected a different parameter")
        levels: tuple[float, ...] = ()
        if "growth_levels" in tab:
            lv = tab["growth_levels"]
            if (not isinstance(lv, list)
                    or any(isinstance(v, bool) or not isinstance(v, int | float)
                           or not math.isfinite(float(v)) for v in lv)):
                chk.bad("sweep.growth_levels", lv, "an array of finite numbers "
                        "(growth rates in the case's frequency unit)")
            else:
                levels = tuple(sorted(float(v) for v in lv))
        angles = _check_angles(chk, tab, "sweep.angles")
        if len(chk.errors) == n0 and x is not None:
            sweep = SweepSpec(x, y, levels, angles)

    threshold: ThresholdSpec | None = None
    tab = chk.table(data, "threshold", "threshold", required=False)
    if tab is not None:
        chk.unknown_keys(tab, THRESHOLD_KEYS, "threshold")
        n0 = len(chk.errors)
        growth = chk.number(tab, "growth", "threshold.growth",
                            "a number (growth rate in the case's frequency unit)")
        path = None
        if "parameter" not in tab:
            chk.missing("threshold.parameter", "the parameter path to bracket")
        else:
            try:
                path = parse_path(tab["parameter"], names)
            except ParameterError as exc:
                chk.error("threshold.parameter", str(exc))
        bracket = chk.window(tab, "bracket", "threshold.bracket")
        across = (_check_axis(chk, tab["across"], "threshold.across", names)
                  if "across" in tab else None)
        angles = _check_angles(chk, tab, "threshold.angles")
        if across is None and "across" not in tab and path is not None:
            others = [a for a in (sweep.axes if sweep else ()) if a.path.text != path.text]
            if others:
                across = others[0]
            else:
                chk.missing("threshold.across", "a table {parameter, start, stop, points} "
                            "(or a [sweep] axis other than threshold.parameter)")
        if across is not None and path is not None and across.path.text == path.text:
            chk.error("threshold.across.parameter", f"got {path.text!r}, the bracketed "
                      "parameter itself; expected a different parameter")
        if angles is None and sweep is not None:
            angles = sweep.angles
        if len(chk.errors) == n0:
            assert growth is not None and path is not None and bracket is not None
            assert across is not None
            threshold = ThresholdSpec(growth, path, bracket, across, angles)
    return sweep, threshold
