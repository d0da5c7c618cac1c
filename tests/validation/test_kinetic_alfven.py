r"""Kinetic Alfvén wave: real frequency at k⊥ ≫ k∥ against the kinetic Alfvén dispersion.

Source: A. Hasegawa and L. Chen, "Kinetic processes in plasma heating by resonant mode
conversion of Alfvén wave", Phys. Fluids 19, 1924 (1976) (from memory):

    ω² = k∥² v_A² [1 + k⊥² ρ_i² (3/4 + T_e/T_i)],   ρ_i = sqrt(T_i/m_i)/Ω_i.

Note the gyroradius: ρ_i here uses sqrt(T/m); kinroots' ρ uses w = sqrt(2T/m), so
k⊥²ρ_i² = (k⊥ρ_kinroots)²/2.  The formula is the first term in k⊥²ρ_i² of the gyrokinetic
low-β result ω²/(k∥²v_A²) = b/(1 − Γ_0(b)) + b T_e/T_i (b = k⊥²ρ_i², Γ_0 = e^{−b}I_0(b),
from memory); it holds for ω ≪ Ω_i, k⊥ρ_i ≲ 1 and m_e/m_i ≪ β ≪ 1 (ions cold along
B, ω/k∥ ≫ w_i; electrons isothermal, ω/k∥ ≪ w_e; no coupling to δB∥).

Neglected terms and the tolerance.  The relative error of ω is about half the relative
error of the bracket, and the bracket differs from 1 only by the finite-Larmor-radius
term b(3/4 + T_e/T_i); what the formula neglects is a fraction of that term:
O(b) (next order of b/(1 − Γ_0): +0.146 b² in the bracket), O(β) (ion parallel
thermal motion, 1/(2ζ_i²) = β_i/2, and δB∥ coupling), and O(m_e/(m_iβ)) (electron
inertia k⊥²d_e² = b·2m_e/(m_iβ_i) and the first non-isothermal correction 2ζ_e² =
2m_e/(m_iβ_e)).  At β_i = β_e = 0.05 these are each a few to ~10 % of the FLR term
(measured: the kinetic FLR coefficient (ω²/(k∥²v_A²) − 1)/b is 1.55–1.63 against 1.75,
i.e. −7 to −12 %).  The tolerance on ω is 20 % of the FLR contribution,
0.2 × (sqrt(1 + b(3/4 + T_e/T_i)) − 1).  (ω/Ω_i = k∥ d_i ≈ 0.005: ion-cyclotron
corrections ~1e-5; v_A/c = 0.01.)

Plasma (invented): protons and electrons, β_p = β_e = 0.05 (T_e = T_p) and β_p = 0.05,
T_e = 3 T_p; ω_pp/Ω_p = 100; k∥ d_p = 0.005 fixed, k⊥ρ_i = 0.1–0.5.
"""

from __future__ import annotations

import functools
import math
from pathlib import Path

import numpy as np
from _checks import Check, assert_all, validation
from scipy.constants import e as E_CHARGE
from scipy.constants import epsilon_0, m_p, mu_0

from kinroots.io.case import Case, parse_case
from kinroots.roots import polish
from kinroots.study.problem import function_at

FAMILY = "Kinetic Alfvén wave"
SOURCE = (
    "Hasegawa & Chen, Phys. Fluids 19, 1924 (1976), ω² = k∥²v_A²[1 + k⊥²ρ_i²(3/4 + T_e/T_i)]"
    " (from memory)"
)
BETA_I = 0.05
K_PAR = 0.005  # k∥ d_p
K_PERP_RHO = (0.1, 0.2, 0.3, 0.5)  # k⊥ ρ_i, ρ_i = sqrt(T_i/m_i)/Ω_i
TE_TI = (1.0, 3.0)
#: Root tolerance: since D is formed without cancellation at small ω (the scaled
#: electromagnetic builders), low-frequency roots (ω ~ 5e-3 Ω_p) converge to 1e-12.
ROOT_RTOL = 1e-12


def make_case(te_ti: float, angle: float) -> Case:
    B = 1e-7
    wc = E_CHARGE * B / m_p
    n = (100.0 * wc) ** 2 * epsilon_0 * m_p / E_CHARGE**2
    t_i = BETA_I * B**2 / (2 * mu_0 * n) / E_CHARGE  # eV
    data = {
        "title": "kinetic Alfvén wave",
        "magnetic_field": {"B": B},
        "species": [
            {"name": "e", "charge": -1, "mass": "electron", "density": n,
             "temperature": t_i * te_ti},
            {"name": "p", "charge": 1, "mass": "proton", "density": n, "temperature": t_i},
        ],
        "wave": {"model": "electromagnetic", "angle": angle},
        "scan": {"k": {"start": 0.1, "stop": 1.0, "points": 2}},
        "units": {"frequency": "cyclotron:p", "length": "inertial:p"},
        "search": {"real": [0.0, 0.1], "imag": [-0.01, 0.01]},
        "solver": {"tolerance": ROOT_RTOL},
    }
    return parse_case(data, "<test_kinetic_alfven>")


def hasegawa_chen(k_perp_rho: float, te_ti: float) -> float:
    """ω/Ω_p from the published formula (v_A/Ω_p = d_p for protons)."""
    return K_PAR * math.sqrt(1 + k_perp_rho**2 * (0.75 + te_ti))


@functools.cache
def kaw_root(k_perp_rho: float, te_ti: float) -> complex:
    """The kinetic Alfvén root (ω/Ω_p) at k∥ d_p = K_PAR and the given k⊥ρ_i."""
    k_perp = k_perp_rho / math.sqrt(BETA_I / 2)  # k⊥ d_p, since ρ_i/d_p = sqrt(β_i/2)
    k = math.hypot(K_PAR, k_perp)
    angle = math.degrees(math.atan2(k_perp, K_PAR))
    w0 = hasegawa_chen(k_perp_rho, te_ti)
    f = function_at(make_case(te_ti, angle), k)
    r = polish(f, complex(w0, -0.01 * w0), rtol=ROOT_RTOL, verify_radius=0.05 * w0)
    assert r.converged and r.verified, r
    return complex(r.value)


@validation(FAMILY)
def kaw_checks() -> list[Check]:
    checks = []
    for te in TE_TI:
        for kr in K_PERP_RHO:
            ref = hasegawa_chen(kr, te)
            flr = ref / K_PAR - 1.0
            checks.append(Check(
                family=FAMILY,
                quantity=f"ω_r/Ω_p at k∥d_p = {K_PAR}, k⊥ρ_i = {kr:g}",
                case=f"β_p = {BETA_I}, T_e/T_p = {te:g} (β_e = {BETA_I * te:g})",
                source=SOURCE, reference=ref, value=kaw_root(kr, te).real,
                tolerance=0.2 * flr / (1 + flr),
                tolerance_reason=(
                    "20 % of the finite-Larmor-radius term: neglected O(b), O(β), "
                    "O(m_e/(m_iβ)) parts (module docstring)"
                ),
            ))
    return checks


def test_kinetic_alfven_frequency():
    assert_all(kaw_checks())


def figure(path: str | Path) -> None:
    """ω_r/(k∥v_A) versus k⊥ρ_i: kinroots points and the published curves."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(5, 3.6), dpi=90)
    x = np.linspace(0, 0.55, 50)
    for te, color in zip(TE_TI, ("C0", "C1"), strict=True):
        ax.plot(x, np.sqrt(1 + x**2 * (0.75 + te)), "--", color=color,
                label=f"Hasegawa & Chen, T_e/T_i = {te:g}")
        vals = [kaw_root(kr, te).real / K_PAR for kr in K_PERP_RHO]
        ax.plot(K_PERP_RHO, vals, "o", color=color, label=f"kinroots, T_e/T_i = {te:g}")
    ax.set_xlabel("k⊥ ρ_i  (ρ_i = sqrt(T_i/m_i)/Ω_i)")
    ax.set_ylabel("ω_r / (k∥ v_A)")
    ax.set_title(f"kinetic Alfvén wave, β_i = {BETA_I}", fontsize=9)
    ax.legend(fontsize=7)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


if __name__ == "__main__":
    for ch in kaw_checks():
        print(ch.quantity, "|", ch.case, "|", ch.reference, ch.value, ch.difference, ch.tolerance)
    figure("/tmp/kaw.png")
