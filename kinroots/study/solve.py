"""Trace every branch of a case across its k scan (the main job of ``kinroots solve``).

Re-survey rule (documented in DEVELOPERS.md and in every summary.json): the window is
surveyed at the first scan point, then again every ``solver.resurvey_every`` scan points
and at the last point.  A surveyed root that no traced branch accounts for (farther than
``match_tol`` from every active branch) starts a new branch; that branch is traced
*backwards* from the survey point to the previous survey point (or until it leaves the
window), so a root that entered the window between surveys is tabulated from where it
entered.  At every survey point each active branch is checked against the survey:
branches matched to a surveyed root are marked ``verified``.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from kinroots.io.case import Case
from kinroots.roots import (
    Branch,
    BranchEnd,
    RootResult,
    Status,
    SurveyResult,
    Tracer,
    match_new_roots,
)
from kinroots.study.problem import (
    MATCH_FRACTION,
    PairFunction,
    dispersion_at,
    function_at,
    pair_function,
    survey,
    window,
)
from kinroots.study.rows import metadata

AnalyticFunction = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]

#: Relative distance (to the window diameter) under which a surveyed root is taken to be
#: a root already being traced.

@dataclass
class TracedBranch:
    """A branch across the scan: one entry per requested k it covers.

    ``points`` maps a normalized k to its RootResult; a failed point is a RootResult
    with ``converged`` false.  ``end_reason`` is one of ``"end of scan"``,
    ``"left the window"``, ``"failed"``, ``"merged with branch N"``.
    """

    id: int
    points: dict[float, RootResult] = field(default_factory=dict)
    verified_at: set[float] = field(default_factory=set)
    end_reason: str = "end of scan"
    end_k: float | None = None
    note: str = ""
    found_at: float = 0.0

    def sorted_points(self) -> list[tuple[float, RootResult]]:
        return sorted(self.points.items())


@dataclass
class Solution:
    """Result of :func:`solve`."""

    case: Case
    branches: list[TracedBranch]
    surveys: list[tuple[float, SurveyResult]]
    evaluations: int
    notes: list[str]

    @property
    def failed_points(self) -> int:
        """Points recorded as failed (the CLI's exit code 1), incomplete surveys included."""
        n = sum(1 for b in self.branches for r in b.points.values() if not r.converged)
        n += sum(1 for _, s in self.surveys if not s.complete)
        return n


def failed_root(value: complex, reason: str) -> RootResult:
    """A point that tracing could not reach: ``converged`` false, with the reason."""
    return RootResult(
        value=complex(value), converged=False, status=Status.NOT_ATTEMPTED, reason=reason,
        residual=float("nan"), step=float("nan"), iterations=0, evaluations=0,
        verified=False, multiplicity=1, method="trace",
    )


def _end_text(b: Branch) -> str:
    if b.end_reason is BranchEnd.LEFT_REGION:
        return "left the window"
    if b.end_reason is BranchEnd.MERGED:
        return f"merged with branch {b.merged_with}"
    if b.end_reason is BranchEnd.FAILED:
        return "failed"
    return "end of scan"


def follow_branches(
    family: Callable[[float], AnalyticFunction],
    params: list[float],
    box: tuple[float, float, float, float],
    survey_at: Callable[[float], SurveyResult],
    *,
    rtol: float,
    resurvey_every: int,
    label: Callable[[float], str],
    progress: Callable[[int, int], None] | None = None,
    pairs: PairFunction | None = None,
) -> tuple[list[TracedBranch], list[tuple[float, SurveyResult]], int, list[str]]:
    """Survey at the first parameter value, trace every root across ``params``.

    The driver shared by :func:`solve` (ω across k) and :func:`kinroots.study.launch.launch`
    (complex k across ω); the re-survey rule is the module docstring's.

    Parameters
    ----------
    family : callable
        ``family(p)`` returns the analytic function whose zeros are traced at ``p``.
    params : list of float
        Increasing parameter values at which the table is wanted.
    box : (re_min, re_max, im_min, im_max)
        Where roots are surveyed and traced.
    survey_at : callable
        ``survey_at(p)`` surveys ``box`` at ``p``.
    rtol : float
        Root tolerance of the tracer.
    resurvey_every : int
        Re-survey every this many points (0: only first and last).
    label : callable
        ``label(p)`` names a parameter value in notes (e.g. ``"k = 0.3"``).
    progress : callable, optional
        ``progress(done, total)`` after each parameter value.
    pairs : callable, optional
        ``pairs(p, z)``: ``family`` at arrays of (parameter, z) pairs; lets the tracer
        take several parameter values at once (:class:`kinroots.roots.Tracer`).

    Returns
    -------
    branches, surveys, evaluations, notes
        Failed points are recorded in the branches, never raised.
    """
    diameter = math.hypot(box[1] - box[0], box[3] - box[2])
    match_tol = MATCH_FRACTION * diameter
    notes: list[str] = []
    evaluations = 0

    def family_back(q: float) -> AnalyticFunction:
        return family(-q)

    pairs_back = None
    if pairs is not None:
        def pairs_back(q: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            return pairs(-np.asarray(q), z)

    tracer = Tracer(family, box=box, param=params[0], rtol=rtol, order=4, pairs=pairs)
    out: dict[int, TracedBranch] = {}  # tracer branch id -> TracedBranch
    results: list[TracedBranch] = []
    surveys: list[tuple[float, SurveyResult]] = []
    last_survey_index = 0

    def do_survey(i: int) -> SurveyResult:
        nonlocal evaluations
        s = survey_at(params[i])
        evaluations += s.evaluations
        surveys.append((params[i], s))
        if not s.complete:
            notes.append(
                f"survey at {label(params[i])} incomplete: counted {s.count} zeros, "
                f"found {len(s.values)} ({'; '.join(s.notes) or 'no detail'})"
            )
        return s

    def start_branch(root: RootResult, i: int) -> TracedBranch:
        tb_ = tracer.add_branch(root, param=params[i])
        tb = TracedBranch(id=len(results), found_at=params[i])
        results.append(tb)
        out[tb_.id] = tb
        tb.points[params[i]] = root
        tb.verified_at.add(params[i])
        return tb

    def backfill(tb: TracedBranch, root: RootResult, i: int, i_stop: int) -> None:
        """Trace a newly found branch backwards from point i to i_stop."""
        nonlocal evaluations
        if i <= i_stop:
            return
        back = Tracer(family_back, box=box, param=-params[i], rtol=rtol, order=4,
                      pairs=pairs_back)
        bb = back.add_branch(root, param=-params[i])
        back.advance_through([-params[j] for j in range(i - 1, i_stop - 1, -1)])
        evaluations += back.evaluations
        for q, r in bb.points[1:]:
            tb.points[-q] = r
        if not bb.active and bb.end_reason is not BranchEnd.LEFT_REGION:
            tb.note = f"backward trace from {label(params[i])} ended: {bb.note}"

    def reconcile(s: SurveyResult, i: int) -> None:
        """Mark traced roots confirmed by survey ``s``; start branches for new roots."""
        active = [(tid, b) for tid, b in enumerate(tracer.branches) if b.active]
        current = [b.points[-1][1].value for _, b in active]
        for tid, b in active:
            z = b.points[-1][1].value
            if any(abs(z - r) <= match_tol for r in s.values):
                out[tid].verified_at.add(params[i])
        for root in match_new_roots(current, [r for r in s.roots if r.converged], match_tol):
            tb = start_branch(root, i)
            backfill(tb, root, i, last_survey_index)

    s0 = do_survey(0)
    for root in s0.roots:
        if root.converged:
            start_branch(root, 0)
        else:
            notes.append(f"unsolved root near {root.value!r} at {label(params[0])}: "
                         f"{root.reason}")
    if progress:
        progress(1, len(params))

    i = 1
    while i < len(params):
        # the next survey point: every resurvey_every-th point and the last one
        j = len(params) - 1
        if resurvey_every > 0:
            j = min(j, (i + resurvey_every - 1) // resurvey_every * resurvey_every)
        first = i

        def done(n: int, first: int = first) -> None:
            if progress:
                progress(first + n, len(params))

        tracer.advance_through(params[i:j + 1], on_target=done)
        for tid, b in enumerate(tracer.branches):
            tb = out[tid]
            for q, r in reversed(b.points):
                if q < params[i]:
                    break
                tb.points[q] = r
        s = do_survey(j)
        reconcile(s, j)
        last_survey_index = j
        if progress:
            progress(j + 1, len(params))
        i = j + 1

    for tid, b in enumerate(tracer.branches):
        tb = out[tid]
        evaluations += b.evaluations
        if not b.active:
            tb.end_reason = _end_text(b)
            tb.end_k = b.end_param
            tb.note = b.note or tb.note
            if b.end_reason is BranchEnd.FAILED:
                # the first requested value the branch could not reach is a failed point
                last = max(tb.points) if tb.points else params[0]
                nxt = [p for p in params if p > last]
                if nxt:
                    prev = tb.points[last].value if tb.points else complex("nan")
                    tb.points[nxt[0]] = failed_root(prev, b.note or "tracing failed")
    return results, surveys, evaluations, notes


def solve(case: Case, *, progress: Callable[[int, int], None] | None = None) -> Solution:
    """Survey the window at the first k, trace every branch across the scan.

    Parameters
    ----------
    case : Case
        Validated case.
    progress : callable, optional
        ``progress(done, total)`` after each scan point.

    Returns
    -------
    Solution
        Branches (with failed points recorded, never raised), the surveys made, total
        dispersion evaluations and notes.
    """
    branches, surveys, evaluations, notes = follow_branches(
        lambda k: function_at(case, k),
        [float(k) for k in case.k_values],
        window(case),
        lambda k: survey(case, k),
        rtol=case.solver.tolerance,
        resurvey_every=case.solver.resurvey_every,
        label=lambda k: f"k = {k!r}",
        progress=progress,
        pairs=pair_function(case),
    )
    return Solution(case=case, branches=branches, surveys=surveys, evaluations=evaluations,
                    notes=notes)



def solution_summary(sol: Solution, rows: list[dict[str, Any]]) -> dict[str, Any]:
    """summary.json for ``kinroots solve``."""
    case = sol.case
    d0 = dispersion_at(case, float(case.k_values[0]))
    return metadata(case, rows=rows, extra={
        "model": case.model,
        "dispersion_scaling": d0.scaling,
        "resurvey_rule": (
            "window surveyed at the first k, every resurvey_every points and at the last k; "
            "new roots start branches traced backwards to the previous survey"
        ),
        "branches": [
            {
                "branch": b.id,
                "found_at_k": b.found_at,
                "k_range": [min(b.points), max(b.points)] if b.points else None,
                "points": len(b.points),
                "failed_points": sum(1 for r in b.points.values() if not r.converged),
                "end_reason": b.end_reason,
                "end_k": b.end_k,
                "note": b.note,
            }
            for b in sol.branches
        ],
        "surveys": [
            {"k": k, "count": s.count, "found": len(s.values), "complete": s.complete,
             "evaluations": s.evaluations, "notes": list(s.notes)}
            for k, s in sol.surveys
        ],
        "evaluations": sol.evaluations,
        "failed_points": sol.failed_points,
        "notes": sol.notes,
    })


