"""Bind a case to the root layer: survey the window, trace every branch across k.

Everything here works in the case's normalized units: ω̂ = ω / ω_u and k̂ = k L_u
(see :class:`kinroots.physics.plasma.Normalization`).  The dispersion function handed to the
root layer is ``f(ω̂) = D(ω̂ ω_u)`` with ``f'(ω̂) = ω_u D'(ω̂ ω_u)``; D is the scaled,
entire dispersion function of :class:`kinroots.physics.dispersion.Dispersion`.

The check rule of ``kinroots solve`` (survey at the first k, zero counts on the window's
boundary at every k) is documented in :mod:`kinroots.study.solve` and DEVELOPERS.md.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from kinroots.io.case import Case
from kinroots.physics.dispersion import (
    Dispersion,
    dispersion_in_k,
    dispersion_pairs,
    in_blocks,
)
from kinroots.physics.models import krook, krook_dispersion
from kinroots.roots import (
    Branch,
    SurveyResult,
    Tracer,
    find_roots,
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
    rtol : float
        The survey's relative root tolerance (``solver.tolerance``): it decides which
        cyclotron harmonics are poles to exclude at k∥ = 0 (:meth:`excluded`).
    """

    k: float
    dispersion: Dispersion
    rtol: float = 1e-10

    def __call__(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # Newton steps may leave the window into regions where D overflows: the
        # non-finite values are handled (reported) by the root layer, not warned about.
        # Blocks bound the memory of large calls (maps) for the Krook forms as well.
        with np.errstate(over="ignore", invalid="ignore"):
            return in_blocks(self._call, np.asarray(omega, dtype=complex),
                             block=self.dispersion.block)

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
            f, fw = krook_dispersion.magnetized_scaled_dispersion(
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
        """Points the survey must exclude (poles, scaling zeros), normalized.

        At k∥ = 0 only the cyclotron harmonics whose residue exceeds the resolution
        :attr:`rtol` (:meth:`~kinroots.physics.dispersion.Dispersion.singular_points`).
        """
        w_u = self.dispersion.omega_ref
        pts = self.dispersion.singular_points(*(v * w_u for v in box), rtol=self.rtol)
        return [p / w_u for p in pts]

    def features(self, box: tuple[float, float, float, float]) -> list[tuple[complex, float]]:
        """Narrow features of D near the box (centre, width), normalized.

        See :meth:`kinroots.physics.dispersion.Dispersion.resonances`.
        """
        w_u = self.dispersion.omega_ref
        return [(c / w_u, w / w_u)
                for c, w in self.dispersion.resonances(box[0] * w_u, box[1] * w_u)]


def function_at(case: Case, k: float) -> NormalizedDispersion:
    """The normalized dispersion function of ``case`` at normalized ``k``."""
    return NormalizedDispersion(float(k), dispersion_at(case, float(k)),
                                rtol=case.solver.tolerance)


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


#: Largest log₂|D| left on a window's boundary after the constant scale of
#: :func:`_log2_offset` (double precision reaches 2^1024; the interior of the window is
#: bounded by its boundary, maximum modulus principle, and the rest is margin for
#: maxima between probe points and for dD/dω).
_LOG2_TOP = 900
#: Probe points per edge of the window for :func:`_log2_offset`.
_PROBES = 64


def _offset_decades(offset: int) -> int:
    """The power of ten of 2^offset (for messages)."""
    return round((offset + _LOG2_TOP) * math.log10(2.0))


def _log2_offset(f: NormalizedDispersion, box: tuple[float, float, float, float]) -> int:
    """A constant scale 2^-N that brings D into double precision on ``box``, or 0.

    log₂|D| (:meth:`~kinroots.physics.dispersion.Dispersion.log2_magnitude`, finite where
    every entry of the tensor is) is probed on the boundary of ``box``; by the maximum
    modulus principle (D is analytic in the box apart from the excluded points, which the
    survey circles) its maximum over the box is on the boundary.  N puts that maximum at
    2^_LOG2_TOP.  0 (no scale possible) when a probe is not finite (an entry itself
    overflows) or when the boundary's values would then underflow below 2^-1000 (the
    range of |D| on the box exceeds double precision).
    """
    x0, x1, y0, y1 = box
    t = np.linspace(0.0, 1.0, _PROBES + 1)
    z = np.concatenate((x0 + (x1 - x0) * t + 1j * y0, x1 + 1j * (y0 + (y1 - y0) * t),
                        x1 - (x1 - x0) * t + 1j * y1, x0 + 1j * (y1 - (y1 - y0) * t)))
    # |D| peaks sharply where a species resonates (|exp(-zeta^2)| is largest at
    # Re zeta = 0): probe the horizontal edges at and around every resonance centre too
    xs = [c.real + w * u for c, w in f.features(box) for u in (-2, -1, -0.5, 0, 0.5, 1, 2)]
    xr = np.array([x for x in xs if x0 <= x <= x1])
    z = np.concatenate((z, xr + 1j * y0, xr + 1j * y1))
    lg = f.dispersion.log2_magnitude(z * f.dispersion.omega_ref)
    if not np.all(np.isfinite(lg)):
        return 0
    hi, lo = float(np.max(lg)), float(np.min(lg))
    offset = math.ceil(hi) - _LOG2_TOP
    if offset <= 0 or lo - offset < -1000:
        return 0
    return offset


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
    excluded, features = f.excluded(wide), f.features(wide)
    res = find_roots(f, b, excluded=excluded, rtol=case.solver.tolerance, features=features)
    if any("is not finite" in n for n in res.notes):
        offset = _log2_offset(f, b)
        if offset:
            # |D| exceeds double precision on the window but fits after a constant
            # scale 2^-offset (same zeros, same f'/f): survey that scaled D instead.
            f.dispersion.log2_offset = offset
            res = find_roots(f, b, excluded=excluded, rtol=case.solver.tolerance,
                             features=features)
            top = _offset_decades(offset)
            res.notes.append(
                f"|D| exceeds double precision on this window (up to about 1e{top}): D was "
                f"surveyed as D/2^{offset} (same roots; residuals are of D/2^{offset})"
            )
    if any("is not finite" in n for n in res.notes):
        res.notes.append(
            "D overflows there: a Landau term exp(-zeta^2) exceeds double precision where "
            "the edge runs below the real axis by more than about 26 widths of a resonance "
            "(zeta = (omega - k_par V - n Omega)/(k w)): the width is k*w of a cold species "
            "unmagnetized, k_par*w_par near a cyclotron harmonic n*Omega + k_par*V when "
            "magnetized; raise the window's lower edge toward the real axis there, or keep "
            "it away from those harmonics (README, limits)"
        )
    return res



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
            f, fk = krook_dispersion.magnetized_scaled_dispersion_in_k(
                self.omega * units.omega_unit, plasma.species,
                k=np.asarray(k, dtype=complex) / L, cos_theta=math.cos(theta),
                sin_theta=math.sin(theta), B=plasma.B, tol=self.case.solver.harmonic_tolerance,
            )
            return f, fk / L
        if krook.collisional(plasma) and self.case.model == "electrostatic" and not plasma.B:
            theta = math.radians(self.case.angle_deg)
            f, _, fk = krook.scaled_dispersion(
                np.asarray(self.omega * units.omega_unit, dtype=complex), plasma.species,
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
