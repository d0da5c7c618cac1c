"""The ``[sweep]`` and ``[threshold]`` tables of a case file: specs and their validation.

Called by :func:`kinroots.io.case.parse_case` through :func:`check_study_tables`; the
parameter names come from :mod:`kinroots.io.parameter_paths`.
"""


from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from kinroots.io.grid import spaced_grid
from kinroots.io.limits import (
    LIMITS,
    MAX_ANGLES,
    MAX_SWEEP_AXIS_POINTS,
    MAX_SWEEP_POINTS,
    finite_float,
)
from kinroots.io.parameter_paths import ParameterError, ParameterPath, parse_path

__all__ = [
]


# --------------------------------------------------------------------------------------
# [sweep] and [threshold] tables (validated here, called from kinroots.io.case)
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
        v = spaced_grid(self.start, self.stop, self.points, self.spacing)
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
    points = chk.integer(tab, "points", f"{where}.points", "an integer >= 1", minimum=1,
                         maximum=MAX_SWEEP_AXIS_POINTS)
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
    if (not isinstance(value, list) or not value or len(value) > MAX_ANGLES
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

    Called by :func:`kinroots.io.case.parse_case`; both tables are optional.
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
            if (not isinstance(lv, list) or len(lv) > MAX_ANGLES
                    or any(isinstance(v, bool) or not isinstance(v, int | float)
                           or not LIMITS["growth"](finite_float(v) or math.inf) for v in lv)):
                chk.bad("sweep.growth_levels", lv, "an array of at most "
                        f"{MAX_ANGLES} numbers with |x| <= {LIMITS['growth'].hi:g} "
                        "(growth rates in the case's frequency unit)")
            else:
                levels = tuple(sorted(float(v) for v in lv))
        angles = _check_angles(chk, tab, "sweep.angles")
        if x is not None and y is not None and x.points * y.points > MAX_SWEEP_POINTS:
            chk.error("sweep", f"got {x.points} x {y.points} = {x.points * y.points} grid "
                      f"points, expected at most {MAX_SWEEP_POINTS} (size limit)")
        if len(chk.errors) == n0 and x is not None:
            sweep = SweepSpec(x, y, levels, angles)

    threshold: ThresholdSpec | None = None
    tab = chk.table(data, "threshold", "threshold", required=False)
    if tab is not None:
        chk.unknown_keys(tab, THRESHOLD_KEYS, "threshold")
        n0 = len(chk.errors)
        growth = chk.ranged(tab, "growth", "threshold.growth", LIMITS["growth"],
                            note="growth rate in the case's frequency unit")
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
