"""Batched Newton on families of functions, and local maximization of a smooth surface.

Nothing here knows about plasmas.  :func:`newton_batch` polishes many roots at once, each
of its own member of a family ``f(index, z)`` (one vectorized call per Newton iteration
for the whole batch); :func:`maximize_local` climbs a smooth function of one or two real
variables to a local maximum inside a box, evaluating its stencils in one call each (so
that the caller can batch them through :func:`newton_batch`).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Generator
from dataclasses import dataclass

import numpy as np

from kinroots.roots.result import Box

__all__ = ["BatchRoots", "ClimbStart", "LocalMaximum", "maximize_local", "maximize_many",
           "newton_batch"]

#: ``f(index, z) -> (f, f')``: member ``index[j]`` of a family at ``z[j]``, elementwise.
FamilyFunction = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


@dataclass
class BatchRoots:
    """Roots from :func:`newton_batch` (arrays over the batch).

    Attributes
    ----------
    values : ndarray of complex
        Last iterate of each element (a root only where ``converged``).
    converged : ndarray of bool
        The Newton correction computed at ``values`` was within ``rtol·|z|``.
    residual : ndarray of float
        ``|f(values)|``.
    step : ndarray of float
        Relative size of that last correction.
    evaluations : int
        Function evaluations (points) for the whole batch.
    """

    values: np.ndarray
    converged: np.ndarray
    residual: np.ndarray
    step: np.ndarray
    evaluations: int


def newton_batch(f: FamilyFunction, z0: np.ndarray, /, *, rtol: float = 1e-12,
                 maxiter: int = 30, region: Box | None = None) -> BatchRoots:
    """Newton's method on every element of a batch, one vectorized call per iteration.

    Parameters
    ----------
    f : callable
        ``f(index, z) -> (f, f')``: element ``j`` of the batch is the function
        ``f(index[j], ·)`` (for example one wavenumber of a dispersion relation).
        Called with the indices of the elements still iterating only.
    z0 : ndarray of complex
        Starting points, one per element.
    rtol : float
        Stopping test ``|Δz| ≤ rtol·|z|`` on the correction computed at the iterate
        reported (the test of :func:`kinroots.roots.polish`).
    maxiter : int
        Largest number of corrections per element.
    region : tuple of float, optional
        ``(re_min, re_max, im_min, im_max)``; an element whose iterate leaves it fails.

    Returns
    -------
    BatchRoots
        Elements that fail (non-finite values, vanishing derivative, leaving the region,
        no convergence) have ``converged`` false; nothing is raised.

    Notes
    -----
    Plain Newton iteration z ← z − f/f' (e.g. J. Stoer and R. Bulirsch, *Introduction to
    Numerical Analysis*, 3rd ed., 2002, §5.1), started close to the root by the caller
    (continuation from a neighbouring member of the family).
    """
    z = np.array(z0, dtype=complex).ravel()
    n = z.size
    converged = np.zeros(n, dtype=bool)
    residual = np.full(n, np.nan)
    step = np.full(n, np.nan)
    active = np.arange(n)
    evaluations = 0
    for _ in range(maxiter + 1):
        if active.size == 0:
            break
        with np.errstate(all="ignore"):
            fv, dv = f(active, z[active])
            fv, dv = np.asarray(fv, dtype=complex), np.asarray(dv, dtype=complex)
            corr = fv / dv
            ok = np.isfinite(corr)
            size = np.where(ok, np.abs(corr), np.inf)
            step[active] = size / np.abs(z[active])
        evaluations += active.size
        residual[active] = np.abs(fv)
        done = ok & (size <= rtol * np.abs(z[active]))
        converged[active[done]] = True
        keep = ok & ~done
        nxt = z[active[keep]] - corr[keep]
        if region is not None:
            inside = ((region[0] <= nxt.real) & (nxt.real <= region[1])
                      & (region[2] <= nxt.imag) & (nxt.imag <= region[3]))
            nxt, keep_idx = nxt[inside], active[keep][inside]
        else:
            keep_idx = active[keep]
        z[keep_idx] = nxt
        active = keep_idx
    return BatchRoots(values=z, converged=converged, residual=residual, step=step,
                      evaluations=evaluations)


@dataclass
class LocalMaximum:
    """Outcome of :func:`maximize_local`.

    Attributes
    ----------
    x : ndarray
        Best point found.
    value : float
        Function value there.
    converged : bool
        The last step (or the trust radius) fell below ``xtol``: a local maximum, or a
        point on the box boundary where the function increases outwards.
    at_lower, at_upper : ndarray of bool
        Per coordinate: ``x`` lies on that face of the box.
    iterations : int
        Accepted and rejected steps.
    calls, points : int
        Calls of the function and points evaluated.
    reason : str
        Why it stopped without converging ("" when converged).
    """

    x: np.ndarray
    value: float
    converged: bool
    at_lower: np.ndarray
    at_upper: np.ndarray
    iterations: int
    calls: int
    points: int
    reason: str = ""


def _basis(u: np.ndarray) -> np.ndarray:
    """Quadratic monomials of the rows of ``u`` (d = 1 or 2)."""
    if u.shape[1] == 1:
        return np.column_stack([np.ones(len(u)), u[:, 0], u[:, 0] ** 2])
    x, y = u[:, 0], u[:, 1]
    return np.column_stack([np.ones(len(u)), x, y, x * x, x * y, y * y])


def _model(u: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Gradient and Hessian at 0 of the least-squares quadratic through (u, values)."""
    c = np.linalg.lstsq(_basis(u), values, rcond=None)[0]
    if u.shape[1] == 1:
        return np.array([c[1]]), np.array([[2 * c[2]]])
    return np.array([c[1], c[2]]), np.array([[2 * c[3], c[4]], [c[4], 2 * c[5]]])


def _offsets(x: float, delta: float, lo: float, hi: float) -> tuple[float, float, float]:
    """Three stencil offsets around ``x`` kept inside [lo, hi] (one-sided at a face)."""
    if x - delta < lo:
        return (0.0, delta, 2 * delta)
    if x + delta > hi:
        return (-2 * delta, -delta, 0.0)
    return (-delta, 0.0, delta)


@dataclass
class ClimbStart:
    """One climb of :func:`maximize_many`: start, box and scale (see there)."""

    x0: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    scale: np.ndarray
    hard_lower: np.ndarray | None = None
    hard_upper: np.ndarray | None = None
    value0: float | None = None


def _stencil(u: np.ndarray, delta: float, hlo: np.ndarray, hhi: np.ndarray) -> np.ndarray:
    """Offsets of the 3^d − 1 stencil points around ``u`` (one-sided at a face)."""
    offs = [_offsets(u[a], delta, hlo[a], hhi[a]) for a in range(u.size)]
    return np.array([o for o in itertools.product(*offs) if any(o)], dtype=float)


def _step(g: np.ndarray, h: np.ndarray, u: np.ndarray, radius: float, lo: np.ndarray,
          hi: np.ndarray) -> tuple[np.ndarray, float]:
    """Model step within the trust radius, projected on the box; and the predicted gain."""
    d = u.size
    at_lo, at_hi = u <= lo + 1e-12, u >= hi - 1e-12
    free = ~((at_lo & (g < 0)) | (at_hi & (g > 0)))
    s = np.zeros(d)
    if np.any(free):
        gf, hf = g[free], h[np.ix_(free, free)]
        newton = -np.linalg.solve(hf, gf) if np.all(np.linalg.eigvalsh(hf) < 0) else None
        norm_g = float(np.linalg.norm(gf))
        if newton is not None and np.linalg.norm(newton) <= radius:
            s[free] = newton
        elif newton is not None:
            s[free] = newton * radius / np.linalg.norm(newton)
        elif norm_g > 0:
            s[free] = gf * radius / norm_g
    s = np.clip(u + s, lo, hi) - u
    return s, float(g @ s + 0.5 * s @ h @ s)


def _climb_steps(start: ClimbStart, xtol: float, ftol: float, max_iter: int
                 ) -> Generator[np.ndarray, np.ndarray, LocalMaximum]:
    """Generator of one climb (scaled coordinates): yields points, receives values."""
    scale = np.asarray(start.scale, dtype=float)
    lo = np.asarray(start.lower, dtype=float) / scale
    hi = np.asarray(start.upper, dtype=float) / scale
    hlo = lo if start.hard_lower is None else np.asarray(start.hard_lower, float) / scale
    hhi = hi if start.hard_upper is None else np.asarray(start.hard_upper, float) / scale
    u = np.clip(np.asarray(start.x0, dtype=float) / scale, lo, hi)
    d = u.size
    f0 = start.value0
    if f0 is None:
        f0 = float((yield u[None, :])[0])
    it = 0

    def done(converged: bool, reason: str) -> LocalMaximum:
        return LocalMaximum(x=u * scale, value=math.nan if f0 is None else float(f0),
                            converged=converged,
                            at_lower=u <= lo + 1e-9, at_upper=u >= hi - 1e-9,
                            iterations=it, calls=0, points=0, reason=reason)

    if not math.isfinite(f0):
        return done(False, "function not finite at the start")
    radius, delta = 0.5, 0.1
    model = None
    while it < max_iter:
        if model is None:  # a stencil around u (first, or after non-finite neighbours)
            rel = _stencil(u, delta, hlo, hhi)
            vals = np.asarray((yield u + rel), dtype=float)
            if not np.all(np.isfinite(vals)):
                delta *= 0.25
                if delta < 1e-5:
                    return done(False, "function not finite next to the best point")
                continue
            model = _model(np.vstack([np.zeros(d), rel]), np.concatenate([[f0], vals]))
        it += 1
        s, predicted = _step(*model, u, radius, lo, hi)
        length = float(np.linalg.norm(s))
        if length < xtol or predicted < ftol:
            return done(True, "")
        # the trial point and the stencil around it in one evaluation (the stencil is
        # used if the trial is accepted; a rejected trial reuses the current model)
        target = u + s
        new_delta = float(np.clip(length, 1e-3, 0.1))
        rel = _stencil(target, new_delta, hlo, hhi)
        vals = np.asarray((yield np.vstack([target, target + rel])), dtype=float)
        f1 = float(vals[0])
        if math.isfinite(f1) and f1 > f0:
            if length >= 0.9 * radius and f1 - f0 >= 0.5 * predicted:
                radius = min(2 * radius, 2.0)
            u, f0, delta = target, f1, new_delta
            model = (_model(np.vstack([np.zeros(d), rel]), vals) if np.all(np.isfinite(vals))
                     else None)
        else:
            radius = 0.5 * length
            if radius < xtol:
                return done(True, "")
    return done(False, f"no convergence in {max_iter} steps")


def maximize_many(
    fun: Callable[[np.ndarray, np.ndarray], np.ndarray],
    starts: list[ClimbStart],
    *,
    xtol: float = 1e-6,
    ftol: float | list[float] = 0.0,
    max_iter: int = 60,
) -> list[LocalMaximum]:
    """Several climbs in lockstep, one call of ``fun`` per round for all of them.

    Parameters
    ----------
    fun : callable
        ``fun(owner, points) -> values``: ``points`` an ``(n, d)`` array, ``owner[j]``
        the index in ``starts`` of the climb that asks for point ``j``; a non-finite
        value marks a point where the function could not be evaluated.
    starts : list of ClimbStart
        Start, box (``lower``, ``upper``), natural step per coordinate (``scale``, e.g.
        the grid spacing the start came from) and where ``fun`` may be evaluated at all
        (``hard_lower``/``hard_upper``: stencils near a face may reach outside the box up
        to these; default the box).  d = 1 or 2, the same for every climb.
    xtol : float
        Stop when a step (in units of ``scale``) or the trust radius is below this.
    ftol : float or list of float
        Stop when the model predicts a gain below this (the function's noise level).
    max_iter : int
        Largest number of steps per climb.

    Returns
    -------
    list of LocalMaximum
        One per start, in order; ``calls`` counts the rounds the climb took part in.

    Notes
    -----
    A trust-region method on a quadratic model (J. Nocedal and S. J. Wright, *Numerical
    Optimization*, 2nd ed., 2006, ch. 4): gradient and Hessian come from a least-squares
    quadratic through a 3 × 3 (or 3-point) stencil of half-width δ around the current
    point; the step is the Newton step of the model when its Hessian is negative
    definite (cut to the trust radius), else the steepest ascent step of the trust
    radius, projected onto the box, with coordinates on a face held there when the
    gradient points out of the box.  Each round evaluates the trial point together with
    the stencil around it; a trial that increases the function is accepted (the radius
    doubles after a full-length step the model predicted well), a rejected one halves
    the radius to half the step length and reuses the model.  δ follows the step length
    between 1e-3 and 0.1 units of ``scale`` (finite-difference error O(δ²), rounding
    error O(ε/δ)).
    """
    tols = ftol if isinstance(ftol, list) else [ftol] * len(starts)
    gens = [_climb_steps(s, xtol, t, max_iter) for s, t in zip(starts, tols, strict=True)]
    out: list[LocalMaximum | None] = [None] * len(starts)
    calls, points = [0] * len(starts), [0] * len(starts)
    asks: dict[int, np.ndarray] = {}
    for i, g in enumerate(gens):
        try:
            asks[i] = next(g)
        except StopIteration as stop:
            out[i] = stop.value
    while asks:
        owners = np.concatenate([np.full(len(p), i) for i, p in asks.items()])
        pts = np.vstack([p * np.asarray(starts[i].scale, float) for i, p in asks.items()])
        vals = np.asarray(fun(owners, pts), dtype=float)
        nxt: dict[int, np.ndarray] = {}
        for i in asks:
            calls[i] += 1
            points[i] += int(np.sum(owners == i))
            try:
                nxt[i] = gens[i].send(vals[owners == i])
            except StopIteration as stop:
                out[i] = stop.value
        asks = nxt
    results = []
    for i, m in enumerate(out):
        assert m is not None
        m.calls, m.points = calls[i], points[i]
        results.append(m)
    return results


def maximize_local(fun: Callable[[np.ndarray], np.ndarray], x0: np.ndarray, *,
                   lower: np.ndarray, upper: np.ndarray, scale: np.ndarray,
                   hard_lower: np.ndarray | None = None,
                   hard_upper: np.ndarray | None = None, value0: float | None = None,
                   xtol: float = 1e-6, ftol: float = 0.0, max_iter: int = 60) -> LocalMaximum:
    """One climb of :func:`maximize_many`; ``fun(points) -> values``."""
    start = ClimbStart(np.asarray(x0, float), np.asarray(lower, float),
                       np.asarray(upper, float), np.asarray(scale, float), hard_lower,
                       hard_upper, value0)
    return maximize_many(lambda owner, p: fun(p), [start], xtol=xtol, ftol=ftol,
                         max_iter=max_iter)[0]
