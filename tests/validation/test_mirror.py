r"""Mirror instability threshold of bi-Maxwellian protons with isotropic electrons.

Sources: A. Hasegawa, "Drift mirror instability in the magnetosphere", Phys. Fluids 12,
2642 (1969) (from memory): instability when Σ_s β⊥s (T⊥s/T∥s − 1) > 1 for ions with
cold electrons.  With warm electrons a charge-separation term adds to the right side;
the general kinetic threshold for bi-Maxwellian species in the limit k∥/k⊥ → 0,
k⊥ρ → 0 is (P. Hellinger, "Comment on the linear mirror instability near the
threshold", Phys. Plasmas 14, 082105 (2007), eq. for Γ; O. A. Pokhotelov et al.,
J. Geophys. Res. 105, 2393 (2000); both from memory)

    Σ_s β⊥s (τ_s − 1) > 1 + (Σ_s q_s n_s τ_s)² / (2 Σ_s q_s² n_s² / β∥s),  τ_s = T⊥s/T∥s.

The form is confirmed here by a short derivation: with a static response along field
lines, f_s(μ, v∥) ∝ exp[−(m v∥²/2 + q_s φ + μ δB)/T∥s] × exp(−μB/T⊥s) and
d³v = (2πB/m) dμ dv∥, a species responds with
δn_s/n_s = (1 − τ_s) δB/B − q_s φ/T∥s and δp⊥s = n_s T⊥s [2(1 − τ_s) δB/B − q_s φ/T∥s];
quasi-neutrality fixes φ, and perpendicular pressure balance δ(p⊥ + B²/2μ0) < 0 per δB
gives the criterion above.  For protons (n, T∥, T⊥, A = τ − 1) and isotropic electrons
(n, T_e) it reads

    β⊥p A > 1 + A² β∥p T_e / (2 (T∥p + T_e)),

which at T_e → 0 is Hasegawa's β⊥p A > 1.  Electron conditions assumed here: isotropic
Maxwellian electrons, T_e = T∥p (warm; the electron term moves the threshold A from
0.618 to 2/3 at β∥p = 1) and T_e = 0.02 T∥p (nearly cold).

Method: the purely growing root (Re ω = 0) is followed in A = T⊥p/T∥p − 1 at fixed
β∥p, θ and k.  D has an extra zero at ω = 0 (the scaling of the electromagnetic
determinant), so the root is not followed through ω = 0: instead A(γ*) is found by
brentq where γ = γ* for γ* = (1, 2, 3) % of k∥w∥p and extrapolated to γ* = 0 by a
quadratic (γ is analytic in A through the threshold).  The threshold at finite angle
and k exceeds the limit by a cot²θ + b (k d_p)² (field-line bending and finite Larmor
radius; measured a ≈ 0.67, b ≈ 0.57 at β∥p = 1); the check at θ = 89°, k d_p = 0.05
allows for that, and a second check removes it by fitting A0 + a cot²θ + b (k d_p)² to
(89°, 0.05), (88°, 0.05), (89°, 0.1).

Plasma (invented): ω_pp/Ω_p = 100, β∥p = 1 or 3; lengths in d_p, frequencies in Ω_p.
"""

from __future__ import annotations

import functools
import math
from pathlib import Path

import numpy as np
import pytest
from _checks import Check, assert_all, validation
from scipy.constants import e as E_CHARGE
from scipy.constants import epsilon_0, m_p, mu_0
from scipy.optimize import brentq

from kinroots.io.case import Case, parse_case
from kinroots.roots import polish
from kinroots.study.problem import function_at, survey

FAMILY = "Mirror instability"
SOURCE = (
    "Hasegawa, Phys. Fluids 12, 2642 (1969); electron term: Hellinger, Phys. Plasmas 14, "
    "082105 (2007), Pokhotelov et al. 2000 (from memory, form re-derived)"
)
#: Root tolerances.  Near ω = 0 the scaled D loses digits (measured Newton floor ~1e-12
#: absolute in Ω_p at γ ~ 1e-4); atol 1e-10 moves A by ~2e-8.
ROOT_RTOL, ROOT_ATOL = 1e-8, 1e-10
#: (β∥p, T_e/T∥p)
CASES: tuple[tuple[float, float], ...] = ((1.0, 1.0), (1.0, 0.02), (3.0, 1.0))
POINTS = ((89.0, 0.05), (88.0, 0.05), (89.0, 0.1))


def make_case(beta_par: float, anisotropy: float, angle: float, te_ratio: float) -> Case:
    """Protons with β∥p, T⊥p/T∥p = 1 + ``anisotropy``; isotropic electrons."""
    B = 1e-7
    wc = E_CHARGE * B / m_p
    n = (100.0 * wc) ** 2 * epsilon_0 * m_p / E_CHARGE**2
    t_par = beta_par * B**2 / (2 * mu_0 * n) / E_CHARGE  # eV
    data = {
        "title": "mirror threshold",
        "magnetic_field": {"B": B},
        "species": [
            {"name": "e", "charge": -1, "mass": "electron", "density": n,
             "temperature": t_par * te_ratio},
            {"name": "p", "charge": 1, "mass": "proton", "density": n,
             "temperature_par": t_par, "temperature_perp": t_par * (1.0 + anisotropy)},
        ],
        "wave": {"model": "electromagnetic", "angle": angle},
        "scan": {"k": {"start": 0.05, "stop": 0.1, "points": 2}},
        "units": {"frequency": "cyclotron:p", "length": "inertial:p"},
        "search": {"real": [-0.05, 0.05], "imag": [1e-6, 0.2]},
        "solver": {"tolerance": ROOT_RTOL},
    }
    return parse_case(data, "<test_mirror>")


def threshold_formula(beta_par: float, te_ratio: float) -> float:
    """A where β⊥p A = 1 + A² β∥p T_e/(2(T∥p + T_e)) (module docstring)."""
    def gamma(a: float) -> float:
        return beta_par * (1 + a) * a - 1 - a * a * beta_par * te_ratio / (2 * (1 + te_ratio))

    return brentq(gamma, 1e-6, 10.0, xtol=1e-15)


@functools.cache
def kinetic_threshold(beta_par: float, te_ratio: float, angle: float, k: float) -> float:
    """A = T⊥p/T∥p − 1 at which γ of the mirror root vanishes (at this θ and k)."""
    a_pred = threshold_formula(beta_par, te_ratio)
    kpw = k * math.cos(math.radians(angle)) * math.sqrt(beta_par)  # k∥ w∥p / Ω_p
    a_start = 1.15 * a_pred
    s = survey(make_case(beta_par, a_start, angle, te_ratio), k,
                    box=(-0.05, 0.05, 1e-6, 0.2))
    assert s.complete and len(s.values) == 1, (s.values, s.notes)
    known = [(a_start, complex(s.values[0]))]

    def gamma(a: float) -> float:
        near = sorted(known, key=lambda pz: abs(pz[0] - a))[:2]
        guess = near[0][1]
        if len(near) == 2 and near[0][0] != near[1][0]:
            (p1, z1), (p2, z2) = near
            guess = z1 + (z1 - z2) * (a - p1) / (p1 - p2)
        f = function_at(make_case(beta_par, a, angle, te_ratio), k)
        r = polish(f, guess, rtol=ROOT_RTOL, atol=ROOT_ATOL)
        assert r.converged, r
        assert abs(r.value.real) < 1e-6 * kpw, r  # purely growing
        known.append((a, complex(r.value)))
        return r.value.imag

    targets = (0.03 * kpw, 0.02 * kpw, 0.01 * kpw)
    step = 0.02 * a_pred
    a_hi = a_start
    found = []
    for g_target in targets:
        while gamma(a_hi) <= g_target:
            a_hi += step
        a_lo = a_hi - step
        while gamma(a_lo) > g_target:
            a_hi, a_lo = a_lo, a_lo - step
        found.append(brentq(lambda x, t=g_target: gamma(x) - t, a_lo, a_hi, xtol=1e-12))
    coef = np.polyfit(targets, found, 2)
    return float(coef[-1])


def _extrapolated(beta_par: float, te_ratio: float) -> float:
    """A0 of A0 + a cot²θ + b k² through the three POINTS."""
    rows, rhs = [], []
    for angle, k in POINTS:
        rows.append([1.0, 1.0 / math.tan(math.radians(angle)) ** 2, k * k])
        rhs.append(kinetic_threshold(beta_par, te_ratio, angle, k))
    return float(np.linalg.solve(np.array(rows), np.array(rhs))[0])


@validation(FAMILY)
def mirror_checks() -> list[Check]:
    checks = []
    for beta, te in CASES:
        ref = threshold_formula(beta, te)
        case = f"β∥p = {beta:g}, isotropic electrons T_e = {te:g} T∥p"
        angle, k = POINTS[0]
        checks.append(Check(
            family=FAMILY,
            quantity=f"threshold T⊥p/T∥p − 1 at θ = {angle:g}°, k d_p = {k:g}",
            case=case, source=SOURCE, reference=ref,
            value=kinetic_threshold(beta, te, angle, k),
            tolerance=1e-2,
            tolerance_reason=(
                "finite θ and k raise the threshold by a cot²θ + b (k d_p)²: measured "
                "0.24 % of A at β∥p = 1, 0.62 % at β∥p = 3 (FLR grows with β)"
            ),
        ))
        checks.append(Check(
            family=FAMILY,
            quantity="threshold T⊥p/T∥p − 1 extrapolated to θ → 90°, k → 0",
            case=case, source=SOURCE, reference=ref, value=_extrapolated(beta, te),
            tolerance=3e-4,
            tolerance_reason=(
                "remainder of the linear fit in cot²θ and k²: O((kρ)⁴), ∝ β∥²; "
                "measured ~1.2e-5 relative at β∥p = 1, 7e-5 at β∥p = 3"
            ),
        ))
    return checks


@pytest.mark.slow
def test_mirror_threshold_with_electron_term():
    assert_all(mirror_checks())


def figure(path: str | Path) -> None:
    """Kinetic threshold A at θ = 89°, 88° versus (k d_p)², with the two formulas."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    beta, te = CASES[0]
    fig, ax = plt.subplots(figsize=(5, 3.6), dpi=90)
    for angle, marker in ((89.0, "o"), (88.0, "s")):
        ks = [k for a, k in POINTS if a == angle]
        vals = [kinetic_threshold(beta, te, angle, k) for k in ks]
        ax.plot(np.square(ks), vals, marker, label=f"kinroots, θ = {angle:g}°")
    ax.plot([0.0], [_extrapolated(beta, te)], "k*", ms=9, label="extrapolated θ→90°, k→0")
    ax.axhline(threshold_formula(beta, te), color="C2", ls="--",
               label="with electron term (T_e = T∥p)")
    ax.axhline(threshold_formula(beta, 0.0), color="C3", ls=":",
               label="Hasegawa, cold electrons")
    ax.set_xlabel("(k d_p)²")
    ax.set_ylabel("threshold T⊥p/T∥p − 1")
    ax.set_title(f"mirror threshold, β∥p = {beta:g}", fontsize=9)
    ax.legend(fontsize=7)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


if __name__ == "__main__":
    for ch in mirror_checks():
        print(ch.quantity, "|", ch.case, "|", ch.reference, ch.value, ch.difference, ch.tolerance)
    figure("/tmp/mirror.png")
