"""Marginal stability: the parameter value at which the maximum growth rate equals a level."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

from kinroots.io.case import Case
from kinroots.io.parameters import (
    ParameterError,
    ParameterPath,
    with_parameter,
)
from kinroots.roots import polish
from kinroots.study.growth import GrowthResult, max_growth
from kinroots.study.problem import function_at, window


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
    notes: list[str] = field(default_factory=list)


#: Largest |γ_max − level| / |level| at the answer for a threshold to count as converged.
VERIFY_FRACTION = 0.05


#: Newton steps in the parameter that carry a neighbour's maximizer to a new value.
CARRY_STEPS = 8


def _neighbour_seeds(case: Case, path: str | ParameterPath,
                     memo: dict[float, tuple[float, GrowthResult]], p: float
                     ) -> list[tuple[float, float, complex]]:
    """The maximizers at the nearest values solved below and above ``p``, carried to ``p``.

    Both sides: near a threshold the mode that grows may be damped at every (k, θ) grid
    point on one side, and only continuation from the other side finds it.  Each
    maximizer's root is carried at its (k, θ) from its value q to p in ``CARRY_STEPS``
    Newton steps (continuation in the parameter); a failed step drops the seed.
    """
    seeds = []
    for side in (-1.0, 1.0):
        done = [(abs(q - p), q) for q, (_, g) in memo.items()
                if math.isfinite(g.growth) and (q - p) * side > 0]
        if not done:
            continue
        q = min(done)[1]
        g = memo[q][1]
        z = g.omega
        for j in range(1, CARRY_STEPS + 1):
            c = with_parameter(case, path, q + (p - q) * j / CARRY_STEPS)
            c = c if g.angle == c.angle_deg else replace(c, angle_deg=g.angle)
            r = polish(function_at(c, g.k), z, rtol=case.solver.tolerance, maxiter=20)
            if not r.converged:
                break
            z = complex(r.value)
        else:
            seeds.append((g.k, g.angle, z))
    return seeds


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
        ``converged`` false, with the reason, when there is no sign change, or when the
        maximum growth recomputed at the answer differs from ``level`` by more than
        ``VERIFY_FRACTION`` of it (γ_max jumps there: another mode takes over).
        ``growth_low``/``growth_high`` are NaN where the window holds no root, and
        ``notes`` says so.

    Notes
    -----
    Root bracketing with Brent's method (``scipy.optimize.brentq``) on
    γ_max(p) − level, where γ_max(p) is :func:`max_growth` of the case at p (a fresh
    survey each time, so the function is the true maximum, not a followed branch); the
    maximizers at the nearest values already solved on either side, carried to p by
    Newton continuation in p, are more climb starts (so γ_max(p) is continuous where the
    physics is).  A case with no root in the window counts as
    γ_max below the window's lower edge for the bracketing, and is reported as such.
    """
    from scipy.optimize import brentq

    lo, hi = float(bracket[0]), float(bracket[1])
    out = ThresholdResult()
    memo: dict[float, tuple[float, GrowthResult]] = {}

    def g(p: float) -> float:
        if p not in memo:
            gr = max_growth(with_parameter(case, path, p), angles,
                            seeds=_neighbour_seeds(case, path, memo, p))
            # nothing in the window: growth below its lower edge (for the sign only)
            memo[p] = (window(case)[2] if math.isnan(gr.growth) else gr.growth, gr)
        return memo[p][0] - level

    try:
        glo, ghi = g(lo), g(hi)
    except ParameterError as exc:
        out.reason = str(exc)
        return out
    for end, v in (("lower", lo), ("upper", hi)):
        if math.isnan(memo[v][1].growth):
            out.notes.append(f"no root in the search window at the {end} bracket end "
                             f"({v!r}): maximum growth below the window's lower edge "
                             f"{window(case)[2]!r}")
    out.growth_low, out.growth_high = memo[lo][1].growth, memo[hi][1].growth
    if glo == 0.0 or ghi == 0.0 or (glo < 0) != (ghi < 0):
        tol = xtol if xtol is not None else 1e-6 * abs(hi - lo)
        p, info = brentq(g, lo, hi, xtol=tol, rtol=1e-12, full_output=True, disp=False)
        out.value, out.iterations = float(p), int(info.iterations)
        out.converged = bool(info.converged)
        if p not in memo:
            g(p)
        out.at = memo[p][1]
        off = abs(out.at.growth - level) if math.isfinite(out.at.growth) else math.inf
        if not out.converged:
            out.reason = f"Brent's method did not converge: {info.flag}"
        elif not out.at.complete:
            out.converged = False
            out.reason = "; ".join(out.at.notes)
        elif off > VERIFY_FRACTION * abs(level):
            out.converged = False
            out.reason = (f"maximum growth recomputed at {p!r} is {out.at.growth!r}, not "
                          f"the level {level!r} within {VERIFY_FRACTION:.0%}: it jumps "
                          f"there (another mode takes over, or the grid misses the maximum)")
    else:
        def said(v: float) -> str:
            return repr(v) if math.isfinite(v) else "none (no root in the window)"
        out.reason = (f"no crossing of growth level {level!r} in [{lo!r}, {hi!r}]: maximum "
                      f"growth {said(out.growth_low)} at {lo!r} and {said(out.growth_high)} "
                      f"at {hi!r}")
    return out


