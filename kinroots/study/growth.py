"""Maximum growth rate over the k scan (and angles) of one case: every local maximum refined.

:func:`max_growth` surveys the search window at every (k, θ) of the grid, links the roots
of neighbouring grid points into families by continuation (Newton from one grid point to
the next, accepted only when the two continuations agree both ways), and takes every
root that no linked neighbour exceeds as a candidate: the local maxima of γ of every
family, not only the best grid point.  Each candidate (and any seed the caller adds, such
as the maximizer at a neighbouring sweep value) is climbed to its local maximum of γ(k, θ)
(:func:`kinroots.roots.climb.maximize_many`: all climbs in lockstep, each round's points
polished by one batched Newton call per angle); the largest refined value wins.  The
least-damped root (largest γ among the non-growing roots) is read off the grid.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from kinroots.io.case import Case
from kinroots.roots import RootResult, polish
from kinroots.roots.climb import (
    BatchRoots,
    ClimbStart,
    FamilyFunction,
    LocalMaximum,
    maximize_many,
    newton_batch,
)
from kinroots.study.problem import PairFunction, function_at, pair_function, survey, window
from kinroots.study.rows import is_growing

#: Distance from a window edge, relative to the window's side, under which the
#: maximizing root counts as at the edge (a faster root may lie just outside).
WINDOW_EDGE_FRACTION = 0.01
#: Continuations to a neighbouring grid point match a surveyed root within this fraction
#: of the window diameter.
LINK_FRACTION = 1e-6


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
    root : RootResult or None
        That root polished at (k, angle), with residual and contour verification.
    growing : bool
        γ exceeds the root finder's resolution (:func:`kinroots.study.rows.is_growing`).
    k_at_edge, angle_at_edge : bool
        The maximum sits at an end of the k scan or of the angle list (the true maximum
        may lie outside the ranges searched).
    root_at_window_edge : bool
        The maximizing root lies within ``WINDOW_EDGE_FRACTION`` of an edge of the
        search window (a faster root may lie outside it).
    least_damped : complex or None
        Largest Im ω among the roots that do not grow (grid value), with
        ``least_damped_k`` and ``least_damped_angle``.
    roots_found : int
        Roots found by the surveys, all k and angles together.
    candidates : int
        Local maxima (and seeds) climbed.
    complete : bool
        Every survey complete and every climb converged.
    notes : list of str
        What went wrong, if anything.
    evaluations : int
        Dispersion-function evaluations.
    """

    growth: float = math.nan
    omega: complex = complex(math.nan, math.nan)
    k: float = math.nan
    angle: float = math.nan
    root: RootResult | None = None
    growing: bool = False
    k_at_edge: bool = False
    angle_at_edge: bool = False
    root_at_window_edge: bool = False
    least_damped: complex | None = None
    least_damped_k: float = math.nan
    least_damped_angle: float = math.nan
    roots_found: int = 0
    candidates: int = 0
    complete: bool = True
    notes: list[str] = field(default_factory=list)
    evaluations: int = 0

    def edge_warnings(self) -> list[str]:
        """What the flags mean for the user, with how to extend the grid or window."""
        out = []
        if self.k_at_edge:
            out.append(f"the maximum lies at an end of the k scan (k = {self.k:.6g}): "
                       "extend [scan] k beyond it")
        if self.angle_at_edge:
            out.append(f"the maximum lies at an end of the angles (angle = {self.angle:.6g}"
                       "°): extend the angle list beyond it")
        if self.root_at_window_edge:
            out.append(f"the maximizing root omega = {self.omega:.6g} lies at the edge of "
                       "the search window: widen [search] there")
        return out


class _Surface:
    """Roots of one case at arbitrary (k, θ), polished in batches by Newton's method."""

    def __init__(self, case: Case) -> None:
        self.case = case
        self.box = window(case)
        re0, re1, im0, im1 = self.box
        dr, di = 0.1 * (re1 - re0), 0.1 * (im1 - im0)
        # climbs follow a root as far below the window as the window is high (a mode
        # damped at every grid point may grow between them), never above it
        self.climb_box = (re0 - dr, re1 + dr, im0 - (im1 - im0), im1)
        self.newton_box = (re0 - 2 * dr, re1 + 2 * dr, im0 - (im1 - im0) - di, im1 + di)
        self.diameter = math.hypot(re1 - re0, im1 - im0)
        self.evaluations = 0
        self._pairs: dict[float, PairFunction | None] = {}

    def at_angle(self, a: float) -> Case:
        return self.case if a == self.case.angle_deg else replace(self.case, angle_deg=a)

    def _family(self, a: float, ks: np.ndarray) -> FamilyFunction:
        if a not in self._pairs:
            self._pairs[a] = pair_function(self.at_angle(a))
        pairs = self._pairs[a]
        if pairs is not None:
            return lambda idx, z: pairs(ks[idx], z)
        c = self.at_angle(a)

        def one_k_at_a_time(idx: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            d, dd = np.empty(z.shape, complex), np.empty(z.shape, complex)
            for j, (i, zj) in enumerate(zip(idx, z, strict=True)):
                d[j], dd[j] = (v[0] for v in function_at(c, float(ks[i]))(np.array([zj])))
            return d, dd
        return one_k_at_a_time

    def solve(self, k: np.ndarray, a: np.ndarray, z0: np.ndarray) -> BatchRoots:
        """Newton from ``z0`` at each (k, θ) (one batch per distinct angle)."""
        k, a, z0 = np.asarray(k, float), np.asarray(a, float), np.asarray(z0, complex)
        out = BatchRoots(values=z0.copy(), converged=np.zeros(k.size, bool),
                         residual=np.full(k.size, np.nan), step=np.full(k.size, np.nan),
                         evaluations=0)
        for av in np.unique(a):
            sel = np.flatnonzero(a == av)
            r = newton_batch(self._family(float(av), k[sel]), z0[sel],
                             rtol=self.case.solver.tolerance, region=self.newton_box)
            out.values[sel], out.converged[sel] = r.values, r.converged
            out.residual[sel], out.step[sel] = r.residual, r.step
            out.evaluations += r.evaluations
        self.evaluations += out.evaluations
        return out

    def inside(self, z: complex) -> bool:
        """``z`` lies where climbs may follow a root (:attr:`climb_box`)."""
        b = self.climb_box
        return b[0] <= z.real <= b[1] and b[2] <= z.imag <= b[3]

    def at_window_edge(self, z: complex) -> bool:
        b = self.box
        wr, wi = WINDOW_EDGE_FRACTION * (b[1] - b[0]), WINDOW_EDGE_FRACTION * (b[3] - b[2])
        return (z.real - b[0] < wr or b[1] - z.real < wr
                or z.imag - b[2] < wi or b[3] - z.imag < wi)


def _grid_candidates(surface: _Surface, ks: list[float], angs: list[float],
                     grid: dict[tuple[int, int], list[complex]]) -> list[tuple[int, int, complex]]:
    """Roots that no neighbour of their family exceeds (local maxima of γ on the grid).

    Every root is carried by Newton to the 4 neighbouring grid points; a carried root
    that lands on a surveyed root there, whose own continuation lands back on the
    original, links the two into one family.  A root with a linked neighbour of larger
    γ is not a candidate; every other root is (an unlinked root is kept, so a failed or
    ambiguous continuation can only add candidates, never drop one).
    """
    src_node, src_root, dst_node = [], [], []
    for (ai, ki), roots in grid.items():
        for di, dk in ((0, 1), (0, -1), (1, 0), (-1, 0)):
            nb = (ai + di, ki + dk)
            if nb not in grid or not grid[nb]:
                continue
            for r in range(len(roots)):
                src_node.append((ai, ki))
                src_root.append(r)
                dst_node.append(nb)
    if src_node:
        carried = surface.solve(np.array([ks[n[1]] for n in dst_node]),
                                np.array([angs[n[0]] for n in dst_node]),
                                np.array([grid[n][r] for n, r in zip(src_node, src_root,
                                                                     strict=True)]))
    tol = LINK_FRACTION * surface.diameter
    lands: dict[tuple[tuple[int, int], int, tuple[int, int]], int] = {}
    for j, (n, r, m) in enumerate(zip(src_node, src_root, dst_node, strict=True)):
        if not carried.converged[j]:
            continue
        z = carried.values[j]
        dist = [abs(z - w) for w in grid[m]]
        best = int(np.argmin(dist))
        if dist[best] <= tol:
            lands[(n, r, m)] = best
    beaten = {(n, r) for (n, r, m), s in lands.items()
              if lands.get((m, s, n)) == r and grid[m][s].imag > grid[n][r].imag}
    out: list[tuple[int, int, complex]] = []
    for (ai, ki), roots in grid.items():
        out.extend((ai, ki, z) for r, z in enumerate(roots) if ((ai, ki), r) not in beaten)
    return out


def _spacing(values: list[float], i: int) -> float:
    """Local grid spacing at index ``i``."""
    if len(values) < 2:
        return 1.0
    left = values[i] - values[i - 1] if i > 0 else values[1] - values[0]
    right = values[i + 1] - values[i] if i < len(values) - 1 else values[-1] - values[-2]
    return 0.5 * (left + right)


def _climbs(surface: _Surface, ks: list[float], angs: list[float],
            starts: list[tuple[float, float, complex, float, float]]
            ) -> list[tuple[LocalMaximum, float, float, complex]]:
    """Climb γ(k, θ) from every start (k0, θ0, ω0, k step, θ step), all in lockstep.

    Returns, per start, the climb's outcome and the (k, θ, ω) of its best point.  Each
    point's root is polished from the nearest point already solved by the same climb.
    """
    vary_k, vary_a = len(ks) > 1, len(angs) > 1
    dims = [d for d, v in ((0, vary_k), (1, vary_a)) if v]
    known = [([k0], [a0], [z0]) for k0, a0, z0, _, _ in starts]
    climb_starts = []
    for k0, a0, z0, sk, sa in starts:
        climb_starts.append(ClimbStart(
            x0=np.array([k0, a0])[dims], lower=np.array([ks[0], angs[0]])[dims],
            upper=np.array([ks[-1], angs[-1]])[dims], scale=np.array([sk, sa])[dims],
            hard_lower=np.array([max(ks[0] - 0.25 * sk, 0.5 * ks[0]),
                                 max(angs[0] - 0.25 * sa, 0.0)])[dims],
            hard_upper=np.array([ks[-1] + 0.25 * sk, min(angs[-1] + 0.25 * sa, 180.0)])[dims],
            value0=z0.imag))

    def gammas(owner: np.ndarray, p: np.ndarray) -> np.ndarray:
        n = len(p)
        kk = p[:, dims.index(0)] if vary_k else np.array([starts[o][0] for o in owner])
        aa = p[:, dims.index(1)] if vary_a else np.array([starts[o][1] for o in owner])
        z0 = np.empty(n, complex)
        for j in range(n):
            o = owner[j]
            kn, an, zn = (np.asarray(v) for v in known[o])
            d2 = ((kk[j] - kn) / starts[o][3]) ** 2 + ((aa[j] - an) / starts[o][4]) ** 2
            z0[j] = zn[int(np.argmin(d2))]
        res = surface.solve(kk, aa, z0)
        g = np.full(n, -np.inf)
        for j in range(n):
            z = complex(res.values[j])
            if res.converged[j] and surface.inside(z):
                g[j] = z.imag
                for lst, v in zip(known[owner[j]], (float(kk[j]), float(aa[j]), z),
                                  strict=True):
                    lst.append(v)
        return g

    noise = [10 * surface.case.solver.tolerance * abs(z0) for _, _, z0, _, _ in starts]
    out = []
    for i, m in enumerate(maximize_many(gammas, climb_starts, ftol=noise)):
        k0, a0, z0 = starts[i][:3]
        kf = float(m.x[dims.index(0)]) if vary_k else k0
        af = float(m.x[dims.index(1)]) if vary_a else a0
        kn, an, zn = known[i]
        pick = [j for j in range(len(kn)) if kn[j] == kf and an[j] == af]
        out.append((m, kf, af, zn[pick[-1]] if pick else z0))
    return out


def max_growth(case: Case, angles: Sequence[float] | None = None, *,
               refine: bool = True,
               seeds: Sequence[tuple[float, float, complex]] = ()) -> GrowthResult:
    """Fastest-growing root over the case's k scan (and over ``angles``), refined locally.

    Parameters
    ----------
    case : Case
        Validated case; its ``[scan]`` k values and ``[search]`` window are searched.
    angles : sequence of float, optional
        Angles in degrees (increasing); default ``[case.angle_deg]``.
    refine : bool
        Climb every candidate between grid points (default); False gives the best grid
        point.
    seeds : sequence of (k, angle, omega)
        More starting points for climbs (e.g. the maximizer of a neighbouring sweep or
        threshold value): each is polished at its (k, angle), and climbed if it
        converges there, up to a window's height below the window (climbs follow a root
        there: a mode damped at every grid point may still grow between them).

    Returns
    -------
    GrowthResult

    Notes
    -----
    Grid stage: every root in the window at every (k, θ) by the argument-principle
    survey.  Families and candidates: :func:`_grid_candidates` (continuation to the
    neighbouring grid points, checked both ways).  Refinement: each candidate climbs
    γ(k, θ) within the grid's box by a trust-region method on quadratic models from
    3 × 3 stencils (:func:`kinroots.roots.climb.maximize_many`), each stencil point's
    root polished by Newton from the nearest point already solved of the same climb.
    The largest climbed value wins; its root is polished once more and verified by a
    contour count.
    """
    angs = [float(a) for a in (angles if angles else [case.angle_deg])]
    ks = [float(k) for k in case.k_values]
    res = GrowthResult()
    rtol = case.solver.tolerance
    surface = _Surface(case)
    grid: dict[tuple[int, int], list[complex]] = {}
    least: tuple[float, int, int, complex] | None = None
    for ai, a in enumerate(angs):
        ca = surface.at_angle(a)
        for ki, k in enumerate(ks):
            s = survey(ca, k)
            res.evaluations += s.evaluations
            if not s.complete:
                res.complete = False
                res.notes.append(f"survey at k = {k!r}, angle = {a!r} incomplete: counted "
                                 f"{s.count}, found {len(s.values)}")
            grid[(ai, ki)] = [complex(r.value) for r in s.roots if r.converged]
            for z in grid[(ai, ki)]:
                res.roots_found += 1
                if not is_growing(z, rtol) and (least is None or z.imag > least[0]):
                    least = (z.imag, ai, ki, z)
    if least is not None:
        res.least_damped = least[3]
        res.least_damped_k, res.least_damped_angle = ks[least[2]], angs[least[1]]
    flat = [(z.imag, ai, ki, z) for (ai, ki), roots in grid.items() for z in roots]
    if not flat and not seeds:
        return res
    if flat:
        _, ai, ki, z = max(flat, key=lambda t: t[0])
        best = (z.imag, ks[ki], angs[ai], z)
        res.k_at_edge = len(ks) > 1 and ki in (0, len(ks) - 1)
        res.angle_at_edge = len(angs) > 1 and ai in (0, len(angs) - 1)
    else:
        best = (-math.inf, math.nan, math.nan, complex(math.nan, math.nan))
    if refine and (len(ks) > 1 or len(angs) > 1):
        starts = [(ks[ki], angs[ai], z, _spacing(ks, ki), _spacing(angs, ai))
                  for ai, ki, z in _grid_candidates(surface, ks, angs, grid)]
        if seeds:
            sk = np.array([float(s[0]) for s in seeds])
            sa = np.array([float(s[1]) for s in seeds])
            inside = (ks[0] <= sk) & (sk <= ks[-1]) & (angs[0] <= sa) & (sa <= angs[-1])
            polished = surface.solve(sk, sa, np.array([complex(s[2]) for s in seeds]))
            for j in np.flatnonzero(inside & polished.converged):
                z = complex(polished.values[j])
                if surface.inside(z):
                    ki = int(np.argmin(np.abs(np.array(ks) - sk[j])))
                    ai = int(np.argmin(np.abs(np.array(angs) - sa[j])))
                    starts.append((float(sk[j]), float(sa[j]), z, _spacing(ks, ki),
                                   _spacing(angs, ai)))
        res.candidates = len(starts)
        best_m: LocalMaximum | None = None
        for (k0, a0, z0, _, _), (m, kf, af, z) in zip(starts, _climbs(surface, ks, angs, starts),
                                                      strict=True):
            if not m.converged:
                res.complete = False
                res.notes.append(f"climb from k = {k0:.6g}, angle = {a0:.6g}, omega = "
                                 f"{z0:.6g} stopped at gamma = {m.value:.6g}: {m.reason}")
            if m.value > best[0]:
                best, best_m = (m.value, kf, af, z), m
        if best_m is not None:
            res.k_at_edge = len(ks) > 1 and bool(best_m.at_lower[0] or best_m.at_upper[0])
            res.angle_at_edge = len(angs) > 1 and bool(best_m.at_lower[-1]
                                                       or best_m.at_upper[-1])
    res.evaluations += surface.evaluations
    g, k, a, z = best
    if not math.isfinite(g):
        return res
    root = polish(function_at(surface.at_angle(a), k), z, rtol=rtol, region=surface.newton_box,
                  verify_radius=1e-3 * surface.diameter)
    res.evaluations += root.evaluations
    if root.converged:
        z = complex(root.value)
    else:
        res.complete = False
        res.notes.append(f"maximizing root at k = {k:.6g}, angle = {a:.6g} did not polish: "
                         f"{root.reason}")
    res.root = root
    res.growth, res.omega, res.k, res.angle = z.imag, z, k, a
    res.root_at_window_edge = surface.at_window_edge(z)
    res.growing = is_growing(z, rtol)
    return res
