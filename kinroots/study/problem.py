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
import re
import weakref
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from kinroots.io.case import Case
from kinroots.physics.dispersion import (
    Dispersion,
    dispersion_in_k,
    dispersion_in_k_scaled,
    dispersion_pairs,
    in_blocks,
)
from kinroots.physics.models import krook, krook_dispersion
from kinroots.physics.scales import Scale, characteristic_frequencies
from kinroots.physics.zfunc import ldexp_complex
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
    """The search window ``(re_min, re_max, im_min, im_max)`` in normalized ω.

    The case's ``[search]`` table where it gives one; otherwise the window chosen from the
    plasma by :func:`window_choice` (computed once per case).
    """
    if case.search_real is not None and case.search_imag is not None:
        return (*case.search_real, *case.search_imag)
    c = window_choice(case)
    return (*c.real, *c.imag)


@dataclass(frozen=True)
class WindowChoice:
    """The search window used for a case and how it was obtained.

    Attributes
    ----------
    real, imag : tuple of float
        ``(min, max)`` of Re ω and Im ω, normalized.
    chosen : bool
        True when kinroots chose (part of) the window from the plasma (no ``[search]``
        or no ``search.real`` / ``search.imag``); False when the case gave it.
    rule : str
        The rule in words, with the scales that set each edge.
    evaluations : int
        Dispersion evaluations spent choosing it (probe surveys).
    """

    real: tuple[float, float]
    imag: tuple[float, float]
    chosen: bool
    rule: str
    evaluations: int = 0

    def as_json(self) -> dict[str, Any]:
        """The ``search_window`` entry of summary.json."""
        return {"real": list(self.real), "imag": list(self.imag), "normalized": True,
                "chosen_from_plasma": self.chosen, "rule": self.rule,
                "evaluations": self.evaluations}


#: Characteristic frequencies above this multiple of the case's frequency unit are not
#: on the case's scale (the unit names the physics the user studies): they do not widen
#: a chosen window.
SCALE_RANGE = 10.0
#: Margin on the highest characteristic frequency kept (Re ω edge of a chosen window).
REAL_MARGIN = 1.3
#: Re ω of a chosen window starts this fraction of its top edge below 0, so that purely
#: growing or damped roots (Re ω = 0) lie inside it, not on its edge.
ZERO_MARGIN = 0.05
#: Without drifts or the electromagnetic model (no root on Re ω = 0 to catch), Re ω of a
#: chosen window starts at this fraction of the lowest characteristic frequency at the
#: smallest k, clear of the zero-frequency resonance of cold species whose Landau term
#: grows fastest below the real axis there.
LOW_FRACTION = 0.5
#: First depth below the real axis of a chosen window, as a fraction of its Re ω span.
FIRST_DEPTH = 0.01
#: Depth multiplier per deepening step, and the deepest a chosen window goes (fraction
#: of its Re ω span).
DEEPEN, MAX_DEPTH = 3.0, 1.0
#: A chosen window reaches at most this many resonance widths below the real axis where a
#: resonance centre (k∥V + nΩ, :meth:`NormalizedDispersion.features`) lies within its Re ω
#: range. The survey handles D beyond double precision (the constant scale, sub-boxes),
#: but deeper the damped roots of that species crowd in (hundreds near Re ω = 0 for a
#: cold ion species) and a count at every k costs a survey.
RESONANCE_DEPTH = 12.0
#: Probe wavenumbers (evenly spread over the scan's points) for a chosen Im ω range.
PROBES = 5
#: Where every probe k has a growing root, a chosen window's bottom edge lies at this
#: fraction of the smallest of their growth rates (above the real axis).
GROWING_FLOOR = 0.5
#: Margin on the deepest least-damped root found by the probes.
DEPTH_MARGIN = 1.5

_CHOICES: weakref.WeakKeyDictionary[Case, WindowChoice] = weakref.WeakKeyDictionary()


def window_choice(case: Case) -> WindowChoice:
    """The window used for ``case``: its ``[search]`` table, or one chosen from the plasma.

    Rule for a missing ``search.real`` (README "Choosing the window"): the plasma's
    characteristic frequencies at the first and last k of the scan
    (:func:`kinroots.physics.scales.characteristic_frequencies`: ω_ps, |Ω_s|, k∥V_s ±
    k w_s, Bohm-Gross, light wave, hybrid, cutoff and Alfvén frequencies), keeping those
    at most :data:`SCALE_RANGE` times the frequency unit; Re ω runs from
    −:data:`ZERO_MARGIN` × top (or the lowest Doppler frequency kept, times
    :data:`REAL_MARGIN`) to :data:`REAL_MARGIN` × the highest kept.

    For a missing ``search.imag``: Im ω reaches up to half the Re ω span (growth rates of
    linear instabilities stay below the frequencies that drive them), raised to twice the
    largest growth rate the probes see if one comes within 20 % of it.  Downward the
    window is deepened from :data:`FIRST_DEPTH` of the span by factors of
    :data:`DEEPEN` until the window holds a root at each probe k (first, middle and last
    of the scan), then set to :data:`DEPTH_MARGIN` times the deepest of the probes'
    least-damped roots, and at most :data:`MAX_DEPTH` of the span.  So the window holds
    the least-damped root and every growing root at the probe k.
    """
    cached = _CHOICES.get(case)
    if cached is not None:
        return cached
    if case.search_real is not None and case.search_imag is not None:
        return WindowChoice(case.search_real, case.search_imag, False,
                            "given by the case's [search] table")
    cached = _CHOICES[case] = _choose_window(case)
    return cached


def with_window(case: Case) -> Case:
    """``case`` with its window fixed (chosen from the plasma if it gives none).

    Studies that re-read the case at other parameter values (sweeps, thresholds) use
    the window of the case as given, written into its ``[search]`` table, so every
    point shares one window; :func:`window_choice` of the result still says whether it
    was chosen.
    """
    if case.search_real is not None and case.search_imag is not None:
        return case
    choice = window_choice(case)
    raw = dict(case.raw)
    raw["search"] = {"real": list(choice.real), "imag": list(choice.imag)}
    fixed = replace(case, search_real=choice.real, search_imag=choice.imag, raw=raw)
    _CHOICES[fixed] = choice
    return fixed


def _scales(case: Case) -> tuple[list[Scale], list[Scale], list[str]]:
    """Characteristic scales (normalized) at the scan's smallest and largest k.

    Returns the scales kept at the largest k, those kept at the smallest k (both: on the
    case's scale at some k of the scan and at most :data:`SCALE_RANGE` units), and the
    names left out as beyond the case's scale.
    """
    units = case.units
    w_u = units.omega_unit
    ks = np.asarray(case.k_values, dtype=float)
    kmin, kmax = float(ks.min()), float(ks.max())
    at: dict[float, list[Scale]] = {}
    for k in (kmin, kmax):
        at[k] = [Scale(sc.name, sc.centre / w_u, sc.spread / w_u)
                 for sc in characteristic_frequencies(case.plasma, k / units.length_unit,
                                                      case.angle_deg,
                                                      case.model == "electromagnetic")]

    def size(sc: Scale) -> float:
        return max(abs(sc.low), abs(sc.high))

    every = [sc for v in at.values() for sc in v]
    names = {sc.name for sc in every if 1.0 / SCALE_RANGE <= size(sc) <= SCALE_RANGE}
    if not names and every:  # no scale near the unit: the slowest ones
        smallest = min(size(sc) for sc in every)
        names = {sc.name for sc in every if size(sc) <= smallest * SCALE_RANGE}
    dropped = sorted({sc.name for sc in every} - names)
    # at the largest k a kept scale must itself lie within range (it sets the top edge);
    # at the smallest k every kept scale counts (the lowest sets the left edge)
    high_k = [sc for sc in at[kmax]
              if sc.name in names and (size(sc) <= SCALE_RANGE or kmax == kmin)]
    low_k = [sc for sc in at[kmin] if sc.name in names]
    return high_k, low_k, dropped


def _real_range(case: Case) -> tuple[tuple[float, float], str]:
    high_k, low_k = _scales(case)[:2]
    kept = high_k + low_k
    top_scale = max(kept, key=lambda sc: sc.high, default=None)
    hi = REAL_MARGIN * (top_scale.high if top_scale is not None else 1.0)
    setter = top_scale.name if top_scale is not None else "frequency unit"
    drifts = [sc for sc in kept if sc.name.startswith("Doppler") and abs(sc.centre) >= 0.05 * hi]
    if case.model == "electromagnetic" or (
            any(sc.centre > 0 for sc in drifts) and any(sc.centre < 0 for sc in drifts)):
        # purely growing roots (Weibel, mirror, firehose, filamentation; two-stream of
        # counter-drifting species) lie on Re omega = 0
        lo, why_lo = -ZERO_MARGIN * hi, "just below 0, so that Re omega = 0 is inside"
    else:
        waves = [sc.centre for sc in low_k if sc.centre > 0 and not sc.name.startswith(
            "cyclotron harmonics")]
        lo = LOW_FRACTION * min(waves) if waves else 0.0
        why_lo = (f"{LOW_FRACTION:g} x the lowest characteristic frequency at the "
                  "smallest k")
    backward = [REAL_MARGIN * sc.low for sc in drifts if sc.centre < 0]
    if backward and min(backward) < lo:
        lo, why_lo = min(backward), "the backward Doppler frequency of a drifting species"
    why = (f"Re omega from {lo:.4g} ({why_lo}) to {hi:.4g} ({REAL_MARGIN:g} x the {setter} "
           "at the scan's ends, the highest characteristic frequency within "
           f"{SCALE_RANGE:g} frequency units)")
    return (_round(lo), _round(hi)), why


def _round(x: float) -> float:
    """``x`` to 3 significant digits (a window the user can copy into ``[search]``)."""
    return float(f"{x:.3g}")


def _choose_window(case: Case) -> WindowChoice:
    if case.search_real is not None:
        real, why_real = case.search_real, "Re omega given by the case"
    else:
        real, why_real = _real_range(case)
    span = real[1] - real[0]
    if case.search_imag is not None:
        return WindowChoice(real, case.search_imag, True, why_real + "; Im omega given")
    ks = np.asarray(case.k_values, dtype=float)
    probes = sorted({float(ks[round(i * (len(ks) - 1) / (PROBES - 1))])
                     for i in range(PROBES)})
    # below the real axis a Landau term exp(-zeta^2) grows like exp((Im omega / width)^2)
    # near a resonance centre: past about 26 widths it exceeds double precision
    cap = MAX_DEPTH * span
    widths = [w for c, w in function_at(case, float(ks.min())).features(
        (real[0], real[1], -cap, 0.0)) if real[0] <= c.real <= real[1]]
    if widths:
        cap = min(cap, RESONANCE_DEPTH * min(widths))
    top, depth = 0.5 * span, min(FIRST_DEPTH * span, cap)
    evaluations = 0
    best: dict[float, float] = {}  # probe k -> Im of its least-damped root found
    notes: list[str] = []

    def look(k: float, lo: float, hi: float) -> bool:
        """Survey the strip [lo, hi] at k; False when it could not be completed."""
        nonlocal evaluations
        res = survey(case, k, box=(real[0], real[1], lo, hi))
        evaluations += res.evaluations
        for v in res.values:
            best[k] = max(best.get(k, -math.inf), float(v.imag))
        return bool(res.complete)

    failed = [k for k in probes if not look(k, -depth, top)]
    for shallower in (0.25 * depth, 0.0625 * depth, -0.0625 * depth):
        # damped roots crowding the bottom edge (and the outward shift of an edge through
        # them into the overflow region): raise the bottom edge, at last above the axis
        if not failed:
            break
        for k in failed:
            best.pop(k, None)
        failed = [k for k in failed if not look(k, -shallower, top)]
        notes.append(f"the bottom edge was raised to Im omega = {-shallower:.3g}: a survey "
                     f"reaching {-depth:.3g} could not be completed there")
        depth = shallower
    if failed:
        notes.append("the first survey (Im omega from " f"{-depth:.3g}) at k = "
                     + ", ".join(f"{k:g}" for k in failed) + " could not be completed")
    raised = depth < min(FIRST_DEPTH * span, cap)
    grow = max(best.values(), default=-math.inf)
    if grow > 0.8 * top:
        new_top = 2.0 * grow
        for k in probes:
            look(k, top, new_top)
        top = new_top
    while not raised and depth < cap and any(k not in best for k in probes):
        deeper = min(DEEPEN * depth, cap)
        failed = [k for k in probes if k not in best and not look(k, -deeper, -depth)]
        if failed:
            # D cannot be surveyed that deep (overflow, poles): stay above that depth
            notes.append("a survey down to Im omega = " f"{-deeper:.3g} at k = "
                         + ", ".join(f"{k:g}" for k in failed) + " could not be completed")
            break
        depth = deeper
    if best and not raised:
        depth = min(cap, max(depth if any(k not in best for k in probes)
                             else min(FIRST_DEPTH * span, cap),
                             -DEPTH_MARGIN * min(best.values())))
    # growing beyond the root's accuracy (an undamped root's Im omega is rounding noise)
    res = 10.0 * case.solver.tolerance * max(abs(real[0]), abs(real[1]))
    growing = len(best) == len(probes) and min(best.values()) > res
    if growing:
        # every probe k has a growing root (the least-damped one): the window need not
        # reach below the real axis, where damped roots can crowd (a cold species'
        # resonance at Re omega = 0)
        depth = -GROWING_FLOOR * min(best.values())
    empty = [k for k in probes if k not in best]
    why_imag = (f"Im omega from {-depth:.4g} ({GROWING_FLOOR:g} x the smallest of the "
                "growth rates of the fastest-growing roots at the probe k = "
                + ", ".join(f"{k:g}" for k in probes) + ", where every probe has one)"
                if growing else
                f"Im omega from {-depth:.4g} (the least-damped root at the probe k = "
                + ", ".join(f"{k:g}" for k in probes)
                + f", with margin {DEPTH_MARGIN:g}"
                + (f"; at most {RESONANCE_DEPTH:g} widths of the narrowest resonance in the "
                   f"window, {cap:.3g}, where D would overflow" if depth >= cap else "")
                + ")")
    why_imag += f" to {top:.4g} (half the Re omega span)"
    if empty:
        why_imag += ("; no root found down to that depth at k = "
                     + ", ".join(f"{k:g}" for k in empty))
    if notes:
        why_imag += "; " + "; ".join(notes)
    return WindowChoice(real, (_round(-depth), _round(top)), True,
                        f"{why_real}; {why_imag}", evaluations)


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
    auto_window : tuple of float or None
        See below (constant scale of D for tracing and counts in that box).
    """

    k: float
    dispersion: Dispersion
    rtol: float = 1e-10
    #: A box (normalized): the first evaluation that is not finite at a finite ω sets
    #: ``dispersion.log2_offset`` once, from log|D| on the box's boundary
    #: (:func:`_log2_offset`), and evaluates again: D/2^N with one N for the whole box,
    #: so Newton's and a boundary count's comparisons of |D| stay consistent.
    auto_window: tuple[float, float, float, float] | None = None

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
        om = np.asarray(omega, dtype=complex)
        d, dd = _auto_scaled(
            self, om, lambda offset: (self._krook(om * w_u, offset) if self._krook_es
                                      else disp(om * w_u)))
        return d, dd * w_u

    @property
    def log2_offset(self) -> int:
        """The constant scale N of the function handed over (f = D/2^N or F/2^N)."""
        return self.dispersion.log2_offset

    @log2_offset.setter
    def log2_offset(self, value: int) -> None:
        self.dispersion.log2_offset = value

    @property
    def _krook_es(self) -> bool:
        """Electrostatic with Krook species: the function handed over is F = (Π_s Q_s) D."""
        flag = self.__dict__.get("_krook_flag")
        if flag is None:  # fixed for the wrapped function: decided on the first call
            disp = self.dispersion
            flag = self.__dict__["_krook_flag"] = (krook.collisional(disp.plasma)
                                                   and not disp.electromagnetic)
        return bool(flag)

    def _krook_split(self, om: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """F, dF/dω (SI ω) as mantissas and the binary exponent per point."""
        disp = self.dispersion
        if disp.magnetized:
            # at k∥ = 0 F has poles (nΩ − iν), which the case file rejects: NaN makes such
            # a point fail visibly if reached otherwise
            if disp.k_par == 0:
                nan = np.full(om.shape, np.nan + 0j)
                return nan, nan.copy(), np.zeros(om.shape, dtype=int)
            return krook_dispersion.magnetized_split_dispersion(
                om, disp.plasma.species, k_par=disp.k_par, k_perp=disp.k_perp,
                B=disp.plasma.B, tol=disp.harmonic_tol)
        f, fw, _, p = krook.split_dispersion(om, disp.plasma.species, k=disp.k,
                                             cos_theta=disp._cos, sin_theta=disp._sin,
                                             dk=False)
        return f, fw, p

    def _krook(self, om: np.ndarray, offset: int) -> tuple[np.ndarray, np.ndarray]:
        """F = (Π_s Q_s) D and dF/dω at SI ω (Krook χ_s = N_s/Q_s has poles; F is entire
        with the same zeros), times 2^−offset when ``offset`` is set (overflow-free)."""
        disp = self.dispersion
        if offset:
            f, fw, p = self._krook_split(om)
            return ldexp_complex(f, p - offset), ldexp_complex(fw, p - offset)
        if disp.magnetized:
            if disp.k_par == 0:
                nan = np.full(om.shape, np.nan + 0j)
                return nan, nan.copy()
            return krook_dispersion.magnetized_scaled_dispersion(
                om, disp.plasma.species, k_par=disp.k_par, k_perp=disp.k_perp,
                B=disp.plasma.B, tol=disp.harmonic_tol)
        f, fw, _ = krook.scaled_dispersion(om, disp.plasma.species, k=disp.k,
                                           cos_theta=disp._cos, sin_theta=disp._sin, dk=False)
        return f, fw

    def log2_magnitude(self, omega: np.ndarray) -> np.ndarray:
        """log₂|f| at normalized ω without overflow (NaN where f is not defined): of D,
        or of F = (Π_s Q_s) D with Krook species."""
        om = np.asarray(omega, dtype=complex) * self.dispersion.omega_ref
        if not self._krook_es:
            return self.dispersion.log2_magnitude(om)
        f, _, p = self._krook_split(om)
        with np.errstate(all="ignore"):
            out = np.log2(np.abs(f)) + p
        out[~np.isfinite(out)] = np.nan
        return out

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


def function_at(case: Case, k: float, *,
                auto_window: tuple[float, float, float, float] | None = None
                ) -> NormalizedDispersion:
    """The normalized dispersion function of ``case`` at normalized ``k``.

    With ``auto_window``, D is scaled by a constant 2^-N for that box where it exceeds
    double precision (:attr:`NormalizedDispersion.auto_window`): for tracing and counts.
    """
    return NormalizedDispersion(float(k), dispersion_at(case, float(k)),
                                rtol=case.solver.tolerance, auto_window=auto_window)


#: ``f(k̂, ω̂) -> (D, dD/dω̂)`` at arrays of normalized (k, ω) pairs.
PairFunction = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


def pair_function(case: Case) -> CasePairs | None:
    """``f(k̂, ω̂) -> (D, dD/dω̂)`` at arrays of normalized (k, ω) pairs, for batched tracing.

    Element by element the same function as :func:`function_at` (k̂_j)(ω̂_j).  ``None`` for
    cases with Krook collisions, whose scaled function is formed one k at a time.
    """
    if krook.collisional(case.plasma):
        return None
    return CasePairs(case)


class CasePairs:
    """The pair function of :func:`pair_function`: a call is :meth:`values` (one dispersion
    call) then :meth:`finish` (the constant scale of each k where D overflowed), so that
    several groups of pairs can share one dispersion call and still be finished one group
    after the other, each as its own call would be."""

    def __init__(self, case: Case) -> None:
        self.case = case
        self.box = window(case)
        # k values where D overflowed in the window: evaluated one k at a time from then
        # on, with that k's constant scale (function_at's auto_window), so that every
        # later call at that k sees the same D/2^N
        self.scaled: dict[float, NormalizedDispersion] = {}

    def __call__(self, k: np.ndarray, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return self.finish(*self.values(k, omega))

    def values(self, k: np.ndarray, omega: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """k and ω broadcast, D and dD/dω̂ as evaluated (not finite where they overflow)."""
        case = self.case
        w_u, l_u = case.units.omega_unit, case.units.length_unit
        kk, om = np.broadcast_arrays(np.asarray(k, dtype=float),
                                     np.asarray(omega, dtype=complex))
        with np.errstate(over="ignore", invalid="ignore"):
            d, dd = dispersion_pairs(
                case.plasma, k=kk / l_u, omega=om * w_u, angle_deg=case.angle_deg,
                model=case.model, omega_ref=w_u, harmonic_tol=case.solver.harmonic_tolerance,
            )
            dd = dd * w_u  # may overflow: such k are evaluated again below, scaled
        return kk, om, d, dd

    def finish(self, kk: np.ndarray, om: np.ndarray, d: np.ndarray, dd: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray]:
        """The values of :meth:`values` with every k where they overflowed (now or in an
        earlier call) evaluated again with that k's constant scale."""
        bad = np.isfinite(om) & ~(np.isfinite(d) & np.isfinite(dd))
        todo = {float(v) for v in np.unique(kk[bad])} | {
            float(v) for v in np.unique(kk) if float(v) in self.scaled}
        if todo:
            d, dd = d.copy(), dd.copy()
        for kv in todo:
            f = self.scaled.get(kv)
            if f is None:
                f = self.scaled[kv] = function_at(self.case, kv, auto_window=self.box)
            sel = kk == kv
            d[sel], dd[sel] = f(om[sel])
        return d, dd


#: Largest log₂|D| left on a window's boundary after the constant scale of
#: :func:`_log2_offset` (double precision reaches 2^1024; the interior of the window is
#: bounded by its boundary, maximum modulus principle, and the rest is margin for
#: maxima between probe points and for dD/dω).
_LOG2_TOP = 900
#: Smallest log₂|D| allowed on the boundary after that scale (margin above 2^-1074).
_LOG2_BOTTOM = -1000
#: Probe points per edge of the window for :func:`_log2_offset`.
_PROBES = 64
#: Largest number of times :func:`survey` halves a window whose |D| spans more binary
#: orders than double precision holds (at most 2^_MAX_SPLITS sub-boxes).
_MAX_SPLITS = 6
#: Largest span of log₂|D| on a window's boundary for which :func:`survey` tries
#: sub-boxes (beyond it, 2^_MAX_SPLITS of them would not suffice: refused at once).
_MAX_SPAN = 16_000
#: The note of a window that neither a constant scale nor sub-boxes can serve.
_TOO_WIDE = (
    "D overflows there: |D| spans more binary orders on the window than sub-boxes of "
    f"double precision can hold (more than about {_MAX_SPAN}, or beyond 2^(2^20)): a "
    "Landau term exp(-zeta^2) of a cold species far below the real axis; raise the "
    "window's lower edge toward the real axis there (README, limits)")


def _offset_decades(offset: int) -> int:
    """The power of ten of 2^offset (for messages)."""
    return round((offset + _LOG2_TOP) * math.log10(2.0))


def _boundary_log2(f: NormalizedDispersion | SpatialFunction, box: tuple[float, float, float, float]
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Probe points on the boundary of ``box`` and log₂|D| there (NaN where undefined).

    Each edge uniformly, plus the horizontal edges at and around every resonance centre,
    where |exp(−ζ²)| peaks (Re ζ = 0).
    """
    x0, x1, y0, y1 = box
    t = np.linspace(0.0, 1.0, _PROBES + 1)
    z = np.concatenate((x0 + (x1 - x0) * t + 1j * y0, x1 + 1j * (y0 + (y1 - y0) * t),
                        x1 - (x1 - x0) * t + 1j * y1, x0 + 1j * (y1 - (y1 - y0) * t)))
    xs = [c.real + w * u for c, w in f.features(box) for u in (-2, -1, -0.5, 0, 0.5, 1, 2)]
    xr = np.array([x for x in xs if x0 <= x <= x1])
    z = np.concatenate((z, xr + 1j * y0, xr + 1j * y1))
    return z, f.log2_magnitude(z)


def _log2_offset(f: NormalizedDispersion | SpatialFunction, box: tuple[float, float, float, float]
                 ) -> tuple[int, str, float]:
    """A constant scale 2^-N that brings D into double precision on ``box``.

    log₂|D| (:meth:`~kinroots.physics.dispersion.Dispersion.log2_magnitude`, overflow-free)
    is probed on the boundary of ``box``; by the maximum modulus principle (D is analytic
    in the box apart from the excluded points, which the survey circles) its maximum over
    the box is on the boundary.  N puts that maximum at 2^_LOG2_TOP.

    Returns
    -------
    offset : int
        N, or 0 when no constant scale serves.
    why : str
        ``""``, ``"undefined"`` (a probe is NaN: D is not defined there) or ``"range"``
        (|D| spans more binary orders on the boundary than double precision holds).
    span : float
        max − min of log₂|D| on the boundary (NaN if undefined).
    """
    _, lg = _boundary_log2(f, box)
    if not np.all(np.isfinite(lg)):
        return 0, "undefined", math.nan
    hi, lo = float(np.max(lg)), float(np.min(lg))
    offset = max(0, math.ceil(hi) - _LOG2_TOP)
    if lo - offset < _LOG2_BOTTOM:
        return 0, "range", hi - lo
    return offset, "", hi - lo


def _auto_scaled(f: NormalizedDispersion | SpatialFunction, z: np.ndarray,
                 evaluate: Callable[[int], tuple[np.ndarray, np.ndarray]]
                 ) -> tuple[np.ndarray, np.ndarray]:
    """``evaluate(f.log2_offset)``; with ``f.auto_window`` set, the first evaluation that
    is not finite at a finite point sets ``f.log2_offset`` once from log₂|f| on that box
    (:func:`_log2_offset`) and evaluates again, so every later call sees the same f/2^N."""
    d, dd = evaluate(f.log2_offset)
    if f.auto_window is not None and not f.__dict__.get("_auto_tried"):
        bad = np.isfinite(z) & ~(np.isfinite(d) & np.isfinite(dd))
        if bad.any():
            f.__dict__["_auto_tried"] = True
            offset, _, _ = _log2_offset(f, f.auto_window)
            if offset:
                f.log2_offset = offset
                d, dd = evaluate(offset)
    return d, dd


def _undefined_note(f: NormalizedDispersion | SpatialFunction) -> str:
    """Why D cannot be evaluated on an edge even with the exponent carried apart."""
    plasma = f.case.plasma if isinstance(f, SpatialFunction) else f.dispersion.plasma
    if isinstance(f, SpatialFunction) and plasma.magnetized:
        return ("D is not defined there: at real omega and |arg k_par| > 45 degrees the "
                "Landau terms exp(-zeta_n^2) grow with the harmonic number n faster than "
                "the Bessel weights fall, so the sum over cyclotron harmonics diverges; "
                "keep the box's Im k below Re k (README, limits)")
    if any(s.distribution == "kappa" for s in plasma.species):
        return ("D is not defined there: the continued kappa functions have a branch cut "
                "(Im zeta < -sqrt(kappa) on the imaginary zeta axis) that the edge "
                "crosses; keep the window above it (README, limits)")
    return _TOO_WIDE


def _split(box: tuple[float, float, float, float], lg: np.ndarray
           ) -> tuple[tuple[float, float, float, float], tuple[float, float, float, float]]:
    """Halve ``box`` across the direction in which log|D| varies most on its boundary
    (``lg``: the first 4(_PROBES + 1) probes of :func:`_boundary_log2`)."""
    x0, x1, y0, y1 = box
    n = _PROBES + 1
    edges = [lg[i * n:(i + 1) * n] for i in range(4)]  # bottom, right, top, left
    horizontal = max(float(np.ptp(edges[0])), float(np.ptp(edges[2])))
    vertical = max(float(np.ptp(edges[1])), float(np.ptp(edges[3])))
    if vertical >= horizontal:
        ym = 0.5 * (y0 + y1)
        return (x0, x1, y0, ym), (x0, x1, ym, y1)
    xm = 0.5 * (x0 + x1)
    return (x0, xm, y0, y1), (xm, x1, y0, y1)


def _merge(parts: list[SurveyResult], box: tuple[float, float, float, float],
           diameter: float) -> SurveyResult:
    """One result for adjacent sub-boxes: roots on a shared edge (each sub-box shifts
    such an edge outward, so both count them) are kept and counted once."""
    roots: list = []
    count: int | None = 0
    evaluations = cells = 0
    notes: list[str] = []
    complete = True
    for part in parts:
        evaluations += part.evaluations
        cells += part.cells
        complete = complete and part.complete
        count = None if count is None or part.count is None else count + part.count
        for n in part.notes:
            if n not in notes:
                notes.append(n)
        for r in part.roots:
            twin = next((q for q in roots if q.converged and r.converged
                         and abs(q.value - r.value) <= 1e-9 * max(abs(r.value), diameter)),
                        None)
            if twin is None:
                roots.append(r)
            elif count is not None:
                count -= r.multiplicity
    roots.sort(key=lambda r: (not r.converged, r.value.real, r.value.imag))
    if count is not None:
        found = sum(r.multiplicity for r in roots if r.converged)
        complete = complete and found == count
    return SurveyResult(roots=roots, count=count, evaluations=evaluations, cells=cells,
                        box=box, notes=notes, complete=complete)


#: The note of a box surveyed with a constant scale (its power of ten).
_SCALE_NOTE = re.compile(r"\|D\| exceeds double precision on this window \(up to about "
                         r"1e(\d+)\): D was surveyed as D/2\^")


def _survey_box(f: NormalizedDispersion | SpatialFunction, b: tuple[float, float, float, float],
                excluded: list[complex], features: list[tuple[complex, float]],
                rtol: float, splits: int) -> SurveyResult:
    """:func:`survey` on one box: plain D, else a constant scale, else halves."""
    f.log2_offset = 0
    res = find_roots(f, b, excluded=excluded, rtol=rtol, features=features)
    if not any("is not finite" in n for n in res.notes):
        return res
    offset, why, span = _log2_offset(f, b)
    if offset:
        # |D| exceeds double precision on the box but fits after a constant scale
        # 2^-offset (same zeros, same f'/f): survey that scaled D instead.
        f.log2_offset = offset
        res = find_roots(f, b, excluded=excluded, rtol=rtol, features=features)
        f.log2_offset = 0
        top = _offset_decades(offset)
        res.notes.append(
            f"|D| exceeds double precision on this window (up to about 1e{top}): D was "
            f"surveyed as D/2^{offset} (same roots; residuals are of D/2^{offset})"
        )
        return res
    if why == "range" and splits < _MAX_SPLITS and span <= _MAX_SPAN:
        # log|D| spans more than double precision holds: survey halves, each with its
        # own constant scale
        _, lg = _boundary_log2(f, b)
        halves = [_survey_box(f, h, excluded, features, rtol, splits + 1)
                  for h in _split(b, lg)]
        merged = _merge(halves, b, abs(complex(b[1] - b[0], b[3] - b[2])))
        if splits == 0:  # the sub-boxes' scale notes become one
            scaled = [int(m.group(1)) for m in map(_SCALE_NOTE.match, merged.notes) if m]
            merged.notes = [n for n in merged.notes if not _SCALE_NOTE.match(n)]
            upto = f" (up to about 1e{max(scaled)})" if scaled else ""
            merged.notes.append(
                f"|D| exceeds double precision on this window{upto} and spans more binary "
                "orders than it holds: the window was surveyed in sub-boxes, each as "
                "D/2^N with its own constant N (same roots; residuals are of the scaled D)")
        return merged
    # one plain note instead of the root layer's edge-by-edge ones
    res.notes = [n for n in res.notes if "is not finite" not in n]
    if why == "range":
        res.notes.append(_TOO_WIDE)
    else:
        res.notes.append(_undefined_note(f))
    return res


#: Why D is rounding noise near cyclotron harmonics deep in the lower half-plane.
_NOISE_NOTE = (
    "near a cyclotron harmonic n*Omega + k_par*V, below the real axis by more than a few "
    "k_par*w_par of that species, its resonant term exp(-zeta^2) grows so large that the "
    "3x3 determinant cancels far below its terms (at small k_perp*rho that term is nearly "
    "of rank one); that term is kept apart, and D stays accurate, for a species given as "
    "one drifting bi-Maxwellian where one species-harmonic dominates, not for species "
    "given as components or where two such terms are both that large; keep the window's "
    "lower edge within about 2 k_par*w_par of the real axis near those harmonics, or "
    "away from them (README, limits)"
)


def survey(case: Case, k: float, *, box: tuple[float, float, float, float] | None = None
           ) -> SurveyResult:
    """Every root of D in the window (or ``box``) at normalized ``k``.

    Where |D| exceeds double precision the window is surveyed as D/2^N with a constant N
    (same zeros, same D'/D), from the overflow-free log|D| on its boundary; where one
    constant cannot serve (|D| spans more than about 1900 binary orders) the window is
    halved, up to 64 sub-boxes, each with its own N.
    """
    f = function_at(case, k)
    b = window(case) if box is None else box
    # The root layer may shift an edge outward (a root or pole on it): list the excluded
    # points of a margin around the box too, so a shifted edge never swallows an unlisted
    # pole.
    dr, di = 0.05 * (b[1] - b[0]), 0.05 * (b[3] - b[2])
    wide = (b[0] - dr, b[1] + dr, b[2] - di, b[3] + di)
    excluded, features = f.excluded(wide), f.features(wide)
    res = _survey_box(f, b, excluded, features, case.solver.tolerance, 0)
    # the root layer's notes on noise become one note in physics terms, with the places
    noisy = [m for m in (_NOISE_WHERE.match(n) for n in res.notes) if m]
    if noisy:
        res.notes = [n for n in res.notes if not _NOISE_WHERE.match(n)]
        where = "; ".join(f"{m.group(1)} near {m.group(2)}" for m in noisy)
        why = (_NOISE_NOTE if f.dispersion.magnetized else
               "it has lost its precision to cancellation between terms far larger than "
               "D: move the window's edges toward the real axis")
        res.notes.append(f"D is rounding noise {where} (its values between close samples "
                         f"contradict D'/D), so its zeros cannot be counted there: {why}")
    return res


#: The root layer's note on a place where f is rounding noise (place, points).
_NOISE_WHERE = re.compile(r"f is rounding noise (on the \w+ edge|inside the window) near "
                          r"(.+?) \(its values")



# ----------------------------------------------------------------------- spatial problem


@dataclass
class SpatialFunction:
    """``g(k̂) -> (D, dD/dk̂)`` at one real normalized frequency (spatial problem).

    Attributes
    ----------
    case : Case
        The case.
    omega : float
        Real normalized frequency.
    log2_offset : int
        D and dD/dk̂ are returned times 2^−log2_offset (same zeros and D'/D), for boxes
        where |D| exceeds double precision (:func:`spatial_roots`).
    auto_window : tuple of float or None
        A box (normalized k): the first evaluation that is not finite at a finite k sets
        :attr:`log2_offset` once from log₂|D| on its boundary (tracing).
    """

    case: Case
    omega: float
    log2_offset: int = 0
    auto_window: tuple[float, float, float, float] | None = None

    def __call__(self, k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # overflow far from the window gives non-finite values, reported by the root layer
        with np.errstate(over="ignore", invalid="ignore"):
            kk = np.asarray(k, dtype=complex)
            return _auto_scaled(self, kk, lambda offset: self._call(kk, offset))

    def _call(self, k: np.ndarray, offset: int) -> tuple[np.ndarray, np.ndarray]:
        if offset:
            d, dd, p = self._split(k)
            return ldexp_complex(d, p - offset), ldexp_complex(dd, p - offset)
        units = self.case.units
        L = units.length_unit
        plasma = self.case.plasma
        theta = math.radians(self.case.angle_deg)
        ks = k / L
        if self._krook_es and plasma.B:
            f, fk = krook_dispersion.magnetized_scaled_dispersion_in_k(
                self.omega * units.omega_unit, plasma.species, k=ks,
                cos_theta=math.cos(theta), sin_theta=math.sin(theta), B=plasma.B,
                tol=self.case.solver.harmonic_tolerance,
            )
            return f, fk / L
        if self._krook_es:
            f, _, fk_or_none = krook.scaled_dispersion(
                np.asarray(self.omega * units.omega_unit, dtype=complex), plasma.species,
                k=ks, cos_theta=math.cos(theta), sin_theta=math.sin(theta),
            )
            assert fk_or_none is not None
            return f, fk_or_none / L
        d, dd = dispersion_in_k(
            plasma, omega=self.omega * units.omega_unit, k=ks, angle_deg=self.case.angle_deg,
            model=self.case.model, omega_ref=units.omega_unit,
            harmonic_tol=self.case.solver.harmonic_tolerance,
        )
        return d, dd / L

    @property
    def _krook_es(self) -> bool:
        return krook.collisional(self.case.plasma) and self.case.model == "electrostatic"

    def _split(self, k: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """D (F with Krook species) and its k̂-derivative as mantissas times 2^p."""
        units = self.case.units
        L = units.length_unit
        plasma = self.case.plasma
        theta = math.radians(self.case.angle_deg)
        ks = np.asarray(k, dtype=complex) / L
        if self._krook_es and plasma.B:
            f, fk, p = krook_dispersion.magnetized_split_dispersion_in_k(
                self.omega * units.omega_unit, plasma.species, k=ks,
                cos_theta=math.cos(theta), sin_theta=math.sin(theta), B=plasma.B,
                tol=self.case.solver.harmonic_tolerance,
            )
        elif self._krook_es:
            om = np.full(ks.shape, self.omega * units.omega_unit, dtype=complex)
            f, _, fk_split, p = krook.split_dispersion(om, plasma.species, k=ks,
                                                       cos_theta=math.cos(theta),
                                                       sin_theta=math.sin(theta))
            assert fk_split is not None
            fk = fk_split
        else:
            f, fk, p = dispersion_in_k_scaled(
                plasma, omega=self.omega * units.omega_unit, k=ks,
                angle_deg=self.case.angle_deg, model=self.case.model,
                omega_ref=units.omega_unit, harmonic_tol=self.case.solver.harmonic_tolerance,
            )
        return f, fk / L, p

    def log2_magnitude(self, k: np.ndarray) -> np.ndarray:
        """log₂|D| (|F| with Krook species) at normalized k, overflow-free (NaN where
        undefined)."""
        f, _, p = self._split(np.asarray(k, dtype=complex))
        with np.errstate(all="ignore"):
            out = np.log2(np.abs(f)) + p
        out[~np.isfinite(out)] = np.nan
        return out

    def features(self, box: tuple[float, float, float, float]) -> list[tuple[complex, float]]:
        """No resonance list in k (the boundary is sampled uniformly)."""
        return []


def spatial_roots(case: Case, omega: float, box: tuple[float, float, float, float]
                  ) -> SurveyResult:
    """Every complex wavenumber (normalized) in ``box`` at real normalized ``omega``.

    The box must lie in Re k > 0, away from k = 0 (the continuation is built there).
    """
    if box[0] <= 0:
        raise ValueError("the spatial search box must lie in Re k > 0")
    res = _survey_box(SpatialFunction(case, float(omega)), box, [], [], case.solver.tolerance,
                      0)
    # the notes speak of ω windows; in k the Landau term grows toward large Im k / Re k
    res.notes = [n.replace("raise the window's lower edge toward the real axis",
                           "keep the box's Im k small against Re k (Landau damping "
                           "lengths far shorter than a wavelength)")
                 .replace("; raise the window's lower edge toward the real axis there",
                          "; keep the box's Im k smaller against Re k there")
                 for n in res.notes]
    return res


def trace_spatial(case: Case, omegas: np.ndarray, box: tuple[float, float, float, float]
                  ) -> list[Branch]:
    """Survey complex k at the first frequency and trace each root across ``omegas``."""
    om = [float(w) for w in omegas]
    s = spatial_roots(case, om[0], box)
    tracer = Tracer(lambda w: SpatialFunction(case, w, auto_window=box), box=box, param=om[0],
                    rtol=case.solver.tolerance)
    for r in s.roots:
        if r.converged:
            tracer.add_branch(r, param=om[0])
    for w in om[1:]:
        if not tracer.active:
            break
        tracer.advance_to(w)
    return tracer.branches
