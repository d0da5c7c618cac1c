"""Maximum growth rate over the k scan (and angles) of one case.

:func:`max_growth` surveys the search window at every k of the case's scan (and every
angle of a list), takes the root with the largest γ, then maximizes γ locally (bounded
Brent on γ(k) between the neighbouring grid points, nested in a bounded Brent on the
angle when angles are given) from roots polished by Newton's method, each start taken
from the nearest point already solved.  The least-damped root (largest γ among the
non-growing roots) is read off the grid.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace

from kinroots.io.case import Case
from kinroots.roots import RootResult, polish
from kinroots.study.problem import function_at, survey, window
from kinroots.study.rows import is_growing


@dataclass
class GrowthResult:
    """The fastest-growing and least-damped roots of one case (normalized units).

    Attributes
    ----------
    growth : float
        Largest Im ω found (may be negative: nothing grows); NaN when no root was found.
    omega : complex
        That root.
    k, angle : float
        Where it lies (normalized k, degrees).
    growing : bool
        γ exceeds the root finder's resolution (:func:`kinroots.study.problem.is_growing`).
    k_at_edge, angle_at_edge : bool
        The maximum sits at an end of the k scan or of the angle list (the true maximum
        may lie outside the ranges searched).
    least_damped : complex or None
        Largest Im ω among the roots that do not grow (grid value), with
        ``least_damped_k`` and ``least_damped_angle``.
    roots_found : int
        Roots found by the surveys, all k and angles together.
    complete : bool
        Every survey complete and the refinement converged.
    notes : list of str
        What went wrong, if anything.
    evaluations : int
        Dispersion-function evaluations.
    """

    growth: float = math.nan
    omega: complex = complex(math.nan, math.nan)
    k: float = math.nan
    angle: float = math.nan
    growing: bool = False
    k_at_edge: bool = False
    angle_at_edge: bool = False
    least_damped: complex | None = None
    least_damped_k: float = math.nan
    least_damped_angle: float = math.nan
    roots_found: int = 0
    complete: bool = True
    notes: list[str] = field(default_factory=list)
    evaluations: int = 0


class _Refiner:
    """γ(k, θ) of one root carried from the nearest solved point (memoized)."""

    def __init__(self, case: Case, k_scale: float, a_scale: float) -> None:
        self.case = case
        self.box = window(case)
        self.known: list[tuple[float, float, complex]] = []
        self.k_scale, self.a_scale = k_scale, a_scale
        self.evaluations = 0
        self.best: tuple[float, float, float, complex] | None = None  # γ, k, θ, ω

    def add(self, k: float, a: float, omega: complex) -> None:
        self.known.append((k, a, omega))

    def gamma(self, k: float, a: float) -> float:
        k0, a0, z0 = min(self.known, key=lambda t: ((t[0] - k) / self.k_scale) ** 2
                         + ((t[1] - a) / self.a_scale) ** 2)
        c = self.case if a == self.case.angle_deg else replace(self.case, angle_deg=a)
        r: RootResult = polish(function_at(c, k), z0, rtol=self.case.solver.tolerance,
                               region=self.box, maxiter=30)
        self.evaluations += r.evaluations
        if not r.converged:
            return -math.inf
        self.known.append((k, a, r.value))
        g = r.value.imag
        if self.best is None or g > self.best[0]:
            self.best = (g, k, a, r.value)
        return g


def _bounded_max(fun: Callable[[float], float], lo: float, hi: float, x0: float) -> None:
    """Maximize ``fun`` on [lo, hi] by bounded Brent (results kept by the callee)."""
    from scipy.optimize import minimize_scalar

    if not hi > lo:
        fun(x0)
        return

    def neg(x: float) -> float:
        v = fun(x)
        return 1e300 if not math.isfinite(v) else -v

    minimize_scalar(neg, bounds=(lo, hi), method="bounded",
                    options={"xatol": 1e-5 * (hi - lo) + 1e-12 * abs(x0), "maxiter": 60})


def max_growth(case: Case, angles: Sequence[float] | None = None, *,
               refine: bool = True) -> GrowthResult:
    """Fastest-growing root over the case's k scan (and over ``angles``), refined locally.

    Parameters
    ----------
    case : Case
        Validated case; its ``[scan]`` k values and ``[search]`` window are searched.
    angles : sequence of float, optional
        Angles in degrees (increasing); default ``[case.angle_deg]``.
    refine : bool
        Maximize γ between grid points (default); False gives the best grid point.

    Returns
    -------
    GrowthResult

    Notes
    -----
    Grid stage: every root in the window at every (k, θ) by the argument-principle survey.
    Refinement: γ(k) of the best root, polished by Newton from the nearest solved point,
    maximized by bounded Brent (``scipy.optimize.minimize_scalar``) on
    [k_{i−1}, k_{i+1}]; with several angles, an outer bounded Brent on θ over
    [θ_{j−1}, θ_{j+1}] maximizes max_k γ(k, θ).  The refined maximum replaces the grid
    maximum only when it is larger.
    """
    angs = [float(a) for a in (angles if angles else [case.angle_deg])]
    ks = [float(k) for k in case.k_values]
    res = GrowthResult()
    best: tuple[float, int, int, complex] | None = None
    least: tuple[float, int, int, complex] | None = None
    rtol = case.solver.tolerance
    for ai, a in enumerate(angs):
        ca = case if a == case.angle_deg else replace(case, angle_deg=a)
        for ki, k in enumerate(ks):
            s = survey(ca, k)
            res.evaluations += s.evaluations
            if not s.complete:
                res.complete = False
                res.notes.append(f"survey at k = {k!r}, angle = {a!r} incomplete: counted "
                                 f"{s.count}, found {len(s.values)}")
            for r in s.roots:
                if not r.converged:
                    continue
                res.roots_found += 1
                z = complex(r.value)
                if best is None or z.imag > best[0]:
                    best = (z.imag, ai, ki, z)
                if not is_growing(z, rtol) and (least is None or z.imag > least[0]):
                    least = (z.imag, ai, ki, z)
    if least is not None:
        res.least_damped = least[3]
        res.least_damped_k, res.least_damped_angle = ks[least[2]], angs[least[1]]
    if best is None:
        return res
    _, ai, ki, z = best
    res.growth, res.omega, res.k, res.angle = z.imag, z, ks[ki], angs[ai]
    if refine and (len(ks) > 1 or len(angs) > 1):
        k_lo, k_hi = ks[max(ki - 1, 0)], ks[min(ki + 1, len(ks) - 1)]
        a_lo, a_hi = angs[max(ai - 1, 0)], angs[min(ai + 1, len(angs) - 1)]
        k_span = (ks[-1] - ks[0]) or 1.0
        a_span = (angs[-1] - angs[0]) or 1.0
        ref = _Refiner(case, k_scale=k_span / max(len(ks) - 1, 1),
                       a_scale=a_span / max(len(angs) - 1, 1))
        ref.add(ks[ki], angs[ai], z)

        def over_k(a: float) -> float:
            before = ref.best
            ref.best = None
            _bounded_max(lambda k: ref.gamma(k, a), k_lo, k_hi, ks[ki])
            inner = ref.best
            ref.best = before if (inner is None or (before and before[0] >= inner[0])) \
                else inner
            return -math.inf if inner is None else inner[0]

        if len(angs) > 1:
            _bounded_max(over_k, a_lo, a_hi, angs[ai])
        else:
            over_k(angs[ai])
        res.evaluations += ref.evaluations
        if ref.best is not None and ref.best[0] > res.growth:
            g, k, a, w = ref.best
            res.growth, res.omega, res.k, res.angle = g, w, k, a
        tol_k = 1e-3 * (k_hi - k_lo)
        tol_a = 1e-3 * (a_hi - a_lo)
        res.k_at_edge = len(ks) > 1 and (
            (ki == 0 and res.k - ks[0] <= tol_k) or (ki == len(ks) - 1 and ks[-1] - res.k <= tol_k))
        res.angle_at_edge = len(angs) > 1 and (
            (ai == 0 and res.angle - angs[0] <= tol_a)
            or (ai == len(angs) - 1 and angs[-1] - res.angle <= tol_a))
    res.growing = is_growing(res.omega, rtol)
    return res


