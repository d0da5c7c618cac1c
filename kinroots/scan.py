"""Bind a case to the root layer: survey the window, trace every branch across k.

Everything here works in the case's normalized units: ω̂ = ω / ω_u and k̂ = k L_u
(see :class:`kinroots.plasma.Normalization`).  The dispersion function handed to the
root layer is ``f(ω̂) = D(ω̂ ω_u)`` with ``f'(ω̂) = ω_u D'(ω̂ ω_u)``; D is the scaled,
entire dispersion function of :class:`kinroots.dispersion.Dispersion`.

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

from kinroots import __version__, modes
from kinroots.casefile import Case
from kinroots.dispersion import Dispersion, dispersion_in_k, dispersion_pairs
from kinroots.models import krook
from kinroots.plasma import CONVENTIONS, derived_quantities
from kinroots.roots import (
    Branch,
    BranchEnd,
    RootResult,
    Status,
    SurveyResult,
    Tracer,
    find_roots,
    match_new_roots,
)

AnalyticFunction = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]

#: Relative distance (to the window diameter) under which a surveyed root is taken to be
#: a root already being traced.
MATCH_FRACTION = 1e-6


def window(case: Case) -> tuple[float, float, float, float]:
    """The search window ``(re_min, re_max, im_min, im_max)`` in normalized ω."""
    return (*case.search_real, *case.search_imag)


def dispersion_at(case: Case, k: float | complex) -> Dispersion:
    """The SI dispersion function of ``case`` at normalized wavenumber ``k``."""
    units = case.units
    return Dispersion(
        case.plasma,
        k=complex(k) / units.length_unit if isinstance(k, complex) else k / units.length_unit,
        angle_deg=case.angle_deg,
        model=case.model,
        omega_ref=units.omega_unit,
        harmonic_tol=case.solver.harmonic_tolerance,
    )


@dataclass
class NormalizedDispersion:
    """``f(ω̂) -> (D, dD/dω̂)`` at one normalized k, with its excluded points.

    Attributes
    ----------
    k : float
        Normalized wavenumber.
    dispersion : Dispersion
        The SI function it wraps.
    """

    k: float
    dispersion: Dispersion

    def __call__(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # Newton steps may leave the window into regions where D overflows: the
        # non-finite values are handled (reported) by the root layer, not warned about.
        with np.errstate(over="ignore", invalid="ignore"):
            return self._call(omega)

    def _call(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        disp = self.dispersion
        w_u = disp.omega_ref
        krook_es = self.__dict__.get("_krook_es")
        if krook_es is None:  # fixed for the wrapped function: decided on the first call
            krook_es = self.__dict__["_krook_es"] = (
                krook.collisional(disp.plasma) and not disp.electromagnetic
            )
        if krook_es and disp.magnetized:
            # same scaling, magnetized χ_s = N_s/Q_s; at k∥ = 0 F has poles (nΩ − iν), which
            # the case file rejects: NaN makes such a point fail visibly if reached otherwise
            om = np.asarray(omega, dtype=complex)
            if disp.k_par == 0:
                nan = np.full(om.shape, np.nan + 0j)
                return nan, nan.copy()
            f, fw = krook.magnetized_scaled_dispersion(
                om * w_u, disp.plasma.species, k_par=disp.k_par, k_perp=disp.k_perp,
                B=disp.plasma.B, tol=disp.harmonic_tol,
            )
            return f, fw * w_u
        if krook_es:
            # Krook χ_s has poles: hand the root layer F = (Π_s Q_s) D, entire, same zeros
            cos, sin = disp._cos, disp._sin
            f, fw, _ = krook.scaled_dispersion(
                np.asarray(omega, dtype=complex) * w_u, disp.plasma.species,
                k=disp.k, cos_theta=cos, sin_theta=sin,
            )
            return f, fw * w_u
        d, dd = disp(np.asarray(omega, dtype=complex) * w_u)
        return d, dd * w_u

    def value(self, omega: np.ndarray) -> np.ndarray:
        """D only (for maps)."""
        return self(omega)[0]

    def excluded(self, box: tuple[float, float, float, float]) -> list[complex]:
        """Points the survey must exclude (poles, scaling zeros), normalized."""
        w_u = self.dispersion.omega_ref
        pts = self.dispersion.singular_points(*(v * w_u for v in box))
        return [p / w_u for p in pts]


def function_at(case: Case, k: float) -> NormalizedDispersion:
    """The normalized dispersion function of ``case`` at normalized ``k``."""
    return NormalizedDispersion(float(k), dispersion_at(case, float(k)))


#: ``f(k̂, ω̂) -> (D, dD/dω̂)`` at arrays of normalized (k, ω) pairs.
PairFunction = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


def pair_function(case: Case) -> PairFunction | None:
    """``f(k̂, ω̂) -> (D, dD/dω̂)`` at arrays of normalized (k, ω) pairs, for batched tracing.

    Element by element the same function as :func:`function_at` (k̂_j)(ω̂_j).  ``None`` for
    cases with Krook collisions, whose scaled function is formed one k at a time.
    """
    if krook.collisional(case.plasma):
        return None
    units = case.units
    w_u, l_u = units.omega_unit, units.length_unit

    def pairs(k: np.ndarray, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        with np.errstate(over="ignore", invalid="ignore"):
            d, dd = dispersion_pairs(
                case.plasma, k=np.asarray(k, dtype=float) / l_u,
                omega=np.asarray(omega, dtype=complex) * w_u, angle_deg=case.angle_deg,
                model=case.model, omega_ref=w_u, harmonic_tol=case.solver.harmonic_tolerance,
            )
        return d, dd * w_u

    return pairs


def survey(case: Case, k: float, *, box: tuple[float, float, float, float] | None = None
           ) -> SurveyResult:
    """Every root of D in the window (or ``box``) at normalized ``k``."""
    f = function_at(case, k)
    b = window(case) if box is None else box
    # The root layer may shift an edge outward (a root or pole on it): list the excluded
    # points of a margin around the box too, so a shifted edge never swallows an unlisted
    # pole.
    dr, di = 0.05 * (b[1] - b[0]), 0.05 * (b[3] - b[2])
    wide = (b[0] - dr, b[1] + dr, b[2] - di, b[3] + di)
    res = find_roots(f, b, excluded=f.excluded(wide), rtol=case.solver.tolerance)
    if any("is not finite" in n for n in res.notes):
        res.notes.append(
            "D overflows there: the Landau term exp(-zeta^2) of a cold species exceeds "
            "double precision deep in the lower half-plane; keep Im(omega) above about "
            "-|Re(omega)| on the frequency scale k*w of the coldest species (README, limits)"
        )
    return res


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

    The driver shared by :func:`solve` (ω across k) and :func:`kinroots.launch.launch`
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


# ----------------------------------------------------------------------------- tables


def root_row(case: Case, branch: int | str, k: float, r: RootResult,
             verified: bool | None = None) -> dict[str, Any]:
    """One table row (columns of :data:`kinroots.tables.ROOT_COLUMNS`).

    Converged roots also carry their mode identity (polarization, handedness, δB/δE,
    electrostatic fraction, per-species δn_s/n_s): see :mod:`kinroots.modes`.
    """
    units = case.units
    w_si = complex(units.omega_to_si(r.value))
    if r.converged:
        identity = modes.mode_columns(
            case.plasma, omega=w_si, k=float(units.k_to_si(k)), angle_deg=case.angle_deg,
            model=case.model, omega_ref=units.omega_unit,
            harmonic_tol=case.solver.harmonic_tolerance,
        )
    else:
        identity = dict.fromkeys(modes.MODE_COLUMNS + modes.density_columns(case.plasma))
    return {
        "branch": branch,
        "k": float(k),
        "omega_real": float(r.value.real),
        "omega_imag": float(r.value.imag),
        "k_per_m": float(units.k_to_si(k)),
        "freq_hz": w_si.real / (2.0 * math.pi),
        "gamma_per_s": w_si.imag,
        "residual": float(r.residual),
        "converged": bool(r.converged),
        "verified": bool(r.verified if verified is None else verified),
        "multiplicity": int(r.multiplicity),
        "iterations": int(r.iterations),
        "evaluations": int(r.evaluations),
        "status": r.status.name.lower(),
        "reason": r.reason,
        **identity,
    }


def branch_rows(sol: Solution) -> list[dict[str, Any]]:
    """Rows of branches.csv, branch by branch, k increasing."""
    rows = []
    for b in sol.branches:
        for k, r in b.sorted_points():
            rows.append(root_row(sol.case, b.id, k, r, verified=k in b.verified_at))
    return rows


#: A root counts as growing only when γ exceeds this multiple of the root tolerance
#: times |ω|: below that, the sign of γ is not resolved by the root finder.
GROWTH_RESOLUTION = 10.0


def is_growing(omega: complex, rtol: float) -> bool:
    """True when Im ω > 0 by more than the root finder's resolution."""
    return omega.imag > GROWTH_RESOLUTION * rtol * abs(omega)


def extreme_roots(rows: list[dict[str, Any]], rtol: float = 1e-10) -> dict[str, Any]:
    """The fastest-growing (largest γ) and least-damped roots among converged rows.

    A root is growing only if ``γ > GROWTH_RESOLUTION · rtol · |ω|``; a root with
    |γ| below that is neutral to the accuracy of the tables and counts as least damped.
    """
    good = [r for r in rows if r["converged"]]
    if not good:
        return {"fastest_growing": None, "least_damped": None}

    def grows(r: dict[str, Any]) -> bool:
        return is_growing(complex(r["omega_real"], r["omega_imag"]), rtol)

    top = max(good, key=lambda r: r["omega_imag"])
    growing = top if grows(top) else None
    damped = [r for r in good if not grows(r)]
    least = max(damped, key=lambda r: r["omega_imag"]) if damped else None
    keep = ("branch", "k", "omega_real", "omega_imag", "k_per_m", "freq_hz", "gamma_per_s")
    return {
        "fastest_growing": {k: growing[k] for k in keep} if growing else None,
        "least_damped": {k: least[k] for k in keep} if least else None,
    }


def metadata(case: Case, *, rows: list[dict[str, Any]], extra: dict[str, Any]) -> dict[str, Any]:
    """summary.json content shared by ``solve`` and ``roots``."""
    units = case.units
    return {
        "kinroots_version": __version__,
        "title": case.title,
        "source": str(case.source) if case.source else None,
        "case": case.raw,
        "conventions": CONVENTIONS,
        "units": {
            "omega": units.frequency_label_ascii,
            "omega_unit_rad_per_s": units.omega_unit,
            "k": f"1/{units.length_label_ascii}",
            "length_unit_m": units.length_unit,
            "table_columns": {
                "k": f"k * {units.length_label_ascii}",
                "omega_real": f"Re(omega) / {units.frequency_label_ascii}",
                "omega_imag": f"Im(omega) / {units.frequency_label_ascii}",
                "k_per_m": "k [1/m]",
                "freq_hz": "Re(omega) / (2 pi) [Hz]",
                "gamma_per_s": "Im(omega) [1/s]; > 0 grows",
                "residual": "|D| at the root (D as scaled in 'dispersion_scaling')",
            },
        },
        "derived": derived_quantities(case.plasma, units),
        "tolerances": {
            "root_rtol": case.solver.tolerance,
            "harmonic_tolerance": case.solver.harmonic_tolerance,
            "resurvey_every": case.solver.resurvey_every,
            "match_fraction_of_window": MATCH_FRACTION,
        },
        "warnings": list(case.warnings),
        "growth_resolution": (
            f"a root counts as growing when gamma > {GROWTH_RESOLUTION:g} * root_rtol * |omega|"
        ),
        **extreme_roots(rows, case.solver.tolerance),
        **extra,
    }


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


# ----------------------------------------------------------------------- spatial problem


@dataclass
class SpatialFunction:
    """``g(k̂) -> (D, dD/dk̂)`` at one real normalized frequency (spatial problem)."""

    case: Case
    omega: float

    def __call__(self, k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # overflow far from the window gives non-finite values, reported by the root layer
        with np.errstate(over="ignore", invalid="ignore"):
            return self._call(k)

    def _call(self, k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        units = self.case.units
        L = units.length_unit
        plasma = self.case.plasma
        if krook.collisional(plasma) and self.case.model == "electrostatic" and plasma.B:
            theta = math.radians(self.case.angle_deg)
            f, fk = krook.magnetized_scaled_dispersion_in_k(
                self.omega * units.omega_unit, plasma.species,
                k=np.asarray(k, dtype=complex) / L, cos_theta=math.cos(theta),
                sin_theta=math.sin(theta), B=plasma.B, tol=self.case.solver.harmonic_tolerance,
            )
            return f, fk / L
        if krook.collisional(plasma) and self.case.model == "electrostatic" and not plasma.B:
            theta = math.radians(self.case.angle_deg)
            f, _, fk = krook.scaled_dispersion(
                self.omega * units.omega_unit, plasma.species,
                k=np.asarray(k, dtype=complex) / L, cos_theta=math.cos(theta),
                sin_theta=math.sin(theta),
            )
            return f, fk / L
        d, dd = dispersion_in_k(
            self.case.plasma,
            omega=self.omega * units.omega_unit,
            k=np.asarray(k, dtype=complex) / L,
            angle_deg=self.case.angle_deg,
            model=self.case.model,
            omega_ref=units.omega_unit,
            harmonic_tol=self.case.solver.harmonic_tolerance,
        )
        return d, dd / L


def spatial_roots(case: Case, omega: float, box: tuple[float, float, float, float]
                  ) -> SurveyResult:
    """Every complex wavenumber (normalized) in ``box`` at real normalized ``omega``.

    The box must lie in Re k > 0, away from k = 0 (the continuation is built there).
    """
    if box[0] <= 0:
        raise ValueError("the spatial search box must lie in Re k > 0")
    return find_roots(SpatialFunction(case, float(omega)), box, rtol=case.solver.tolerance)


def trace_spatial(case: Case, omegas: np.ndarray, box: tuple[float, float, float, float]
                  ) -> list[Branch]:
    """Survey complex k at the first frequency and trace each root across ``omegas``."""
    om = [float(w) for w in omegas]
    s = spatial_roots(case, om[0], box)
    tracer = Tracer(lambda w: SpatialFunction(case, w), box=box, param=om[0],
                    rtol=case.solver.tolerance)
    for r in s.roots:
        if r.converged:
            tracer.add_branch(r, param=om[0])
    for w in om[1:]:
        if not tracer.active:
            break
        tracer.advance_to(w)
    return tracer.branches
