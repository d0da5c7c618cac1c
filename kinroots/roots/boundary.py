"""Zero counts on the boundary of one rectangle for many members of a family f_p.

Between two parameter values a zero can enter or leave a fixed rectangle only through its
edges, and the number of zeros inside is the winding number of f_p along the edges
(argument principle).  :class:`BoundaryCounter` counts it at many p with samples on the
boundary only:

* the samples form one closed counter-clockwise loop (the four corners always included,
  so the midpoint of two neighbours lies on the boundary);
* every p starts from the loop that resolved the previous p, evaluated for a whole batch
  of p in one call of ``pairs(p, z)`` when the family offers it;
* a segment is refined until it passes :func:`kinroots.roots.contour.segment_ok`
  — the same phase-step test the survey uses, so a count here is as reliable as the
  survey's outer count; it is cut into 2 to ``MAX_PIECES`` equal pieces, as many as the
  phase turn it shows in units of the phase step (fewer rounds of evaluation where f
  turns fast); a segment still failing below ``min_fraction`` × the box diameter
  (a zero on or next to an edge), a zero or non-finite sample, or a phase sum more than
  0.1 from an integer gives no count (``None``) with the reason;
* after a batch, the loop of its last p is respaced: on each edge the points are spread
  so that each segment uses about one allowance of the tests (``RESPACE_FILL``), judged
  from the share each resolved segment used of it (each measure brought to the first power
  of the length: phase steps 1, trapezoidal remainder 3, P minus its chord 2); so the loop
  follows f as it becomes smoother as well as rougher (without ``respace``: thinned where
  a merged segment still passes, at most every other sample per batch);
* the smooth factor: after a batch, a polynomial P (degree ≤ ``SMOOTH_DEGREE``, a least-
  squares fit of log g and (log g)' on the last resolved loop, g = f divided by the known
  zeros, refined batch after batch) is learnt, and the next batches take the winding of
  g·exp(−P).  exp(−P) is entire and never zero, so the winding, hence the count, is the
  same exactly; what it removes is the phase that turns steadily along the edges (the
  Landau factors of a dispersion function below the real axis), so far fewer samples
  pass the test.  It is learnt only from a loop whose g winds 0 times (single-valued
  log).  The factor must not hide a zero that crosses an edge: P fitted to earlier
  loops carries the far field of a zero just outside, and a zero that then crosses the
  edge would meet that imprint as a zero–pole pair, invisible from far away.  So a
  segment passes only where P is linear to within ``PHASE_STEP/2`` along it (a
  rigorous bound: Chebyshev coefficients of P minus its chord), i.e. where exp(−P)
  only removes a linear trend of log g, which no zero produces; near an imprint the
  segments stay as short as the imprint's distance, where a crossing zero is seen;
* excluded points (poles, zeros brought in by a scaling) inside the box: their winding
  on a small circle is subtracted, as in :func:`kinroots.roots.find_roots`.  It is measured
  at the first and the last p of a batch and, if the two differ, at every p of it (it is
  an integer that changes only when a zero passes within the circle's radius).
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from kinroots.roots.contour import (
    PHASE_STEP,
    circle_contour,
    feature_params,
    rectangle_edges,
    segment_ok,
)
from kinroots.roots.result import AnalyticFunction, Box, CountedFunction

__all__ = ["BoundaryCount", "BoundaryCounter"]

#: Degree of the polynomial P of the smooth factor exp(P) (:class:`BoundaryCounter`).
SMOOTH_DEGREE = 16
#: Most pieces a failing boundary segment is cut into in one round.
MAX_PIECES = 4
#: Whether a batch's loop is respaced for the next one (else only thinned).
RESPACE = True
#: Share of one segment test's allowance a respaced segment is given (bench_resurvey:
#: 0.8, 0.9, 1.0, 1.1, 1.25 give 44.2, 41.5, 40.3, 45.2, 47.7 evaluations per k; above 1
#: more k need refinement rounds).
RESPACE_FILL = 1.0


def _fractions(pieces: np.ndarray) -> np.ndarray:
    """1/n … (n−1)/n for each n of ``pieces``, concatenated."""
    return np.concatenate([np.arange(1, n) / n for n in pieces.tolist()])


@functools.lru_cache(maxsize=8)
def _lobatto(m: int) -> tuple[np.ndarray, np.ndarray]:
    """Chebyshev–Lobatto nodes on [0, 1] and the matrix from values there to Chebyshev
    coefficients (degree m)."""
    x = -np.cos(np.pi * np.arange(m + 1) / m)
    return 0.5 * (x + 1.0), np.linalg.inv(np.polynomial.chebyshev.chebvander(x, m))

Family = Callable[[float], AnalyticFunction]
PairFamily = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class BoundaryCount:
    """Zeros inside the box at one parameter value.

    ``count`` is ``None`` when the boundary could not be resolved (``note`` says why).
    ``evaluations`` is the number of points at which f_p was evaluated for it; ``where``,
    when the count is ``None`` for a reason on the boundary, a boundary point there.
    """

    param: float
    count: int | None
    evaluations: int
    note: str = ""
    where: complex | None = None


def _corners(box: Box) -> np.ndarray:
    x0, x1, y0, y1 = box
    return np.array([complex(x0, y0), complex(x1, y0), complex(x1, y1), complex(x0, y1)])


def _initial_loop(box: Box, n: int) -> np.ndarray:
    c = _corners(box)
    t = np.arange(n) / n
    return np.concatenate([c[i] + (c[(i + 1) % 4] - c[i]) * t for i in range(4)])


class BoundaryCounter:
    """Argument-principle counts of f_p in ``box`` from boundary samples only.

    Parameters
    ----------
    box : (re_min, re_max, im_min, im_max)
        The rectangle (fixed for the life of the counter).
    excluded : sequence of complex
        Points whose winding is not wanted in the count (the same meaning as for
        :func:`kinroots.roots.find_roots`); assumed independent of p.
    n_init : int
        Samples per edge of the first loop.
    min_fraction : float
        Shortest segment, relative to the box diameter, before an edge counts as
        unresolved (a zero on it).
    exclusion_radius : float
        Radius of the circles around excluded points, relative to the box diameter.
    max_points : int
        Largest loop; beyond it the count is ``None``.
    features : callable, optional
        ``features(p)``: narrow features of f_p, (centre, width), as for
        :func:`kinroots.roots.find_roots`.  Each batch's loops get the points
        :func:`kinroots.roots.contour.feature_params` places about the features of its
        first and last p (uniform or thinned samples can step over a narrow resonance
        and miss whole windings); thinning never removes them for long, since they are
        added again to every batch.
    """

    def __init__(self, box: Box, *, excluded: Sequence[complex] = (), n_init: int = 8,
                 min_fraction: float = 1e-7, exclusion_radius: float = 1e-8,
                 max_points: int = 4096,
                 features: Callable[[float], Sequence[tuple[complex, float]]] | None = None,
                 ) -> None:
        self.features = features
        self.n_init = n_init
        x0, x1, y0, y1 = (float(v) for v in box)
        self.box: Box = (x0, x1, y0, y1)
        self.diameter = math.hypot(x1 - x0, y1 - y0)
        self.min_len = min_fraction * self.diameter
        self.max_points = max_points
        self.loop = _initial_loop(self.box, n_init)
        self.excluded = [complex(e) for e in excluded
                         if x0 <= e.real <= x1 and y0 <= e.imag <= y1]
        radius = exclusion_radius * self.diameter
        self._radii = []
        for i, e in enumerate(self.excluded):
            others = [abs(e - o) for j, o in enumerate(self.excluded) if j != i]
            self._radii.append(min([radius] + [0.1 * d for d in others]))
        self._corner_set = set(_corners(self.box).tolist())
        self._centre = complex(0.5 * (x0 + x1), 0.5 * (y0 + y1))
        #: Respace the loop after a batch (:meth:`_respaced`); otherwise thin it.
        self.respace = RESPACE
        #: Share of one test's allowance each respaced segment is given.
        self.respace_fill = RESPACE_FILL
        #: Thinning passes after a batch (each drops at most every other sample).
        self.thin_passes = 3
        #: Most pieces a failing segment is cut into in one round (2: bisection).
        self.max_pieces = MAX_PIECES
        #: Largest degree of the smooth factor exp(P) divided out (0: none).
        self.smooth_degree = SMOOTH_DEGREE
        # (centre, scale, coefficients of P in ((z − centre)/scale)^j, ascending)
        self._smooth: tuple[complex, float, np.ndarray] | None = None
        self._smooth_der = np.zeros(1, complex)
        #: Points evaluated by this counter (boundary and exclusion circles).
        self.evaluations = 0
        self._started: tuple[list[float], np.ndarray] | None = None

    # -- public -------------------------------------------------------------------
    def start(self, params: Sequence[float]) -> tuple[np.ndarray, np.ndarray]:
        """The (p, z) pairs that :meth:`count` at ``params`` evaluates first: its start loop
        at each p in turn.  A caller that evaluates them together with other work (one
        call of the family instead of two) hands their values (f, f') to
        ``count(params, first=...)``."""
        ps = [float(p) for p in params]
        loop = self._start_loop(ps)
        return np.repeat(np.array(ps), loop.size), np.tile(loop, len(ps))

    def _start_loop(self, ps: list[float]) -> np.ndarray:
        """The loop a count at ``ps`` starts from (the last one, with the feature points of
        its first and last p); the same array for the same ``ps`` until the next count."""
        if self._started is not None and self._started[0] == ps:
            return self._started[1]
        loop = self.loop
        if self.features is not None:
            loop = self._with_features(loop, [*self.features(ps[0]), *self.features(ps[-1])])
        self._started = (ps, loop)
        return loop

    def count(self, params: Sequence[float], *, family: Family | None = None,
              pairs: PairFamily | None = None,
              known: Sequence[Sequence[complex]] | None = None,
              first: tuple[np.ndarray, np.ndarray] | None = None) -> list[BoundaryCount]:
        """Counts at each of ``params``: one batch (``pairs``) or one p at a time.

        ``known[i]``, optional, lists zeros of f at ``params[i]`` believed to lie inside
        (with repetition for multiplicity), e.g. the traced roots.  The winding is then
        taken of the deflated ``g = f / Π (z − z_j)``, and the count is that winding plus
        the number of those inside the box: the argument principle for g (whose poles
        inside are exactly the listed zeros), so the count stays exact whatever the list.
        The listed zeros no longer make the phase turn fast along nearby edges, so far
        fewer samples resolve the boundary.

        ``first``, optional: f and f' at the pairs :meth:`start` gave for these
        ``params`` (evaluated by the caller), in place of this call's first evaluation.
        """
        ps = [float(p) for p in params]
        if not ps:
            return []
        if pairs is None and family is None:
            raise ValueError("give family or pairs")

        def raw(idx: list[int], zs: list[np.ndarray], given: tuple[np.ndarray, np.ndarray]
                | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
            n = sum(z.size for z in zs)
            self.evaluations += n
            if given is not None or pairs is not None:
                if given is None:
                    assert pairs is not None
                    pp = np.concatenate([np.full(z.size, ps[i])
                                         for i, z in zip(idx, zs, strict=True)])
                    given = pairs(pp, np.concatenate(zs))
                f, d = np.asarray(given[0], complex), np.asarray(given[1], complex)
                if f.shape != (n,) or d.shape != (n,):
                    raise ValueError(f"first: {n} values expected, not {f.shape}, {d.shape}")
                out, j = [], 0
                for z in zs:
                    out.append((f[j:j + z.size], d[j:j + z.size]))
                    j += z.size
                return out
            assert family is not None
            out = []
            for i, z in zip(idx, zs, strict=True):
                f, d = family(ps[i])(z)
                out.append((np.asarray(f, complex), np.asarray(d, complex)))
            return out

        m = len(ps)
        x0, x1, y0, y1 = self.box
        poles = [np.array([complex(z) for z in (known[i] if known is not None else ())
                           if x0 < z.real < x1 and y0 < z.imag < y1], dtype=complex)
                 for i in range(m)]

        def evaluate(idx: list[int], zs: list[np.ndarray], given: tuple[np.ndarray, np.ndarray]
                     | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
            """``raw`` deflated by the known zeros of each p and by the smooth factor."""
            out = []
            for i, z, (f, d) in zip(idx, zs, raw(idx, zs, given), strict=True):
                if poles[i].size:
                    with np.errstate(all="ignore"):
                        diff = z[:, None] - poles[i][None, :]
                        g = f / np.prod(diff, axis=1)
                        d = g * (d / f - np.sum(1.0 / diff, axis=1))
                    f = g
                out.append((f, d))
            if self._smooth is None:
                return out
            p_val, p_der = self._smooth_factor(np.concatenate(zs))
            with np.errstate(all="ignore"):
                e = np.exp(-p_val)
            j, scaled = 0, []
            for f, d in out:
                sl = slice(j, j + f.size)
                j += f.size
                with np.errstate(all="ignore"):
                    scaled.append((f * e[sl], (d - f * p_der[sl]) * e[sl]))
            return scaled

        loop = self._start_loop(ps)
        self._started = None
        zl = [loop.copy() for _ in range(m)]
        fd = evaluate(list(range(m)), zl, first)
        fl = [a for a, _ in fd]
        dl = [b for _, b in fd]
        evals = [z.size for z in zl]
        # segments (z_j, z_{j+1}) of the shared first loop on which the smooth factor is
        # linear enough (later loops: tested where they pass segment_ok)
        linear0 = self._factor_linear(loop, np.roll(loop, -1))
        result: list[int | None] = [None] * m
        notes = [""] * m
        wheres: list[complex | None] = [None] * m
        todo = list(range(m))
        while todo:
            # the loops of every p still to resolve, checked together (one flat array)
            sizes = np.array([zl[i].size for i in todo])
            start = np.concatenate(([0], np.cumsum(sizes)[:-1]))
            owner = np.repeat(np.arange(len(todo)), sizes)
            local = np.arange(owner.size) - start[owner]
            z = np.concatenate([zl[i] for i in todo])
            f = np.concatenate([fl[i] for i in todo])
            d = np.concatenate([dl[i] for i in todo])
            nxt = np.arange(1, z.size + 1)
            nxt[start + sizes - 1] = start  # each loop is closed
            with np.errstate(all="ignore"):
                bad_pt = ~np.isfinite(f) | ~np.isfinite(d) | (f == 0)
            pairs_z = np.stack([z, z[nxt]], axis=1).ravel()
            pairs_f = np.stack([f, f[nxt]], axis=1).ravel()
            pairs_d = np.stack([d, d[nxt]], axis=1).ravel()
            ok = segment_ok(pairs_z, pairs_f, pairs_d)[::2]
            if self._smooth is not None:
                shared = (sizes == loop.size)[owner]  # nothing inserted yet: the first loop
                ok[shared] &= linear0[local[shared]]
                t = np.flatnonzero(ok & ~shared)
                if t.size:  # the loops share most segments: each distinct one once
                    ends, back = np.unique(np.stack([z[t], z[nxt[t]]], axis=1), axis=0,
                                           return_inverse=True)
                    ok[t] = self._factor_linear(ends[:, 0], ends[:, 1])[back.ravel()]
            with np.errstate(all="ignore"):
                turn = np.angle(f[nxt] / f)
            winding = np.bincount(owner, weights=turn, minlength=len(todo)) / (2 * math.pi)
            n_bad_pt = np.bincount(owner, weights=bad_pt, minlength=len(todo))
            failing = ~ok
            n_fail = np.bincount(owner, weights=failing, minlength=len(todo))
            seg = np.abs(z[nxt] - z)
            short = np.bincount(owner, weights=failing & (seg <= self.min_len),
                                minlength=len(todo))
            split = failing.copy()
            for j, i in enumerate(todo):
                if n_bad_pt[j]:
                    at = complex(z[start[j] + np.flatnonzero(bad_pt[owner == j])[0]])
                    wheres[i] = at
                    notes[i] = f"f is zero or not finite on the boundary near {at:.6g}"
                elif not n_fail[j]:
                    w = float(winding[j])
                    if abs(w - round(w)) > 0.1:
                        notes[i] = f"phase sum {w:.3f}·2π is not an integer"
                    else:
                        result[i] = round(w)
                elif short[j] or sizes[j] + n_fail[j] > self.max_points:
                    e = start[j] + np.flatnonzero(failing[owner == j])[0]
                    where = wheres[i] = complex(0.5 * (z[e] + z[nxt[e]]))
                    notes[i] = (f"boundary unresolved near {where:.6g} (a zero on or next "
                                "to an edge, e.g. a marginal wave on an edge at Im = 0; "
                                "moving that edge a little lets it be counted)")
                else:
                    continue
                split[owner == j] = False
            bad = np.flatnonzero(split)
            if not bad.size:
                break
            pieces = self._pieces(z[bad], z[nxt[bad]], f[bad], f[nxt[bad]], d[bad],
                                  d[nxt[bad]])
            new_z = (np.repeat(z[bad], pieces - 1)
                     + np.repeat(z[nxt[bad]] - z[bad], pieces - 1) * _fractions(pieces))
            new_owner = np.repeat(owner[bad], pieces - 1)
            new_pos = np.repeat(local[bad] + 1, pieces - 1)
            req_j = np.unique(new_owner)
            req_i = [todo[j] for j in req_j.tolist()]
            req_z = [new_z[new_owner == j] for j in req_j]
            req_pos = [new_pos[new_owner == j] for j in req_j]
            for i, zn, pos, (fn, dn) in zip(req_i, req_z, req_pos, evaluate(req_i, req_z),
                                            strict=True):
                zl[i] = np.insert(zl[i], pos, zn)
                fl[i] = np.insert(fl[i], pos, fn)
                dl[i] = np.insert(dl[i], pos, dn)
                evals[i] += zn.size
            todo = req_i
        # next batch starts from the last resolved loop, respaced (or thinned)
        good = [i for i in range(m) if result[i] is not None]
        if good:
            i = good[-1]
            z, f, d = zl[i], fl[i], dl[i]
            if self.respace:
                before = self._smooth
                self._fit_smooth(z, f, d, result[i])
                self.loop = self._respaced(z, *self._refactored(z, f, d, before))
            else:
                for _ in range(self.thin_passes):
                    keep = self._thin(z, f, d)
                    if keep.all():
                        break
                    z, f, d = z[keep], f[keep], d[keep]
                self.loop = z
                self._fit_smooth(zl[i], fl[i], dl[i], result[i])
        else:
            self._smooth = None
        ex, ex_evals = self._exclusions(ps, family, pairs)
        out = []
        for i, p in enumerate(ps):
            c = result[i]
            note = notes[i]
            ex_i = ex[i]
            if c is not None:
                if ex_i is None:
                    c, note = None, "winding around an excluded point not resolved"
                else:
                    c += poles[i].size - ex_i
            out.append(BoundaryCount(p, c, evals[i] + ex_evals[i], note, wheres[i]))
        return out

    # -- internals ----------------------------------------------------------------
    def _pieces(self, z0: np.ndarray, z1: np.ndarray, f0: np.ndarray, f1: np.ndarray,
                d0: np.ndarray, d1: np.ndarray) -> np.ndarray:
        """Pieces to cut each failing segment into: 2 (bisection) up to
        :data:`MAX_PIECES`, the phase change it shows (between its ends and as f'/f
        predicts at each end) in units of ``PHASE_STEP``; more samples than a bisection
        where the phase turns much faster, so fewer rounds of evaluation."""
        with np.errstate(all="ignore"):
            dz = z1 - z0
            turn = np.maximum.reduce([np.abs(np.angle(f1 / f0)), np.abs((d0 / f0 * dz).imag),
                                      np.abs((d1 / f1 * dz).imag)]) / PHASE_STEP
        n = np.ceil(np.nan_to_num(turn, nan=2.0, posinf=MAX_PIECES))
        return np.clip(n, 2, self.max_pieces).astype(int)

    def _smooth_factor(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """P(z) and P'(z) of the smooth factor."""
        assert self._smooth is not None
        centre, scale, coef = self._smooth
        u = (z - centre) / scale
        value = np.polynomial.polynomial.polyval(u, coef)
        deriv = np.polynomial.polynomial.polyval(u, self._smooth_der) / scale
        return value, deriv

    def _fit_smooth(self, z: np.ndarray, f: np.ndarray, d: np.ndarray,
                    winding: int | None) -> None:
        """Improve P from the resolved loop of the last p (``f`` = g/exp(P) there).

        A least-squares polynomial Q of log f and of its derivative on the loop is added
        to P (a correction, so a sparse loop keeps what earlier loops taught). Only when f
        winds 0 times (a single-valued log along the loop); otherwise P is kept as it is.
        """
        m = min(self.smooth_degree, z.size - 2)
        if winding != 0 or m < 1:
            return
        with np.errstate(all="ignore"):
            ratio = np.roll(f, -1) / f
            step = np.log(np.abs(ratio)) + 1j * np.angle(ratio)
            log_f = np.concatenate(([0j], np.cumsum(step[:-1])))
            dlog = d / f
        centre, scale = self._centre, 0.5 * self.diameter
        u = (z - centre) / scale
        basis = np.vander(u, m + 1, increasing=True)
        # rows for log f and for its derivative times the local spacing
        h = 0.5 * (np.abs(np.roll(z, -1) - z) + np.abs(z - np.roll(z, 1)))
        dbasis = np.zeros_like(basis)
        dbasis[:, 1:] = basis[:, :-1] * np.arange(1, m + 1) / scale
        a = np.concatenate([basis, h[:, None] * dbasis])
        b = np.concatenate([log_f, h * dlog])
        if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))):
            return
        coef, *_ = np.linalg.lstsq(a, b, rcond=None)
        coef[0] = 0.0  # the constant of log f is arbitrary: leave the scale of f alone
        old = self._smooth[2] if self._smooth is not None else np.zeros(1, complex)
        new = np.zeros(max(old.size, coef.size), complex)
        new[:old.size] += old
        new[:coef.size] += coef
        if np.all(np.isfinite(new)):
            self._smooth = (centre, scale, new)
            self._smooth_der = np.polynomial.polynomial.polyder(new)

    def _factor_linear(self, za: np.ndarray, zb: np.ndarray) -> np.ndarray:
        """Whether P is linear to within ``PHASE_STEP/2`` on each segment [za, zb].

        P restricted to a segment is a polynomial of its degree in the segment
        parameter t; minus the chord through its ends, its Chebyshev coefficients on
        [0, 1] (exact from that many Chebyshev–Lobatto nodes) bound the deviation by
        their absolute sum.
        """
        return self._chord_deviation(za, zb) <= 0.5 * PHASE_STEP

    def _chord_deviation(self, za: np.ndarray, zb: np.ndarray) -> np.ndarray:
        """Upper bound of |P − its chord| on each segment [za, zb] (0 without a factor):
        the absolute sum of the Chebyshev coefficients on [0, 1] of P minus the chord."""
        if self._smooth is None or za.size == 0 or self._smooth[2].size <= 2:
            return np.zeros(za.shape)
        m = self._smooth[2].size - 1
        t, inv = _lobatto(m)
        zz = za[:, None] + t[None, :] * (zb - za)[:, None]
        centre, scale, coef = self._smooth
        pv = np.polynomial.polynomial.polyval((zz - centre) / scale, coef)
        dev = pv - (pv[:, :1] + t[None, :] * (pv[:, -1:] - pv[:, :1]))
        with np.errstate(all="ignore"):
            return np.sum(np.abs(dev @ inv.T), axis=1)

    def _refactored(self, z: np.ndarray, f: np.ndarray, d: np.ndarray,
                    before: tuple[complex, float, np.ndarray] | None
                    ) -> tuple[np.ndarray, np.ndarray]:
        """``f`` = g·exp(−P_before) and its derivative, given as g·exp(−P) for the current P."""
        if self._smooth is before:
            return f, d
        p_new, d_new = self._smooth_factor(z)
        if before is not None:
            centre, scale, coef = before
            u = (z - centre) / scale
            p_new = p_new - np.polynomial.polynomial.polyval(u, coef)
            d_new = d_new - np.polynomial.polynomial.polyval(
                u, np.polynomial.polynomial.polyder(coef)) / scale
        with np.errstate(all="ignore"):
            e = np.exp(-p_new)
            return f * e, (d - f * d_new) * e

    def _needs(self, z: np.ndarray, f: np.ndarray, d: np.ndarray) -> np.ndarray:
        """For each segment (z_j, z_{j+1}) of the closed loop, the number of pieces of the
        test's size it is worth: the largest of the ratios of each quantity that
        :func:`segment_ok` and :meth:`_factor_linear` bound to its bound, each brought to
        the first power of the length by the power at which it grows with it (phase steps
        and f'/f·Δz: 1; the trapezoidal remainder of log f: 3; P minus its chord: 2)."""
        nxt = np.roll(np.arange(z.size), -1)
        with np.errstate(all="ignore"):
            g = d / f
            dz = z[nxt] - z
            ratio = f[nxt] / f
            dphi = np.angle(ratio)
            dlog = np.log(np.abs(ratio)) + 1j * dphi
            p0, p1 = g * dz, g[nxt] * dz
            phase = np.maximum.reduce([np.abs(dphi), np.abs(p0.imag), np.abs(p1.imag)])
            trap = np.abs(dlog - 0.5 * (p0 + p1))
            need = np.maximum.reduce([
                phase / PHASE_STEP,
                np.cbrt(trap / (0.5 * PHASE_STEP)),
                np.sqrt(self._chord_deviation(z, z[nxt]) / (0.5 * PHASE_STEP)),
            ])
        return np.where(np.isfinite(need), need, np.inf)

    def _respaced(self, z: np.ndarray, f: np.ndarray, d: np.ndarray) -> np.ndarray:
        """A loop for the next batch: on each edge, points spread so that every piece is
        worth the same share of :meth:`_needs` of the resolved loop (``z``, ``f`` = g·exp(−P)
        with the current P), about ``RESPACE_FILL`` of one test's allowance each; the
        corners stay.  Segments that the tests passed with room to spare get merged, those
        that only just passed get more points, so the loop needs less refinement at the
        next p and holds fewer points than one thinned by dropping samples."""
        need = self._needs(z, f, d)
        s = self._perimeter(z)
        s_next = np.append(s[1:], 4.0)
        corners = _corners(self.box)
        pieces = []
        for e in range(4):
            on = (s >= e) & (s < e + 1)
            if not np.all(np.isfinite(need[on])):
                pieces.append(z[on])  # keep a loop whose needs are not known as it is
                continue
            total = np.concatenate(([0.0], np.cumsum(need[on])))
            n = max(1, math.ceil(total[-1] / self.respace_fill - 1e-9))
            at = np.interp(total[-1] * np.arange(n) / n, total,
                           np.concatenate((s[on], [min(s_next[on][-1], e + 1.0)])))
            at[0] = e
            pieces.append(corners[e] + (corners[(e + 1) % 4] - corners[e]) * (at - e))
        return np.concatenate(pieces)

    def _perimeter(self, z: np.ndarray) -> np.ndarray:
        """Position of boundary points along the loop: edge index + fraction (0 … 4)."""
        x0, x1, y0, y1 = self.box
        x, y = z.real, z.imag
        return np.select(
            [(y == y0) & (x < x1), x == x1, y == y1],
            [(x - x0) / (x1 - x0), 1 + (y - y0) / (y1 - y0), 2 + (x1 - x) / (x1 - x0)],
            3 + (y1 - y) / (y1 - y0),
        )

    def _with_features(self, loop: np.ndarray, features: Sequence[tuple[complex, float]]
                       ) -> np.ndarray:
        """``loop`` with the feature points of every edge merged in, in loop order."""
        if not features:
            return loop
        extra = []
        for e in rectangle_edges(self.box):
            spacing = abs(e.t1 - e.t0) / self.n_init
            extra.append(e.point(feature_params(e, features, spacing)))
        z = np.concatenate([loop, *extra])
        _, idx = np.unique(self._perimeter(z), return_index=True)
        return z[idx]

    def _thin(self, z: np.ndarray, f: np.ndarray, d: np.ndarray) -> np.ndarray:
        """Mask of samples to keep: every other one whose neighbours pass without it."""
        keep = np.ones(z.size, dtype=bool)
        if z.size < 3:
            return keep
        # merged segment (j−1, j+1) for every j ≥ 1, tested in one call: the segments are
        # independent, and a dropped sample's neighbours are both kept (the skip below),
        # so each test is the one the thinned loop will see
        j = np.arange(1, z.size)
        nxt = (j + 1) % z.size
        zz = np.stack([z[j - 1], z[nxt]], axis=1).ravel()
        ff = np.stack([f[j - 1], f[nxt]], axis=1).ravel()
        dd = np.stack([d[j - 1], d[nxt]], axis=1).ravel()
        merged = segment_ok(zz, ff, dd)[::2] & self._factor_linear(z[j - 1], z[nxt])
        corner = np.isin(z[1:], np.array(list(self._corner_set)))
        can = (merged & ~corner).tolist()
        i = 0
        while i < len(can):
            if can[i]:
                keep[i + 1] = False
                i += 2  # at most every other sample per batch
            else:
                i += 1
        return keep

    def _exclusions(self, ps: list[float], family: Family | None, pairs: PairFamily | None
                    ) -> tuple[list[int | None], list[int]]:
        m = len(ps)
        if not self.excluded:
            return [0] * m, [0] * m
        ex: list[int | None] = [None] * m
        evals = [0] * m

        def at(i: int) -> int | None:
            p = ps[i]
            f: AnalyticFunction
            if pairs is not None:
                def f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
                    return pairs(np.full(np.shape(z), p), z)
            else:
                assert family is not None
                f = family(p)
            total = 0
            for e, r in zip(self.excluded, self._radii, strict=True):
                cf = CountedFunction(f)
                c = circle_contour(cf, e, r)
                evals[i] += cf.evaluations
                self.evaluations += cf.evaluations
                if c.winding is None:
                    return None
                total += c.winding
            return total

        ex[0] = at(0)
        ex[-1] = at(m - 1) if m > 1 else ex[0]
        if ex[0] is not None and ex[0] == ex[-1]:
            ex = [ex[0]] * m
        else:
            for i in range(1, m - 1):
                ex[i] = at(i)
        return ex, evals
