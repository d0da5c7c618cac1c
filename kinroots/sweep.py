"""Maximum growth over k (and angle), parameter sweeps and marginal-stability thresholds.

Three layers, each a pure function of its inputs:

* :func:`max_growth` — for one case: survey the search window at every k of the case's
  scan (and every angle of a list), take the root with the largest γ, then maximize γ
  locally (bounded Brent on γ(k) between the neighbouring grid points, nested in a
  bounded Brent on the angle when angles are given) from roots polished by Newton's
  method, each start taken from the nearest point already solved.  The least-damped
  root (largest γ among the non-growing roots) is read off the grid.
* :func:`sweep_point` / :func:`threshold_point` — one grid point of a ``[sweep]`` or one
  value of ``threshold.across``: a pure function of (case, index), so local pool and Dask
  give identical rows.
* :func:`run_points` — executes the points not yet in the store, on a local process pool
  or an existing Dask cluster, committing each row as it finishes.

Order in which swept values are applied: in axis order, except that ``beta_par`` paths
(which set B from the species' T∥ and density) are applied last, so that the β∥ written
in the table is the β∥ of the case solved.

Growth values are in the case's normalized frequency unit *at that grid point* (for
B or beta_par sweeps with a cyclotron unit the unit follows B); SI columns accompany them.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from kinroots.casefile import Case, parse_case
from kinroots.parameters import (
    ParameterError,
    ParameterPath,
    SweepAxis,
    parameter_value,
    with_parameter,
)
from kinroots.roots import RootResult, polish
from kinroots.scan import function_at, is_growing, survey, window

__all__ = [
    "SWEEP_COLUMNS",
    "THRESHOLD_COLUMNS",
    "GrowthResult",
    "case_hash",
    "check_ranges",
    "find_threshold",
    "max_growth",
    "run_points",
    "sweep_point",
    "threshold_point",
]

#: Columns of sweep.csv.
SWEEP_COLUMNS: tuple[str, ...] = (
    "i", "j", "x", "y",
    "growth_max", "growth_omega_real", "growth_k", "growth_angle",
    "growth_per_s", "growth_freq_hz", "growth_k_per_m", "growing",
    "k_at_edge", "angle_at_edge",
    "least_damped_omega_real", "least_damped_omega_imag", "least_damped_k",
    "least_damped_angle",
    "roots_found", "evaluations", "converged", "reason",
)
#: Columns of threshold.csv.
THRESHOLD_COLUMNS: tuple[str, ...] = (
    "j", "across", "threshold", "growth_level",
    "growth_k", "growth_angle", "growth_omega_real", "growth_omega_imag",
    "growth_at_low", "growth_at_high", "bracket_low", "bracket_high",
    "brent_iterations", "converged", "reason",
)
_SWEEP_VALUES = ("growth_max", "growth_omega_real", "growth_k", "growth_angle",
                 "growth_per_s", "growth_freq_hz", "growth_k_per_m")
_THRESHOLD_VALUES = ("threshold", "growth_k", "growth_angle", "growth_omega_real",
                     "growth_omega_imag")


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
        γ exceeds the root finder's resolution (:func:`kinroots.scan.is_growing`).
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


# ----------------------------------------------------------------------- grid points


def _apply(case: Case, settings: Iterable[tuple[ParameterPath, float]]) -> Case:
    """Apply parameter settings; ``beta_par`` paths last (they read T∥ and n)."""
    items = list(settings)
    items.sort(key=lambda t: t[0].quantity == "beta_par")
    for path, value in items:
        case = with_parameter(case, path, value)
    return case


def grid_index(shape: tuple[int, ...], index: int) -> tuple[int, int]:
    """Flat index → (i, j) (j = 0 for a one-parameter sweep); x runs slowest."""
    if len(shape) == 1:
        return index, 0
    return divmod(index, shape[1])


def sweep_point(case: Case, index: int) -> dict[str, Any]:
    """The row of grid point ``index`` (flat, x slowest) of the case's ``[sweep]``.

    A pure function of (case, index).  A point whose parameter values make an invalid
    case, or whose search fails, is recorded (``converged = false`` with the reason).
    """
    spec = case.sweep
    i, j = grid_index(spec.shape, index)
    xv = float(spec.x.values[i])
    yv = float(spec.y.values[j]) if spec.y is not None else math.nan
    row: dict[str, Any] = {"i": i, "j": j, "x": xv, "y": yv}
    settings = [(spec.x.path, xv)] + ([(spec.y.path, yv)] if spec.y is not None else [])
    try:
        c = _apply(case, settings)
    except ParameterError as exc:
        return {**row, "converged": False, "reason": str(exc), "roots_found": 0,
                "evaluations": 0, "growing": False}
    g = max_growth(c, spec.angles)
    units = c.units
    w_si = complex(units.omega_to_si(g.omega))
    ld = g.least_damped
    row.update({
        "growth_max": g.growth,
        "growth_omega_real": g.omega.real,
        "growth_k": g.k,
        "growth_angle": g.angle,
        "growth_per_s": w_si.imag,
        "growth_freq_hz": w_si.real / (2 * math.pi),
        "growth_k_per_m": float(units.k_to_si(g.k)),
        "growing": g.growing,
        "k_at_edge": g.k_at_edge,
        "angle_at_edge": g.angle_at_edge,
        "least_damped_omega_real": ld.real if ld is not None else math.nan,
        "least_damped_omega_imag": ld.imag if ld is not None else math.nan,
        "least_damped_k": g.least_damped_k,
        "least_damped_angle": g.least_damped_angle,
        "roots_found": g.roots_found,
        "evaluations": g.evaluations,
        "converged": g.complete,
        "reason": "; ".join(g.notes) if g.notes else
        ("" if g.roots_found else "no root in the search window"),
    })
    return row


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


def threshold_point(case: Case, index: int) -> dict[str, Any]:
    """Row ``index`` of the ``[threshold]`` curve: pure function of (case, index)."""
    spec = case.threshold
    v = float(spec.across.values[index])
    row: dict[str, Any] = {"j": index, "across": v, "growth_level": spec.growth,
                           "bracket_low": spec.bracket[0], "bracket_high": spec.bracket[1]}
    try:
        c = _apply(case, [(spec.across.path, v)])
    except ParameterError as exc:
        return {**row, "converged": False, "reason": str(exc), "brent_iterations": 0}
    t = find_threshold(c, spec.path, spec.bracket, spec.growth, spec.angles)
    at = t.at
    row.update({
        "threshold": t.value,
        "growth_k": at.k if at else math.nan,
        "growth_angle": at.angle if at else math.nan,
        "growth_omega_real": at.omega.real if at else math.nan,
        "growth_omega_imag": at.omega.imag if at else math.nan,
        "growth_at_low": t.growth_low,
        "growth_at_high": t.growth_high,
        "brent_iterations": t.iterations,
        "converged": t.converged,
        "reason": t.reason,
    })
    return row


def blank_failed(rows: list[dict[str, Any]], kind: str) -> list[dict[str, Any]]:
    """Rows for the CSV: value cells emptied (None) where ``converged`` is false."""
    cols = _SWEEP_VALUES if kind == "sweep" else _THRESHOLD_VALUES
    out = []
    for r in rows:
        r = dict(r)
        if r.get("converged") is False:
            for c in cols:
                r[c] = None
        out.append(r)
    return out


def check_ranges(case: Case) -> list[str]:
    """Messages for swept or bracketed values that make an invalid case (before any work).

    Each message names the key path of the table and the value refused.
    """
    errors: list[str] = []
    src = str(case.source) if case.source else "case"
    checks: list[tuple[str, SweepAxis | None, tuple[float, ...]]] = []
    if case.sweep is not None:
        for name, ax in (("sweep.x", case.sweep.x), ("sweep.y", case.sweep.y)):
            if ax is not None:
                checks.append((name, ax, (ax.start, ax.stop)))
    if case.threshold is not None:
        t = case.threshold
        checks.append(("threshold.across", t.across, (t.across.start, t.across.stop)))
        checks.append(("threshold.bracket", None, t.bracket))
    for where, ax, ends in checks:
        path = ax.path if ax is not None else case.threshold.path
        for v in ends:
            try:
                with_parameter(case, path, v)
            except ParameterError as exc:
                errors.append(f"{src}: {where}: value {v!r} refused: {exc}")
    return errors


def case_hash(case: Case) -> str:
    """SHA-256 of the case's TOML data in a normalized form (sorted keys, repr floats)."""
    text = json.dumps(case.raw, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


# ------------------------------------------------------------------------- execution

_CASE_CACHE: dict[str, Case] = {}


def _case_from(raw: dict[str, Any], source: str) -> Case:
    key = hashlib.sha256(json.dumps(raw, sort_keys=True, default=str).encode()).hexdigest()
    key += source
    if key not in _CASE_CACHE:
        _CASE_CACHE.clear()
        _CASE_CACHE[key] = parse_case(raw, source)
    return _CASE_CACHE[key]


def compute_point(raw: dict[str, Any], source: str, kind: str, index: int
                  ) -> tuple[int, dict[str, Any]]:
    """Worker entry: rebuild the case from its TOML data and solve one point."""
    case = _case_from(raw, source)
    if kind == "sweep":
        return index, sweep_point(case, index)
    return index, threshold_point(case, index)


def run_points(
    case: Case,
    kind: str,
    indices: Sequence[int],
    on_result: Callable[[int, dict[str, Any]], None],
    *,
    workers: int | None = None,
    scheduler: str | None = None,
) -> None:
    """Solve grid points and hand each row to ``on_result(index, row)`` as it completes.

    Parameters
    ----------
    case : Case
        Case with a ``[sweep]`` (kind "sweep") or ``[threshold]`` (kind "threshold").
    kind : str
        ``"sweep"`` or ``"threshold"``.
    indices : sequence of int
        Points to solve (the caller leaves out finished ones).
    on_result : callable
        Called in this process, once per point, in completion order.
    workers : int, optional
        Local worker processes (default: the number of cores); 1 runs in this process.
    scheduler : str, optional
        Address of a running Dask distributed scheduler; overrides ``workers``.

    Raises
    ------
    ConnectionError
        The scheduler cannot be reached (raised before any point is solved).
    """
    source = str(case.source) if case.source is not None else "case"
    todo = list(indices)
    if not todo:
        return
    if scheduler:
        _run_dask(case.raw, source, kind, todo, on_result, scheduler)
        return
    n = workers or os.cpu_count() or 1
    if n <= 1 or len(todo) == 1:
        for i in todo:
            on_result(*compute_point(case.raw, source, kind, i))
        return
    import multiprocessing as mp
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    with ProcessPoolExecutor(max_workers=min(n, len(todo)),
                             mp_context=mp.get_context("spawn")) as pool:
        pending = {pool.submit(compute_point, case.raw, source, kind, i) for i in todo}
        try:
            while pending:
                done, pending = wait(pending, return_when=FIRST_COMPLETED)
                for fut in sorted(done, key=lambda f: f.result()[0]):
                    on_result(*fut.result())
        except BaseException:
            for fut in pending:
                fut.cancel()
            raise


def _run_dask(raw: dict[str, Any], source: str, kind: str, todo: list[int],
              on_result: Callable[[int, dict[str, Any]], None], scheduler: str) -> None:
    from dask.distributed import Client, as_completed

    try:
        client = Client(scheduler, timeout="10s")
    except (OSError, TimeoutError) as exc:
        raise ConnectionError(f"cannot reach the Dask scheduler at {scheduler!r}: {exc}"
                              ) from None
    try:
        futures = client.map(compute_point, [raw] * len(todo), [source] * len(todo),
                             [kind] * len(todo), todo, pure=False)
        for fut in as_completed(futures):
            on_result(*fut.result())
    finally:
        client.close()


def grid_values(case: Case) -> dict[str, np.ndarray]:
    """Axis values of the ``[sweep]`` keyed by axis name ("x", "y")."""
    spec = case.sweep
    out = {"x": spec.x.values}
    if spec.y is not None:
        out["y"] = spec.y.values
    return out


def current_values(case: Case) -> dict[str, float]:
    """The case's own values of the swept parameters (for the summary)."""
    spec = case.sweep
    return {a.path.text: parameter_value(case, a.path) for a in spec.axes}
