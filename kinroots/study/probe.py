"""A quick look at D on the search window's boundary before a run (``kinroots check``).

The survey of a window (:func:`kinroots.study.problem.survey`) starts by resolving the
phase of D along the window's four edges (argument principle).  What makes a survey
impossible or costly shows there already: D not finite on an edge (a Landau term
exp(−ζ²) beyond double precision), a pole of D on or next to an edge, or a phase that
turns many times along an edge (many zeros near it).  :func:`probe_window` looks at the
first and the last k of the scan with the root layer's own pieces: the probe points of
:func:`~kinroots.study.problem._boundary_log2` (evenly spaced points plus the
resonance centres), the constant rescaling of :func:`~kinroots.study.problem._log2_offset`
(and the sub-boxes the survey falls back on) and a boundary zero count
(:class:`kinroots.roots.BoundaryCounter`, the survey's phase test).
:func:`probe_launch` does the same for the k box of a ``[launch]`` table at the first and
the last driving frequency.

Findings are worded in physics terms (species, resonance widths, edges, poles), with the
parameter values they apply to; a finding repeated at several k is listed once.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from kinroots.io.case import Case
from kinroots.roots.boundary import BoundaryCounter
from kinroots.study.problem import (
    _MAX_SPAN,
    _MAX_SPLITS,
    _TOO_WIDE,
    NormalizedDispersion,
    SpatialFunction,
    _boundary_log2,
    _log2_offset,
    _offset_decades,
    _undefined_note,
    function_at,
    window,
)

Box = tuple[float, float, float, float]

#: Largest loop of boundary samples the probe's zero count may use at one k (the survey's
#: outer boundary needs about as many; beyond it the survey is costly).
MAX_BOUNDARY_SAMPLES = 4096
#: A pole closer to an edge than this fraction of the window's diameter makes the edge
#: costly to resolve (the phase of D turns by half a turn over that distance).
POLE_NEAR = 1e-3
#: The survey cannot resolve an edge within this fraction of the window's diameter of a
#: zero or pole (:func:`kinroots.roots.find_roots`, outer boundary).
EDGE_RESOLUTION = 1e-7
#: Zeros in the window (boundary winding) from which a survey is called costly: each is
#: isolated by subdivision and polished, about 70-140 evaluations per root (measured on
#: Weibel windows with 36 and 124 zeros), against the survey's budget of 50000.
MANY_ZEROS = 200
#: |Im ζ| (ζ on Re ζ = 0) at which exp(−ζ²) = exp(Im ζ²) reaches the largest double,
#: about 1.8e308: sqrt(709.78).
OVERFLOW_WIDTHS = math.sqrt(math.log(np.finfo(float).max))
#: Depth in resonance widths suggested for a lower edge (margin below OVERFLOW_WIDTHS).
SAFE_WIDTHS = 25.0

_EDGES = ("bottom", "right", "top", "left")


@dataclass(frozen=True)
class Finding:
    """One finding of a probe.

    Attributes
    ----------
    level : str
        ``"warning"`` (the survey will be impossible or costly) or ``"note"``.
    text : str
        What was found and why, in physics terms.
    where : list of str
        The parameter values it applies to (e.g. ``"k = 0.1"``).
    """

    level: str
    text: str
    where: list[str]


@dataclass
class WindowProbe:
    """The result of a probe of a window (or a k box) at a few parameter values.

    Attributes
    ----------
    box : (re_min, re_max, im_min, im_max)
        The window probed, normalized.
    variable : str
        ``"omega"`` (temporal problem) or ``"k"`` (the k box of a launch table).
    counts : dict
        Label of each parameter value -> zeros inside by the boundary winding (``None``
        where the boundary was not resolved or D is not finite on it).
    evaluations : int
        Dispersion evaluations spent.
    findings : list of Finding
        Warnings and notes, each listed once with the values it applies to.
    """

    box: Box
    variable: str
    counts: dict[str, int | None] = field(default_factory=dict)
    evaluations: int = 0
    findings: list[Finding] = field(default_factory=list)

    def add(self, level: str, text: str, where: str) -> None:
        """Record a finding at ``where``, merged with an identical one already found."""
        for f in self.findings:
            if f.level == level and f.text == text:
                if where not in f.where:
                    f.where.append(where)
                return
        self.findings.append(Finding(level, text, [where]))

    @property
    def warnings(self) -> list[Finding]:
        """The findings of level ``"warning"``."""
        return [f for f in self.findings if f.level == "warning"]


def _join(words: list[str]) -> str:
    """``a``, ``a and b``, ``a, b and c``."""
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def _c(z: complex) -> str:
    """A complex number for messages: ``1.2``, ``1.2 - 0.5i``."""
    z = complex(z)
    if z.imag == 0:
        return f"{z.real:.6g}"
    sign = "-" if z.imag < 0 else "+"
    return f"{z.real:.6g} {sign} {abs(z.imag):.4g}i"


def _edge_of(z: complex, box: Box) -> str:
    """The name of the edge of ``box`` nearest to the boundary point ``z``."""
    x0, x1, y0, y1 = box
    d = (abs(z.imag - y0), abs(z.real - x1), abs(z.imag - y1), abs(z.real - x0))
    return _EDGES[int(np.argmin(d))]


def _edge_turns(z: np.ndarray, fv: np.ndarray, box: Box) -> dict[str, float]:
    """Turns of the phase of f along each edge of the closed sample loop ``z``."""
    with np.errstate(all="ignore"):
        inc = np.angle(np.roll(fv, -1) / fv) / (2.0 * math.pi)
    turns = dict.fromkeys(_EDGES, 0.0)
    for zi, di in zip(z, inc, strict=True):
        turns[_edge_of(complex(zi), box)] += float(di)
    return turns


@dataclass(frozen=True)
class _Landau:
    """The largest Landau (or cyclotron) term exp(−ζ²) among a set of points."""

    decades: float  # log10 |exp(-zeta^2)|
    species: str
    harmonic: int | None  # None unmagnetized
    zeta: complex
    width: complex  # k w (unmagnetized) or k_par w_par [rad/s]
    point: int  # index of the point


def _largest_landau_term(case: Case, omega: np.ndarray, k: np.ndarray,
                         harmonics: dict[str, int] | None = None) -> _Landau | None:
    """The Maxwellian species part whose exp(−ζ²) is largest at the points (ω, k) [SI].

    ζ = (ω − k∥V − nΩ)/(k∥ w∥) with the harmonic n nearest to Re ω (magnetized, |n| at
    most ``harmonics[name]`` when given) or ζ = (ω − k∥V)/(k w) with
    w² = sin²θ w⊥² + cos²θ w∥² (unmagnetized): the argument of the plasma dispersion
    function (Swanson, *Plasma Waves*, 2nd ed., 2003, ch. 4, from memory).  Kappa species
    have no exponential term and are skipped.
    """
    from kinroots.physics.plasma import EV

    theta = math.radians(case.angle_deg)
    cos, sin = math.cos(theta), math.sin(theta)
    kpar, kperp = k * cos, k * sin
    B = case.plasma.B
    best: _Landau | None = None
    for s in case.plasma.species:
        if s.distribution != "maxwellian":
            continue
        for _, part in s.component_species():
            wpar = math.sqrt(2.0 * part.temperature_par * EV / part.mass)
            wperp = math.sqrt(2.0 * part.temperature_perp * EV / part.mass)
            base = kpar * part.drift
            with np.errstate(all="ignore"):
                if case.plasma.magnetized:
                    width = kpar * wpar
                    om_c = abs(part.cyclotron_frequency(B))
                    n = np.rint(((omega - base) / om_c).real) if om_c > 0 else 0 * omega.real
                    if harmonics is not None:
                        cap = harmonics.get(s.name, 0)
                        n = np.clip(n, -cap, cap)
                    zeta = (omega - base - n * om_c) / width
                else:
                    n = None
                    width = np.sqrt(kperp * kperp * wperp * wperp + kpar * kpar * wpar * wpar)
                    zeta = (omega - base) / width
                dec = -(zeta * zeta).real * math.log10(math.e)
            dec = np.where(np.isfinite(dec), dec, -np.inf)
            i = int(np.argmax(dec))
            if best is None or dec[i] > best.decades:
                best = _Landau(
                    float(dec[i]), s.name,
                    None if n is None else int(np.broadcast_to(n, dec.shape)[i]),
                    complex(np.broadcast_to(zeta, dec.shape)[i]),
                    complex(np.broadcast_to(width, dec.shape)[i]), i)
    return best


def _overflow_text(case: Case, f: NormalizedDispersion, z: np.ndarray, box: Box,
                   why: str, span: float) -> tuple[str, str]:
    """(level, text): why D is not finite in double precision at the boundary points ``z``
    (normalized ω) and what the survey does about it, in physics terms.

    ``why`` and ``span`` as returned by :func:`~kinroots.study.problem._log2_offset`: the
    survey halves a window whose |D| spans more than double precision holds (up to
    2^_MAX_SPLITS sub-boxes, each with its own constant scale; costly) and refuses one
    spanning more than _MAX_SPAN binary orders, or where D is not defined.
    """
    w_u = case.units.omega_unit
    unit = case.units.frequency_label
    d = f.dispersion
    edges = sorted({_edge_of(complex(p), box) for p in z}, key=_EDGES.index)
    on = f"{_join(edges)} edge{'s' if len(edges) > 1 else ''}"
    term = _largest_landau_term(case, z * w_u, np.full(z.shape, complex(d.k)),
                                d.harmonics if d.magnetized else None)
    if why == "undefined" and _undefined_note(f) != _TOO_WIDE:  # kappa cut
        return "warning", (f"D cannot be evaluated on the {on} near ω = {_c(complex(z[0]))} "
                           f"{unit}: " + _undefined_note(f).replace("zeta", "ζ"))
    if term is None or term.decades < 300.0:
        cause = "|D| exceeds double precision there"
        fix = "move that edge toward the real axis"
    else:
        p = complex(z[term.point])
        width = abs(term.width) / w_u
        depth = -p.imag / width
        if term.harmonic is None:
            what, at = f"k w = {width:.3g} {unit}", "its Landau resonance ω = k∥V"
        else:
            what = f"k∥w∥ = {width:.3g} {unit}"
            at = ("its Landau resonance ω = k∥V" if term.harmonic == 0
                  else f"its cyclotron harmonic {term.harmonic}Ω")
        cause = (f"the Landau term exp(-ζ²) of species {term.species} reaches about "
                 f"1e{term.decades:.0f} near ω = {_c(p)} {unit}, where the edge runs "
                 f"{depth:.0f} times its resonance width {what} below the real axis near "
                 f"{at} (exp(-ζ²) exceeds double precision beyond about "
                 f"{OVERFLOW_WIDTHS:.1f} widths)")
        fix = (f"a lower edge at about Im ω = {-SAFE_WIDTHS * width:.3g} {unit} or above "
               "(search.imag) avoids it")
    decades = span * math.log10(2.0)
    if why == "range" and span <= _MAX_SPAN:
        return "warning", (
            f"|D| spans about {decades:.0f} decades along the window's boundary, more than "
            f"double precision holds: {cause}. The survey will split the window into up "
            f"to {2 ** _MAX_SPLITS} sub-boxes, each with its own constant scale (costly, "
            "and it may end incomplete); "
            f"{fix}")
    return "warning", (
        f"D cannot be surveyed on this window: {cause}; |D| spans "
        + (f"about {decades:.0f} decades" if math.isfinite(span) else "beyond 2^(2^20)")
        + f" along the {on}, more than the survey's sub-boxes can hold (about "
        f"{_MAX_SPAN * math.log10(2.0):.0f} decades); {fix}")


def _pole_kind(case: Case, f: NormalizedDispersion, p: complex) -> str:
    """What the excluded point ``p`` (normalized ω) of D is, in words."""
    if p == 0:
        return "the point ω = 0 (a zero the electromagnetic scaling of D brings in)"
    if p.imag == 0 and f.dispersion.magnetized and f.dispersion.k_par == 0:
        w_u = case.units.omega_unit
        for s in case.plasma.species:
            om_c = abs(s.cyclotron_frequency(case.plasma.B)) / w_u
            n = round(p.real / om_c) if om_c > 0 else 0
            if n and abs(p.real - n * om_c) <= 1e-9 * abs(p.real):
                return (f"the cyclotron harmonic {n}Ω of species {s.name} (a pole of D at "
                        "k∥ = 0)")
    return "a pole of the continued kappa function"


def _poles_near_edges(case: Case, f: NormalizedDispersion, excluded: list[complex],
                      box: Box, probe: WindowProbe, where: str) -> None:
    x0, x1, y0, y1 = box
    diam = math.hypot(x1 - x0, y1 - y0)
    unit = case.units.frequency_label
    for p in excluded:
        dist = {}
        if x0 <= p.real <= x1:
            dist["bottom"], dist["top"] = abs(p.imag - y0), abs(p.imag - y1)
        if y0 <= p.imag <= y1:
            dist["left"], dist["right"] = abs(p.real - x0), abs(p.real - x1)
        if not dist:
            continue
        edge = min(dist, key=lambda e: dist[e])
        rel = dist[edge] / diam
        if rel >= POLE_NEAR:
            continue
        why = ("the survey cannot resolve the edge there (it moves the edge outward, "
               "across the pole)" if rel < EDGE_RESOLUTION else
               "the phase of D turns by half a turn within that distance, so the survey "
               "must sample the edge down to it (more evaluations; impossible closer than "
               f"{EDGE_RESOLUTION:g} of the window's size)")
        probe.add("warning",
                  f"{_pole_kind(case, f, p)} at ω = {_c(p)} {unit} lies "
                  f"{rel:.1e} of the window's size from its {edge} edge: {why}; move "
                  "that edge away from it", where)


def _count(probe: WindowProbe, func: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]],
           box: Box, excluded: list[complex], features: list[tuple[complex, float]],
           where: str, unit: str, symbol: str) -> None:
    """Zero count from the boundary winding (the survey's phase test) and phase turns."""
    counter = BoundaryCounter(box, excluded=excluded, max_points=MAX_BOUNDARY_SAMPLES,
                              features=(lambda _p: features) if features else None)
    (bc,) = counter.count([0.0], family=lambda _p: func)
    probe.evaluations += counter.evaluations
    probe.counts[where] = bc.count
    if bc.count is None:
        if bc.where is None:
            probe.add("warning", "the winding of D around a pole inside the window is not "
                      "resolved: the survey will report its count as unknown", where)
            return
        edge = _edge_of(bc.where, box)
        if "not finite" in bc.note:
            probe.add("warning", f"D is zero or not finite on the {edge} edge near "
                      f"{symbol} = {_c(bc.where)} {unit}: a root or a pole of D lies on the "
                      "edge, or D overflows there; move that edge", where)
            return
        probe.add("warning",
                  f"the phase of D along the {edge} edge is not resolved near {symbol} = "
                  f"{_c(bc.where)} {unit} with {MAX_BOUNDARY_SAMPLES} boundary samples: a "
                  "root or pole of D lies on or very close to the edge, or the phase turns "
                  "very fast there (many roots or a narrow resonance next to it); the "
                  "survey will be costly there and may move the edge", where)
        return
    z = counter.loop
    fv, _ = func(z)
    probe.evaluations += z.size
    turns = _edge_turns(z, np.asarray(fv, dtype=complex), box)
    edge = max(turns, key=lambda e: abs(turns[e]))
    if bc.count >= MANY_ZEROS:
        probe.add("warning",
                  f"the window holds {bc.count} zeros of D (boundary winding; the phase of "
                  f"D turns {abs(turns[edge]):.0f} times along its {edge} edge): the survey "
                  "isolates and polishes each, so it will be slow and may exhaust its "
                  "evaluation budget; a narrower window is cheaper", where)


def probe_window(case: Case, ks: list[float] | None = None) -> WindowProbe:
    """A quick look at D on the edges of the search window at the scan's first and last k.

    Parameters
    ----------
    case : Case
        Validated case (its window from :func:`kinroots.study.problem.window`).
    ks : list of float, optional
        Normalized wavenumbers to probe (default: the first and the last of the scan).

    Returns
    -------
    WindowProbe
        Zero counts, evaluations spent and findings: D not finite on an edge (with the
        species and depth in resonance widths, and whether the survey's constant
        rescaling handles it), excluded poles on or next to an edge, a phase that turns
        many times along an edge or many zeros.
    """
    box = window(case)
    probe = WindowProbe(box=box, variable="omega")
    if ks is None:
        kv = [float(k) for k in case.k_values]
        ks = list(dict.fromkeys((kv[0], kv[-1])))
    unit = case.units.frequency_label
    x0, x1, y0, y1 = box
    dr, di = 0.05 * (x1 - x0), 0.05 * (y1 - y0)
    wide = (x0 - dr, x1 + dr, y0 - di, y1 + di)
    for k in ks:
        where = f"k = {k:g}"
        f = function_at(case, k)
        excluded, features = f.excluded(wide), f.features(wide)
        _poles_near_edges(case, f, excluded, box, probe, where)
        z, _ = _boundary_log2(f, box)
        fv, dv = f(z)
        probe.evaluations += 2 * z.size  # D, and log|D| at the same points
        bad = ~(np.isfinite(fv) & np.isfinite(dv))
        if np.any(bad):
            offset, why, span = _log2_offset(f, box)
            probe.evaluations += z.size
            if not offset:
                probe.add(*_overflow_text(case, f, z[bad], box, why, span), where)
                probe.counts[where] = None
                continue
            f.dispersion.log2_offset = offset
            edges = sorted({_edge_of(complex(p), box) for p in z[bad]}, key=_EDGES.index)
            probe.add("note",
                      f"|D| exceeds double precision on the {_join(edges)} "
                      f"edge{'s' if len(edges) > 1 else ''} (up to about "
                      f"1e{_offset_decades(offset)}): the survey divides D by a constant "
                      "power of two (same roots) and can survey the window", where)
        _count(probe, f, box, excluded, features, where, unit, "ω")
    return probe


def probe_launch(case: Case) -> WindowProbe | None:
    """The same look at the k box of the case's ``[launch]`` table (``None`` without one).

    At the first and the last driving frequency: D finite on the box's edges (or which
    species' Landau term overflows there) and the zero count from the boundary winding.
    """
    spec = case.launch
    if spec is None:
        return None
    box: Box = (*spec.k_real, *spec.k_imag)
    probe = WindowProbe(box=box, variable="k")
    w_u, l_u = case.units.omega_unit, case.units.length_unit
    unit = f"/{case.units.length_label}"
    freqs = [float(v) for v in spec.frequencies_hz]
    x0, x1, y0, y1 = box
    t = np.linspace(0.0, 1.0, 65)
    z = np.concatenate((x0 + (x1 - x0) * t + 1j * y0, x1 + 1j * (y0 + (y1 - y0) * t),
                        x1 - (x1 - x0) * t + 1j * y1, x0 + 1j * (y1 - (y1 - y0) * t)))
    for hz in dict.fromkeys((freqs[0], freqs[-1])):
        where = f"f = {hz:.6g} Hz"
        om = 2.0 * math.pi * hz / w_u
        g = SpatialFunction(case, om)
        fv, dv = g(z)
        probe.evaluations += z.size
        bad = ~(np.isfinite(fv) & np.isfinite(dv))
        if np.any(bad):
            zb = z[bad]
            edges = sorted({_edge_of(complex(p), box) for p in zb}, key=_EDGES.index)
            offset, why_scale, span = _log2_offset(g, box)
            probe.evaluations += z.size
            on = f"{_join(edges)} edge{'s' if len(edges) > 1 else ''}"
            if offset:
                g.log2_offset = offset
                probe.add("note", f"|D| exceeds double precision on the {on} of the k box "
                          f"(up to about 1e{_offset_decades(offset)}): the survey divides D "
                          "by a constant power of two (same roots) and can survey the box",
                          where)
                _count(probe, g, box, [], [], where, unit, "k")
                continue
            if why_scale == "range" and span <= _MAX_SPAN:
                probe.add("note", f"|D| exceeds double precision on the {on} of the k box "
                          f"and spans about {span:.0f} binary orders on it, more than one "
                          "constant scale holds: the survey splits the box into sub-boxes, "
                          "each with its own scale (costly; a box whose Im k stays smaller "
                          "against Re k is cheaper)", where)
                probe.counts[where] = None
                continue
            term = _largest_landau_term(case, np.full(zb.shape, om * w_u, dtype=complex),
                                        zb / l_u)
            why = ("a term of the dispersion function exceeds double precision there"
                   if term is None or term.decades < 300.0 else
                   f"the Landau term exp(-ζ²) of species {term.species} reaches about "
                   f"1e{term.decades:.0f} there (ζ = {term.zeta:.3g}; it exceeds double "
                   f"precision once |Im ζ| passes about {OVERFLOW_WIDTHS:.1f} near Re ζ = 0)")
            probe.add("warning",
                      f"D is not finite on the {_join(edges)} edge"
                      f"{'s' if len(edges) > 1 else ''} of the k box near k = "
                      f"{_c(complex(zb[0]))} {unit}: {why}; keep the box where k w is "
                      "larger against the frequency (larger Re k, smaller |Im k|)", where)
            probe.counts[where] = None
            continue
        _count(probe, g, box, [], [], where, unit, "k")
    return probe
