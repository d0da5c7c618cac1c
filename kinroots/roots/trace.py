"""Following roots of a one-parameter family f_p(z) as the real parameter p changes.

Predictor–corrector continuation (any numerical continuation text; from memory):
the predictor extrapolates each branch with the polynomial (degree ≤ order) through its last
accepted points; the corrector is Newton's method (:func:`kinroots.roots.polish`).  All
branches advance together with one internal step h, so that at every parameter value the
neighbours of each branch are known.  A step is *rejected* (h halved) when, for some
branch,

* Newton does not converge;
* the corrected root strays from its prediction by more than ``stray_fraction`` of the
  distance from the prediction to the nearest other branch (or by more than a quarter
  of the box diameter);
* two branches converge to the same root (a collision: they are within
  ``merge_tol`` of each other).

After a step in which every branch converged in at most two Newton corrections, h is
doubled.  Once h would fall below ``min_step`` the offending branch ends: FAILED (no
convergence or a jump), or MERGED with the branch it collided with.  A branch whose
corrected root lies outside the box ends with LEFT_REGION — but only if it lies within a
tenth of the predicted move from its prediction (or the prediction is outside as well):
Newton thrown out of the box from a prediction inside is a jump, and the step is halved.
The parameter where it leaves is located by bisection on that branch alone, to
``min_step``.  Failures are recorded in
the branches, never raised.

Speculative blocks.  Given ``pairs`` — the family evaluated at arrays of (parameter, z)
pairs in one call — :meth:`Tracer.advance_through` first tries several requested values
at once: every branch is extrapolated to each of them, plain Newton runs on all the pairs
together (at most :data:`BLOCK_NEWTON` corrections, each at most a tenth of the one
before until within a hundred tolerances of the root, where rounding decides), and the
points are accepted in order up to the first one where any branch fails one of the
checks above (or converges slowly, or |f| grows).  From there the single-step
path takes over, with its halving.  Blocks grow (doubling, up to ``block``) after a block
that is accepted whole and shrink to what was accepted otherwise.  A block therefore
accepts only points that a single step would also have accepted from a prediction no
closer than its own; it saves the per-call cost of evaluating one parameter at a time.
"""

from __future__ import annotations

import enum
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, overload

import numpy as np

from kinroots.roots.newton import polish, relative_size
from kinroots.roots.result import AnalyticFunction, Box, RootResult, Status

__all__ = ["BLOCK_NEWTON", "Branch", "BranchEnd", "PairFamily", "Tracer", "match_new_roots",
           "trace"]

Family = Callable[[float], AnalyticFunction]
#: ``pairs(p, z) -> (f, f')``: the family at the pairs (p_j, z_j), arrays of equal shape.
PairFamily = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]

#: Newton corrections allowed per point in a speculative block.
BLOCK_NEWTON = 2
#: Each correction in a block must be at most this fraction of the one before ...
_BLOCK_CONTRACTION = 0.1
#: ... unless it is within this many tolerances (the rounding floor of f).
_NOISE_ZONE = 100.0
#: A corrected root outside the box counts as having left it only when it lies within this
#: fraction of the predicted move from its prediction (or the prediction is outside too).
_EXIT_PREDICTION = 0.1


class BranchEnd(enum.Enum):
    """Why a branch stopped (``ACTIVE`` while it is still being traced)."""

    ACTIVE = "active"
    LEFT_REGION = "left_region"
    FAILED = "failed"
    MERGED = "merged"


@dataclass
class Branch:
    """One traced root.

    Attributes
    ----------
    id : int
        Index of the branch in its tracer, stable for its life.
    points : list of (float, RootResult)
        The root at each requested parameter value (and at the start).
    path : list of (float, complex)
        Every accepted point, internal steps included (used by the predictor).
    end_reason : BranchEnd
        ``ACTIVE`` until the branch ends.
    end_param : float or None
        Parameter at which it ended (for LEFT_REGION: where it crosses the box edge).
    merged_with : int or None
        For MERGED, the id of the branch it ran into.
    note : str
        Human-readable reason for the end.
    evaluations : int
        Points at which f was evaluated for this branch (accepted and rejected steps).
    """

    id: int
    points: list[tuple[float, RootResult]] = field(default_factory=list)
    path: list[tuple[float, complex]] = field(default_factory=list)
    end_reason: BranchEnd = BranchEnd.ACTIVE
    end_param: float | None = None
    merged_with: int | None = None
    note: str = ""
    evaluations: int = 0

    @property
    def active(self) -> bool:
        return self.end_reason is BranchEnd.ACTIVE

    @property
    def params(self) -> np.ndarray:
        return np.array([p for p, _ in self.points])

    @property
    def values(self) -> np.ndarray:
        """Root values at ``params`` (complex; nan where not converged)."""
        return np.array([r.value if r.converged else complex(math.nan, math.nan)
                         for _, r in self.points])

    def _end(self, reason: BranchEnd, param: float, note: str, other: int | None = None) -> None:
        self.end_reason, self.end_param, self.note, self.merged_with = reason, param, note, other


@overload
def _extrapolate(path: list[tuple[float, complex]], p: float, order: int) -> complex: ...
@overload
def _extrapolate(path: list[tuple[float, complex]], p: np.ndarray, order: int) -> np.ndarray: ...
def _extrapolate(path: list[tuple[float, complex]], p: float | np.ndarray, order: int
                 ) -> complex | np.ndarray:
    """Lagrange polynomial through the last ``order + 1`` points of ``path``, at p (a float
    or an array of parameters)."""
    pts = path[-(order + 1):]
    total: complex | np.ndarray = 0j
    for i, (pi, zi) in enumerate(pts):
        w: float | np.ndarray = 1.0
        for j, (pj, _) in enumerate(pts):
            if j != i:
                w *= (p - pj) / (pi - pj)
        total += w * zi
    return total


def _history_value(r: RootResult) -> complex:
    """The point the predictor extrapolates from: the Newton-refined value when known.

    The reported value is the last *evaluated* iterate, up to ``rtol`` away from the zero;
    extrapolating a cubic through such points amplifies that noise ~15 times, so the
    predictor uses the refined (one more, unevaluated, Newton step) value instead.
    """
    return r.refined if r.refined is not None and r.multiplicity == 1 else r.value


def _inside(z: complex, box: Box) -> bool:
    return box[0] <= z.real <= box[1] and box[2] <= z.imag <= box[3]


@dataclass
class _Trial:
    result: RootResult
    prediction: complex
    problem: str = ""  # "", "failed", "left", "stray", "collision"
    other: int | None = None


class Tracer:
    """Trace several branches together across a real parameter, step by step.

    Parameters
    ----------
    family : callable
        ``family(p)`` returns ``f`` for parameter p (``f(z) -> (f, f')``, vectorized).
    box : tuple of float
        ``(re_min, re_max, im_min, im_max)``; a branch leaving it ends (LEFT_REGION).
    param : float
        Parameter value of the starting roots.
    rtol, atol : float
        Newton stopping test ``|Δz| ≤ atol + rtol·|z|``.
    maxiter : int
        Newton corrections per step before the step counts as failed.
    min_step : float, optional
        Smallest internal step (default ``1e-7·max(1, |param|)``).
    max_step : float, optional
        Largest internal step (default: none besides the requested values).
    stray_fraction : float
        Allowed distance between prediction and corrected root, as a fraction of the
        distance from the prediction to the nearest other branch's root.
    merge_tol : float, optional
        Two branches closer than this have collided (default
        ``max(100·(atol + rtol|z|), 1e-10·box diameter)``).
    order : int
        Degree of the extrapolation polynomial (1 to 5; `kinroots solve` uses 4: with
        Newton-refined history points a quartic predictor lands within the tolerance of
        smooth branches, so most points cost one evaluation).
    pairs : callable, optional
        ``pairs(p, z) -> (f, f')`` at arrays of parameter/point pairs, the same function
        as ``family(p_j)(z_j)`` element by element; enables speculative blocks in
        :meth:`advance_through` (module docstring).
    block : int
        Largest number of requested values in one speculative block.

    Examples
    --------
    >>> import numpy as np
    >>> fam = lambda p: (lambda z: (z - p * (1 + 1j), np.ones_like(z)))
    >>> tr = Tracer(fam, box=(-1.0, 3.0, -1.0, 3.0), param=0.0)
    >>> _ = tr.add_branch(0j)
    >>> tr.advance_to(1.0)
    >>> complex(tr.branches[0].points[-1][1].value)
    (1+1j)
    """

    def __init__(
        self,
        family: Family,
        *,
        box: Box,
        param: float,
        rtol: float = 1e-10,
        atol: float = 0.0,
        maxiter: int = 12,
        min_step: float | None = None,
        max_step: float | None = None,
        stray_fraction: float = 1.0 / 3.0,
        merge_tol: float | None = None,
        order: int = 2,
        pairs: PairFamily | None = None,
        block: int = 64,
    ) -> None:
        self.family = family
        x0, x1, y0, y1 = (float(v) for v in box)
        self.box: Box = (x0, x1, y0, y1)
        self.param = float(param)
        self.rtol, self.atol, self.maxiter = rtol, atol, maxiter
        self.min_step = min_step if min_step is not None else 1e-7 * max(1.0, abs(param))
        self.max_step = max_step
        self.stray_fraction = stray_fraction
        self._merge_tol = merge_tol
        self.order = order
        self.pairs = pairs
        self.block = max(2, int(block))
        self._block_size = 4
        self.branches: list[Branch] = []
        self._h: float | None = None
        self.diameter = math.hypot(self.box[1] - self.box[0], self.box[3] - self.box[2])

    # -- public ---------------------------------------------------------------------
    @property
    def active(self) -> list[Branch]:
        return [b for b in self.branches if b.active]

    def add_branch(self, root: RootResult | complex, param: float | None = None) -> Branch:
        """Start a new branch at the current parameter (or at ``param`` if none active).

        A converged ``RootResult`` is taken as is; a bare complex number is polished
        first.  A start that does not converge, or lies outside the box, gives a branch
        that has already ended (FAILED / LEFT_REGION) — it is returned, not raised.
        """
        if param is not None and not math.isclose(param, self.param, rel_tol=1e-14,
                                                  abs_tol=1e-300):
            if self.active:
                raise ValueError(
                    f"branches can only be added at the current parameter {self.param}"
                )
            self.param = float(param)
        b = Branch(id=len(self.branches))
        self.branches.append(b)
        if isinstance(root, RootResult) and root.converged:
            r = root
        else:
            z0 = root.value if isinstance(root, RootResult) else complex(root)
            r = polish(self.family(self.param), z0, rtol=self.rtol, atol=self.atol,
                       maxiter=4 * self.maxiter, method="trace")
            b.evaluations += r.evaluations
        b.points.append((self.param, r))
        if not r.converged:
            b._end(BranchEnd.FAILED, self.param, f"start did not converge: {r.reason}")
        elif not _inside(r.value, self.box):
            b._end(BranchEnd.LEFT_REGION, self.param, "start lies outside the box")
        else:
            b.path.append((self.param, _history_value(r)))
        return b

    def advance_to(self, target: float) -> None:
        """Advance every active branch to ``target`` (> current parameter); record it."""
        target = float(target)
        if target <= self.param:
            raise ValueError(f"target {target} must exceed the current parameter {self.param}")
        last: dict[int, RootResult] = {}
        while self.param < target and self.active:
            remaining = target - self.param
            h = remaining if self._h is None else min(self._h, remaining)
            if self.max_step is not None:
                h = min(h, self.max_step)
            final = h >= remaining
            p_new = target if final else self.param + h
            trials = self._try(p_new)
            bad = {i: t for i, t in trials.items() if t.problem}
            only_left = all(t.problem == "left" for t in bad.values())
            if bad and not only_left and h / 2 >= self.min_step:
                self._h = h / 2
                continue
            for i, t in bad.items():
                self._finish(self.branches[i], t, p_new, trials)
            for i, t in trials.items():
                b = self.branches[i]
                if b.active:
                    b.path.append((p_new, _history_value(t.result)))
                    last[i] = t.result
            easy = all(t.result.iterations <= 2 for t in trials.values() if not t.problem)
            self._h = 2 * h if easy and not bad else h
            self.param = p_new
        for b in self.active:
            if b.id in last:
                b.points.append((target, last[b.id]))
        self.param = target

    def advance_through(
        self, targets: Sequence[float], on_target: Callable[[int], None] | None = None
    ) -> None:
        """Advance through the increasing ``targets``, recording every active branch at each.

        The same as :meth:`advance_to` for each target in turn (with ``pairs``, several at
        a time where the checks allow: module docstring).  With no active branch left the
        tracer's parameter just moves on.  ``on_target(n)`` is called after each target
        with the number of targets done.
        """
        ts = [float(t) for t in targets]
        i = 0
        while i < len(ts):
            if not self.active:
                self.param = ts[i]
                done = 1
            else:
                n = self._block_length(ts, i)
                done = self._block(ts[i:i + n]) if n >= 2 else 0
                if done == 0:
                    self.advance_to(ts[i])
                    done = 1
            for j in range(i, i + done):
                if on_target is not None:
                    on_target(j + 1)
            i += done

    @property
    def evaluations(self) -> int:
        return sum(b.evaluations for b in self.branches)

    # -- internals ------------------------------------------------------------------
    def _merge_tol_at(self, z: complex) -> float:
        if self._merge_tol is not None:
            return self._merge_tol
        return max(100 * (self.atol + self.rtol * abs(z)), 1e-10 * self.diameter)

    def _block_length(self, ts: list[float], i: int) -> int:
        """How many of ``ts[i:]`` a speculative block may take (0: take a single step)."""
        act = self.active
        if (self.pairs is None or self._h is None
                or any(len(b.path) < 3 or b.points[0][1].multiplicity != 1 for b in act)):
            return 0
        h = self._h if self.max_step is None else min(self._h, self.max_step)
        n, prev = 0, self.param
        while i + n < len(ts) and n < self._block_size and ts[i + n] - prev <= h:
            prev = ts[i + n]
            n += 1
        return n

    def _block(self, ps: list[float]) -> int:
        """Try the requested values ``ps`` as one block; returns how many were accepted."""
        act = self.active
        nb, m = len(act), len(ps)
        p_arr = np.array(ps)
        pred = np.array([_extrapolate(b.path, p_arr, min(self.order, len(b.path) - 1))
                         for b in act])
        pp = np.broadcast_to(p_arr, (nb, m)).ravel()
        z = pred.ravel().copy()
        f_at = np.full(z.shape, np.nan + 0j)
        corr = np.full(z.shape, np.nan + 0j)
        evals = np.zeros(z.shape, dtype=int)
        iters = np.zeros(z.shape, dtype=int)
        done = np.zeros(z.shape, dtype=bool)
        todo = np.arange(z.size)
        pairs = self.pairs
        assert pairs is not None  # _block_length gives 0 without pairs
        for it in range(BLOCK_NEWTON + 1):
            f, df = pairs(pp[todo], z[todo])
            evals[todo] += 1
            with np.errstate(all="ignore"):
                c = np.asarray(f / df, dtype=complex)
            finite = np.isfinite(c)
            tol = self.atol + self.rtol * np.abs(z[todo])
            conv = finite & (np.abs(c) <= tol)
            ok = finite
            if it > 0:
                # go on with plain Newton only while it contracts fast and |f| falls, or
                # once within _NOISE_ZONE tolerances of the root (rounding in f then
                # decides both; there is no other root that close)
                ok &= ((np.abs(c) <= _BLOCK_CONTRACTION * np.abs(corr[todo]))
                       & (np.abs(f) <= np.abs(f_at[todo]))) | (np.abs(c) <= _NOISE_ZONE * tol)
            f_at[todo], corr[todo] = f, c
            done[todo[conv]] = True
            todo = todo[ok & ~conv]
            if todo.size == 0 or it == BLOCK_NEWTON:
                break
            iters[todo] += 1
            z[todo] -= corr[todo]
        zz = z.reshape(nb, m)
        bad = ~done.reshape(nb, m)
        for bi in range(nb):
            bad[bi] |= self._block_problems(zz, pred, bi)
        bad_any = bad.any(axis=0)
        accepted = int(np.argmax(bad_any)) if bad_any.any() else m
        shape = (nb, m)
        f_at, corr = f_at.reshape(shape), corr.reshape(shape)
        evals, iters = evals.reshape(shape), iters.reshape(shape)
        for bi, b in enumerate(act):
            b.evaluations += int(evals[bi].sum())
            for j in range(accepted):
                zj, cj = complex(zz[bi, j]), complex(corr[bi, j])
                r = RootResult(
                    value=zj, converged=True, status=Status.CONVERGED,
                    residual=float(abs(f_at[bi, j])), step=relative_size(cj, zj),
                    iterations=int(iters[bi, j]), evaluations=int(evals[bi, j]),
                    method="trace", refined=zj - cj,
                )
                b.path.append((ps[j], _history_value(r)))
                b.points.append((ps[j], r))
        if accepted:
            self.param = ps[accepted - 1]
        self._block_size = min(2 * m, self.block) if accepted == m else max(2, accepted)
        return accepted

    def _block_problems(self, z: np.ndarray, pred: np.ndarray, bi: int) -> np.ndarray:
        """The single-step checks (collision, stray, left the box) for branch ``bi`` at
        every point of a block (``z``, ``pred``: branches × points)."""
        zi, pi = z[bi], pred[bi]
        x0, x1, y0, y1 = self.box
        out = ~((x0 <= zi.real) & (zi.real <= x1) & (y0 <= zi.imag) & (zi.imag <= y1))
        allowed = np.full(zi.shape, 0.25 * self.diameter)
        if z.shape[0] > 1:
            others = np.delete(z, bi, axis=0)
            if self._merge_tol is not None:
                merge = np.full(zi.shape, self._merge_tol)
            else:
                merge = np.maximum(100 * (self.atol + self.rtol * np.abs(zi)),
                                   1e-10 * self.diameter)
            out |= np.min(np.abs(others - zi), axis=0) <= merge
            allowed = np.minimum(allowed,
                                 self.stray_fraction * np.min(np.abs(others - pi), axis=0))
        return out | (np.abs(zi - pi) > allowed)

    def _correct(self, f: AnalyticFunction, b: Branch, z0: complex) -> RootResult:
        # a branch that started as a multiple zero (e.g. two degenerate polarizations)
        # is corrected with modified Newton of that multiplicity
        m = b.points[0][1].multiplicity if b.points else 1
        r = polish(f, z0, rtol=self.rtol, atol=self.atol, maxiter=self.maxiter,
                   multiplicity=max(1, m), detect_multiplicity=False, method="trace")
        b.evaluations += r.evaluations
        return r

    def _try(self, p_new: float) -> dict[int, _Trial]:
        f = self.family(p_new)
        act = self.active
        trials: dict[int, _Trial] = {}
        for b in act:
            order = min(self.order, len(b.path) - 1)
            pred = _extrapolate(b.path, p_new, order)
            r = self._correct(f, b, pred)
            trials[b.id] = _Trial(r, pred)
        for b in act:
            t = trials[b.id]
            if not t.result.converged:
                t.problem = "failed"
                continue
            z = t.result.value
            others = [trials[o.id] for o in act if o.id != b.id]
            for o_id, o in ((o.id, trials[o.id]) for o in act if o.id != b.id):
                if o.result.converged and abs(o.result.value - z) <= self._merge_tol_at(z):
                    t.problem, t.other = "collision", o_id
                    break
            if t.problem:
                continue
            near = [abs((o.result.value if o.result.converged else o.prediction) - t.prediction)
                    for o in others]
            allowed = min([self.stray_fraction * d for d in near] + [0.25 * self.diameter])
            if abs(z - t.prediction) > allowed:
                t.problem = "stray"
            elif not _inside(z, self.box):
                # a root that leaves moves smoothly: its prediction is good to a small part
                # of the step.  Newton thrown outside from a prediction inside is a jump
                # (step halved), not an exit.
                moved = abs(t.prediction - b.path[-1][1])
                tol = 100 * (self.atol + self.rtol * abs(z))
                genuine = (not _inside(t.prediction, self.box)
                           or abs(z - t.prediction) <= _EXIT_PREDICTION * moved + tol)
                t.problem = "left" if genuine else "stray"
        return trials

    def _finish(self, b: Branch, t: _Trial, p_new: float, trials: dict[int, _Trial]) -> None:
        if t.problem == "left":
            p_exit = self._locate_exit(b, p_new, t.result.value)
            b._end(BranchEnd.LEFT_REGION, p_exit, f"left the box near parameter {p_exit:.8g}")
        elif t.problem == "collision" and t.other is not None:
            o = trials[t.other]
            # the one that moved further from its own prediction is the one that jumped
            mine = abs(t.result.value - t.prediction)
            theirs = abs(o.result.value - o.prediction)
            if mine > theirs or (mine == theirs and b.id > t.other):
                b._end(BranchEnd.MERGED, p_new,
                       f"converged to the root of branch {t.other} at the minimum step",
                       t.other)
        elif t.problem == "stray":
            b._end(BranchEnd.FAILED, self.param,
                   "corrected root jumped away from the prediction at the minimum step")
        elif t.problem == "failed":
            b._end(BranchEnd.FAILED, self.param,
                   f"Newton failed at the minimum step: {t.result.reason}")

    def _locate_exit(self, b: Branch, p_out: float, z_out: complex) -> float:
        """Bisect in p between the last inside point and ``p_out`` (this branch only)."""
        p_in, z_in = b.path[-1]
        while p_out - p_in > self.min_step:
            p_mid = 0.5 * (p_in + p_out)
            z_pred = z_in + (z_out - z_in) * (p_mid - p_in) / (p_out - p_in)
            r = self._correct(self.family(p_mid), b, z_pred)
            if not r.converged:
                break
            if abs(r.value - z_pred) > abs(z_out - z_in):
                break  # Newton jumped: keep the bracket found so far
            if _inside(r.value, self.box):
                p_in, z_in = p_mid, r.value
            else:
                p_out, z_out = p_mid, r.value
        # crossing of the straight segment z_in → z_out with the box boundary
        x0, x1, y0, y1 = self.box
        s_exit = 1.0
        dz = z_out - z_in
        for lo, hi, a, d in ((x0, x1, z_in.real, dz.real), (y0, y1, z_in.imag, dz.imag)):
            if d > 0 and a + d > hi:
                s_exit = min(s_exit, (hi - a) / d)
            if d < 0 and a + d < lo:
                s_exit = min(s_exit, (lo - a) / d)
        return p_in + max(0.0, s_exit) * (p_out - p_in)


def trace(
    family: Family,
    params: Sequence[float],
    starts: Sequence[RootResult | complex],
    /,
    *,
    box: Box,
    rtol: float = 1e-10,
    atol: float = 0.0,
    **options: Any,
) -> list[Branch]:
    """Trace the roots ``starts`` of ``family(params[0])`` through increasing ``params``.

    Parameters
    ----------
    family : callable
        ``family(p) -> f`` with ``f(z) -> (f(z), f'(z))``.
    params : sequence of float
        Increasing parameter values at which each branch is recorded.
    starts : sequence of RootResult or complex
        Roots at ``params[0]``.
    box : tuple of float
        Region the branches must stay in.
    rtol, atol : float
        Newton stopping test.
    **options
        Passed to :class:`Tracer` (``maxiter``, ``min_step``, ``max_step``,
        ``stray_fraction``, ``merge_tol``, ``order``, ``pairs``, ``block``).

    Returns
    -------
    list of Branch
        One per start, in order; see :class:`Branch` for end reasons.
    """
    p = [float(v) for v in params]
    if any(b <= a for a, b in zip(p, p[1:], strict=False)):
        raise ValueError("params must be strictly increasing")
    tracer = Tracer(family, box=box, param=p[0], rtol=rtol, atol=atol, **options)
    for s in starts:
        tracer.add_branch(s)
    tracer.advance_through(p[1:])
    return tracer.branches


def match_new_roots(
    existing: Sequence[complex], surveyed: Sequence[RootResult | complex], tol: float
) -> list[RootResult | complex]:
    """Surveyed roots farther than ``tol`` from every value already being traced.

    Non-converged ``RootResult`` entries are dropped.  Use it after a re-survey to hand
    only new roots to :meth:`Tracer.add_branch`.
    """
    have = np.asarray(list(existing), dtype=complex)
    out: list[RootResult | complex] = []
    for s in surveyed:
        if isinstance(s, RootResult):
            if not s.converged:
                continue
            z = s.value
        else:
            z = complex(s)
        if have.size == 0 or np.min(np.abs(have - z)) > tol:
            out.append(s)
            have = np.append(have, z)
    return out
