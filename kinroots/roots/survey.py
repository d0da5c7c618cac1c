"""Every zero of an analytic function in a rectangle.

Method
------
1. Argument principle on the rectangle, with adaptively refined, shared edge samples
   (:mod:`kinroots.roots.contour`).  An edge that cannot be resolved (a zero or pole on
   it or within about 1e-7 of the box diameter) is moved *outward* by
   ``10^(k−4)`` × the box diameter on attempt k = 0, 1, 2, and the move is reported.
2. Each *excluded* point inside the box gets a tiny circle of radius
   ``exclusion_radius × diameter`` (shrunk to a tenth of the distance to the nearest
   other excluded point); its winding number (−order for a pole, +multiplicity for a
   known spurious zero) is subtracted from every count, its contribution ``c_e ζ_e^p``
   from every moment, and no root is reported inside that disk.
3. Recursive subdivision until a cell holds one zero, or at most ``cluster_size``
   zeros.  The cell's moments s_1, s_2 give the centroid of its zeros and the
   direction in which they spread most (Re(s_2/n − (s_1/n)²) > 0: along Re z); the cut
   goes across that direction (unless the halves would exceed an aspect ratio of 4),
   in the widest balanced gap between the Hankel estimates of its zeros when it holds
   at most 8, else next to the centroid, so that both halves hold zeros and the new
   line keeps away from them (fewer samples).  If such a line passes near an excluded
   point or cannot be resolved, a few off-centre positions are tried.
4. One zero: the first contour moment gives the starting point; Newton polishes it.
   A cluster: Delves–Lyness moments and the Hankel eigenvalue problem of Kravanja & Van
   Barel give the starting points, improved together on arrays (one f call per
   iteration) by Aberth–Ehrlich steps with the zero-free part of f'/f, the Cauchy
   integral of f'/f on the cell's boundary, taken out
   (:func:`~kinroots.roots.contour.smooth_log_derivative`); a start settled to 1e-4
   tolerances is the root, any other is polished by damped Newton.  The zeros found are deflated
   from the moments and the Hankel problem of the rest gives further starting points.
   n distinct zeros in a cell that winds n times are simple; otherwise a small circle
   around each root gives its multiplicity.  A cell whose count is not accounted for
   is split: no evaluation ever falls outside the cells of the window (issue 14).

References
----------
L. M. Delves and J. N. Lyness, Math. Comp. 21, 543 (1967).
P. Kravanja and M. Van Barel, *Computing the Zeros of Analytic Functions*, Springer
LNM 1727 (2000).
"""

from __future__ import annotations

import cmath
import math
from collections import deque
from collections.abc import Sequence
from dataclasses import replace

import numpy as np

from kinroots.roots.contour import (
    BoundarySampler,
    Edge,
    circle_contour,
    contour_moments,
    hankel_zeros,
    rectangle_edges,
    smooth_log_derivative,
)
from kinroots.roots.newton import newton_starts, polish, relative_size
from kinroots.roots.result import (
    AnalyticFunction,
    Box,
    CountedFunction,
    RootResult,
    Status,
    SurveyResult,
)

__all__ = ["find_roots", "hermite_noise_error", "noise_error"]

_N_INIT_OUTER = 8  # initial intervals per outer edge
_N_INIT_LINE = 6  # initial intervals per subdivision line
#: Where a cell is cut across its longer side, in order of preference.  Not 0.5: search
#: windows are often symmetric about a line that holds roots (purely growing modes on
#: Re ω = 0, real roots on Im z = 0), and a cut through a zero cannot be resolved.
_SPLIT_FRACTIONS = (0.4871, 0.5377, 0.4213, 0.5829, 0.3419, 0.6637, 0.2731, 0.7269)
#: A start whose last array-Newton step exceeds this fraction of its cell's diameter is
#: not polished (:meth:`_Survey._polished`).
_WANDER = 1e-3
#: Largest aspect ratio of the halves when a cell is cut across its shorter side.
_MAX_ASPECT = 4.0
#: Cells with at most this many zeros are cut in a gap between their Hankel estimates.
_GAP_MAX = 8
#: Offsets (fractions of the side) of the first cuts from the zeros' centroid.
_CENTROID_OFFSETS = (0.0123, -0.0377)
#: The survey as it was before issue 14 (a cluster circle growing up to twice its cell,
#: one circle per cluster root, one-point Newton): ``benchmarks/bench_survey.py`` sets
#: it to measure its baseline in the same run.  Never set otherwise.
_BASELINE = False
#: A cluster whose estimates lie within this fraction of the cell's half-diagonal of
#: their centroid gets a circle; any other unresolved cluster splits its cell.
_TIGHT = 0.05
#: Most points on a cluster's circle; a circle that needs more makes the cell split.
_CIRCLE_POINTS = 64
_CIRCLE_TRIES = 3


def _inside(z: complex, box: Box, margin: float = 0.0) -> bool:
    x0, x1, y0, y1 = box
    return (
        x0 - margin <= z.real <= x1 + margin and y0 - margin <= z.imag <= y1 + margin
    )


def _diameter(box: Box) -> float:
    return math.hypot(box[1] - box[0], box[3] - box[2])


#: An array-Newton start whose correction is below this many tolerances is reported as
#: it stands (:meth:`_Survey._converged_start`), without one more evaluation.
_SETTLED = 1e-4
#: Absolute floor of the Newton stopping test, as a fraction of rtol × box diameter.
_ATOL_FRACTION = 1e-3


class _Remembering(CountedFunction):
    """A :class:`CountedFunction` that answers points it has evaluated before from
    memory (uncounted): the noise probe of a root repeats the polished value, where
    Newton evaluated f last.  Keeps at most :data:`_MEMORY` points."""

    def __init__(self, func: AnalyticFunction) -> None:
        super().__init__(func)
        self._memory: dict[complex, tuple[complex, complex]] = {}

    def __call__(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if _BASELINE:
            return super().__call__(z)
        z = np.atleast_1d(np.asarray(z, dtype=complex))
        keys = z.tolist()
        known = {k: self._memory[k] for k in keys if k in self._memory}
        missing = [k for k in dict.fromkeys(keys) if k not in known]
        if missing:
            fv, dv = super().__call__(np.array(missing, dtype=complex))
            new = dict(zip(missing, zip(fv.tolist(), dv.tolist(), strict=True), strict=True))
            self._remember(new)
            if len(missing) == len(keys):  # all new, no repeats: f's own arrays
                return fv, dv
            known.update(new)
        return (np.array([known[k][0] for k in keys], dtype=complex),
                np.array([known[k][1] for k in keys], dtype=complex))

    def known(self, z: complex) -> tuple[complex, complex] | None:
        """f and f' at ``z`` if remembered (uncounted), else None."""
        return self._memory.get(z)

    def remembered(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The points remembered, f and f' there (arrays)."""
        pts = np.array(list(self._memory), dtype=complex)
        vals = np.array(list(self._memory.values()), dtype=complex).reshape(-1, 2)
        return pts, vals[:, 0], vals[:, 1]

    def _remember(self, new: dict[complex, tuple[complex, complex]]) -> None:
        if len(self._memory) + len(new) > _MEMORY:
            self._memory.clear()
        self._memory.update(new)


#: Most points a survey's function remembers (:class:`_Remembering`).
_MEMORY = 1 << 16


class _Survey:
    def __init__(
        self,
        f: AnalyticFunction,
        box: Box,
        excluded: Sequence[complex],
        *,
        rtol: float,
        atol: float,
        max_depth: int,
        max_evaluations: int,
        cluster_size: int,
        exclusion_radius: float,
        features: Sequence[tuple[complex, float]] = (),
        evaluations_per_zero: int = 0,
        max_roots: int | None = None,
    ) -> None:
        self.f_user = f
        self.func = _Remembering(f)
        self.sampler = BoundarySampler(self.func, max_evaluations=max_evaluations,
                                       features=features)
        self.box = box
        self.diam0 = _diameter(box)
        self.excluded = np.asarray(list(excluded), dtype=complex)
        # A purely relative test can never be met by a zero at z = 0: give the stopping
        # test an absolute floor far below the box scale (1e-3·rtol·diameter).
        self.rtol, self.atol = rtol, max(atol, _ATOL_FRACTION * rtol * self.diam0)
        self.max_depth = max_depth
        self.max_evaluations = max_evaluations
        self.evaluations_per_zero = evaluations_per_zero
        self.max_roots = max_roots
        self.cluster_size = min(cluster_size, 4) if _BASELINE else cluster_size
        self.exclusion_radius = exclusion_radius
        self.notes: list[str] = []
        self.cells = 0
        self._ex_winding: dict[int, int | None] = {}

    # -- excluded points -----------------------------------------------------------
    def _ex_radius(self, i: int) -> float:
        r = self.exclusion_radius * self.diam0
        others = np.delete(self.excluded, i)
        if others.size:
            r = min(r, 0.1 * float(np.min(np.abs(others - self.excluded[i]))))
        return r

    def _ex_in(self, box: Box) -> list[int]:
        return [i for i, e in enumerate(self.excluded) if _inside(complex(e), box)]

    def _ex_contribution(self, i: int) -> int | None:
        if i not in self._ex_winding:
            c = circle_contour(self.func, complex(self.excluded[i]), self._ex_radius(i))
            self._ex_winding[i] = c.winding
            if c.winding is None:
                self.notes.append(
                    f"could not resolve the winding around excluded point {self.excluded[i]!r}"
                )
        return self._ex_winding[i]

    def _zero_count(self, box: Box, winding: int) -> int | None:
        total = winding
        for i in self._ex_in(box):
            c = self._ex_contribution(i)
            if c is None:
                return None
            total -= c
        return total

    def _in_exclusion_disk(self, z: complex) -> bool:
        return any(abs(z - complex(e)) <= self._ex_radius(i) for i, e in enumerate(self.excluded))

    # -- contours ------------------------------------------------------------------
    def _cell_winding(self, box: Box) -> int | None:
        self.cells += 1
        w = self.sampler.winding(box)
        if abs(w - round(w)) > 0.1:
            self.notes.append(f"phase sum {w:.3f}·2π around {box} is not an integer")
            return None
        return round(w)

    def _outer(self) -> int | None:
        box = self.box
        for attempt in range(4):
            edges = rectangle_edges(box)
            status = self.sampler.resolve(edges, n_init=_N_INIT_OUTER, min_len=1e-7 * self.diam0)
            bad = [i for i, s in enumerate(status) if not s.resolved]
            if not bad:
                self.box = box
                return self._cell_winding(box)
            if self.sampler.budget_exhausted:
                self.notes.append(
                    f"evaluation budget of {self.max_evaluations} evaluations exhausted on "
                    "the window's boundary before its zeros could be counted")
                return None
            names = ("bottom", "right", "top", "left")
            for flag, what, why, where_ok in (
                ("noisy", "rounding noise", "its values between close samples contradict "
                 "f'/f: precision lost, e.g. by cancellation", "is accurate"),
                ("nonfinite", "not finite", "it overflows or is undefined there",
                 "can be evaluated"),
            ):
                hit = [i for i in bad if getattr(status[i], flag)]
                for i in hit:
                    where = ", ".join(f"{z:.6g}" for z in status[i].trouble[:3])
                    self.notes.append(
                        f"f is {what} on the {names[i]} edge near {where} ({why}): the box "
                        f"cannot be surveyed; choose one that stays where f {where_ok}")
                if hit:
                    self.box = box
                    return None
            if attempt == 3:
                break
            delta = 10.0 ** (attempt - 4) * self.diam0
            x0, x1, y0, y1 = box
            for i in bad:
                where = ", ".join(f"{z:.6g}" for z in status[i].trouble[:3])
                self.notes.append(
                    f"{names[i]} edge unresolved near {where} (zero or pole on or next to "
                    f"it): moved outward by {delta:.3g}"
                )
                if i == 0:
                    y0 -= delta
                elif i == 1:
                    x1 += delta
                elif i == 2:
                    y1 += delta
                else:
                    x0 -= delta
            box = (x0, x1, y0, y1)
        self.box = box
        self.notes.append("outer boundary could not be resolved after three outward shifts")
        return None

    def _cuts(self, box: Box, n: int) -> list[tuple[bool, float]]:
        """Cut lines of ``box`` to try, in order: (vertical, position)."""
        x0, x1, y0, y1 = box
        w, h = x1 - x0, y1 - y0
        ex = [complex(self.excluded[i]) for i in self._ex_in(box)]
        first: list[tuple[bool, float]] = []
        vertical = w >= h
        if n >= 2 and not _BASELINE:
            center, rho, s = self._moments(box, 3)
            mid = center + rho * s[1] / n
            spread = rho * rho * (s[2] / n - (s[1] / n) ** 2)
            if np.isfinite(mid) and np.isfinite(spread) and _inside(mid, box):
                v = bool(spread.real >= 0)
                side, length = (w, h) if v else (h, w)
                if side >= length or length / side <= 0.5 * _MAX_ASPECT:
                    vertical = v
                lo, side = (x0, w) if vertical else (y0, h)
                f0 = ((mid.real if vertical else mid.imag) - lo) / side
                first = [(vertical, lo + min(max(f0 + d, 0.2), 0.8) * side)
                         for d in _CENTROID_OFFSETS]
                if n <= _GAP_MAX:
                    gap = self._gap_cut(box, n, vertical)
                    if gap is not None:
                        first.insert(0, (vertical, gap))
        lo, side = (x0, w) if vertical else (y0, h)
        out = first + [(vertical, lo + fr * side) for fr in _SPLIT_FRACTIONS]

        def clear(cut: tuple[bool, float]) -> bool:
            v, c = cut
            return all(abs(c - (e.real if v else e.imag)) >= 0.05 * (w if v else h) for e in ex)

        return sorted(out, key=lambda cut: not clear(cut))

    def _gap_cut(self, box: Box, n: int, vertical: bool) -> float | None:
        """A cut position in a wide gap between the cell's zero estimates (Hankel zeros
        of its moments), with estimates on both sides; None if there is none."""
        center, rho, s = self._moments(box, 2 * n)
        est = center + rho * hankel_zeros(s, n)
        est = np.array([z for z in est if _inside(complex(z), box)], dtype=complex)
        lo, side = (box[0], box[1] - box[0]) if vertical else (box[2], box[3] - box[2])
        p = np.sort((est.real if vertical else est.imag) - lo) / side
        best, where = 0.0, None
        for k in range(1, p.size):
            c = 0.5 * (p[k - 1] + p[k])
            score = (p[k] - p[k - 1]) * min(k, p.size - k)
            if 0.15 <= c <= 0.85 and score > best:
                best, where = score, lo + c * side
        return where

    def _split(self, box: Box, n: int) -> list[tuple[Box, int]] | None:
        x0, x1, y0, y1 = box
        for vertical, c in self._cuts(box, n):
            if vertical:
                line = Edge(("v", c), y0, y1)
                kids = [(x0, c, y0, y1), (c, x1, y0, y1)]
            else:
                line = Edge(("h", c), x0, x1)
                kids = [(x0, x1, y0, c), (x0, x1, c, y1)]
            length = (y1 - y0) if vertical else (x1 - x0)
            (st,) = self.sampler.resolve(
                [line], n_init=_N_INIT_LINE, min_len=max(1e-4 * length, 1e-7 * self.diam0)
            )
            if not st.resolved:
                if self.sampler.budget_exhausted:
                    return None
                if st.noisy:
                    self._noise_note(st.trouble)
                continue
            edges = [e for k in kids for e in rectangle_edges(k)]
            sts = self.sampler.resolve(edges, n_init=1, min_len=1e-7 * self.diam0)
            if not all(s.resolved for s in sts):
                continue
            out = []
            for k in kids:
                w = self._cell_winding(k)
                if w is None:
                    break
                out.append((k, w))
            else:
                return out
        return None

    def _noise_note(self, where: list[complex]) -> None:
        if any("rounding noise" in n for n in self.notes):
            return
        self.notes.append(
            "f is rounding noise inside the window near "
            + ", ".join(f"{z:.6g}" for z in where[:3])
            + " (its values between close samples contradict f'/f): cells there cannot "
            "be subdivided")

    # -- solving cells -------------------------------------------------------------
    def _tol(self, z: complex) -> float:
        return self.atol + self.rtol * abs(z)

    def _moments(self, box: Box, nmom: int) -> tuple[complex, float, np.ndarray]:
        z, fv, dv = self.sampler.loop(box)
        center = complex(0.5 * (box[0] + box[1]), 0.5 * (box[2] + box[3]))
        rho = 0.5 * _diameter(box)
        s = contour_moments(z, fv, dv, center, rho, nmom)
        return center, rho, self._remove_excluded(s, box, center, rho)

    def _remove_excluded(self, s: np.ndarray, box: Box, center: complex, rho: float,
                         circle: tuple[complex, float] | None = None) -> np.ndarray:
        p = np.arange(s.size)
        for i, e in enumerate(self.excluded):
            e = complex(e)
            inside = _inside(e, box) if circle is None else abs(e - circle[0]) < circle[1]
            if inside:
                c = self._ex_contribution(i) or 0
                s = s - c * ((e - center) / rho) ** p
        return s

    def _region(self, box: Box) -> Box:
        """Where Newton may wander from a cell: the cell and a quarter of it around,
        but not beyond the window (plus the margin of the stopping test)."""
        w, h = box[1] - box[0], box[3] - box[2]
        m = 1e-6 * self.diam0
        x0, x1, y0, y1 = self.box
        return (max(box[0] - 0.25 * w, x0 - m), min(box[1] + 0.25 * w, x1 + m),
                max(box[2] - 0.25 * h, y0 - m), min(box[3] + 0.25 * h, y1 + m))

    def _polish(self, z0: complex, box: Box, multiplicity: int = 1) -> RootResult:
        region = self._region(box)
        return polish(self.func, z0, rtol=self.rtol, atol=self.atol, maxiter=40,
                      multiplicity=multiplicity, region=region, method="survey")

    def _converged_start(self, z: complex, step: float, box: Box) -> RootResult | None:
        """The root at ``z``, the last point the array Newton evaluated, when its
        correction there (``step``) is below :data:`_SETTLED` tolerances: converged as
        :func:`~kinroots.roots.newton.polish` would report it one evaluation later, and
        as accurate (the value differs by that correction, near rounding; a larger one
        would raise the residuals the README states).  None otherwise."""
        if not (cmath.isfinite(z) and step <= _SETTLED * self._tol(z)):
            return None
        known = self.func.known(z)
        if known is None or not _inside(z, self._region(box)):
            return None
        fz, dz = known
        with np.errstate(all="ignore"):
            corr = fz / dz
        if not (cmath.isfinite(corr) and abs(corr) <= self._tol(z)):
            return None
        return RootResult(value=z, converged=True, status=Status.CONVERGED, residual=abs(fz),
                          step=relative_size(corr, z), iterations=0, evaluations=1,
                          method="survey", refined=z - corr)

    def _acceptable(self, r: RootResult, box: Box) -> bool:
        return (
            r.converged
            and _inside(r.value, box, margin=self._tol(r.value))
            and not self._in_exclusion_disk(r.value)
        )

    def _single(self, box: Box) -> RootResult | None:
        center, rho, s = self._moments(box, 2)
        z0 = center + rho * s[1]
        if not (np.isfinite(z0) and _inside(z0, box)):
            z0 = complex(min(max(z0.real, box[0]), box[1]), min(max(z0.imag, box[2]), box[3]))
            if not np.isfinite(z0):
                z0 = center
        r = None
        if not _BASELINE:
            # plain Newton first, as for clusters: a start it settles (1e-4 tolerances)
            # is a root as it stands (damped Newton from the estimate stops
            # as soon as its correction is within the tolerance)
            (z1,), (st,), (ze,) = newton_starts(self.func, np.array([z0]), rtol=self.rtol,
                                                atol=self.atol, region=self._region(box))
            r = self._converged_start(complex(ze), float(st), box)
            if st <= _WANDER * _diameter(box):
                z0 = complex(z1)
        if r is None:
            r = self._polish(z0, box)
        if self._acceptable(r, box):
            # the cell's own boundary winds once around it: that is the verification
            return replace(r, verified=True, multiplicity=1, method="moments+newton")
        return None

    def _polished(self, estimates: np.ndarray, box: Box,
                  found: Sequence[RootResult] = ()) -> tuple[list[RootResult], bool]:
        """Distinct zeros of the cell polished from ``estimates``, none of them near
        ``found``; and whether an estimate ended on a zero already known (a multiple
        zero, or moments too crude to tell two zeros apart)."""
        new: list[RootResult] = []
        again = False
        region = self._region(box)
        if _BASELINE:
            starts, step = np.asarray(estimates, complex), np.zeros(len(estimates))
            last = np.full(len(estimates), complex("nan"))
        else:
            # the starts move together, with the cell's zero-free part of f'/f taken out
            loop = self.sampler.loop(box)
            starts, step, last = newton_starts(
                self.func, np.asarray(estimates, complex), rtol=self.rtol, atol=self.atol,
                region=region, background=lambda at: smooth_log_derivative(*loop, at))
        # a start still wandering after the array Newton steps (its last |f/f'| beyond
        # a thousandth of the cell) is not polished: the damped Newton of polish would
        # spend up to 40 steps on it; the deflated moments, or the cell's halves, give
        # better ones.  Linear convergence to a multiple zero is far below that bound.
        wander = _WANDER * _diameter(box)
        for z0, st, ze in zip(starts, step, last, strict=True):
            if not _inside(complex(z0), region) or st > wander:
                continue
            r = self._converged_start(complex(ze), float(st), box) or self._polish(
                complex(z0), box)
            if not self._acceptable(r, box):
                continue
            if any(abs(r.value - q.value) <= 1e3 * self._tol(r.value) + 1e-12 * self.diam0
                   for q in [*found, *new]):
                again = True
                continue
            new.append(r)
        return new, again

    def _from_estimates(self, estimates: np.ndarray, box: Box, n: int) -> list[RootResult] | None:
        found, _ = self._polished(estimates, box)
        return self._verified(found, box, n)

    def _verified(self, found: list[RootResult], box: Box, n: int) -> list[RootResult] | None:
        """The cell's n zeros from the distinct zeros ``found`` in it, or None."""
        if not found:
            return None
        if len(found) == n and not _BASELINE:
            # n distinct converged zeros inside a cell whose boundary winds n times: each
            # is simple, and the cell's winding verifies them all (no circles needed)
            return [replace(r, multiplicity=1, verified=True, method="moments+newton")
                    for r in found]
        out = []
        diam = _diameter(box)
        for r in found:
            others = [abs(r.value - q.value) for q in found if q is not r]
            others += [abs(r.value - complex(e)) for e in self.excluded]
            rad = max(1e-6 * diam, 1e4 * self._tol(r.value))
            if others:
                rad = min(rad, 0.3 * min(others))
            c = circle_contour(self.func, r.value, rad)
            m = c.winding
            if m is None or m < 1:
                return None
            if m != r.multiplicity:
                r2 = self._polish(r.value, box, multiplicity=m)
                if not self._acceptable(r2, box):
                    return None
                r = replace(r2, evaluations=r.evaluations + r2.evaluations)
            out.append(replace(r, multiplicity=m, verified=True, method="moments+newton",
                               evaluations=r.evaluations + c.z.size))
        if sum(r.multiplicity for r in out) != n:
            return None
        return out

    def _cluster(self, box: Box, n: int) -> list[RootResult] | None:
        center, rho, s = self._moments(box, 2 * n)
        est = center + rho * hankel_zeros(s, n)
        if _BASELINE:
            got = self._from_estimates(est, box, n)
            if got is not None:
                return got
            mid = center + rho * s[1] / n
            return None if not np.isfinite(mid) else self._cluster_circle_legacy(
                box, n, mid, est, rho)
        found, again = self._polished(est, box)
        # Deflation: the moments of the zeros found so far are known exactly, so the
        # remaining m zeros are the Hankel zeros of s_p − Σ_found ζ_k^p, p < 2m (the
        # same identity as the moments themselves, Delves & Lyness 1967).  Two close
        # zeros that crude moments merge into one estimate separate this way.  (Each
        # found zero counts once here: a multiplicity Newton detects from a crude start
        # may be spurious; a true multiple zero is confirmed on its circle below.)
        while found and len(found) < n:
            m = n - len(found)
            zeta = np.array([(r.value - center) / rho for r in found])
            p = np.arange(2 * m)
            rest = s[: 2 * m] - np.sum(zeta[:, None] ** p[None, :], axis=0)
            new, dup = self._polished(center + rho * hankel_zeros(rest, m), box, found)
            again |= dup
            if not new:
                break
            found += new
        if len(found) == n or any(r.multiplicity > 1 for r in found) or again:
            got = self._verified(found, box, n)
            if got is not None:
                return got
        # A tight cluster (its estimates within a small fraction of the cell about their
        # centroid): the rectangle's moments cannot tell its zeros apart, and splitting
        # would take as many levels as the cell is larger than the cluster.  Moments on
        # a circle around it, inside the cell, whose radius is adjusted until it winds
        # exactly n times, can.  Any other unresolved cell splits.
        mid = center + rho * s[1] / n
        if not (np.isfinite(mid) and _inside(mid, box)):
            return None
        near = [abs(z - mid) for z in est if _inside(complex(z), box)]
        if max(near, default=math.inf) > _TIGHT * rho:
            return None
        room = min(mid.real - box[0], box[1] - mid.real, mid.imag - box[2], box[3] - mid.imag)
        radius = max(2.0 * max(near), 1e-3 * rho)
        if radius > 0.5 * room:  # next to the cell's edge: its halves do better
            return None
        for _ in range(_CIRCLE_TRIES):
            if not 1e-9 * rho < radius <= room:
                return None
            w, expected, got, smaller = self._on_circle(box, n, mid, radius, _CIRCLE_POINTS)
            if w is None or w < expected:
                radius = min(4.0 * radius, room) if radius < room else 2 * room
            elif w > expected:
                radius /= 4.0
            elif got is not None:
                return got
            else:
                radius = smaller
        return None

    def _on_circle(self, box: Box, n: int, mid: complex, radius: float, n_max: int
                   ) -> tuple[int | None, int, list[RootResult] | None, float]:
        """Winding of f on a circle about ``mid``, the winding n zeros would give (with
        the excluded points inside), the cell's zeros from the circle's moments when the
        two agree (None if not found), and a smaller radius to try if they are not."""
        c = circle_contour(self.func, mid, radius, n0=16, n_max=n_max)
        expected = n + sum((self._ex_contribution(i) or 0)
                           for i, e in enumerate(self.excluded)
                           if abs(complex(e) - mid) < radius)
        if c.winding != expected:
            return c.winding, expected, None, radius
        sc = self._remove_excluded(c.moments(2 * n), box, mid, radius, circle=(mid, radius))
        est = mid + radius * hankel_zeros(sc, n)
        near = [abs(z - mid) for z in est if abs(z - mid) < radius]
        return (c.winding, expected, self._from_estimates(est, box, n),
                min(2.0 * max(near, default=0.0), 0.25 * radius))

    def _cluster_circle_legacy(self, box: Box, n: int, mid: complex, est: np.ndarray,
                               rho: float) -> list[RootResult] | None:
        """The fallback before issue 14 (kept for the benchmark's baseline only)."""
        near = [abs(z - mid) for z in est if _inside(complex(z), box)]
        radius = min(max(2.0 * max(near, default=0.0), 1e-3 * rho), rho)
        for _ in range(8):
            w, expected, got, smaller = self._on_circle(box, n, mid, radius, 512)
            if w is None:
                radius *= 1.7
            elif w < expected:
                radius *= 4.0
            elif w > expected:
                radius /= 4.0
            elif got is not None:
                return got
            else:
                radius = smaller
                if radius < 1e-9 * rho:
                    return None
            if radius > 2.0 * rho:
                return None
        return None

    # -- driver --------------------------------------------------------------------
    def run(self) -> SurveyResult:
        w = self._outer()
        if w is None:
            return self._result([], None)
        count = self._zero_count(self.box, w)
        if count is None:
            return self._result([], None)
        if count < 0:
            self.notes.append(
                f"negative zero count {count}: f has poles in the box not listed in excluded"
            )
        if self.max_roots is not None and count > self.max_roots:
            self.notes.append(
                f"the window holds {count} zeros, more than the limit of {self.max_roots} "
                "(max_roots): none were isolated and the survey is incomplete; narrow the "
                "window or split it")
            return self._result([self._unsolved(self.box, count, "more zeros than max_roots")],
                                count)
        # the cost of isolating zeros grows with their number: the budget does too
        self.max_evaluations += self.evaluations_per_zero * max(count, 0)
        self.sampler.max_evaluations = self.max_evaluations
        roots: list[RootResult] = []
        queue: deque[tuple[Box, int, int]] = deque([(self.box, w, 0)])
        while queue:
            box, wc, depth = queue.popleft()
            n = self._zero_count(box, wc)
            if n is None or n == 0:
                continue
            if n < 0:
                self.notes.append(f"negative count {n} in cell {box}: unlisted poles")
                continue
            if self._out_of_budget():
                roots.append(self._unsolved(box, n, "evaluation budget exhausted"))
                continue
            if n == 1:
                r = self._single(box)
                if r is not None:
                    roots.append(r)
                    continue
            elif n <= self.cluster_size:
                got = self._cluster(box, n)
                if got is not None:
                    roots.extend(got)
                    continue
            if depth >= self.max_depth:
                self.notes.append(f"maximum depth reached in cell {box} with {n} zero(s)")
                roots.append(self._unsolved(box, n, "maximum subdivision depth reached"))
                continue
            kids = self._split(box, n)
            if kids is None:
                if self._out_of_budget():
                    roots.append(self._unsolved(box, n, "evaluation budget exhausted"))
                    continue
                self.notes.append(f"cell {box} with {n} zero(s) could not be subdivided")
                roots.append(self._unsolved(box, n, "cell could not be subdivided"))
                continue
            if sum(k[1] for k in kids) != wc:
                self.notes.append(f"windings of the halves of {box} do not add up")
            queue.extend((k, wk, depth + 1) for k, wk in kids)
        starved = [r for r in roots if not r.converged and r.reason.endswith("budget exhausted")]
        if starved:
            found = sum(r.multiplicity for r in roots if r.converged)
            left = sum(r.multiplicity for r in starved)
            self.notes.append(
                f"evaluation budget of {self.max_evaluations} evaluations exhausted: "
                f"{found} of {count} zeros isolated, {left} in {len(starved)} cell(s) left "
                "unsolved; the survey is incomplete (narrow the window or split it)")
        return self._result(roots, count)

    def _out_of_budget(self) -> bool:
        return self.sampler.budget_exhausted or self.func.evaluations > self.max_evaluations

    def _noise_checked(self, r: RootResult, roots: list[RootResult],
                       seen: tuple[np.ndarray, np.ndarray, np.ndarray]) -> RootResult:
        """``r`` with its :func:`hermite_noise_error` (simple roots), and a reason when
        that exceeds the stopping test's tolerance.  ``seen``: the points evaluated so
        far, f and f' there (Newton's last iterates serve as probes)."""
        if r.multiplicity != 1:
            return r
        near = [abs(r.value - q.value) for q in roots if q is not r]
        near += [abs(r.value - complex(e)) for e in self.excluded]
        # probes where the second-order part of f is about the tolerance: the third-
        # order terms are then far below it, and noise far above it stands out
        tol = self._tol(r.value)
        h = math.sqrt(tol * min([self.diam0] + near))
        if _BASELINE:
            err = noise_error(self.func, r.value, h)
        else:
            pts, fv, dv = seen
            close = np.flatnonzero(np.abs(pts - r.value) <= h)
            err = hermite_noise_error(self.func, r.value, h,
                                      known=(pts[close], fv[close], dv[close]))
        if err <= _NOISE_FACTOR * tol:
            return r
        return replace(r, noise_error=err, reason=(
            f"f is rounding noise at the root's scale: it is accurate to about {err:.1e} "
            f"({err / max(abs(r.value), 1e-300):.1e} relative), not to the tolerance"))

    def _unsolved(self, box: Box, n: int, why: str) -> RootResult:
        center = complex(0.5 * (box[0] + box[1]), 0.5 * (box[2] + box[3]))
        return RootResult(value=center, converged=False, status=Status.NOT_ATTEMPTED,
                          reason=f"{n} zero(s) in cell {box} not isolated: {why}",
                          multiplicity=n, method="survey")

    def _result(self, roots: list[RootResult], count: int | None) -> SurveyResult:
        good = sorted((r for r in roots if r.converged),
                      key=lambda r: (round(r.value.real, 12), r.value.imag))
        bad = [r for r in roots if not r.converged]
        # Two cells whose Newton iterations ended on the same zero: keep it once; one
        # cell's own zero was then missed, so the survey cannot be complete.
        distinct: list[RootResult] = []
        for r in good:
            same = [q for q in distinct
                    if abs(r.value - q.value) <= 1e3 * self._tol(r.value) + 1e-12 * self.diam0]
            if same:
                self.notes.append(f"zero near {r.value!r} found from two cells; a zero of "
                                  "one of those cells was missed")
                bad.append(replace(r, converged=False, status=Status.NOT_ATTEMPTED,
                                   reason="duplicate of another cell's zero"))
                continue
            distinct.append(r)
        seen = self.func.remembered()
        good = [self._noise_checked(r, good, seen) for r in distinct]
        found = sum(r.multiplicity for r in good)
        return SurveyResult(
            roots=good + bad,
            count=count,
            evaluations=self.func.evaluations,
            cells=self.cells,
            box=self.box,
            notes=self.notes,
            complete=count is not None and found == count and not bad,
        )


#: A root's :func:`noise_error` above this many tolerances is reported.
_NOISE_FACTOR = 10.0


def noise_error(f: AnalyticFunction, z: complex, h: float) -> float:
    """Uncertainty of a simple zero ``z`` of f caused by rounding noise in f.

    The remainders r(p) = f(p) − f(z) − f'(z)(p − z) at four points p at distance h and
    at the four in the same directions at h/10 are compared: for an analytic f,
    r ≈ f''(z)(p − z)²/2, so r(h/10) = r(h)/100 up to third-order terms.  Their
    difference, divided by |f'(z)|, is what rounding noise in f does to the zero (first-
    order perturbation of a simple zero, common practice).  Returns that estimate.
    """
    dirs = np.array([1, 1j, -1, -1j])
    pts = np.concatenate(([z], z + h * dirs, z + 0.1 * h * dirs))
    fv, dv = f(pts)
    with np.errstate(all="ignore"):
        r = fv[1:] - fv[0] - dv[0] * (pts[1:] - z)
        noise = float(np.max(np.abs(r[4:] - 0.01 * r[:4])))
        slope = abs(complex(dv[0]))
    if not (math.isfinite(noise) and slope > 0):
        return math.inf
    return noise / slope


#: A point nearer a root than this many units in the last place of |z| is not a probe
#: of :func:`hermite_noise_error`: rounding of f there may be shared with f(z).
_PROBE_ULPS = 1e4
#: Probes :func:`hermite_noise_error` wants (fresh ones complete the known ones).
_PROBES = 2


def hermite_noise_error(f: AnalyticFunction, z: complex, h: float, *,
                        known: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
                        ) -> float:
    """Uncertainty of a simple zero ``z`` of f caused by rounding noise in f, from few
    evaluations.

    At a probe p near z, f(p) − f(z) − (f'(p) + f'(z))(p − z)/2 is the error of the
    trapezoidal rule for the integral of f' from z to p: −f'''(ξ)(p − z)³/12 for an
    analytic f (common practice), far below the tolerance at |p − z| ≤ h when h makes
    the second-order part about that tolerance.  Rounding noise in f or f' adds to it
    at full size.  Divided by |f'(z)| it is what that noise does to the zero (first-
    order perturbation of a simple zero, as in :func:`noise_error`, which needs eight
    probes where this needs two).

    Parameters
    ----------
    f : callable
        ``f(z) -> (f(z), f'(z))`` for a 1-D complex array (f(z) itself is evaluated
        unless ``known`` holds it).
    z : complex
        The zero.
    h : float
        Largest distance of a probe.
    known : tuple of ndarray, optional
        Points already evaluated (e.g. Newton's last iterates toward z), f and f' there.
        Those within h of z and farther than 1e4 units in the last place of |z| (the
        rounding of closer points may be shared with f(z)) serve as probes, beside a
        fresh one at z + h (and one at z + ih when none is known).

    Returns
    -------
    float
        The largest estimate over the probes (inf where f or f' is not finite).
    """
    pts = np.zeros(0, complex)
    fv = dv = pts
    fz: complex | None = None
    dz = 0j
    if known is not None:
        kp, kf, kd = (np.asarray(a, dtype=complex).ravel() for a in known)
        at = np.flatnonzero(kp == z)
        if at.size:
            fz, dz = complex(kf[at[0]]), complex(kd[at[0]])
        dist = np.abs(kp - z)
        use = (dist <= h) & (dist > _PROBE_ULPS * np.spacing(max(abs(z), 1e-300)))
        pts, fv, dv = kp[use], kf[use], kd[use]
    # one fresh probe at distance h always: close points see noise that varies on a
    # longer scale only in part (a Newton iterate may lie 1e-10 from z)
    fresh = [z + h * d for d in (1, 1j)][: max(_PROBES - pts.size, 1)]
    ask = ([] if fz is not None else [z]) + fresh
    if ask:
        af, ad = f(np.array(ask, dtype=complex))
        if fz is None:
            fz, dz = complex(af[0]), complex(ad[0])
            af, ad = af[1:], ad[1:]
        pts = np.concatenate((pts, np.array(fresh, dtype=complex)))
        fv, dv = np.concatenate((fv, af)), np.concatenate((dv, ad))
    with np.errstate(all="ignore"):
        rem = fv - fz - 0.5 * (dv + dz) * (pts - z)
        noise = float(np.max(np.abs(rem)))
        slope = abs(dz)
    if not (math.isfinite(noise) and slope > 0):
        return math.inf
    return noise / slope


def find_roots(
    f: AnalyticFunction,
    box: Box,
    /,
    *,
    excluded: Sequence[complex] = (),
    rtol: float = 1e-12,
    atol: float = 0.0,
    max_depth: int = 50,
    max_evaluations: int = 50_000,
    cluster_size: int = 5,
    exclusion_radius: float = 1e-8,
    features: Sequence[tuple[complex, float]] = (),
    evaluations_per_zero: int = 500,
    max_roots: int | None = 2000,
) -> SurveyResult:
    """All zeros of an analytic function in a rectangle of the complex plane.

    Parameters
    ----------
    f : callable
        ``f(z) -> (f(z), f'(z))`` for a 1-D complex array ``z`` (one call evaluates
        many points).  f must be analytic in the box except at ``excluded`` points.
    box : tuple of float
        ``(re_min, re_max, im_min, im_max)``.
    excluded : sequence of complex
        Known poles of f, or zeros brought in by a scaling of f, that are not wanted:
        their winding (measured on a circle of radius ``exclusion_radius`` × box
        diameter) is subtracted from the counts and no root is reported within it.
    rtol, atol : float
        Newton stopping test ``|Δz| ≤ atol + rtol·|z|``.
    max_depth : int
        Largest number of successive subdivisions of a cell.
    max_evaluations : int
        Budget of evaluated points for the outer boundary and, with
        ``evaluations_per_zero`` added for each zero it counts, for the whole survey
        (checked between cells and during refinement).  Exhausting it stops the survey
        with one note (zeros counted, isolated and left) and an unsolved result for each
        cell left: ``complete`` is false.
    evaluations_per_zero : int
        Budget added per zero counted on the outer boundary (isolating zeros costs about
        52 evaluations each on the ion-acoustic family of tests/test_survey_many_roots.py).
    max_roots : int or None
        A window counting more zeros than this is not subdivided: the result holds the
        count, a note and one unsolved entry (``complete`` false).  ``None``: no limit.
    cluster_size : int
        Cells with at most this many zeros are solved by the moment method first.
    exclusion_radius : float
        Radius of the disks around excluded points, relative to the box diameter.
    features : sequence of (complex, float)
        Points near which f changes on a length scale (the float) much shorter than the
        box, e.g. a resonance of width w.  Sampling a line starts with points spaced
        geometrically about each one's projection (:class:`BoundarySampler`): uniform
        samples that step over a narrow feature can each pass the phase test and
        miss whole windings (a zero next to a cyclotron harmonic, common practice).

    Returns
    -------
    SurveyResult
        ``count`` from the argument principle; ``complete`` when the converged roots'
        multiplicities add up to it.  See the module docstring for the method.

    Examples
    --------
    >>> import numpy as np
    >>> res = find_roots(lambda z: (np.sin(z), np.cos(z)), (-4.0, 4.0, -1.0, 1.0))
    >>> res.count, res.complete
    (3, True)
    """
    x0, x1, y0, y1 = (float(v) for v in box)
    if not (x0 < x1 and y0 < y1):
        raise ValueError(f"box must satisfy re_min < re_max and im_min < im_max, got {box}")
    if cluster_size < 1:
        raise ValueError("cluster_size must be at least 1")
    survey = _Survey(
        f, (x0, x1, y0, y1), excluded, rtol=rtol, atol=atol, max_depth=max_depth,
        max_evaluations=max_evaluations, cluster_size=cluster_size,
        exclusion_radius=exclusion_radius, features=features,
        evaluations_per_zero=evaluations_per_zero, max_roots=max_roots,
    )
    return survey.run()
