"""Validation: Langmuir waves of Maxwellian electrons with fixed ions (Landau damping).

Plasma: one Maxwellian electron species, ions a fixed neutralizing background (omitted,
so quasi-neutrality is only a warning in ``Case.warnings``).  Units ω_pe and λ_De.  The
dispersion relation is ε = 1 − Z′(ζ)/(2k²λ_De²) = 0, ζ = ω/(√2 k v_te), v_te = √(T/m).

References
----------
* Tabulated roots at kλ_De = 0.2 … 1.0, "quoted widely in the kinetic-simulation
  literature" (Landau-damping test problems of Vlasov codes).  From memory.  Before I
  used them, each one was checked against an mpmath root at 30 digits.  Three of them
  agreed to the printed digits.  For the other two, the digit I remembered was off by
  one in the fourth decimal: at 0.4 I remembered Re ω = 1.2850 where mpmath gives
  1.285057, and at 1.0 I remembered 2.0458 where mpmath gives 2.045905.  Both were
  corrected to the correctly rounded 1.2851 and 2.0459.  The tolerance is half a unit
  in the last printed digit.
* L. D. Landau, J. Phys. USSR 10, 25 (1946): the weak-damping rate
  γ/ω_pe ≈ −√(π/8) (kλ_D)^-3 exp(−1/(2k²λ_D²) − 3/2), in the form given by
  N. A. Krall and A. W. Trivelpiece, *Principles of Plasma Physics* (1973), ch. 8
  (from memory).  It is valid for kλ_D ≪ 1.  The error estimate is derived here.  The
  Bohm–Gross-type expansion of ε for |ζ| ≫ 1 gives ω² = ω_pe²(1 + 3k²λ² + 6k⁴λ⁴ + …).
  Put into the Landau exponent −ω²/(2k²v²), it leaves a factor exp(−3k²λ²) that the
  formula leaves out.  The prefactor corrections cancel at O(k²).  So the relative
  difference should be ≈ 3k²λ², shrinking like k² as k → 0.  In the same way, the
  real part differs from the Bohm–Gross √(1 + 3k²λ²) by ≈ 3k⁴λ⁴ (relative).
* Independent route: mpmath (arbitrary precision) with
  Z(ζ) = i√π exp(−ζ²) erfc(−iζ) and Z′ = −2(1 + ζZ) (B. D. Fried and S. D. Conte,
  *The Plasma Dispersion Function*, 1961).
"""

from __future__ import annotations

import math

import mpmath as mp
from _checks import Check, assert_all, validation

from kinroots.io.case import Case, parse_case
from kinroots.study.problem import survey

FAMILY = "Langmuir waves"
CASE_TEXT = "Maxwellian electrons, fixed ions, k ∥ z"

#: Roots quoted in the literature (from memory; two corrected after the mpmath check,
#: see the module docstring): kλ_De -> (Re ω/ω_pe, Im ω/ω_pe, absolute tolerances).
LITERATURE_ROOTS: dict[float, tuple[float, float, float, float]] = {
    0.2: (1.0640, -5.51e-5, 5e-5, 5e-8),
    0.3: (1.1598, -0.0126, 5e-5, 5e-5),
    0.4: (1.2851, -0.0661, 5e-5, 5e-5),
    0.5: (1.4157, -0.1534, 5e-5, 5e-5),
    1.0: (2.0459, -0.8513, 5e-5, 5e-5),
}
LITERATURE_SOURCE = (
    "Langmuir roots quoted widely in the kinetic-simulation literature (from memory; "
    "Re at 0.4 and 1.0 corrected by one unit in the last digit after an mpmath check)"
)
LANDAU_SOURCE = (
    "L. D. Landau, J. Phys. USSR 10, 25 (1946); form of Krall & Trivelpiece, Principles "
    "of Plasma Physics (1973) ch. 8 (from memory)"
)
MPMATH_SOURCE = "mpmath root of 1 − Z′(ζ)/(2k²λ²) = 0 at 30 digits (Z via erfc, Fried & Conte 1961)"
#: Smallest to largest kλ_De for the weak-damping checks.  At kλ_D = 0.14 the damping
#: rate (≈ 4e-10 ω_pe) is still 4000 times above the root finder's resolution
#: (rtol·|ω| = 1e-13); below about 0.11 it is not resolved (|γ| < 1e-13).
WEAK_K = (0.14, 0.16, 0.18, 0.2)
ROOT_RTOL = 1e-13


def electron_case(window: tuple[float, float, float, float]) -> Case:
    """Maxwellian electrons, ions fixed (omitted), units ω_pe and λ_De."""
    return parse_case(
        {
            "title": "Langmuir waves, fixed ions (validation)",
            "species": [{"name": "e", "charge": -1, "mass": "electron", "density": 1e18,
                         "temperature": 10.0}],
            "wave": {"model": "electrostatic", "angle": 0.0},
            "scan": {"k": {"start": 0.1, "stop": 1.0, "points": 2}},
            "units": {"frequency": "plasma:e", "length": "debye:e"},
            "search": {"real": list(window[:2]), "imag": list(window[2:])},
            "solver": {"tolerance": ROOT_RTOL},
        },
        "<validation: Langmuir>",
    )


def least_damped(k: float, window: tuple[float, float, float, float]) -> complex:
    """The least-damped root in ``window`` at ``k`` (normalized), from a full survey."""
    s = survey(electron_case(window), k)
    assert s.complete and len(s.values) > 0, (k, s.notes)
    return max(s.values, key=lambda z: z.imag)


def mpmath_root(k: float, guess: complex) -> complex:
    """Root of 1 − Z′(ζ)/(2k²) = 0, ζ = ω/(√2 k), ω in ω_pe, at 30 digits."""
    with mp.workdps(30):
        kk = mp.mpf(k)

        def eps(w: mp.mpc) -> mp.mpc:
            zeta = w / (mp.sqrt(2) * kk)
            z = 1j * mp.sqrt(mp.pi) * mp.exp(-zeta**2) * mp.erfc(-1j * zeta)
            return 1 - (-2 * (1 + zeta * z)) / (2 * kk**2)

        g0 = mp.mpc(guess)
        return complex(mp.findroot(eps, (g0, g0 * (1 + mp.mpf("1e-3")))))


def landau_gamma(k: float) -> float:
    """Weak-damping Landau rate γ/ω_pe at kλ_D = k (Landau 1946)."""
    return -math.sqrt(math.pi / 8) / k**3 * math.exp(-1 / (2 * k * k) - 1.5)


@validation(FAMILY)
def literature_roots() -> list[Check]:
    """Least-damped Langmuir root against the tabulated values and against mpmath."""
    out = []
    for k, (re_ref, im_ref, tol_re, tol_im) in LITERATURE_ROOTS.items():
        w = least_damped(k, (0.8, 2.5, -1.0, 0.05))
        digits = "half a unit in the last printed digit"
        out += [
            Check(FAMILY, f"Re ω/ω_pe at kλ_De = {k}", CASE_TEXT, LITERATURE_SOURCE,
                  re_ref, w.real, tol_re, digits, relative=False),
            Check(FAMILY, f"Im ω/ω_pe at kλ_De = {k}", CASE_TEXT, LITERATURE_SOURCE,
                  im_ref, w.imag, tol_im, digits, relative=False),
        ]
        ref = mpmath_root(k, complex(re_ref, im_ref))
        reason = ("root tolerance 1e-13·|ω| plus double-precision Z (~1e-14), with a "
                  "factor 10 margin for conditioning: 1e-12·|ω| absolute")
        out += [
            Check(FAMILY, f"Re ω/ω_pe at kλ_De = {k} (mpmath)", CASE_TEXT, MPMATH_SOURCE,
                  ref.real, w.real, 1e-12 * abs(ref), reason, relative=False),
            Check(FAMILY, f"Im ω/ω_pe at kλ_De = {k} (mpmath)", CASE_TEXT, MPMATH_SOURCE,
                  ref.imag, w.imag, 1e-12 * abs(ref), reason, relative=False),
        ]
    return out


@validation(FAMILY)
def weak_damping_limit() -> list[Check]:
    """γ against Landau's formula and ω_r against Bohm–Gross as kλ_D → 0.

    The tolerances follow from the derivation in the module docstring.  The relative
    γ difference is ≈ 3k² (the factor exp(−3k²λ²)).  Its O(k⁴) remainder is about
    20–30 k⁴ at these k (measured), so the tolerance is 5k²λ².  For ω_r the leading
    difference is 3k⁴λ⁴, and the tolerance 4k⁴λ⁴ leaves room for the O(k⁶) remainder.
    Then the scaling itself: (relative γ difference)/k² at the smallest k must be the
    derived coefficient 3, within the O(k²) remainder (≈ 16k² ≈ 0.3 at kλ_D = 0.14,
    measured; tolerance 0.5).
    """
    out = []
    ratios = []
    for k in WEAK_K:
        w = least_damped(k, (0.8, 2.0, -0.05, 0.05))
        g_ref = landau_gamma(k)
        rel = abs(w.imag / g_ref - 1)
        ratios.append(rel / k**2)
        out.append(Check(
            FAMILY, f"γ/ω_pe at kλ_De = {k} (weak damping)", CASE_TEXT, LANDAU_SOURCE,
            g_ref, w.imag, 5 * k**2,
            "leading neglected factor exp(−3k²λ²) (≈ 3k² relative, derived here) plus "
            "the O(k⁴) remainder: 5k²λ² relative"))
        bg = math.sqrt(1 + 3 * k * k)
        out.append(Check(
            FAMILY, f"Re ω/ω_pe at kλ_De = {k} (Bohm–Gross)", CASE_TEXT,
            "Bohm–Gross ω² = ω_pe²(1 + 3k²λ_D²) (Bohm & Gross, Phys. Rev. 75, 1851, 1949; "
            "from memory)", bg, w.real, 4 * k**4,
            "first neglected term 6k⁴λ⁴ in ω² (3k⁴λ⁴ relative in ω, derived here) plus "
            "O(k⁶): 4k⁴λ⁴ relative"))
    out.append(Check(
        FAMILY, f"(γ − γ_Landau)/(γ_Landau k²λ²) at kλ_De = {WEAK_K[0]}", CASE_TEXT,
        "coefficient 3 of the leading correction exp(−3k²λ²), derived here from the "
        "large-ζ expansion of Z (Fried & Conte 1961)",
        3.0, ratios[0], 0.5,
        "O(k²) remainder of the coefficient (≈ 16k²λ² ≈ 0.3 at 0.14, measured)",
        relative=False))
    return out


def test_literature_roots() -> None:
    assert_all(literature_roots())


def test_weak_damping_limit() -> None:
    checks = weak_damping_limit()
    assert_all(checks)
    # the difference must shrink as k decreases (the statement of the limit)
    gamma = [c for c in checks if c.quantity.startswith("γ/ω_pe")]
    diffs = [c.difference for c in gamma]
    assert diffs == sorted(diffs), diffs


def figure(path: str) -> None:
    """Re ω and −Im ω of the least-damped Langmuir root across kλ_De, with the tabulated
    roots, the mpmath roots and Landau's weak-damping formula."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    ks = np.linspace(0.14, 1.0, 22)
    roots = [least_damped(float(k), (0.8, 2.5, -1.0, 0.05)) for k in ks]
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(8, 3.4), dpi=90)
    a1.plot(ks, [z.real for z in roots], "-", label="kinroots")
    a1.plot(ks, np.sqrt(1 + 3 * ks**2), ":", label="Bohm–Gross")
    a2.semilogy(ks, [-z.imag for z in roots], "-", label="kinroots")
    kl = ks[ks <= 0.35]
    a2.semilogy(kl, [-landau_gamma(float(k)) for k in kl], ":", label="Landau formula")
    lk = list(LITERATURE_ROOTS)
    a1.plot(lk, [LITERATURE_ROOTS[k][0] for k in lk], "o", mfc="none", label="literature")
    a2.semilogy(lk, [-LITERATURE_ROOTS[k][1] for k in lk], "o", mfc="none",
                label="literature")
    a1.set_xlabel("k λ_De")
    a2.set_xlabel("k λ_De")
    a1.set_ylabel("Re ω / ω_pe")
    a2.set_ylabel("−Im ω / ω_pe")
    a1.legend(fontsize=8)
    a2.legend(fontsize=8)
    fig.suptitle("Langmuir waves, fixed ions", fontsize=10)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)
