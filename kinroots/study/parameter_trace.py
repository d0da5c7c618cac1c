"""Follow roots at fixed k while one case parameter changes."""


from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from kinroots.io.case import Case
from kinroots.io.parameter_paths import ParameterError, ParameterPath
from kinroots.io.parameters import _path_of, with_parameter

__all__ = [
    "trace_parameter",
]



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
    from kinroots.study.problem import function_at, survey, window

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


