r"""Electron and ion Bernstein waves at exactly perpendicular propagation.

Source: I. B. Bernstein, "Waves in a plasma in a magnetic field", Phys. Rev. 109, 10
(1958); T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 11 (both from memory).  For
k ∥ x ⊥ B and Maxwellian species the electrostatic dispersion relation is

    1 + Σ_s (1/(k²λ_Ds²)) [1 − Σ_{n=−∞}^{∞} ω Γ_n(λ_s)/(ω − nΩ_s)] = 0,
    Γ_n(λ) = e^{−λ} I_n(λ),  λ_s = k²ρ_s²/2,  ρ_s = w_s/|Ω_s|,  w_s = sqrt(2T_s/m_s),

real for real ω, with poles at every harmonic nΩ_s; its roots are real and lie between
consecutive harmonics, tending to the harmonics as kρ → ∞.  The reference roots here
are computed independently with mpmath (besseli at 30 digits, the ±n terms combined as
2ω²Γ_n/(ω² − n²Ω²)): every sign change on a grid of each open band
(n|Ω|, (n+1)|Ω|) is refined by mpmath's bracketing solver.  kinroots' argument-principle
survey of the same band (a rectangle straddling the real axis) must find the same number
of roots, at the same places (tolerance 1e-10 relative: 100× the root tolerance;
the harmonic sums of both sides are converged to < 1e-14), with Im ω = 0.

Cases (invented): electrons alone on a fixed neutralizing background, ω_pe/|Ω_e| = 2.5
(upper hybrid ω_UH = 2.69 |Ω_e|, inside the band 2–3); protons with Maxwellian electrons
T_e = T_p, ω_pe/|Ω_e| = 2.
"""

from __future__ import annotations

import functools
from pathlib import Path

import mpmath as mp
import numpy as np
from _checks import Check, assert_all, validation
from scipy.constants import e as E_CHARGE
from scipy.constants import epsilon_0, m_e
from scipy.special import ive

from kinroots.io.case import Case, parse_case
from kinroots.physics.plasma import EV
from kinroots.study.problem import survey

FAMILY = "Bernstein waves"
SOURCE = (
    "Bernstein, Phys. Rev. 109, 10 (1958); Stix 1992 ch. 11 (from memory); "
    "roots recomputed with mpmath besseli"
)
ROOT_RTOL = 1e-12
TOLERANCE = 1e-10
BANDS = (1, 2, 3, 4)
K_RHO = (1.0, 2.0, 5.0, 10.0)
B_FIELD = 0.1


def make_case(kind: str) -> Case:
    """``kind`` = "electron" (electrons alone) or "ion" (protons + electrons)."""
    wce = E_CHARGE * B_FIELD / m_e
    ratio = 2.5 if kind == "electron" else 2.0
    n = (ratio * wce) ** 2 * epsilon_0 * m_e / E_CHARGE**2
    species = [{"name": "e", "charge": -1, "mass": "electron", "density": n,
                "temperature": 10.0}]
    if kind == "ion":
        species.append({"name": "p", "charge": 1, "mass": "proton", "density": n,
                        "temperature": 10.0})
    unit = "e" if kind == "electron" else "p"
    data = {
        "title": f"{kind} Bernstein waves",
        "magnetic_field": {"B": B_FIELD},
        "species": species,
        "wave": {"model": "electrostatic", "angle": 90.0},
        "scan": {"k": {"start": 0.5, "stop": 10.0, "points": 2}},
        "units": {"frequency": f"cyclotron:{unit}", "length": f"gyroradius:{unit}"},
        "search": {"real": [0.5, 4.5], "imag": [-0.05, 0.05]},
        "solver": {"tolerance": ROOT_RTOL},
    }
    return parse_case(data, "<test_bernstein>")


def reference_function(case: Case, k_norm: float):
    """F(x), x = ω/ω_unit, of the module docstring, in mpmath (independent of kinroots)."""
    units = case.units
    k = mp.mpf(k_norm) / mp.mpf(units.length_unit)
    terms = []
    for s in case.plasma.species:
        q = s.charge_number * mp.mpf(E_CHARGE)
        t = mp.mpf(s.temperature_perp) * mp.mpf(EV)
        wp2 = s.density * q**2 / (mp.mpf(epsilon_0) * s.mass)
        om_c = abs(q) * B_FIELD / mp.mpf(s.mass) / mp.mpf(units.omega_unit)  # normalized
        lam_d2 = t / (s.mass * wp2)
        lam = k**2 * (2 * t / s.mass) / (2 * (om_c * units.omega_unit) ** 2)
        gam = []
        n = 0
        while True:
            g = mp.exp(-lam) * mp.besseli(n, lam)
            gam.append(g)
            n += 1
            if n > 5 and g < mp.mpf(10) ** -32:
                break
        terms.append((1 / (k**2 * lam_d2), om_c, gam))

    def f(x):
        total = mp.mpf(1)
        for inv_k2ld2, om_c, gam in terms:
            acc = 1 - gam[0]
            for n in range(1, len(gam)):
                acc -= 2 * x**2 * gam[n] / (x**2 - (n * om_c) ** 2)
            total += inv_k2ld2 * acc
        return total

    return f


def _float_function(case: Case, k_norm: float):
    """The same F in double precision (scipy.special.ive), only to bracket sign changes."""
    units = case.units
    k = k_norm / units.length_unit
    terms = []
    for s in case.plasma.species:
        om_c = abs(s.cyclotron_frequency(B_FIELD))
        lam = (k * s.thermal_speed_perp / om_c) ** 2 / 2
        n = np.arange(1, 200)
        terms.append((1 / (k * s.debye_length) ** 2, om_c / units.omega_unit,
                      ive(0, lam), ive(n, lam), n))

    def f(x: np.ndarray) -> np.ndarray:
        total = np.ones_like(x)
        for inv, om_c, g0, gn, n in terms:
            x2 = x[:, None] ** 2
            total += inv * (1 - g0 - np.sum(2 * x2 * gn / (x2 - (n * om_c) ** 2), axis=1))
        return total

    return f


@functools.cache
def reference_roots(kind: str, k_norm: float, band: int) -> tuple[float, ...]:
    """Real roots of F in the open band (band, band + 1): sign changes on a grid that
    crowds towards both harmonics (down to 1e-10), refined with mpmath at 30 digits."""
    case = make_case(kind)
    edge = np.logspace(-10, -1, 60)
    x = band + np.concatenate([edge, np.linspace(0.1, 0.9, 161)[1:-1], 1 - edge[::-1]])
    vals = _float_function(case, k_norm)(x)
    out = []
    with mp.workdps(30):
        f = reference_function(case, k_norm)
        for i in np.nonzero(np.sign(vals[:-1]) != np.sign(vals[1:]))[0]:
            r = mp.findroot(f, (mp.mpf(x[i]), mp.mpf(x[i + 1])), solver="anderson")
            out.append(float(r))
    return tuple(out)


@functools.cache
def _survey(kind: str, k_norm: float) -> tuple[complex, ...]:
    """Every root kinroots finds in a rectangle straddling the real axis over the bands
    (the harmonics inside are poles, excluded by kinroots itself)."""
    s = survey(make_case(kind), k_norm, box=(BANDS[0] - 0.5, BANDS[-1] + 1.5, -0.05, 0.05))
    assert s.complete, s.notes
    return tuple(sorted((complex(v) for v in s.values), key=lambda z: z.real))


def kinroots_roots(kind: str, k_norm: float, band: int) -> tuple[complex, ...]:
    """The roots of :func:`_survey` with band < Re ω < band + 1."""
    return tuple(z for z in _survey(kind, k_norm) if band < z.real < band + 1)


@validation(FAMILY)
def bernstein_checks() -> list[Check]:
    checks = []
    for kind in ("electron", "ion"):
        sym = "e" if kind == "electron" else "p"
        what = ("electrons on a fixed background, ω_pe/|Ω_e| = 2.5" if kind == "electron"
                else "protons and electrons, T_e = T_p, ω_pe/|Ω_e| = 2")
        for k in K_RHO:
            for band in BANDS:
                ref = reference_roots(kind, k, band)
                got = kinroots_roots(kind, k, band)
                where = f"k ρ_{sym} = {k:g}, band {band}–{band + 1} |Ω_{sym}|"
                checks.append(Check(
                    family=FAMILY, quantity=f"number of roots, {where}", case=what,
                    source=SOURCE, reference=float(len(ref)), value=float(len(got)),
                    tolerance=0.0, tolerance_reason="a count is exact", relative=False,
                ))
                for r_ref, r_got in zip(ref, got, strict=False):
                    checks.append(Check(
                        family=FAMILY, quantity=f"Re ω/|Ω_{sym}|, {where}", case=what,
                        source=SOURCE, reference=r_ref, value=r_got.real,
                        tolerance=TOLERANCE,
                        tolerance_reason="100× root tolerance; both harmonic sums < 1e-14",
                    ))
                    checks.append(Check(
                        family=FAMILY, quantity=f"Im ω/|Ω_{sym}|, {where}", case=what,
                        source=SOURCE, reference=0.0, value=r_got.imag,
                        tolerance=TOLERANCE * band, relative=False,
                        tolerance_reason="undamped at k∥ = 0; 100× root tolerance on |ω|",
                    ))
    return checks


def test_bernstein_roots_match_independent_evaluation():
    assert_all(bernstein_checks())


def figure(path: str | Path) -> None:
    """Electron and ion Bernstein branches: kinroots roots and mpmath roots."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 2, figsize=(9, 3.6), dpi=90)
    for ax, kind, sym in zip(axes, ("electron", "ion"), ("e", "p"), strict=True):
        for band in BANDS:
            ks_ref, xs_ref, ks_got, xs_got = [], [], [], []
            for k in K_RHO:
                for r in reference_roots(kind, k, band):
                    ks_ref.append(k)
                    xs_ref.append(r)
                for r in kinroots_roots(kind, k, band):
                    ks_got.append(k)
                    xs_got.append(r.real)
            ax.plot(ks_ref, xs_ref, "o", mfc="none", color="C1", ms=8,
                    label="mpmath" if band == 1 else None)
            ax.plot(ks_got, xs_got, "x", color="C0", label="kinroots" if band == 1 else None)
            ax.axhline(band, color="k", lw=0.4)
        ax.axhline(BANDS[-1] + 1, color="k", lw=0.4)
        if kind == "electron":
            ax.axhline(np.sqrt(1 + 2.5**2), color="C2", ls="--", lw=0.8, label="ω_UH")
        ax.set_xscale("log")
        ax.set_xlabel(f"k ρ_{sym}")
        ax.set_ylabel(f"ω / |Ω_{sym}|")
        ax.set_title(f"{kind} Bernstein waves, θ = 90°", fontsize=9)
        ax.legend(fontsize=7)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


if __name__ == "__main__":
    for ch in bernstein_checks():
        if not ch.passed or "Re" in ch.quantity:
            print(ch.quantity, "|", ch.reference, ch.value, ch.difference, ch.passed)
    figure("/tmp/bernstein.png")
