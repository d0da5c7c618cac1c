"""Trace every branch of a case across its k scan (the main job of ``kinroots solve``).

Check rule (documented in DEVELOPERS.md and in every summary.json): the window is surveyed
at the first scan point.  At every later scan point the zeros in the window are *counted*
on its boundary (:class:`kinroots.roots.boundary.BoundaryCounter`; batches of
``solver.resurvey_every`` points, default 10, share one dispersion call) and the count is
compared with the traced roots inside the window.  Where they agree, every row at that k
is ``verified``.  Where they differ, the window is surveyed at that k: a surveyed root that
no traced branch accounts for starts a new branch, traced *backwards* to the last point
where the count agreed (so a root that entered the window is tabulated from where it
entered) and forwards to the end of the batch.  A backward or forward trace that meets a
root already tabulated at the same k joins that branch (continuation of a branch that
ended) or stops there: no root appears twice at one k.  A point where the count and the
rows still differ, or where the boundary could not be resolved, is listed as unverified
with its reason (``point_checks``).
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Sequence
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
from kinroots.roots.boundary import BoundaryCounter
from kinroots.study.problem import (
    MATCH_FRACTION,
    CasePairs,
    PairFunction,
    dispersion_at,
    function_at,
    pair_function,
    survey,
    window,
)
from kinroots.study.rows import metadata

AnalyticFunction = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]


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


@dataclass(frozen=True)
class PointCheck:
    """The zero count of the window at one scan point against the rows there.

    ``count`` is ``None`` when it could not be made (``reason`` says why); ``verified``
    when ``count`` equals ``rows`` (converged roots in the window, with multiplicity).
    """

    param: float
    count: int | None
    rows: int
    verified: bool
    reason: str = ""


def nothing_found_note(checks: Sequence[PointCheck], *, what: str, region: str,
                       label: Callable[[float], str], keys: str) -> str:
    """The note of a run whose table is empty (``solve``, ``launch``): why, from the counts.

    Parameters
    ----------
    checks : sequence of PointCheck
        The zero count at every parameter value done.
    what, region : str
        Names for messages, e.g. ``"root"`` and ``"search window"``.
    label : callable
        ``label(param)``, e.g. ``"k = 0.1"``.
    keys : str
        The case keys that set the region (for the advice).
    """
    if not checks:
        return f"no {what} found: no point was done"
    span = (label(checks[0].param) if len(checks) == 1
            else f"{label(checks[0].param)} to {label(checks[-1].param)}")
    if all(c.count == 0 for c in checks):
        return (f"no {what} in the {region} ({span}): the zero count on its boundary is 0 "
                f"at every point, so the {region} holds none; a wider one ({keys}) may")
    unknown = sum(1 for c in checks if c.count is None)
    unsolved = sum(1 for c in checks if c.count)
    return (f"no {what} found in the {region} ({span}): at {unsolved} point(s) its "
            f"boundary counts zeros that were not solved and at {unknown} the count could "
            "not be made; the notes and point_checks say why")


#: Start of the note that says a trace was stopped early (``should_stop``).
INTERRUPTED = "interrupted"


@dataclass
class Solution:
    """Result of :func:`solve`."""

    case: Case
    branches: list[TracedBranch]
    surveys: list[tuple[float, SurveyResult]]
    evaluations: int
    notes: list[str]
    point_checks: list[PointCheck] = field(default_factory=list)

    @property
    def interrupted(self) -> bool:
        """True when the trace was stopped before the last scan point (``should_stop``)."""
        return any(n.startswith(INTERRUPTED) for n in self.notes)

    @property
    def failed_points(self) -> int:
        """Points recorded as failed (the CLI's exit code 1), incomplete surveys included."""
        n = sum(1 for b in self.branches for r in b.points.values() if not r.converged)
        n += sum(1 for _, s in self.surveys if not s.complete)
        return n

    @property
    def unverified_points(self) -> int:
        """Scan points whose zero count could not be taken or did not match the rows."""
        return sum(1 for c in self.point_checks if not c.verified)


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


def _inside(z: complex, box: tuple[float, float, float, float]) -> bool:
    return box[0] <= z.real <= box[1] and box[2] <= z.imag <= box[3]


class _Carrier:
    """The tracer's pair function, whose next call also evaluates the (p, z) pairs of a
    zero count (:meth:`BoundaryCounter.start`): one dispersion call per batch instead of
    two.  With a :class:`~kinroots.study.problem.CasePairs` the carried values are finished
    (per-k scale) only when the count takes them, so the tracer's values are those of its
    own call.  Without a tracer call the count evaluates them itself (``take`` gives None).
    """

    def __init__(self, pairs: PairFunction) -> None:
        self.pairs = pairs
        self._extra: tuple[np.ndarray, np.ndarray] | None = None
        self._held: tuple[np.ndarray, ...] | None = None

    def carry(self, p: np.ndarray, z: np.ndarray) -> None:
        self._extra, self._held = (p, z), None

    def take(self) -> tuple[np.ndarray, np.ndarray] | None:
        held, self._extra, self._held = self._held, None, None
        if held is None:
            return None
        if isinstance(self.pairs, CasePairs):
            kk, om, d, dd = held
            return self.pairs.finish(kk, om, d, dd)
        return held[0], held[1]

    def __call__(self, p: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if self._extra is None:
            return self.pairs(p, z)
        (ep, ez), self._extra = self._extra, None
        pb, zb = np.broadcast_arrays(np.asarray(p, dtype=float), np.asarray(z, dtype=complex))
        n = pb.size
        pp = np.concatenate([pb.ravel(), ep])
        zz = np.concatenate([zb.ravel(), ez])
        if isinstance(self.pairs, CasePairs):
            kk, om, d, dd = self.pairs.values(pp, zz)
            self._held = (kk[n:], om[n:], d[n:], dd[n:])
            f, df = self.pairs.finish(kk[:n], om[:n], d[:n], dd[:n])
        else:
            f, df = self.pairs(pp, zz)
            self._held = (f[n:], df[n:])
        return f[:n].reshape(pb.shape), df[:n].reshape(pb.shape)


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
    excluded: Sequence[complex] = (),
    count: bool = True,
    should_stop: Callable[[], bool] | None = None,
    features: Callable[[float], Sequence[tuple[complex, float]]] | None = None,
) -> tuple[list[TracedBranch], list[tuple[float, SurveyResult]], int, list[str],
           list[PointCheck]]:
    """Survey at the first parameter value, trace every root across ``params``.

    The driver shared by :func:`solve` (ω across k) and :func:`kinroots.study.launch.launch`
    (complex k across ω); the check rule is the module docstring's.

    Parameters
    ----------
    family : callable
        ``family(p)`` returns the analytic function whose zeros are traced at ``p``.
    params : list of float
        Increasing parameter values at which the table is wanted.
    box : (re_min, re_max, im_min, im_max)
        Where roots are surveyed, counted and traced.
    survey_at : callable
        ``survey_at(p)`` surveys ``box`` at ``p``.
    rtol : float
        Root tolerance of the tracer.
    resurvey_every : int
        Points per batch of boundary counts (0: 10).
    label : callable
        ``label(p)`` names a parameter value in notes (e.g. ``"k = 0.3"``).
    progress : callable, optional
        ``progress(done, total)`` after each parameter value.
    pairs : callable, optional
        ``pairs(p, z)``: ``family`` at arrays of (parameter, z) pairs; lets the tracer
        take several parameter values at once and the counter count a batch in one call.
    excluded : sequence of complex
        Points excluded from counts (as for the survey), independent of the parameter.
    count : bool
        Count at every point (the default).  ``False`` traces from the first survey
        only, with nothing verified after it (for benchmarks: the cost of tracing alone).
    should_stop : callable, optional
        Asked after each batch of points; when it returns True the trace stops there
        (e.g. after Ctrl-C) and the results cover the points done so far (a note says
        where it stopped; point_checks cover only those points).
    features : callable, optional
        ``features(p)``: narrow features of ``family(p)`` near the box, (centre, width),
        sampled first by the boundary counts (:class:`kinroots.roots.BoundaryCounter`).

    Returns
    -------
    branches, surveys, evaluations, notes, point_checks
        Failed points are recorded in the branches, never raised.
    """
    diameter = math.hypot(box[1] - box[0], box[3] - box[2])
    match_tol = MATCH_FRACTION * diameter
    notes: list[str] = []
    incomplete: dict[str, list[str]] = {}  # reason -> where (surveys that did not finish)
    evaluations = 0
    batch = resurvey_every if resurvey_every > 0 else 10

    def family_back(q: float) -> AnalyticFunction:
        return family(-q)

    pairs_back = None
    if pairs is not None:
        def pairs_back(q: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            return pairs(-np.asarray(q), z)

    carrier = _Carrier(pairs) if pairs is not None and count else None
    tracer = Tracer(family, box=box, param=params[0], rtol=rtol, order=4,
                    pairs=carrier if carrier is not None else pairs)
    counter = BoundaryCounter(box, excluded=excluded, features=features)
    out: dict[int, TracedBranch] = {}  # tracer branch id -> TracedBranch
    results: list[TracedBranch] = []
    surveys: list[tuple[float, SurveyResult]] = []
    counts: dict[float, tuple[int | None, str]] = {}
    # the box a survey counted in, where it moved an edge off a zero or pole on it: the
    # rows at that point are compared with its count inside that box
    counted_in: dict[float, tuple[float, float, float, float]] = {}

    def do_survey(i: int) -> SurveyResult:
        nonlocal evaluations
        s = survey_at(params[i])
        evaluations += s.evaluations
        surveys.append((params[i], s))
        if s.count is not None and tuple(s.box) != tuple(box):
            counted_in[params[i]] = s.box
        else:
            counted_in.pop(params[i], None)
        if not s.complete:  # one note per reason, with every parameter value it applies to
            reason = "; ".join(dict.fromkeys(s.notes)) or "no detail"
            incomplete.setdefault(reason, []).append(
                f"{label(params[i])} ({s.count_text}, {len(s.values)} found)")
        return s

    def rows_at(p: float) -> int:
        where = counted_in.get(p, box)
        return sum(b.points[p].multiplicity for b in results
                   if p in b.points and b.points[p].converged
                   and _inside(b.points[p].value, where))

    def meets(tb: TracedBranch, p: float, z: complex) -> TracedBranch | None:
        """Another branch with a root within merge distance of z at p."""
        tol = max(match_tol, 100 * rtol * abs(z))
        for o in results:
            if o is not tb and p in o.points and o.points[p].converged \
                    and abs(o.points[p].value - z) <= tol:
                return o
        return None

    def new_branch(root: RootResult, i: int) -> TracedBranch:
        tb = TracedBranch(id=len(results), found_at=params[i])
        results.append(tb)
        tb.points[params[i]] = root
        return tb

    def join(tb: TracedBranch, old: TracedBranch, p: float) -> TracedBranch:
        """``tb`` met ``old`` at p going backwards: one branch if old ended there."""
        if max(old.points) <= p:
            for q, r in tb.points.items():
                if q > p:
                    old.points[q] = r
            old.verified_at |= {q for q in tb.verified_at if q > p}
            old.note = (old.note + "; " if old.note else "") + (
                f"re-found by a survey at {label(tb.found_at)} after it had ended")
            old.end_reason, old.end_k = "end of scan", None
            results.remove(tb)
            for tid, v in list(out.items()):
                if v is tb:
                    out[tid] = old
            return old
        tb.note = f"met branch {old.id} at {label(p)} going backwards; traced from there on"
        return tb

    def backfill(tb: TracedBranch, root: RootResult, i: int, i_stop: int) -> TracedBranch:
        """Trace a new branch backwards from point i to i_stop (or until it meets one)."""
        nonlocal evaluations
        if i <= i_stop:
            return tb
        back = Tracer(family_back, box=box, param=-params[i], rtol=rtol, order=4,
                      pairs=pairs_back)
        bb = back.add_branch(root, param=-params[i])
        back.advance_through([-params[j] for j in range(i - 1, i_stop - 1, -1)])
        evaluations += back.evaluations
        for q, r in bb.points[1:]:
            other = meets(tb, -q, r.value) if r.converged else None
            if other is not None:
                return join(tb, other, -q)
            tb.points[-q] = r
        if not bb.active and bb.end_reason is not BranchEnd.LEFT_REGION:
            tb.note = f"backward trace from {label(params[i])} ended: {bb.note}"
        return tb

    def forward(tb: TracedBranch, root: RootResult, i: int, j: int) -> None:
        """Trace a new branch from point i to j (the tracer's position) and hand it over."""
        nonlocal evaluations
        if i == j:
            tid = tracer.add_branch(root, param=params[j]).id
            out[tid] = tb
            return
        fw = Tracer(family, box=box, param=params[i], rtol=rtol, order=4, pairs=pairs)
        fb = fw.add_branch(root, param=params[i])
        fw.advance_through(params[i + 1:j + 1])
        evaluations += fw.evaluations
        for q, r in fb.points[1:]:
            other = meets(tb, q, r.value) if r.converged else None
            if other is not None:
                tb.end_reason, tb.end_k = f"merged with branch {other.id}", q
                return
            tb.points[q] = r
        if fb.active:
            nb = tracer.add_branch(fb.points[-1][1], param=params[j])
            nb.path = list(fb.path)  # the predictor keeps its history
            out[nb.id] = tb
        else:
            tb.end_reason, tb.end_k, tb.note = _end_text(fb), fb.end_param, fb.note

    def reconcile(i: int, j: int, last_ok: int) -> SurveyResult:
        """Survey at point i (count and rows differ) and start branches for new roots."""
        s = do_survey(i)
        current = [b.points[params[i]].value for b in results
                   if params[i] in b.points and b.points[params[i]].converged]
        for root in match_new_roots(current, [r for r in s.roots if r.converged], match_tol):
            assert isinstance(root, RootResult)
            tb = backfill(new_branch(root, i), root, i, last_ok + 1)
            tb.points[params[i]] = root
            forward(tb, root, i, j)
        for r in s.roots:
            if not r.converged:
                notes.append(f"unsolved root near {r.value!r} at {label(params[i])}: "
                             f"{r.reason}")
        return s

    s0 = do_survey(0)
    for root in s0.roots:
        if root.converged:
            out[tracer.add_branch(root, param=params[0]).id] = new_branch(root, 0)
        else:
            notes.append(f"unsolved root near {root.value!r} at {label(params[0])}: "
                         f"{root.reason}")
    counts[params[0]] = (s0.count, "" if s0.complete else "first survey incomplete")
    if progress:
        progress(1, len(params))

    last_ok = 0  # the last point where the count and the rows agreed
    surveyed_deficit: int | None = None  # count − rows where the last survey left it
    i = 1
    while i < len(params):
        j = min(len(params) - 1, i + batch - 1)
        first = i

        def done(n: int, first: int = first) -> None:
            if progress:
                progress(first + n, len(params))

        if carrier is not None:  # the count's first samples ride on the tracer's call
            carrier.carry(*counter.start(params[i:j + 1]))
        tracer.advance_through(params[i:j + 1], on_target=done)
        for tid, b in enumerate(tracer.branches):
            tb = out[tid]
            for q, r in reversed(b.points):
                if q < params[i]:
                    break
                tb.points[q] = r
        if count:
            known = [[pt.value for b in results if (pt := b.points.get(q)) is not None
                      and pt.converged for _ in range(pt.multiplicity)]
                     for q in params[i:j + 1]]
            got = counter.count(params[i:j + 1], pairs=pairs, family=family, known=known,
                                first=carrier.take() if carrier is not None else None)
            for c in got:
                counts[c.param] = (c.count, c.note)
            for m in range(i, j + 1):
                n, why = counts[params[m]]
                rows = rows_at(params[m])
                if n is None:
                    # no count on the window's edges: a zero or pole on or next to an
                    # edge (the survey moves that edge off it, and its count and the
                    # rows are then compared inside the moved box), or |D| on the
                    # boundary beyond double precision even scaled by one constant (the
                    # survey counts in sub-boxes): the survey counts here instead
                    s = reconcile(m, j, last_ok)
                    counts[params[m]] = (s.count, why if s.count is None else "")
                    n, rows = s.count, rows_at(params[m])
                    if n is not None and n == rows:
                        last_ok, surveyed_deficit = m, None
                    continue
                if n is None:
                    continue
                if n == rows:
                    last_ok, surveyed_deficit = m, None
                    continue
                if surveyed_deficit != n - rows:
                    # the count changed against the rows: find out why, here
                    reconcile(m, j, last_ok)
                    rows = rows_at(params[m])
                    surveyed_deficit = n - rows
                    if n == rows:
                        last_ok, surveyed_deficit = m, None
        i = j + 1
        if progress:
            progress(j + 1, len(params))
        if should_stop is not None and should_stop() and i < len(params):
            notes.append(f"{INTERRUPTED}: stopped before {label(params[i])}; "
                         f"{len(params) - i} of {len(params)} points not computed")
            break
    evaluations += counter.evaluations

    for n_, tb in enumerate(results):
        tb.id = n_
    for tid, b in enumerate(tracer.branches):
        tb = out[tid]
        evaluations += b.evaluations
        if not b.active and tb.end_reason == "end of scan":
            tb.end_reason = _end_text(b)
            if b.merged_with is not None:
                tb.end_reason = f"merged with branch {out[b.merged_with].id}"
            tb.end_k = b.end_param
            tb.note = b.note or tb.note
            if b.end_reason is BranchEnd.FAILED:
                # the first requested value the branch could not reach is a failed point
                last = max(tb.points) if tb.points else params[0]
                nxt = [p for p in params if p > last]
                if nxt:
                    prev = tb.points[last].value if tb.points else complex("nan")
                    tb.points[nxt[0]] = failed_root(prev, b.note or "tracing failed")
    checks: list[PointCheck] = []
    for p in params[:i]:  # the points done (all of them unless stopped)
        n, why = counts.get(p, (None, "not counted (counts off)"))
        rows = rows_at(p)
        ok = n is not None and n == rows
        if n is not None and not ok:
            why = f"the window holds {n} zero(s), the table {rows}"
        checks.append(PointCheck(p, n, rows, ok, "" if ok else why))
        if ok:
            for tb in results:
                if p in tb.points and tb.points[p].converged:
                    tb.verified_at.add(p)
    for reason, where in incomplete.items():
        notes.append(f"survey incomplete at {', '.join(where)}: {reason}")
    return results, surveys, evaluations, notes, checks


def solve(case: Case, *, progress: Callable[[int, int], None] | None = None,
          count: bool = True, should_stop: Callable[[], bool] | None = None) -> Solution:
    """Survey the window at the first k, trace every branch across the scan.

    Parameters
    ----------
    case : Case
        Validated case.
    progress : callable, optional
        ``progress(done, total)`` after each scan point.
    count : bool
        Count the window's zeros at every k (module docstring); ``False`` only for
        benchmarks (tracing alone, nothing verified after the first k).
    should_stop : callable, optional
        Asked between batches of scan points; True stops the trace there and the
        solution holds the points done (`Solution.interrupted`).

    Returns
    -------
    Solution
        Branches (with failed points recorded, never raised), the surveys made, total
        dispersion evaluations, notes and the count check at every k.
    """
    ks = [float(k) for k in case.k_values]
    box = window(case)
    # the normalized D of a k, shared by the tracer and the counts' feature sampling
    at = functools.lru_cache(maxsize=16)(lambda k: function_at(case, k, auto_window=box))
    branches, surveys, evaluations, notes, checks = follow_branches(
        at,
        ks,
        box,
        lambda k: survey(case, k),
        rtol=case.solver.tolerance,
        resurvey_every=case.solver.resurvey_every,
        label=lambda k: f"k = {k!r}",
        progress=progress,
        pairs=pair_function(case),
        # the harmonic poles that matter grow with k (their residue bound does): the
        # largest k's list holds every k's
        excluded=function_at(case, float(np.max(ks))).excluded(box),
        count=count,
        should_stop=should_stop,
        features=lambda k: at(k).features(box),
    )
    return Solution(case=case, branches=branches, surveys=surveys, evaluations=evaluations,
                    notes=notes, point_checks=checks)


def solution_summary(sol: Solution, rows: list[dict[str, Any]]) -> dict[str, Any]:
    """summary.json for ``kinroots solve``."""
    case = sol.case
    d0 = dispersion_at(case, float(case.k_values[0]))
    return metadata(case, rows=rows, extra={
        "model": case.model,
        "dispersion_scaling": d0.scaling,
        "resurvey_rule": (
            "window surveyed at the first k; at every k its zeros are counted on its "
            "boundary and compared with the rows; where they differ the window is "
            "surveyed there and new roots start branches traced backwards to the last "
            "agreeing k; rows are verified where count and rows agree"
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
        "point_checks": [
            {"k": c.param, "count": c.count, "rows": c.rows, "verified": c.verified,
             "reason": c.reason}
            for c in sol.point_checks
        ],
        "unverified_points": sum(1 for c in sol.point_checks if not c.verified),
        "evaluations": sol.evaluations,
        "failed_points": sol.failed_points,
        "interrupted": sol.interrupted,
        "notes": sol.notes + ([] if rows else [nothing_found_note(
            sol.point_checks, what="root", region="search window",
            label=lambda k: f"k = {k:g}", keys="search.real, search.imag")]),
    })


