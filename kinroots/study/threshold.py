"""Marginal stability: the parameter value at which the maximum growth rate equals a level."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from kinroots.io.case import Case
from kinroots.io.parameters import (
    ParameterError,
    ParameterPath,
    with_parameter,
)
from kinroots.study.growth import GrowthResult, max_growth


@dataclass
class ThresholdResult:
    """Marginal value of one parameter (see :func:`find_threshold`)."""

    value: float = math.nan
    converged: bool = False
    reason: str = ""
    growth_low: float = math.nan
    growth_high: float = math.nan
    iterations: int = 0
    at: GrowthResult | None = None


def _growth_or_floor(case: Case, angles: Sequence[float] | None) -> tuple[float, GrowthResult]:
    g = max_growth(case, angles)
    if math.isnan(g.growth):  # nothing in the window: growth below its lower edge
        return case.search_imag[0], g
    return g.growth, g


def find_threshold(case: Case, path: str | ParameterPath, bracket: tuple[float, float],
                   level: float, angles: Sequence[float] | None = None, *,
                   xtol: float | None = None) -> ThresholdResult:
    """The value of ``path`` in ``bracket`` where the maximum growth rate equals ``level``.

    Parameters
    ----------
    case : Case
        Validated case (the other parameters as they are).
    path : str or ParameterPath
        Parameter to bracket.
    bracket : (float, float)
        Interval; γ_max − level must change sign across it.
    level : float
        Growth level in the case's normalized frequency unit (e.g. 1e-3 for 10⁻³ Ω_p).
    angles : sequence of float, optional
        Angles of the maximum-growth search (:func:`max_growth`).
    xtol : float, optional
        Absolute tolerance on the parameter (default 1e-6 of the bracket width).

    Returns
    -------
    ThresholdResult
        ``converged`` false, with the reason, when there is no sign change.

    Notes
    -----
    Root bracketing with Brent's method (``scipy.optimize.brentq``) on
    γ_max(p) − level, where γ_max(p) is :func:`max_growth` of the case at p (a fresh
    survey each time, so the function is the true maximum, not a followed branch).  A case
    with no root in the window counts as γ_max = lower edge of the window.
    """
    from scipy.optimize import brentq

    lo, hi = float(bracket[0]), float(bracket[1])
    out = ThresholdResult()
    memo: dict[float, tuple[float, GrowthResult]] = {}

    def g(p: float) -> float:
        if p not in memo:
            memo[p] = _growth_or_floor(with_parameter(case, path, p), angles)
        return memo[p][0] - level

    try:
        glo, ghi = g(lo), g(hi)
    except ParameterError as exc:
        out.reason = str(exc)
        return out
    out.growth_low, out.growth_high = glo + level, ghi + level
    if glo == 0.0 or ghi == 0.0 or (glo < 0) != (ghi < 0):
        tol = xtol if xtol is not None else 1e-6 * abs(hi - lo)
        p, info = brentq(g, lo, hi, xtol=tol, rtol=1e-12, full_output=True, disp=False)
        out.value, out.iterations = float(p), int(info.iterations)
        out.converged = bool(info.converged)
        if p not in memo:
            g(p)
        out.at = memo[p][1]
        if not out.converged:
            out.reason = f"Brent's method did not converge: {info.flag}"
        elif out.at is not None and not out.at.complete:
            out.converged = False
            out.reason = "; ".join(out.at.notes)
    else:
        out.reason = (f"no crossing of growth level {level!r} in [{lo!r}, {hi!r}]: maximum "
                      f"growth {out.growth_low!r} at {lo!r} and {out.growth_high!r} at {hi!r}")
    return out


