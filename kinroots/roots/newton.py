"""Newton polishing with a separate stopping driver, and verification by winding number.

The iteration (a generator that only *takes steps*) and the driver (which only *decides
to stop*, counts and fills the result) are kept apart, in the manner of mpmath's root
finders (from memory).  The step is Newton's, modified for a zero of multiplicity m,
``z ← z − m f(z)/f'(z)`` (E. Schröder 1870; any numerical-analysis text, from memory),
damped by halving while it would increase ``|f|^{1/m}``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass, replace

import numpy as np

from kinroots.roots.contour import circle_contour
from kinroots.roots.result import (
    AnalyticFunction,
    Box,
    CountedFunction,
    RootResult,
    Status,
)

__all__ = ["polish", "relative_size", "verify"]

_MAX_HALVINGS = 8
_HUGE = 1e150


@dataclass
class _Iterate:
    """State yielded by the stepping generator after each evaluation."""

    z: complex
    f: complex
    df: complex
    correction: complex  # Newton correction m f/f' computed at z (nan if undefined)
    multiplicity: int
    problem: Status | None = None  # set when the stepper cannot continue
    reason: str = ""


def _newton_steps(
    func: CountedFunction, z0: complex, multiplicity: int, detect_multiplicity: bool,
    region: Box | None = None,
) -> Iterator[_Iterate]:
    """Yield the iterates of damped (modified) Newton; never decides to stop by itself.

    A trial point outside ``region`` is not evaluated: the step is halved as if it had
    failed, and the iteration ends with ``LEFT_REGION`` when no halving brings it back.

    With ``detect_multiplicity``, two consecutive step-length ratios close to the
    same value r in (0.3, 0.95) — linear convergence, as plain Newton shows at a zero of
    multiplicity m with r = (m − 1)/m — switch the step to ``m = round(1/(1 − r))``.
    """
    m = multiplicity
    z = complex(z0)
    fz, dfz = func.one(z)
    ratios: list[float] = []
    last_len = math.nan
    while True:
        if not (np.isfinite(fz) and np.isfinite(dfz)):
            yield _Iterate(z, fz, dfz, complex("nan"), m, Status.NONFINITE,
                           f"f or f' is not finite at z = {z!r}")
            return
        if dfz == 0:
            if fz == 0:
                yield _Iterate(z, fz, dfz, 0j, m)
                return
            yield _Iterate(z, fz, dfz, complex("nan"), m, Status.STALLED,
                           f"f' vanishes at z = {z!r} while f does not")
            return
        corr = m * fz / dfz
        yield _Iterate(z, fz, dfz, corr, m)
        step_len = abs(corr)
        if detect_multiplicity and m == 1 and math.isfinite(last_len) and last_len > 0:
            ratios.append(step_len / last_len)
            if len(ratios) >= 2:
                r0, r1 = ratios[-2], ratios[-1]
                if 0.3 < r1 < 0.95 and abs(r1 - r0) < 0.1:
                    m_new = max(2, round(1.0 / (1.0 - r1)))
                    m = m_new
                    corr = m * fz / dfz
                    ratios.clear()
        last_len = step_len
        # damped step: halve while |f|^(1/m) would grow
        target = abs(fz) ** (1.0 / m)
        lam = 1.0
        f_new = df_new = complex("nan")
        evaluated = False
        for _ in range(_MAX_HALVINGS + 1):
            z_new = z - lam * corr
            if not _inside(z_new, region):
                lam *= 0.5
                continue
            f_new, df_new = func.one(z_new)
            evaluated = True
            good = np.isfinite(f_new) and np.isfinite(df_new)
            if good and abs(f_new) ** (1.0 / m) <= target * (1 + 1e-12):
                break
            lam *= 0.5
        else:
            if not evaluated:
                yield _Iterate(z, fz, dfz, corr, m, Status.LEFT_REGION,
                               f"the Newton step from {z!r} leaves the region {region}")
                return
            if not (np.isfinite(f_new) and np.isfinite(df_new)):
                yield _Iterate(z, fz, dfz, corr, m, Status.NONFINITE,
                               "f is not finite along the Newton direction")
                return
            # accept the smallest damped step only if it is a genuine reduction
            yield _Iterate(z, fz, dfz, corr, m, Status.STALLED,
                           f"|f| could not be reduced along the Newton step at z = {z!r} "
                           "(a minimum of |f| that is not a zero?)")
            return
        z, fz, dfz = z_new, f_new, df_new


def _multiple_rtol(m: int) -> float:
    """Attainable relative accuracy of a zero of multiplicity m: 4·eps^(1/m)."""
    return 4.0 * np.finfo(float).eps ** (1.0 / m)


def relative_size(corr: complex, z: complex) -> float:
    """|corr|/|z| when |z| > 1, else |corr| (the ``step`` of a RootResult)."""
    a = abs(corr)
    return a / abs(z) if abs(z) > 1.0 else a


def _inside(z: complex, region: Box | None) -> bool:
    if region is None:
        return True
    x0, x1, y0, y1 = region
    return x0 <= z.real <= x1 and y0 <= z.imag <= y1


def polish(
    f: AnalyticFunction,
    z0: complex,
    /,
    *,
    rtol: float = 1e-12,
    atol: float = 0.0,
    maxiter: int = 50,
    multiplicity: int = 1,
    region: Box | None = None,
    detect_multiplicity: bool = True,
    verify_radius: float | None = None,
    method: str = "newton",
) -> RootResult:
    """Polish a root estimate with damped Newton iteration.

    Parameters
    ----------
    f : callable
        ``f(z) -> (f(z), f'(z))``, vectorized over a 1-D complex array.
    z0 : complex
        Starting point.
    rtol, atol : float
        Stopping test ``|Δz| ≤ atol + rtol·|z|`` on the Newton correction computed at
        the reported value (so a converged value is within about that distance of a
        zero, and its residual is small on the scale ``|f'|·(atol + rtol|z|)``).  For a
        zero of multiplicity m > 1, Newton that stalls at the noise floor (or runs out
        of steps) still counts as converged if its correction is below
        ``4·eps^(1/m)·|z|`` (≈ 6e-8 relative for a double zero), the accuracy to which
        double-precision values of f determine such a zero.
    maxiter : int
        Largest number of Newton corrections.
    multiplicity : int
        m in the step ``z − m f/f'``; with ``detect_multiplicity`` (default) a linear
        convergence rate switches m = 1 to the multiplicity it indicates.
    region : tuple of float, optional
        ``(re_min, re_max, im_min, im_max)``; leaving it ends with ``LEFT_REGION``.
    verify_radius : float, optional
        If given, count the zeros inside the circle of this radius around a converged
        value (:func:`verify`); ``verified`` is true when the count equals the
        multiplicity used (a count > 1 after m = 1 triggers a re-polish with that m).
    method : str
        Recorded in the result.

    Returns
    -------
    RootResult
        Failures are returned with their status and reason, never raised.
    """
    func = CountedFunction(f)
    tol_iter = 0
    last: _Iterate | None = None
    status, reason = Status.MAX_ITER, f"no convergence in {maxiter} Newton steps"
    for it in _newton_steps(func, complex(z0), multiplicity, detect_multiplicity, region):
        last = it
        tol = atol + rtol * abs(it.z)
        # a zero of multiplicity m is fixed by double-precision values of f only to about
        # eps^(1/m) relative (common practice in numerical analysis): when Newton stalls
        # or runs out of steps at that noise floor, the zero counts as converged
        floor_tol = (max(tol, atol + _multiple_rtol(it.multiplicity) * abs(it.z))
                     if it.multiplicity > 1 else tol)
        if it.problem is not None:
            if (it.problem is Status.STALLED and it.multiplicity > 1
                    and abs(it.correction) <= floor_tol):
                status, reason = Status.CONVERGED, ""
                break
            status, reason = it.problem, it.reason
            break
        if not _inside(it.z, region):
            status, reason = Status.LEFT_REGION, f"iterate {it.z!r} left the region {region}"
            break
        if abs(it.z) > _HUGE:
            status, reason = Status.DIVERGED, f"iterate ran away to |z| = {abs(it.z):.3g}"
            break
        if abs(it.correction) <= tol:
            status, reason = Status.CONVERGED, ""
            break
        if tol_iter >= maxiter:
            if it.multiplicity > 1 and abs(it.correction) <= floor_tol:
                status, reason = Status.CONVERGED, ""
            break
        tol_iter += 1
    assert last is not None
    corr = last.correction
    result = RootResult(
        value=last.z,
        converged=status is Status.CONVERGED,
        status=status,
        reason=reason,
        residual=abs(last.f),
        step=relative_size(corr, last.z) if np.isfinite(corr) else math.nan,
        iterations=tol_iter,
        evaluations=func.evaluations,
        multiplicity=last.multiplicity,
        method=method,
        refined=(last.z - corr) if status is Status.CONVERGED and np.isfinite(corr) else None,
    )
    if verify_radius is None or not result.converged:
        return result
    count, n_eval = _verify_counted(f, result.value, verify_radius)
    result = replace(result, evaluations=result.evaluations + n_eval)
    if count is not None and count > 1 and count != result.multiplicity:
        again = polish(f, result.value, rtol=rtol, atol=atol, maxiter=maxiter,
                       multiplicity=count, region=region, detect_multiplicity=False,
                       method=method)
        if again.converged:
            result = replace(again, evaluations=result.evaluations + again.evaluations,
                             iterations=result.iterations + again.iterations)
    return replace(result, verified=count is not None and count == result.multiplicity)


def newton_starts(
    f: AnalyticFunction,
    z0: np.ndarray,
    /,
    *,
    rtol: float,
    atol: float,
    region: Box | None = None,
    maxiter: int = 12,
    background: Callable[[np.ndarray], np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Improve many starting points at once by plain Newton, one f call per iteration.

    Only starting points: every returned value still goes through :func:`polish`, which
    decides convergence, so this changes the cost of a survey, not its answers.  An
    element stops when its correction is within a tenth of ``atol + rtol·|z|`` (after
    that last step), when f or f' is not finite, when the step would leave ``region``
    or when its corrections have failed twice in a row to shrink below 0.9 of the one
    before (no zero near: it keeps its last value).

    With ``background`` (f'/f less the poles of the zeros the starts aim at, e.g.
    :func:`kinroots.roots.contour.smooth_log_derivative` of their cell) the starts move
    together by the Aberth–Ehrlich correction 1/(f'/f − background(z_k) −
    Σ_{j≠k} 1/(z_k − z_j)) (O. Aberth, Math. Comp. 27, 339 (1973); L. W. Ehrlich,
    Comm. ACM 10, 107 (1967); from memory): each start sees f as the polynomial of the
    zeros, deflated by the others, instead of crawling while a steep zero-free factor
    (a Landau exponential) dominates f'/f.  It vanishes only where f does, so the
    zeros reached are f's; the stopping test is still on |f/f'|.

    Returns
    -------
    z : ndarray
        The improved points.
    step : ndarray
        |f/f'| at the last point each was evaluated at (inf where f/f' was not finite,
        nan where a point was never evaluated): small for a point near a zero (also a
        multiple one, where plain Newton converges linearly), large for one still
        wandering.
    evaluated : ndarray
        That last point evaluated (nan where none was): ``z`` is it minus its
        correction where the step was taken.
    """
    z = np.array(z0, dtype=complex).ravel()
    step = np.full(z.shape, np.nan)
    evaluated = np.full(z.shape, complex("nan"))
    active = np.isfinite(z)
    if region is not None:
        active &= np.array([_inside(complex(v), region) for v in z], dtype=bool)
    slow = np.zeros(z.shape, dtype=int)
    pool = active.copy()  # the starts inside the region: the zeros' current estimates
    for _ in range(maxiter):
        if not np.any(active):
            break
        idx = np.flatnonzero(active)
        fv, dv = f(z[idx])
        evaluated[idx] = z[idx]
        with np.errstate(all="ignore"):
            corr = fv / dv
        good = np.isfinite(corr)
        new_step = np.where(good, np.abs(corr), np.inf)
        move = corr
        if background is not None:
            with np.errstate(all="ignore"):
                diff = z[idx][:, None] - z[pool][None, :]
                others = np.where(diff != 0, 1.0 / diff, 0.0).sum(axis=1)
                aberth = 1.0 / (dv / fv - background(z[idx]) - others)
            move = np.where(np.isfinite(aberth), aberth, corr)
        # not contracting (a step above 0.9 of the one before) twice in a row: no zero
        # near (at a zero of multiplicity m plain Newton contracts by (m − 1)/m)
        slow[idx] = np.where(new_step > 0.9 * step[idx], slow[idx] + 1, 0)
        step[idx] = new_step
        good &= slow[idx] < 2
        z_new = z[idx] - np.where(good, move, 0)
        if region is not None:
            x0, x1, y0, y1 = region
            good &= (z_new.real >= x0) & (z_new.real <= x1) & (z_new.imag >= y0) & (
                z_new.imag <= y1)
        z[idx[good]] = z_new[good]
        # a converged start takes its last step (not evaluated): polish evaluates it,
        # and the root it reports is then accurate far below the tolerance
        done = ~good | (new_step <= 0.1 * (atol + rtol * np.abs(z[idx])))
        active[idx[done]] = False
    return z, step, evaluated


def _verify_counted(f: AnalyticFunction, root: complex, radius: float) -> tuple[int | None, int]:
    func = CountedFunction(f)
    c = circle_contour(func, complex(root), float(radius))
    return c.winding, func.evaluations


def verify(f: AnalyticFunction, root: complex, /, *, radius: float) -> int | None:
    """Zeros (minus poles) of f inside the circle ``|z − root| < radius``.

    By the argument principle, from uniform samples doubled until the phase between
    neighbours is resolved (:func:`kinroots.roots.contour.circle_contour`).  Returns
    ``None`` when the circle cannot be resolved (a zero or pole on it).
    """
    return _verify_counted(f, root, radius)[0]
