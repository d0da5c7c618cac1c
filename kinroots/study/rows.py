"""Table rows and summary metadata of root tables (branches.csv, roots.csv, launch.csv)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any, Protocol

import numpy as np

from kinroots import __version__
from kinroots.io.case import Case
from kinroots.physics import modes
from kinroots.physics.models.species_models import branch_point_note
from kinroots.physics.plasma import CONVENTIONS, derived_quantities
from kinroots.roots import (
    RootResult,
    SurveyResult,
)
from kinroots.study.problem import MATCH_FRACTION, window, window_choice


class _Branch(Protocol):
    """What :func:`branch_rows` reads of a traced branch
    (:class:`kinroots.study.solve.TracedBranch`)."""

    id: int
    verified_at: set[float]

    def sorted_points(self) -> list[tuple[float, RootResult]]: ...


class _Traced(Protocol):
    """What :func:`branch_rows` reads of a solution (:class:`kinroots.study.solve.Solution`;
    a protocol here, so that this module does not import the solver that imports it)."""

    @property
    def case(self) -> Case: ...

    @property
    def branches(self) -> Sequence[_Branch]: ...


def relative_error(r: RootResult) -> float | None:
    """Estimated relative error of a root, |δz|/|z|: the Newton correction computed at the
    reported value (``refined``), divided by its modulus.  For a simple zero the error
    of the value is of that size (or of the root's ``noise_error``, where D is rounding
    noise at the root's scale, if larger); unlike the residual |D|, whose scale depends on how the
    model writes D, it compares between models (common practice).  None for a failed
    root or when no correction was computed."""
    if not r.converged or r.refined is None or r.value == 0:
        return None
    # where D is rounding noise at the root's scale, the noise bounds the accuracy
    return max(abs(r.value - r.refined), r.noise_error) / abs(r.value)


def relative_residual(case: Case, k: complex, omega_si: complex) -> float | None:
    """|D| relative to the size of what D is built from, at normalized ``k`` and ω [rad/s]
    (:meth:`kinroots.physics.dispersion.Dispersion.relative_residual`); None if it cannot
    be evaluated."""
    from kinroots.study.problem import dispersion_at

    try:
        value = float(dispersion_at(case, k).relative_residual(np.array([omega_si]))[0])
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        return None
    return value if math.isfinite(value) else None


def below_resolution(z: complex, rel_error: float | None, rtol: float) -> str:
    """Which component of a root is rounding noise: ``"real"``, ``"imag"`` or ``""``.

    A component x of z is resolved when |x| > GROWTH_RESOLUTION · ε · |z|, ε =
    max(rtol, relative error of z): below that its sign and size are not known (e.g.
    ω_r = −5e-204 on a purely growing root, a Landau damping far below the root's
    accuracy).  The value is still written, with this mark (issue 18).
    """
    eps = max(rtol, rel_error) if rel_error is not None and math.isfinite(rel_error) else rtol
    floor = GROWTH_RESOLUTION * eps * abs(z)
    parts = [name for name, x in (("real", z.real), ("imag", z.imag)) if abs(x) <= floor]
    return " ".join(parts)


def root_row(case: Case, branch: int | str, k: float, r: RootResult,
             verified: bool | None = None) -> dict[str, Any]:
    """One table row (columns of :data:`kinroots.io.tables.ROOT_COLUMNS`).

    Converged roots also carry their mode identity (polarization, handedness, δB/δE,
    electrostatic fraction, per-species δn_s/n_s): see :mod:`kinroots.physics.modes`.
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
        "relative_error": relative_error(r),
        "relative_residual": (relative_residual(case, complex(k), w_si) if r.converged
                              else None),
        "below_resolution": (below_resolution(r.value, relative_error(r), case.solver.tolerance)
                             if r.converged else None),
        "converged": bool(r.converged),
        "verified": bool(r.verified if verified is None else verified),
        "multiplicity": int(r.multiplicity),
        "iterations": int(r.iterations),
        "evaluations": int(r.evaluations),
        "status": r.status.name.lower(),
        "reason": with_note(r.reason, branch_point_note(
            case.plasma, omega=w_si, k=complex(units.k_to_si(k)), angle_deg=case.angle_deg)),
        **identity,
    }


def survey_rows(case: Case, k: float, s: SurveyResult) -> list[dict[str, Any]]:
    """Rows of roots.csv: every root of survey ``s`` at normalized ``k``; an incomplete
    survey adds a row (``converged`` false, status "incomplete") saying what is missing."""
    rows = [root_row(case, i, k, r) for i, r in enumerate(s.roots)]
    if not s.complete:
        rows.append({"branch": "", "k": k, "converged": False, "verified": False,
                     "k_per_m": float(case.units.k_to_si(k)), "status": "incomplete",
                     "reason": f"{s.count_text}, {len(s.values)} found: "
                               + "; ".join(s.notes)})
    return rows


def with_note(reason: str, note: str) -> str:
    """``reason`` with ``note`` appended (either may be empty)."""
    return "; ".join(x for x in (reason, note) if x)


def branch_rows(sol: _Traced) -> list[dict[str, Any]]:
    """Rows of branches.csv, branch by branch, k increasing, with the ``wave`` each
    branch belongs to and that wave's name (:func:`link_waves`, :func:`wave_name`)."""
    rows = []
    for b in sol.branches:
        for k, r in b.sorted_points():
            rows.append(root_row(sol.case, b.id, k, r, verified=k in b.verified_at))
    waves = link_waves(sol.case, rows)
    names: dict[int, str] = {}
    for wid in set(waves.values()):
        names[wid] = wave_name(sol.case, [row for row in rows
                                          if waves.get(row["branch"]) == wid])
    for row in rows:
        wave = waves.get(row["branch"])
        row["wave"] = wave
        row["wave_name"] = names.get(wave) if wave is not None else None
    return rows


def _median(values: list[Any]) -> float | None:
    xs = sorted(float(v) for v in values if v is not None and math.isfinite(float(v)))
    return xs[len(xs) // 2] if xs else None


def wave_name(case: Case, rows: list[dict[str, Any]]) -> str:
    """A name for a wave from its mode identity (median over its converged rows).

    The rule (written down for the README): electrostatic models, "Langmuir" or "ion
    acoustic" in unmagnetized plasmas where :func:`_electrostatic_name` recognizes them,
    else "electrostatic"; electromagnetic, "left-hand" or "right-hand" where the handedness
    is below −0.5 or above 0.5 (sense of rotation of the transverse field about B, or about
    z when B = 0), else "compressive" where |δB_z|/|δB| > 0.5, else "quasi-electrostatic"
    where the electrostatic fraction exceeds 0.9, else "transverse, linear" where it is
    below 0.1 (δE across k, not rotating: |handedness| < 0.5 or undefined), else
    "unidentified".  When Re ω is rounding noise on every row (``below_resolution``) the
    name starts with "purely growing" or "purely damped" (sign of the median γ), e.g.
    "purely growing, transverse, linear" for a Weibel or filamentation mode.
    """
    good = [r for r in rows if r.get("converged")]
    name = _identity_name(case, good)
    if good and all("real" in str(r.get("below_resolution") or "").split() for r in good):
        gamma = _median([r.get("omega_imag") for r in good])
        if gamma is not None and gamma != 0:
            return f"purely {'growing' if gamma > 0 else 'damped'}, {name}"
    return name


def _electrostatic_name(case: Case, good: list[dict[str, Any]]) -> str:
    """"Langmuir", "ion acoustic" or "electrostatic" for a wave of an electrostatic model.

    Unmagnetized plasmas only (B = 0), from the median ω_r and phase speed v_φ = ω_r/k of
    the wave's rows: "Langmuir" where ω_r ≥ 0.5 ω_pe (ω_pe² summed over the electron
    species; the Bohm–Gross wave ω² = ω_pe² + 3k²v_e² lies above ω_pe), "ion acoustic"
    where ω_r ≤ 1.05 ω_pi (ω_pi² summed over the ions; the ion acoustic wave
    ω = k c_s / (1 + k²λ_De²)^½ stays below ω_pi) and v_φ exceeds twice the largest ion
    thermal speed (it is not an ion thermal mode), else "electrostatic".  Chen,
    *Introduction to Plasma Physics and Controlled Fusion*, 3rd ed. 2016, ch. 4 (the two
    waves and their frequency ranges; chapter from memory).
    """
    plasma = getattr(case, "plasma", None)
    units = getattr(case, "units", None)
    if plasma is None or units is None or plasma.magnetized:
        return "electrostatic"
    w_r = _median([r.get("omega_real") for r in good])
    k = _median([r.get("k_per_m") for r in good])
    if w_r is None or k is None or k <= 0:
        return "electrostatic"
    w_r = abs(w_r) * units.omega_unit
    electrons = [s for s in plasma.species if s.is_electron]
    ions = [s for s in plasma.species if not s.is_electron]
    wpe = math.sqrt(sum(s.plasma_frequency**2 for s in electrons))
    if electrons and w_r >= 0.5 * wpe:
        return "Langmuir"
    if ions:
        wpi = math.sqrt(sum(s.plasma_frequency**2 for s in ions))
        v_ti = max(max(s.thermal_speed_par, s.thermal_speed_perp) for s in ions)
        if w_r <= 1.05 * wpi and w_r / k > 2.0 * v_ti:
            return "ion acoustic"
    return "electrostatic"


def _identity_name(case: Case, good: list[dict[str, Any]]) -> str:
    if case.model != "electromagnetic":
        return _electrostatic_name(case, good)
    hand = _median([r.get("handedness") for r in good])
    comp = _median([r.get("magnetic_compressibility") for r in good])
    esf = _median([r.get("electrostatic_fraction") for r in good])
    if hand is not None and hand <= -0.5:
        return "left-hand"
    if hand is not None and hand >= 0.5:
        return "right-hand"
    if comp is not None and comp > 0.5:
        return "compressive"
    if esf is not None and esf > 0.9:
        return "quasi-electrostatic"
    if esf is not None and esf < 0.1:
        return "transverse, linear"
    return "unidentified"


def link_waves(case: Case, rows: list[dict[str, Any]]) -> dict[Any, int]:
    """Branch id -> wave id: branches that are pieces of one wave share the wave id.

    A branch that ends at the window's edge (its last converged root within 5 % of the
    window's size from an edge) is continued by a later branch that starts, after the
    gap, near the same edge, where the first branch's last two roots extrapolate
    linearly (within 5 % of the window's width in Re ω, plus a quarter of the
    extrapolated move), with the same sense of rotation (handedness of the same sign
    where both exceed 0.5 in size).  Each branch continues at most one other, the best
    match first; the wave id is the id of its first branch.  Common practice
    (continuity of ω and of the polarization across a gap); a piece that matches none
    is a wave of its own.
    """
    x0, x1, y0, y1 = window(case)
    span_r, span_i = x1 - x0, y1 - y0
    pieces: dict[Any, list[dict[str, Any]]] = {}
    for r in rows:
        if r.get("converged") and r.get("branch") not in (None, ""):
            pieces.setdefault(r["branch"], []).append(r)

    def edge(w: complex) -> tuple[str, float]:
        d = {"bottom": (w.imag - y0) / span_i, "top": (y1 - w.imag) / span_i,
             "left": (w.real - x0) / span_r, "right": (x1 - w.real) / span_r}
        side = min(d, key=lambda s: d[s])
        return side, d[side]

    def hand(rs: list[dict[str, Any]]) -> float | None:
        return _median([r.get("handedness") for r in rs])

    ends, starts = {}, {}
    for b, rs in pieces.items():
        rs.sort(key=lambda r: r["k"])
        first = complex(rs[0]["omega_real"], rs[0]["omega_imag"])
        last = complex(rs[-1]["omega_real"], rs[-1]["omega_imag"])
        ends[b] = (rs[-1]["k"], last, edge(last), rs)
        starts[b] = (rs[0]["k"], first, edge(first), rs)
    candidates = []
    for a, (ka, wa, (ea, da), ra) in ends.items():
        if da > 0.05:
            continue
        slope = 0.0
        if len(ra) >= 2 and ra[-1]["k"] != ra[-2]["k"]:
            slope = (ra[-1]["omega_real"] - ra[-2]["omega_real"]) / (ra[-1]["k"] - ra[-2]["k"])
        for b, (kb, wb, (eb, db), rb) in starts.items():
            if b == a or kb <= ka or db > 0.05 or eb != ea:
                continue
            ha, hb = hand(ra), hand(rb)
            if ha is not None and hb is not None and abs(ha) > 0.5 and abs(hb) > 0.5 \
                    and (ha > 0) != (hb > 0):
                continue
            move = slope * (kb - ka)
            miss = abs(wa.real + move - wb.real)
            if miss <= 0.05 * span_r + 0.25 * abs(move):
                candidates.append((miss, a, b))
    follows: dict[Any, Any] = {}
    taken: set[Any] = set()
    for _, a, b in sorted(candidates, key=lambda c: c[0]):
        if a in follows or b in taken:
            continue
        follows[a] = b
        taken.add(b)
    waves: dict[Any, int] = {}
    for b in sorted(pieces, key=lambda x: (starts[x][0], str(x))):
        if b in waves:
            continue
        wid, cur = int(b), b
        while cur is not None and cur not in waves:
            waves[cur] = wid
            cur = follows.get(cur)
    return waves


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
    keep = ("branch", "k", "omega_real", "omega_imag", "k_per_m", "freq_hz", "gamma_per_s",
            "below_resolution")

    def entry(r: dict[str, Any]) -> dict[str, Any]:
        e = {k: r.get(k) for k in keep}
        w = complex(r["omega_real"], r["omega_imag"])
        e["gamma_resolution_per_s"] = abs(r["gamma_per_s"] / w.imag) * GROWTH_RESOLUTION \
            * max(rtol, r.get("relative_error") or 0.0) * abs(w) if w.imag else None
        # a component that is rounding noise is 0 here and what derives from it is empty,
        # with the reason (branches.csv keeps the values and the mark)
        noise = str(r.get("below_resolution") or "").split()
        notes = []
        if "imag" in noise:
            e["omega_imag"], e["gamma_per_s"] = 0.0, None
            notes.append("Im(omega) below resolution (|gamma| < gamma_resolution_per_s): "
                         "shown as 0, gamma_per_s left empty")
        if "real" in noise:
            e["omega_real"], e["freq_hz"] = 0.0, None
            notes.append("Re(omega) below resolution (purely growing or damped): shown as "
                         "0, freq_hz left empty")
        if notes:
            e["unresolved"] = "; ".join(notes)
        return e

    return {
        "fastest_growing": entry(growing) if growing else None,
        "least_damped": entry(least) if least else None,
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
                "relative_error": "estimated |delta omega| / |omega| of the root (its last "
                                  "Newton correction): comparable between models",
            },
        },
        "derived": derived_quantities(case.plasma, units),
        "search_window": window_choice(case).as_json(),
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


