"""Argument principle on rectangles and circles, with adaptive, shared sampling.

The winding number of ``f`` along a closed contour is the sum of the phase changes
``arg(f(z_{k+1}) / f(z_k))`` between consecutive samples, divided by 2π.  The sum is
only right if no phase change between neighbours exceeds π, so the samples are refined
until each segment passes the test of :func:`segment_ok` (phase step ≤ ``PHASE_STEP``,
also as predicted from the logarithmic derivative f'/f at both ends, and consistent
with it).  Samples live on axis-parallel *lines* shared between neighbouring cells, so a
subdivided rectangle reuses its parent's edge samples.

The contour moments ``s_p = (1/2πi) ∮ ζ^p f'(z)/f(z) dz`` (ζ = (z − c)/ρ) equal the sum
of ζ_k^p over the zeros ζ_k inside (minus that over the poles) — the basis of the
Delves–Lyness method (L. M. Delves and J. N. Lyness, Math. Comp. 21, 543 (1967)); the
zeros follow from a generalized eigenvalue problem with Hankel matrices of moments
(P. Kravanja and M. Van Barel, *Computing the Zeros of Analytic Functions*, Springer
LNM 1727 (2000), ch. 1).
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg

from kinroots.roots.result import Box, CountedFunction

__all__ = [
    "PHASE_STEP",
    "BoundarySampler",
    "CircleContour",
    "circle_contour",
    "feature_params",
    "hankel_zeros",
    "noisy_segments",
    "segment_ok",
    "smooth_log_derivative",
]

#: Largest phase change of f accepted between neighbouring samples (radians).
PHASE_STEP = math.pi / 4
#: A narrow feature gets its own samples when its scale is below the uniform spacing
#: divided by this (:func:`feature_params`).
FEATURE_RATIO = 8.0

LineKey = tuple[str, float]  # ("h", y) for Im z = y, ("v", x) for Re z = x


def segment_ok(
    z: np.ndarray, fv: np.ndarray, dv: np.ndarray, *, closed: bool = False
) -> np.ndarray:
    """Whether each segment between consecutive samples is resolved.

    Parameters
    ----------
    z, fv, dv : ndarray
        Sample points in traversal order, ``f`` and ``f'`` there.
    closed : bool
        Include the segment from the last point back to the first.

    Returns
    -------
    ndarray of bool
        One entry per segment.  A segment [z0, z1] with g = f'/f passes when
        ``|Δarg f| ≤ PHASE_STEP``, ``|Im(g0 Δz)|`` and ``|Im(g1 Δz)| ≤ PHASE_STEP``
        (the derivative predicts a slow rotation at both ends) and the actual change of
        ``log f`` agrees with the trapezoidal prediction ``(g0 + g1)Δz/2`` to
        ``PHASE_STEP/2`` (nothing hidden between the samples), and all values are
        finite and non-zero.
    """
    if closed:
        z = np.append(z, z[:1])
        fv = np.append(fv, fv[:1])
        dv = np.append(dv, dv[:1])
    with np.errstate(all="ignore"):
        g = dv / fv
        dz = np.diff(z)
        ratio = fv[1:] / fv[:-1]
        dphi = np.angle(ratio)
        dlog = np.log(np.abs(ratio)) + 1j * dphi
        p0 = g[:-1] * dz
        p1 = g[1:] * dz
        ok = (
            np.isfinite(g[:-1])
            & np.isfinite(g[1:])
            & np.isfinite(dlog)
            & (np.abs(dphi) <= PHASE_STEP)
            & (np.abs(p0.imag) <= PHASE_STEP)
            & (np.abs(p1.imag) <= PHASE_STEP)
            & (np.abs(dlog - 0.5 * (p0 + p1)) <= 0.5 * PHASE_STEP)
        )
    return ok


#: A failing segment shorter than this fraction of its edge, whose ends both predict
#: almost no change of f while f changes (:func:`noisy_segments`), marks f as rounding
#: noise there.
NOISE_LENGTH = 1e-3


def noisy_segments(z: np.ndarray, fv: np.ndarray, dv: np.ndarray) -> np.ndarray:
    """Segments whose change of f contradicts f'/f at both ends: rounding noise.

    Returns
    -------
    ndarray of bool
        One entry per segment: ``|g_0 Δz|`` and ``|g_1 Δz|`` (g = f'/f) are both below
        ``PHASE_STEP/8`` — f'/f at both ends says log f changes by less than 0.1 — while
        the actual change of log f differs from that prediction by more than
        ``PHASE_STEP/2``.  For an analytic f this needs a feature narrower than the
        segment between its ends (which bisection resolves: the feature then lies at a
        sample, where |f'/f| is large); where it persists on ever shorter segments, the
        values of f are dominated by rounding errors (e.g. a determinant whose terms
        cancel far below their size), and no sampling can count its zeros.
    """
    with np.errstate(all="ignore"):
        g = dv / fv
        dz = np.diff(z)
        ratio = fv[1:] / fv[:-1]
        dlog = np.log(np.abs(ratio)) + 1j * np.angle(ratio)
        p0 = g[:-1] * dz
        p1 = g[1:] * dz
        small = (np.abs(p0) <= PHASE_STEP / 8) & (np.abs(p1) <= PHASE_STEP / 8)
        return small & (np.abs(dlog - 0.5 * (p0 + p1)) > 0.5 * PHASE_STEP)


def _closed_log_increments(fv: np.ndarray) -> np.ndarray:
    """Increments of a continuous log f around a closed sample loop."""
    with np.errstate(all="ignore"):
        ratio = np.roll(fv, -1) / fv
        return np.log(np.abs(ratio)) + 1j * np.angle(ratio)


def contour_moments(
    z: np.ndarray, fv: np.ndarray, dv: np.ndarray, center: complex, scale: float, nmom: int
) -> np.ndarray:
    """Moments ``s_p``, p = 0 … nmom−1, on a closed polygonal sample loop.

    Notes
    -----
    With L a continuous branch of log f along the loop (L_N − L_0 = 2πi·W) and
    ζ = (z − c)/ρ, integration by parts gives (derived for this module)

    ``∮ ζ^p dL = ζ_0^p (L_N − L_0) − ∮ p ζ^{p−1} L dζ``,

    and the last integral is taken segment by segment with the end-corrected
    trapezoidal rule ``∫F ≈ h(F_0 + F_1)/2 + h²(F'_0 − F'_1)/12`` (Euler–Maclaurin,
    fourth order), using ``dL/dζ = ρ f'/f``.  The phase control of the sampling keeps
    every segment short on the scale on which L varies.
    """
    n = z.size
    zeta = (z - center) / scale
    with np.errstate(all="ignore"):
        g = dv / fv * scale
    dlog = _closed_log_increments(fv)
    big_l = np.concatenate(([0.0 + 0.0j], np.cumsum(dlog)))  # L_0 … L_N
    zs = np.append(zeta, zeta[:1])
    gs = np.append(g, g[:1])
    h = np.diff(zs)
    s = np.empty(nmom, dtype=complex)
    s[0] = big_l[n] / (2j * math.pi)
    for p in range(1, nmom):
        zp1 = zs ** (p - 1)
        zp2 = zs ** (p - 2) if p >= 2 else np.zeros_like(zs)
        big_f = p * zp1 * big_l
        big_fp = p * (p - 1) * zp2 * big_l + p * zp1 * gs
        integral = np.sum(0.5 * h * (big_f[:-1] + big_f[1:])) + np.sum(
            h * h / 12.0 * (big_fp[:-1] - big_fp[1:])
        )
        s[p] = (zeta[0] ** p * big_l[n] - integral) / (2j * math.pi)
    return s


def smooth_log_derivative(z: np.ndarray, fv: np.ndarray, dv: np.ndarray, at: np.ndarray
                          ) -> np.ndarray:
    """f'/f less the poles of f's zeros inside a closed sample loop, at points inside it.

    Write f = h·Π(z − ζ_j) over the zeros ζ_j inside the loop, h free of zeros there.
    For a point z₀ inside, (1/2πi)∮ f'/f(w)/(w − z₀) dw = h'/h(z₀): Cauchy's formula for
    the analytic h'/h, while each term 1/(w − ζ_j) contributes
    (1/2πi)∮ dw/((w − ζ_j)(w − z₀)) = 0 (residues 1/(ζ_j − z₀) and 1/(z₀ − ζ_j); derived
    here).  So the zero-free part of f'/f is known inside a cell from its boundary
    samples alone, without the zeros.  Trapezoidal rule on the loop's segments (second
    order: about 0.5 % on samples spaced by the π/4 phase rule, where ``at`` is farther
    from the loop than their spacing; enough for Newton's starting points).

    Parameters
    ----------
    z, fv, dv : ndarray
        Closed counter-clockwise loop (first point not repeated), f and f' there.
    at : ndarray
        Points inside the loop.

    Returns
    -------
    ndarray
        h'/h at ``at``.
    """
    at = np.atleast_1d(np.asarray(at, dtype=complex))
    with np.errstate(all="ignore"):
        g = dv / fv
        w1, g1 = np.roll(z, -1), np.roll(g, -1)
        f0 = g[None, :] / (z[None, :] - at[:, None])
        f1 = g1[None, :] / (w1[None, :] - at[:, None])
        return np.sum(0.5 * (w1 - z)[None, :] * (f0 + f1), axis=1) / (2j * math.pi)


def hankel_zeros(moments: np.ndarray, n: int, *, rank_tol: float = 1e-8) -> np.ndarray:
    """Zeros from the moments ``s_0 … s_{2n−1}`` of n zeros (with multiplicity).

    Solves ``H_< v = λ H v`` with ``H = [s_{i+j}]`` and ``H_< = [s_{i+j+1}]``,
    i, j = 0 … k−1, where k ≤ n is the numerical rank of H (the number of *distinct*
    zeros; a multiple zero lowers the rank) — Kravanja & Van Barel (2000), ch. 1, after
    Delves & Lyness (1967).  Returns the k eigenvalues (in the ζ variable of the
    moments).
    """
    s = np.asarray(moments, dtype=complex)
    big_h = np.array([[s[i + j] for j in range(n)] for i in range(n)])
    sv = np.linalg.svd(big_h, compute_uv=False)
    if not np.all(np.isfinite(sv)) or sv[0] == 0.0:
        return np.zeros(0, complex)
    k = int(np.sum(sv > rank_tol * sv[0]))
    big_h = big_h[:k, :k]
    big_h1 = np.array([[s[i + j + 1] for j in range(k)] for i in range(k)])
    lam = scipy.linalg.eigvals(big_h1, big_h)
    return lam[np.isfinite(lam)]


@dataclass
class _Line:
    t: np.ndarray = field(default_factory=lambda: np.zeros(0))
    f: np.ndarray = field(default_factory=lambda: np.zeros(0, complex))
    d: np.ndarray = field(default_factory=lambda: np.zeros(0, complex))

    def insert(self, t: np.ndarray, f: np.ndarray, d: np.ndarray) -> None:
        t_all = np.concatenate((self.t, t))
        t_all, idx = np.unique(t_all, return_index=True)
        self.f = np.concatenate((self.f, f))[idx]
        self.d = np.concatenate((self.d, d))[idx]
        self.t = t_all


@dataclass(frozen=True)
class Edge:
    """A straight piece of a line traversed from ``t0`` to ``t1``."""

    key: LineKey
    t0: float
    t1: float

    def point(self, t: np.ndarray) -> np.ndarray:
        kind, c = self.key
        return t + 1j * c if kind == "h" else c + 1j * t


def rectangle_edges(box: Box) -> list[Edge]:
    """The four edges of ``box`` in counter-clockwise order (bottom, right, top, left)."""
    x0, x1, y0, y1 = box
    return [
        Edge(("h", y0), x0, x1),
        Edge(("v", x1), y0, y1),
        Edge(("h", y1), x1, x0),
        Edge(("v", x0), y1, y0),
    ]


@dataclass
class EdgeStatus:
    """Outcome of refining one edge."""

    resolved: bool
    trouble: list[complex] = field(default_factory=list)  # where it could not resolve
    nonfinite: bool = False  # f or f' was not finite at a sample (e.g. overflow)
    noisy: bool = False  # f is rounding noise there (:func:`noisy_segments`)


def feature_params(edge: Edge, features: Sequence[tuple[complex, float]], spacing: float
                   ) -> np.ndarray:
    """Line parameters on ``edge`` spaced geometrically about narrow features.

    A feature (centre c, width w) seen from a line at distance d varies along it on the
    scale max(w, d); with s = max(w, d)/2, about the projection t₀ of c the samples t₀,
    t₀ ± s · 4^j (j = 0, 1, …) reach out to ``spacing`` (the uniform spacing, which
    resolves the rest).  Seen from these samples a pole-like term a/(z − c) turns by at
    most about 0.64 rad between neighbours (< π/4, the phase step of
    :func:`segment_ok`, which refines the rest); uniform samples alone can step over the
    feature and miss whole windings.  Features with s ≥ ``spacing``/:data:`FEATURE_RATIO`
    are seen by the uniform samples and get none, except one sample at t₀ on a
    horizontal line below the feature by more than its width: there a Landau resonance
    behaves like exp(−ζ²), ζ ≈ (z − c)/w, which is large only within
    about d of t₀ and turns by ~2d²/w² radians across that stretch (not like a pole).
    """
    kind, c_line = edge.key
    lo, hi = min(edge.t0, edge.t1), max(edge.t0, edge.t1)
    out: list[np.ndarray] = []
    for c, w in features:
        t0, d = (c.real, abs(c_line - c.imag)) if kind == "h" else (c.imag, abs(c_line - c.real))
        s = 0.5 * max(w, d)
        if not s < spacing / FEATURE_RATIO:  # uniform samples see it as a pole would be seen
            if kind == "h" and c_line < c.imag - w and lo < t0 < hi:
                # below the feature a Landau resonance grows like exp(−ζ²) within about
                # d of t₀ (|Re ζ| < |Im ζ|) and turns ever faster there: uniform samples
                # on both sides can step over it while f'/f at both ends is small; one
                # sample at t₀ sees the fast turning and the segment tests refine it
                out.append(np.array([t0]))
            continue
        if t0 + spacing < lo or t0 - spacing > hi:
            continue
        steps = s * 4.0 ** np.arange(int(math.ceil(math.log(spacing / s, 4))) + 1)
        t = np.concatenate(([t0], t0 - steps, t0 + steps))
        out.append(t[(t > lo) & (t < hi)])
    return np.concatenate(out) if out else np.zeros(0)


#: A failing segment whose predicted phase rates at its two ends agree within this
#: factor is cut into equal pieces at once (:func:`_split_points`).
_EVEN_RATES = 2.0
#: Off: every failing segment is bisected, as before issue 14 (set only by the baseline
#: of ``benchmarks/bench_survey.py``).
_EVEN_SPLIT = True


def _split_points(t: np.ndarray, z: np.ndarray, f: np.ndarray, d: np.ndarray,
                  bad: np.ndarray) -> np.ndarray:
    """New line parameters inside the failing segments ``bad`` (indices into the
    samples t, z, f, f' of one edge).

    A segment over which f turns evenly (the rates |Im(g Δz)|, g = f'/f, at its two
    ends within :data:`_EVEN_RATES` of each other) is cut into ⌈Φ/PHASE_STEP⌉ equal
    pieces, Φ the larger of its measured phase change and the mean of the two rates:
    each piece is then predicted to pass, where bisection would take ⌈log₂⌉ rounds and
    up to twice the pieces.  Any other failing segment is bisected.  The pieces are
    still tested by :func:`segment_ok` (the rule is unchanged, only where the next
    samples go).
    """
    t0, t1 = t[bad], t[bad + 1]
    with np.errstate(all="ignore"):
        g = d / f
        dz = np.diff(z)[bad]
        a = np.abs((g[bad] * dz).imag)
        b = np.abs((g[bad + 1] * dz).imag)
        phase = np.maximum(0.5 * (a + b), np.abs(np.angle(f[bad + 1] / f[bad])))
        even = (np.minimum(a, b) > 0) & (np.maximum(a, b) <= _EVEN_RATES * np.minimum(a, b))
        pieces = np.where(even & np.isfinite(phase) & _EVEN_SPLIT,
                          np.ceil(phase / PHASE_STEP), 2)
    pieces = np.clip(np.nan_to_num(pieces, nan=2.0), 2, 16).astype(int)
    return np.concatenate([0.5 * (t0[j] + t1[j:j + 1]) if m == 2 else
                           t0[j] + (t1[j] - t0[j]) * np.arange(1, m) / m
                           for j, m in enumerate(pieces)])


class BoundarySampler:
    """Adaptive samples of f on axis-parallel lines, shared by all cells of a survey.

    Parameters
    ----------
    func : CountedFunction
        The function being surveyed.
    max_evaluations : int
        Budget; refinement stops (edges reported unresolved) when it would be exceeded.
    features : sequence of (complex, float)
        Narrow features of f, (centre, width): the first samples of a line include
        points spaced geometrically about each centre's projection (:func:`feature_params`).
    """

    def __init__(self, func: CountedFunction, *, max_evaluations: int,
                 features: Sequence[tuple[complex, float]] = ()) -> None:
        self.func = func
        self.max_evaluations = max_evaluations
        self.features = [(complex(c), float(w)) for c, w in features
                         if cmath.isfinite(complex(c)) and math.isfinite(w) and w > 0]
        self._cache: dict[complex, tuple[complex, complex]] = {}
        self._lines: dict[LineKey, _Line] = {}
        self.budget_exhausted = False

    # -- evaluation -----------------------------------------------------------------
    def evaluate(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """f and f' at ``z``, evaluating (in one batch) only points not seen before."""
        z = np.asarray(z, dtype=complex).ravel()
        missing = [zz for zz in dict.fromkeys(z.tolist()) if zz not in self._cache]
        if missing:
            fv, dv = self.func(np.array(missing, dtype=complex))
            for zz, a, b in zip(missing, fv.tolist(), dv.tolist(), strict=True):
                self._cache[zz] = (a, b)
        fv = np.array([self._cache[zz][0] for zz in z.tolist()], dtype=complex)
        dv = np.array([self._cache[zz][1] for zz in z.tolist()], dtype=complex)
        return fv, dv

    def _add(self, requests: list[tuple[Edge, np.ndarray]]) -> None:
        """Evaluate the parameters ``t`` requested on each edge's line, in one batch."""
        pts = [e.point(np.asarray(t, float)) for e, t in requests]
        if not pts:
            return
        fv, dv = self.evaluate(np.concatenate(pts))
        i = 0
        for (e, t), p in zip(requests, pts, strict=True):
            line = self._lines.setdefault(e.key, _Line())
            line.insert(np.asarray(t, float), fv[i : i + p.size], dv[i : i + p.size])
            i += p.size

    def samples(self, edge: Edge) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Points, f and f' on ``edge`` (both ends included) in traversal order."""
        line = self._lines.get(edge.key, _Line())
        lo, hi = min(edge.t0, edge.t1), max(edge.t0, edge.t1)
        sel = (line.t >= lo) & (line.t <= hi)
        t, f, d = line.t[sel], line.f[sel], line.d[sel]
        if edge.t0 > edge.t1:
            t, f, d = t[::-1], f[::-1], d[::-1]
        return edge.point(t), f, d

    # -- refinement -----------------------------------------------------------------
    def resolve(self, edges: list[Edge], *, n_init: int, min_len: float) -> list[EdgeStatus]:
        """Refine the samples on ``edges`` (batched) until every segment passes.

        A segment that fails is bisected; one still failing when shorter than
        ``min_len``, or a sample where f is zero or not finite, makes the edge
        unresolved (a zero or pole on or extremely near it).  A failing segment shorter
        than :data:`NOISE_LENGTH` × the edge whose values contradict f'/f at both ends
        (:func:`noisy_segments`) makes it unresolved at once, marked ``noisy``: f is
        rounding noise there, and bisecting further would only spend the budget.
        """
        first = []
        for e in edges:
            line = self._lines.get(e.key, _Line())
            lo, hi = min(e.t0, e.t1), max(e.t0, e.t1)
            inside = np.count_nonzero((line.t >= lo) & (line.t <= hi))
            if inside < n_init + 1:
                t = np.linspace(e.t0, e.t1, n_init + 1)
            else:
                t = np.array([e.t0, e.t1])
            if self.features:
                t = np.concatenate((t, feature_params(e, self.features, (hi - lo) / n_init)))
            first.append((e, t))
        self._add(first)
        status: list[EdgeStatus | None] = [None] * len(edges)
        while True:
            requests: list[tuple[Edge, np.ndarray]] = []
            for i, e in enumerate(edges):
                if status[i] is not None:
                    continue
                z, f, d = self.samples(e)
                nonfinite = ~np.isfinite(f) | ~np.isfinite(d)
                bad_pt = nonfinite | (f == 0)
                if np.any(bad_pt):
                    status[i] = EdgeStatus(False, [complex(v) for v in z[bad_pt]],
                                           nonfinite=bool(np.any(nonfinite)))
                    continue
                ok = segment_ok(z, f, d)
                if np.all(ok):
                    status[i] = EdgeStatus(True)
                    continue
                bad = np.flatnonzero(~ok)
                seglen = np.abs(np.diff(z))[bad]
                noise = noisy_segments(z, f, d)[bad] & (
                    seglen <= NOISE_LENGTH * abs(e.t1 - e.t0))
                if np.any(noise):
                    where = [complex(0.5 * (z[j] + z[j + 1])) for j in bad[noise]]
                    status[i] = EdgeStatus(False, where, noisy=True)
                    continue
                if np.any(seglen <= min_len):
                    where = [complex(0.5 * (z[j] + z[j + 1])) for j in bad[seglen <= min_len]]
                    status[i] = EdgeStatus(False, where)
                    continue
                tt = z.real if e.key[0] == "h" else z.imag
                requests.append((e, _split_points(tt, z, f, d, bad)))
            if not requests:
                break
            n_new = sum(r[1].size for r in requests)
            if self.func.evaluations + n_new > self.max_evaluations:
                self.budget_exhausted = True
                for i in range(len(edges)):
                    if status[i] is None:
                        status[i] = EdgeStatus(False)
                break
            self._add(requests)
        return [s if s is not None else EdgeStatus(False) for s in status]

    def loop(self, box: Box) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Closed counter-clockwise sample loop of ``box`` (first point not repeated)."""
        parts = [self.samples(e) for e in rectangle_edges(box)]
        z = np.concatenate([p[0][:-1] for p in parts])
        f = np.concatenate([p[1][:-1] for p in parts])
        d = np.concatenate([p[2][:-1] for p in parts])
        return z, f, d

    def winding(self, box: Box) -> float:
        """Total phase change of f around ``box`` divided by 2π (from current samples)."""
        _, f, _ = self.loop(box)
        with np.errstate(all="ignore"):
            return float(np.sum(np.angle(np.roll(f, -1) / f)) / (2 * math.pi))


@dataclass
class CircleContour:
    """Uniform samples of f on a circle and the winding number they give."""

    center: complex
    radius: float
    z: np.ndarray
    f: np.ndarray
    d: np.ndarray
    resolved: bool
    winding: int | None

    def moments(self, nmom: int) -> np.ndarray:
        """``s_p = (1/2πi)∮ ζ^p f'/f dz``, ζ = (z − c)/R, by the trapezoidal rule.

        On a circle the trapezoidal rule converges geometrically for an analytic
        integrand (Kravanja & Van Barel 2000, ch. 1): ``s_p ≈ (R/N) Σ ζ_j^{p+1} g_j``.
        """
        zeta = (self.z - self.center) / self.radius
        with np.errstate(all="ignore"):
            g = self.d / self.f
        p = np.arange(nmom)[:, None]
        return self.radius / zeta.size * np.sum(zeta[None, :] ** (p + 1) * g[None, :], axis=1)


def circle_contour(
    func: CountedFunction, center: complex, radius: float, *, n0: int = 8, n_max: int = 1024
) -> CircleContour:
    """Sample f uniformly on a circle, doubling the number of points until resolved.

    Doubling keeps the earlier points (only the new midpoints are evaluated) and keeps
    the samples uniform, so the trapezoidal moments stay spectrally accurate.  The
    winding number is ``None`` when ``n_max`` points do not resolve the phase or the
    phase sum is more than 0.1 from an integer.
    """
    n = n0
    theta = 2 * math.pi * np.arange(n) / n
    z = center + radius * np.exp(1j * theta)
    f, d = func(z)
    while True:
        finite = np.all(np.isfinite(f)) and np.all(np.isfinite(d)) and np.all(f != 0)
        if finite and np.all(segment_ok(z, f, d, closed=True)):
            with np.errstate(all="ignore"):
                w = float(np.sum(np.angle(np.roll(f, -1) / f)) / (2 * math.pi))
            ok = abs(w - round(w)) < 0.1
            return CircleContour(center, radius, z, f, d, ok, round(w) if ok else None)
        if 2 * n > n_max or not finite:
            return CircleContour(center, radius, z, f, d, False, None)
        theta_new = 2 * math.pi * (np.arange(n) + 0.5) / n
        z_new = center + radius * np.exp(1j * theta_new)
        f_new, d_new = func(z_new)
        z = np.ravel(np.column_stack((z, z_new)))
        f = np.ravel(np.column_stack((f, f_new)))
        d = np.ravel(np.column_stack((d, d_new)))
        n *= 2
