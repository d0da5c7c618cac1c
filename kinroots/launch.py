"""Launched waves: the complex wavenumbers a plasma carries at a real driving frequency.

An antenna or grid driving the plasma at a real frequency f sets ω = 2πf; each wave the
plasma carries then has a complex wavenumber k = k_r + i k_i (the spatial problem,
solved by :func:`kinroots.scan.spatial_roots`).  With exp(i k x − i ω t) the wave varies
as exp(−k_i x) along the direction of k: k_i > 0 damps towards +x, the damping length
is 1/k_i, the wavelength 2π/k_r and the phase speed ω/k_r.

The search box (normalized k, the case's length unit) is surveyed at the first and at
the last frequency; every root found at the first frequency is traced up in frequency,
and a root found at the last frequency that no traced branch accounts for is traced
back down (it entered the box on the way).  Failed points are recorded, not raised.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from kinroots import modes
from kinroots.casefile import Case
from kinroots.roots import BranchEnd, RootResult, Status, SurveyResult, Tracer, match_new_roots
from kinroots.scan import MATCH_FRACTION, SpatialFunction, spatial_roots
from kinroots.tables import RESULT_COLUMNS

__all__ = [
    "LAUNCH_COLUMNS",
    "LAUNCH_VALUE_COLUMNS",
    "LaunchResult",
    "launch",
    "launch_columns",
    "launch_rows",
]

#: Columns of ``launch.csv`` before the mode-identity columns (see README "Output").
LAUNCH_COLUMNS: tuple[str, ...] = (
    "branch",
    "freq_hz",
    "omega",
    "k_real",
    "k_imag",
    "k_real_per_m",
    "k_imag_per_m",
    "wavelength_m",
    "phase_speed_m_per_s",
    "damping_length_m",
    "damping_length_cm",
    *RESULT_COLUMNS,
)

#: Cells left empty on a failed point (besides the mode-identity columns).
LAUNCH_VALUE_COLUMNS: frozenset[str] = frozenset({
    "k_real", "k_imag", "k_real_per_m", "k_imag_per_m", "wavelength_m",
    "phase_speed_m_per_s", "damping_length_m", "damping_length_cm", "residual",
})


@dataclass
class LaunchedBranch:
    """One wave traced across frequency: normalized ω → RootResult (complex k)."""

    id: int
    points: dict[float, RootResult] = field(default_factory=dict)
    end_reason: str = "end of frequencies"
    note: str = ""


@dataclass
class LaunchResult:
    """Result of :func:`launch`."""

    case: Case
    frequencies_hz: np.ndarray
    box: tuple[float, float, float, float]
    branches: list[LaunchedBranch]
    surveys: list[tuple[float, SurveyResult]]
    notes: list[str]

    @property
    def failed_points(self) -> int:
        """Failed points plus incomplete surveys (the CLI's exit code 1)."""
        n = sum(1 for b in self.branches for r in b.points.values() if not r.converged)
        return n + sum(1 for _, s in self.surveys if not s.complete)


def _failed(value: complex, reason: str) -> RootResult:
    return RootResult(
        value=complex(value), converged=False, status=Status.NOT_ATTEMPTED, reason=reason,
        residual=float("nan"), step=float("nan"), iterations=0, evaluations=0,
        verified=False, multiplicity=1, method="trace",
    )


def launch(
    case: Case,
    /,
    *,
    frequencies_hz: Sequence[float] | None = None,
    box: tuple[float, float, float, float] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> LaunchResult:
    """Complex wavenumbers of the waves launched at each real frequency.

    Parameters
    ----------
    case : Case
        Validated case; its ``launch`` table supplies the defaults below.
    frequencies_hz : sequence of float, optional
        Driving frequencies f [Hz], increasing (default: ``case.launch``).
    box : (re_min, re_max, im_min, im_max), optional
        Search box in normalized k, Re k > 0 (default: ``case.launch`` k_real, k_imag).
    progress : callable, optional
        ``progress(done, total)`` after each frequency.

    Returns
    -------
    LaunchResult
    """
    spec = case.launch
    if frequencies_hz is None:
        if spec is None:
            raise ValueError("the case has no [launch] table and no frequencies were given")
        frequencies_hz = spec.frequencies_hz
    if box is None:
        box = (*spec.k_real, *spec.k_imag) if spec is not None else (0.01, 2.0, -0.01, 0.5)
    freqs = np.asarray(frequencies_hz, dtype=float)
    om = [float(2.0 * math.pi * f / case.units.omega_unit) for f in freqs]
    rtol = case.solver.tolerance
    tol = MATCH_FRACTION * math.hypot(box[1] - box[0], box[3] - box[2])
    notes: list[str] = []
    surveys: list[tuple[float, SurveyResult]] = []

    def family(w: float) -> SpatialFunction:
        return SpatialFunction(case, w)

    def do_survey(i: int) -> SurveyResult:
        s = spatial_roots(case, om[i], box)
        surveys.append((float(freqs[i]), s))
        if not s.complete:
            notes.append(f"survey at f = {freqs[i]:.6g} Hz incomplete: counted {s.count}, "
                         f"found {len(s.values)} ({'; '.join(s.notes) or 'no detail'})")
        return s

    tracer = Tracer(family, box=box, param=om[0], rtol=rtol)
    out: list[LaunchedBranch] = []
    for r in do_survey(0).roots:
        if r.converged:
            tracer.add_branch(r, param=om[0])
            out.append(LaunchedBranch(id=len(out), points={om[0]: r}))
        else:
            notes.append(f"unsolved root near k = {r.value!r} at f = {freqs[0]:.6g} Hz")
    if progress:
        progress(1, len(om))
    for i in range(1, len(om)):
        if tracer.active:
            tracer.advance_to(om[i])
            for b in tracer.branches:
                if b.active and b.points and b.points[-1][0] == om[i]:
                    out[b.id].points[om[i]] = b.points[-1][1]
        if progress:
            progress(i + 1, len(om))
    for b in tracer.branches:
        lb = out[b.id]
        if not b.active:
            lb.end_reason = {BranchEnd.LEFT_REGION: "left the box", BranchEnd.MERGED:
                             f"merged with branch {b.merged_with}"}.get(b.end_reason, "failed")
            lb.note = b.note
            if b.end_reason is BranchEnd.FAILED:
                nxt = [w for w in om if w > max(lb.points)]
                if nxt:
                    lb.points[nxt[0]] = _failed(lb.points[max(lb.points)].value,
                                                b.note or "tracing failed")
    if len(om) > 1:
        last = do_survey(len(om) - 1)
        current = [lb.points[om[-1]].value for lb in out
                   if om[-1] in lb.points and lb.points[om[-1]].converged]
        for r in match_new_roots(current, [r for r in last.roots if r.converged], tol):
            lb = LaunchedBranch(id=len(out), points={om[-1]: r},
                                note="found at the last frequency, traced downwards")
            out.append(lb)
            back = Tracer(lambda q: SpatialFunction(case, -q), box=box, param=-om[-1],
                          rtol=rtol)
            bb = back.add_branch(r, param=-om[-1])
            for w in reversed(om[:-1]):
                back.advance_to(-w)
                if not bb.active:
                    break
            for q, rr in bb.points[1:]:
                lb.points[-q] = rr
    return LaunchResult(case=case, frequencies_hz=freqs, box=box, branches=out,
                        surveys=surveys, notes=notes)


def launch_columns(case: Case) -> tuple[str, ...]:
    """All columns of ``launch.csv`` for this case (per-species density columns last)."""
    return LAUNCH_COLUMNS + modes.MODE_COLUMNS + modes.density_columns(case.plasma)


def launch_row(case: Case, branch: int, omega: float, r: RootResult) -> dict[str, Any]:
    """One row of ``launch.csv`` (normalized ω, RootResult holding normalized complex k)."""
    units = case.units
    w_si = float(units.omega_to_si(omega))
    row: dict[str, Any] = {
        "branch": branch,
        "freq_hz": w_si / (2.0 * math.pi),
        "omega": float(omega),
        "residual": float(r.residual),
        "converged": bool(r.converged),
        "verified": bool(r.verified),
        "multiplicity": int(r.multiplicity),
        "iterations": int(r.iterations),
        "evaluations": int(r.evaluations),
        "status": r.status.name.lower(),
        "reason": r.reason,
    }
    names = modes.MODE_COLUMNS + modes.density_columns(case.plasma)
    if not r.converged:
        row.update(dict.fromkeys(LAUNCH_VALUE_COLUMNS))
        row.update(dict.fromkeys(names))
        return row
    k = complex(r.value)
    k_si = complex(units.k_to_si(k))
    with np.errstate(divide="ignore"):
        damping = 1.0 / k_si.imag if k_si.imag != 0 else math.inf
    row.update({
        "k_real": k.real,
        "k_imag": k.imag,
        "k_real_per_m": k_si.real,
        "k_imag_per_m": k_si.imag,
        "wavelength_m": 2.0 * math.pi / k_si.real,
        "phase_speed_m_per_s": w_si / k_si.real,
        "damping_length_m": damping,
        "damping_length_cm": 100.0 * damping,
    })
    row.update(modes.mode_columns(
        case.plasma, omega=w_si, k=k_si, angle_deg=case.angle_deg, model=case.model,
        omega_ref=units.omega_unit, harmonic_tol=case.solver.harmonic_tolerance,
    ))
    return row


def launch_rows(res: LaunchResult) -> list[dict[str, Any]]:
    """Rows of ``launch.csv``, branch by branch, frequency increasing."""
    return [launch_row(res.case, b.id, w, r)
            for b in res.branches for w, r in sorted(b.points.items())]
