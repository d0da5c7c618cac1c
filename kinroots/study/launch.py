"""Launched waves: the complex wavenumbers a plasma carries at a real driving frequency.

An antenna or grid driving the plasma at a real frequency f sets ω = 2πf; each wave the
plasma carries then has a complex wavenumber k = k_r + i k_i (the spatial problem,
solved by :func:`kinroots.study.problem.spatial_roots`).  With exp(i k x − i ω t) the wave varies
as exp(−k_i x) along the direction of k: k_i > 0 damps towards +x, the damping length
is 1/k_i, the wavelength 2π/k_r and the phase speed ω/k_r.

The search box (normalized k, the case's length unit) is surveyed and the roots traced
across frequency by the driver of ``kinroots solve``
(:func:`kinroots.study.problem.follow_branches`): surveys at the first frequency, every
``solver.resurvey_every`` frequencies and at the last; a root that no traced branch
accounts for starts a branch traced back down to the previous survey (it entered the
box on the way).  Failed points are recorded, not raised.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from kinroots.io.case import Case
from kinroots.io.limits import LIMITS, MAX_LAUNCH_POINTS
from kinroots.io.tables import RESULT_COLUMNS
from kinroots.physics import modes
from kinroots.physics.models.species_models import branch_point_note
from kinroots.roots import RootResult, SurveyResult
from kinroots.study.problem import SpatialFunction, spatial_roots
from kinroots.study.rows import (
    below_resolution,
    relative_error,
    relative_residual,
    with_note,
)
from kinroots.study.solve import INTERRUPTED, PointCheck, TracedBranch, follow_branches

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


#: A wave traced across frequency: normalized ω → RootResult holding normalized complex k.
LaunchedBranch = TracedBranch


@dataclass
class LaunchResult:
    """Result of :func:`launch`."""

    case: Case
    frequencies_hz: np.ndarray
    box: tuple[float, float, float, float]
    branches: list[LaunchedBranch]
    surveys: list[tuple[float, SurveyResult]]
    notes: list[str]
    #: The zero count of the k box at each frequency against the rows there (``param``
    #: is the normalized ω; :class:`kinroots.study.solve.PointCheck`).
    point_checks: list[PointCheck] = field(default_factory=list)

    @property
    def unverified_points(self) -> int:
        """Frequencies whose zero count could not be taken or did not match the rows."""
        return sum(1 for c in self.point_checks if not c.verified)

    @property
    def interrupted(self) -> bool:
        """True when the trace was stopped before the last frequency (``should_stop``)."""
        return any(n.startswith(INTERRUPTED) for n in self.notes)

    @property
    def failed_points(self) -> int:
        """Failed points plus incomplete surveys (the CLI's exit code 1)."""
        n = sum(1 for b in self.branches for r in b.points.values() if not r.converged)
        return n + sum(1 for _, s in self.surveys if not s.complete)


def _driving_frequencies(values: Any) -> np.ndarray:
    """``values`` as an array of driving frequencies [Hz], or ValueError naming what is
    wrong, with the limits of the case file's ``launch.frequency``."""
    limit = LIMITS["launch.frequency"]
    got = repr(values)
    got = got if len(got) <= 80 else got[:77] + "..."
    try:
        freqs = np.atleast_1d(np.asarray(values, dtype=float))
    except (TypeError, ValueError):
        freqs = np.array([[math.nan]])
    if not (freqs.ndim == 1 and 0 < freqs.size <= MAX_LAUNCH_POINTS
            and all(limit(float(f)) for f in freqs)):
        raise ValueError(f"frequencies_hz: got {got}, expected a sequence of 1 to "
                         f"{MAX_LAUNCH_POINTS} frequencies, each {limit.expected()}")
    if np.any(np.diff(freqs) <= 0):
        raise ValueError(f"frequencies_hz: got {got}, expected frequencies in increasing "
                         "order")
    return freqs


def launch(
    case: Case,
    /,
    *,
    frequencies_hz: Sequence[float] | None = None,
    box: tuple[float, float, float, float] | None = None,
    progress: Callable[[int, int], None] | None = None,
    should_stop: Callable[[], bool] | None = None,
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
    should_stop : callable, optional
        Asked between batches of frequencies; True stops there (Ctrl-C), keeping the
        frequencies done (`LaunchResult.interrupted`).

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
    freqs = _driving_frequencies(frequencies_hz)
    om = [float(2.0 * math.pi * f / case.units.omega_unit) for f in freqs]
    branches, surveys_w, _, notes, checks = follow_branches(
        lambda w: SpatialFunction(case, w, auto_window=box),
        om,
        box,
        lambda w: spatial_roots(case, w, box),
        rtol=case.solver.tolerance,
        resurvey_every=case.solver.resurvey_every,
        label=lambda w: f"f = {w * case.units.omega_unit / (2.0 * math.pi):.6g} Hz",
        progress=progress,
        should_stop=should_stop,
    )
    to_hz = {w: float(f) for w, f in zip(om, freqs, strict=True)}
    surveys = [(to_hz[w], s) for w, s in surveys_w]
    return LaunchResult(case=case, frequencies_hz=freqs, box=box, branches=branches,
                        surveys=surveys, notes=notes, point_checks=checks)


def launch_columns(case: Case) -> tuple[str, ...]:
    """All columns of ``launch.csv`` for this case (per-species density columns last)."""
    return LAUNCH_COLUMNS + modes.MODE_COLUMNS + modes.density_columns(case.plasma)


def launch_row(case: Case, branch: int, omega: float, r: RootResult,
               freq_hz: float | None = None, verified: bool | None = None) -> dict[str, Any]:
    """One row of ``launch.csv`` (normalized ω, RootResult holding normalized complex k).

    ``freq_hz`` is the driving frequency as the case gave it (written as is: 5e5, not the
    499999.9999999999 of converting ω back); by default it is computed from ``omega``.
    ``verified`` is the rule of ``solve``'s tables (the zero count of the k box at this
    frequency equals the rows there); by default the root's own flag.
    """
    units = case.units
    w_si = float(units.omega_to_si(omega))
    row: dict[str, Any] = {
        "branch": branch,
        "freq_hz": w_si / (2.0 * math.pi) if freq_hz is None else float(freq_hz),
        "omega": float(omega),
        "residual": float(r.residual),
        "relative_error": relative_error(r),
        "converged": bool(r.converged),
        "verified": bool(r.verified if verified is None else verified),
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
    row["reason"] = with_note(r.reason, branch_point_note(
        case.plasma, omega=w_si, k=k_si, angle_deg=case.angle_deg))
    row["relative_residual"] = relative_residual(case, k, w_si)
    noise = below_resolution(k, relative_error(r), case.solver.tolerance)
    row["below_resolution"] = noise
    with np.errstate(divide="ignore"):
        # Im k at rounding level: the damping length is not known, not a number
        damping = (None if "imag" in noise else
                   1.0 / k_si.imag if k_si.imag != 0 else math.inf)
    row.update({
        "k_real": k.real,
        "k_imag": k.imag,
        "k_real_per_m": k_si.real,
        "k_imag_per_m": k_si.imag,
        "wavelength_m": 2.0 * math.pi / k_si.real,
        "phase_speed_m_per_s": w_si / k_si.real,
        "damping_length_m": damping,
        "damping_length_cm": None if damping is None else 100.0 * damping,
    })
    row.update(modes.mode_columns(
        case.plasma, omega=w_si, k=k_si, angle_deg=case.angle_deg, model=case.model,
        omega_ref=units.omega_unit, harmonic_tol=case.solver.harmonic_tolerance,
    ))
    return row


def launch_rows(res: LaunchResult) -> list[dict[str, Any]]:
    """Rows of ``launch.csv``, branch by branch, frequency increasing."""
    to_hz = {float(2.0 * math.pi * f / res.case.units.omega_unit): float(f)
             for f in res.frequencies_hz}
    return [launch_row(res.case, b.id, w, r, to_hz.get(w), verified=w in b.verified_at)
            for b in res.branches for w, r in sorted(b.points.items())]
