"""Validation: beam instabilities (electrostatic, unmagnetized, k along the drifts).

1. Symmetric two-stream: two equal electron beams, each of density n/2, at ±v0, ions
   fixed.  The total plasma frequency is ω_pe, each beam has ω_b² = ω_pe²/2.  The cold
   dispersion relation is 1 = ω_b²[(ω − kv0)⁻² + (ω + kv0)⁻²] (N. A. Krall and
   A. W. Trivelpiece, *Principles of Plasma Physics*, 1973, ch. 9, from memory).
   Derived here: it is a quadratic in ω², ω² = k²v0² + ω_b² − ω_b√(4k²v0² + ω_b²).
   Its most negative value is reached at kv0 = (√3/2)ω_b, where ω² = −ω_b²/4.  So
   γ_max = ω_b/2 = ω_pe/(2√2).  The test re-derives this maximum with numpy.roots and a
   bounded scalar maximizer (scipy), then checks that the kinetic root approaches
   the cold one as T → 0.
2. Buneman: cold electrons drifting at v0 through cold ions, 1 = ω_pi²/ω² + ω_pe²/(ω − kv0)².
   The maximum growth is γ_max ≈ (√3/2)(m_e/(2m_i))^{1/3} ω_pe near kv0 ≈ ω_pe
   (O. Buneman, Phys. Rev. Lett. 1, 8, 1958 and Phys. Rev. 115, 503, 1959, from memory).
   The formula is the leading term in (m_e/m_i)^{1/3}.  The exact cold maximum comes
   from numpy.roots of the quartic.  The kinetic root approaches it as T → 0.
3. Bump on tail (warm, tenuous beam): Landau's growth rate
   γ = (π/2)(ω_pe³/k²) F′(ω/k), with F the 1-D velocity distribution of all electrons,
   normalized to 1 (L. D. Landau, J. Phys. USSR 10, 25, 1946; e.g. Krall & Trivelpiece
   1973, ch. 8, from memory).  It is valid for n_b/n ≪ 1 and γ ≪ k v_tb.

How the T → 0 tolerances are set (derived here): the kinetic beam response at
|ω − kv| ≫ k v_t is the cold one plus the warm-fluid term 3k²v_t²/(ω − kv)⁴, with
v_t = √(T/m).  To first order this shifts the root by δω = −δD/D′.  The tolerance on
each part of ω is 2|δω|, twice the leading thermal correction.  The test also checks
that the difference falls like T (by 4× per halving of v_t/v0, to the O(T²) remainder).
"""

from __future__ import annotations

import functools
import math

import numpy as np
from _checks import Check, assert_all, validation
from scipy.constants import atomic_mass, m_e, m_p
from scipy.constants import c as C_LIGHT
from scipy.constants import e as E_CHARGE
from scipy.optimize import minimize_scalar

from kinroots.io.case import Case, parse_case
from kinroots.study.problem import survey

FAMILY = "Beam instabilities"
V0 = 0.01 * C_LIGHT  # beam speed [m/s] (non-relativistic)
THERMAL_RATIOS = (0.04, 0.02, 0.01)  # v_t / v0
ROOT_RTOL = 1e-13
TWO_STREAM_SOURCE = (
    "cold two-stream 1 = ω_b²[(ω−kv0)⁻² + (ω+kv0)⁻²] (Krall & Trivelpiece 1973 ch. 9, from "
    "memory); γ_max = ω_pe/(2√2) derived here"
)
BUNEMAN_SOURCE = (
    "Buneman γ_max = (√3/2)(m_e/2m_i)^(1/3) ω_pe, O. Buneman, Phys. Rev. Lett. 1, 8 (1958); "
    "Phys. Rev. 115, 503 (1959) (from memory)"
)
BUMP_SOURCE = (
    "Landau growth γ = (π/2)(ω_pe³/k²)F′(ω/k), Landau, J. Phys. USSR 10, 25 (1946); Krall & "
    "Trivelpiece 1973 ch. 8 (from memory)"
)


def _case(species: list[dict], window: tuple[float, float, float, float],
          units: tuple[str, str]) -> Case:
    return parse_case(
        {
            "title": "Beam instability (validation)",
            "species": species,
            "wave": {"model": "electrostatic", "angle": 0.0},
            "scan": {"k": {"start": 0.01, "stop": 1.0, "points": 2}},
            "units": {"frequency": units[0], "length": units[1]},
            "search": {"real": list(window[:2]), "imag": list(window[2:])},
            "solver": {"tolerance": ROOT_RTOL},
        },
        "<validation: beams>",
    )


def _temperature_ev(thermal_ratio: float, mass: float = m_e) -> float:
    """Temperature [eV] giving v_t = √(T/m) = thermal_ratio · V0."""
    return (thermal_ratio * V0) ** 2 * mass / E_CHARGE


# ------------------------------------------------------------------------- two-stream

def cold_two_stream_roots(x: float) -> np.ndarray:
    """Roots ω/ω_pe of the cold symmetric two-stream quartic at x = kv0/ω_pe."""
    wb2 = 0.5
    # (ω² − x²)² − 2ω_b²(ω² + x²) = 0
    return np.roots([1.0, 0.0, -2 * x * x - 2 * wb2, 0.0, x**4 - 2 * wb2 * x * x])


def cold_two_stream_maximum() -> tuple[float, float]:
    """(x, γ) of the largest cold growth rate over kv0/ω_pe (numpy.roots + maximizer)."""
    res = minimize_scalar(lambda x: -cold_two_stream_roots(x).imag.max(), bounds=(0.3, 1.0),
                          method="bounded", options={"xatol": 1e-10})
    return float(res.x), float(-res.fun)


def kinetic_two_stream(x: float, thermal_ratio: float) -> complex:
    """Kinetic root ω/ω_pe at kv0/ω_pe = x with beams of v_t = thermal_ratio·v0."""
    t = _temperature_ev(thermal_ratio)
    species = [
        {"name": "b1", "charge": -1, "mass": "electron", "density": 0.5e18,
         "temperature": t, "drift": V0},
        {"name": "b2", "charge": -1, "mass": "electron", "density": 0.5e18,
         "temperature": t, "drift": -V0},
    ]
    # units ω_b1 = ω_pe/√2 and c/ω_b1: k̂ = k c/ω_b1, so kv0/ω_pe = k̂ (v0/c)/√2.
    # Window in the upper half plane: below the real axis the Landau exponential of
    # these near-cold beams overflows.
    case = _case(species, (-0.3, 0.3, 0.05, 0.9), ("plasma:b1", "inertial:b1"))
    s = survey(case, x * math.sqrt(2) / (V0 / C_LIGHT))
    assert s.complete and len(s.values) == 1, s.notes
    return complex(s.values[0]) / math.sqrt(2)


def two_stream_warm_shift(w: complex, x: float, thermal_ratio: float) -> complex:
    """First-order warm-fluid shift δω of the cold two-stream root w at kv0 = x."""
    wb2, kvt2 = 0.5, (x * thermal_ratio) ** 2
    d_d = -3 * wb2 * kvt2 * ((w - x) ** -4 + (w + x) ** -4)
    d_prime = 2 * wb2 * ((w - x) ** -3 + (w + x) ** -3)
    return -d_d / d_prime


@validation(FAMILY)
def two_stream_checks() -> list[Check]:
    """Cold maximum (numpy) against ω_pe/(2√2); kinetic root → cold root as T → 0."""
    x0, g_np = cold_two_stream_maximum()
    case = "two equal cold electron beams ±v0, n/2 each, fixed ions"
    out = [Check(
        FAMILY, "cold γ_max/ω_pe (numpy.roots, maximized)", case, TWO_STREAM_SOURCE,
        1 / (2 * math.sqrt(2)), g_np, 1e-12,
        "numpy.roots in double precision; the maximizer's xatol = 1e-10 enters squared",
    ), Check(
        FAMILY, "kv0/ω_pe at cold γ_max (numpy.roots)", case, TWO_STREAM_SOURCE,
        math.sqrt(3) / (2 * math.sqrt(2)), x0, 1e-6,
        "a maximum is located to ~√(double precision) ~ 1e-8; 1e-6 relative",
    )]
    x = math.sqrt(3) / (2 * math.sqrt(2))
    cold = 1j / (2 * math.sqrt(2))
    diffs = []
    for r in THERMAL_RATIOS:
        w = kinetic_two_stream(x, r)
        tol = 2 * abs(two_stream_warm_shift(cold, x, r))
        kcase = f"two electron beams ±v0, v_t/v0 = {r}, kv0 = (√3/2)ω_b"
        reason = "twice the leading warm-fluid correction |δω| (derived here)"
        out += [
            Check(FAMILY, f"γ/ω_pe, v_t/v0 = {r}", kcase, TWO_STREAM_SOURCE, cold.imag,
                  w.imag, tol, reason, relative=False),
            Check(FAMILY, f"Re ω/ω_pe, v_t/v0 = {r}", kcase, TWO_STREAM_SOURCE, 0.0,
                  w.real, 1e-12, "symmetric beams: purely growing (root tolerance)",
                  relative=False),
        ]
        diffs.append(abs(w - cold))
    out.append(Check(
        FAMILY, "ratio of |ω − ω_cold| at v_t/v0 = 0.02 and 0.01", "two-stream, T → 0",
        "thermal correction ∝ T (warm-fluid expansion, derived here)", 4.0,
        diffs[1] / diffs[2], 0.01, "O(T²) remainder: relative (v_t/v0)²·O(10) ≲ 1 %",
    ))
    return out


# --------------------------------------------------------------------------- Buneman

def cold_buneman_roots(x: float, mass_ratio: float) -> np.ndarray:
    """Roots ω/ω_pe of ω²(ω − x)² − μ(ω − x)² − ω² = 0, x = kv0/ω_pe, μ = m_e/m_i."""
    w2 = np.poly1d([1.0, 0.0, 0.0])
    q = np.poly1d([1.0, -x])
    return (w2 * q * q - mass_ratio * q * q - w2).roots


@functools.cache
def cold_buneman_maximum(mass_ratio: float) -> tuple[float, complex]:
    """(x, ω) of the largest cold Buneman growth rate over kv0/ω_pe (numpy.roots)."""

    def growing(x: float) -> complex:
        return complex(max(cold_buneman_roots(x, mass_ratio), key=lambda z: z.imag))

    res = minimize_scalar(lambda x: -growing(x).imag, bounds=(0.8, 1.2), method="bounded",
                          options={"xatol": 1e-10})
    return float(res.x), growing(float(res.x))


def kinetic_buneman(x: float, thermal_ratio: float) -> complex:
    """Kinetic root ω/ω_pe (hydrogen) at kv0 = x ω_pe, both species at v_te = r·v0."""
    t = _temperature_ev(thermal_ratio)
    species = [
        {"name": "e", "charge": -1, "mass": "electron", "density": 1e18, "temperature": t,
         "drift": V0},
        {"name": "p", "charge": 1, "mass": "proton", "density": 1e18, "temperature": t},
    ]
    case = _case(species, (0.01, 0.1, 0.02, 0.1), ("plasma:e", "inertial:e"))
    s = survey(case, x / (V0 / C_LIGHT))
    assert s.complete and len(s.values) == 1, s.notes
    return complex(s.values[0])


def buneman_warm_shift(w: complex, x: float, thermal_ratio: float, mu: float) -> complex:
    """First-order warm-fluid shift of the cold Buneman root (equal temperatures)."""
    kvt2 = (x * thermal_ratio) ** 2  # (k v_te)², units of ω_pe
    d_d = -3 * kvt2 * (w - x) ** -4 - 3 * mu * (mu * kvt2) * w**-4
    d_prime = 2 * mu * w**-3 + 2 * (w - x) ** -3
    return -d_d / d_prime


@validation(FAMILY)
def buneman_checks() -> list[Check]:
    """Buneman's formula against the exact cold maximum; kinetic → cold as T → 0."""
    out = []
    for name, mi in (("hydrogen", m_p), ("argon", 39.948 * atomic_mass)):
        mu = m_e / mi
        _, w = cold_buneman_maximum(mu)
        ga = math.sqrt(3) / 2 * (mu / 2) ** (1 / 3)
        out.append(Check(
            FAMILY, "γ_max/ω_pe, exact cold maximum (numpy.roots)",
            f"cold electrons through cold {name} ions", BUNEMAN_SOURCE, ga, w.imag,
            mu ** (1 / 3),
            "the formula is the leading term in (m_e/m_i)^(1/3); first neglected order "
            "(m_e/m_i)^(1/3) relative",
        ))
    mu = m_e / m_p
    x0, cold = cold_buneman_maximum(mu)
    for r in THERMAL_RATIOS:
        w = kinetic_buneman(x0, r)
        tol = 2 * abs(buneman_warm_shift(cold, x0, r, mu))
        kcase = f"electrons at v0 through hydrogen ions, v_te/v0 = {r}, Te = Ti"
        src = "cold Buneman root at the same k (numpy.roots of the cold quartic)"
        reason = "twice the leading warm-fluid correction |δω| (derived here)"
        out += [
            Check(FAMILY, f"Re ω/ω_pe at cold-maximum k, v_te/v0 = {r}", kcase, src,
                  cold.real, w.real, tol, reason, relative=False),
            Check(FAMILY, f"γ/ω_pe at cold-maximum k, v_te/v0 = {r}", kcase, src,
                  cold.imag, w.imag, tol, reason, relative=False),
        ]
    return out


# ----------------------------------------------------------------------- bump on tail

BUMP_CASES = ((3e-5, 10.0, 1.0), (1e-4, 10.0, 1.0))  # (n_b/n, v_b/v_te, v_tb/v_te)


def bump_case(fraction: float, vb: float, vtb: float) -> Case:
    """Bulk Maxwellian (100 eV) plus a tenuous warm beam; units ω_p(bulk), λ_D(bulk)."""
    te = 100.0
    vte = math.sqrt(te * E_CHARGE / m_e)
    species = [
        {"name": "e", "charge": -1, "mass": "electron", "density": 1e18 * (1 - fraction),
         "temperature": te},
        {"name": "beam", "charge": -1, "mass": "electron", "density": 1e18 * fraction,
         "temperature": te * vtb**2, "drift": vb * vte},
    ]
    return _case(species, (0.9, 1.3, -0.01, 0.05), ("plasma:e", "debye:e"))


def bump_resonance_k(vb: float, vtb: float) -> float:
    """k λ_D whose Bohm–Gross phase speed √(1+3k²)/k equals v_b − v_tb (steepest slope)."""
    vr = vb - vtb
    return 1 / math.sqrt(vr * vr - 3)


def landau_growth(fraction: float, vb: float, vtb: float, k: float) -> float:
    """(π/2)(ω_pe³/k²)F′(v) at the Bohm–Gross resonance, in units of ω_p(bulk)."""
    v = math.sqrt(1 + 3 * k * k) / k
    f_prime = (
        -fraction * (v - vb) / vtb**3 * math.exp(-((v - vb) ** 2) / (2 * vtb**2))
        - (1 - fraction) * v * math.exp(-v * v / 2)
    ) / math.sqrt(2 * math.pi)
    wpe3 = (1 - fraction) ** -1.5  # total ω_pe in units of the bulk one
    return math.pi / 2 * wpe3 / k**2 * f_prime


@validation(FAMILY)
def bump_on_tail_checks() -> list[Check]:
    """Weak warm-beam growth rate against Landau's formula.

    k is chosen so that the resonance sits at the steepest positive slope v_b − v_tb,
    where F″ = 0 and a small error in ω_r does not change F′ to first order.
    Neglected terms (derived here): ∂ε/∂ω carries the thermal factor
    (1 + 6k²λ²)/ω_r³, which with ω_r³ ≈ 1 + 4.5k²λ² leaves −1.5k²λ² relative.  The
    beam's own non-resonant susceptibility adds ~ (n_b/n)(ω_pe/kv_tb)³ (relative
    bound) to ∂ε/∂ω.  The tolerance is the sum of the two.
    """
    out = []
    for fraction, vb, vtb in BUMP_CASES:
        k = bump_resonance_k(vb, vtb)
        s = survey(bump_case(fraction, vb, vtb), k)
        assert s.complete and len(s.values) == 1, s.notes
        w = complex(s.values[0])
        tol = 1.5 * k * k + fraction / (k * vtb) ** 3
        out.append(Check(
            FAMILY, f"γ/ω_pe at kλ_D = {k:.4f} (resonance at v_b − v_tb)",
            f"bulk + beam n_b/n = {fraction:g}, v_b = {vb:g} v_te, v_tb = {vtb:g} v_te",
            BUMP_SOURCE, landau_growth(fraction, vb, vtb, k), w.imag, tol,
            "1.5k²λ² (thermal part of ∂ε/∂ω) + (n_b/n)(ω_pe/k v_tb)³ (beam reactive "
            "part), both derived here",
        ))
    return out


def test_two_stream() -> None:
    assert_all(two_stream_checks())


def test_buneman() -> None:
    assert_all(buneman_checks())


def test_bump_on_tail() -> None:
    assert_all(bump_on_tail_checks())


def figure(path: str) -> None:
    """Two-stream γ(k) for near-cold beams against the cold curve; Buneman maximum."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, (a1, a2) = plt.subplots(1, 2, figsize=(8, 3.4), dpi=90)
    xs = np.linspace(0.05, 0.95, 91)
    a1.plot(xs, [cold_two_stream_roots(float(x)).imag.max() for x in xs], "k-", lw=0.8,
            label="cold (numpy.roots)")
    xk = np.linspace(0.2, 0.9, 8)
    a1.plot(xk, [kinetic_two_stream(float(x), 0.02).imag for x in xk], "o", mfc="none",
            label="kinroots, v_t/v0 = 0.02")
    a1.axhline(1 / (2 * math.sqrt(2)), ls=":", label="ω_pe/(2√2)")
    a1.set_xlabel("k v0 / ω_pe")
    a1.set_ylabel("γ / ω_pe")
    a1.set_title("symmetric two-stream", fontsize=9)
    a1.legend(fontsize=7)
    mu = m_e / m_p
    xb = np.linspace(0.9, 1.1, 81)
    a2.plot(xb, [max(cold_buneman_roots(float(x), mu).imag) for x in xb], "k-", lw=0.8,
            label="cold (numpy.roots)")
    xk = np.linspace(0.92, 1.08, 5)
    a2.plot(xk, [kinetic_buneman(float(x), 0.01).imag for x in xk], "o", mfc="none",
            label="kinroots, v_te/v0 = 0.01")
    a2.axhline(math.sqrt(3) / 2 * (mu / 2) ** (1 / 3), ls=":", label="Buneman formula")
    a2.set_xlabel("k v0 / ω_pe")
    a2.set_title("Buneman (hydrogen)", fontsize=9)
    a2.legend(fontsize=7)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)
