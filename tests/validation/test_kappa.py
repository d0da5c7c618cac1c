"""Validation: kappa species and species made of components (issue 13).

Plasmas are unmagnetized electron–proton plasmas (kappa electrons) in ω_pe and 1/λ_De,
or ω_pi and 1/λ_De for ion waves; a magnetized bi-kappa plasma for whistlers (|Ω_e|,
d_e); loss-cone ions in Ω_i and ρ_i.

References and tolerances
-------------------------
* Modified plasma dispersion function: D. Summers and R. M. Thorne, Phys. Fluids B 3,
  1835 (1991) (from memory).  Their Z*_1(ζ) = −(ζ + 2i)/(2(ζ + i)²) is re-derived by
  residues in tests/test_zfunc_kappa.py; compared at 1e-12.
* Static shielding of a kappa species, χ(0) (kλ_D)² = (κ − 1/2)/(κ − 3/2) (the kappa
  Debye length; Summers & Thorne 1991, from memory; derived in
  tests/test_models_kappa.py); 1e-12.
* Langmuir waves, small kλ_De: the frequency follows Bohm–Gross ω² = ω_pe² + ω_pi²
  + 3k²T/m to O(k²) for any distribution with m⟨v∥²⟩ = T (moment expansion of the
  susceptibility, common practice); the O(k⁴) term needs ⟨v∥⁴⟩ = 3(T/m)²(κ − 3/2)/(κ − 5/2)
  (finite for κ > 5/2), so the tolerance is 15k⁴(κ − 3/2)/(κ − 5/2).  The damping
  γ = (π/2)(ω_pe² ω_r/k²) F′(ω_r/k), F the reduced one-dimensional distribution (the
  weak-damping formula, Krall & Trivelpiece 1973, ch. 8, from memory); for κ = 3 it
  is a power law, much larger than the Maxwellian's (Summers & Thorne 1991: small κ
  strengthens Langmuir damping at small kλ_D, from memory).  Tolerance 10 %: the
  formula's neglected terms are O(k²λ²) and O((γ/ω)²).
* Ion-acoustic waves with kappa electrons and cold ions: at kλ_De ≪ 1 the electrons
  shield with χ_e = (κ − 1/2)/((κ − 3/2)(kλ_De)²), so ω/k = c_s [(κ − 3/2)/(κ − 1/2)
  /(1 + k²λ_κ²) + 3Ti/Te]^½ with λ_κ the kappa Debye length (derived here from the
  static shielding and the cold-ion fluid response, with the usual 3Ti term; the
  slower sound speed of kappa electrons is known from the kappa ion-acoustic literature,
  from memory).  Tolerance 2 %: neglected electron dynamics (ω/(k θ_e) ≈ √(m_e/m_i))
  and ion kinetic corrections.
* Whistler waves of bi-kappa electrons along B: γ = 0 exactly where
  ω_r = (1 − T∥/T⊥)|Ω_e| (the resonant factor ζ₀ + (A − 1)ζ₋ of the parallel
  susceptibility vanishes there for any symmetric reduced profile; Kennel & Petschek
  1966 for bi-Maxwellians, from memory; derived in kinroots.physics.models
  .kappa_magnetized's Notes).  Tolerance 1e-3 relative (the marginal k is bracketed to
  1e-4).
* Loss-cone ions (cases/mirror_loss_cone_ions.toml): waves near Ω_i and 2Ω_i grow
  (Dory, Guest & Harris 1965, Phys. Rev. Lett. 14, 131, from memory), and the same
  plasma with one Maxwellian of the same T∥, T⊥ has no growing root in the window.
  Signs compared exactly.
"""

from __future__ import annotations

import copy
import math
import tomllib
from pathlib import Path

import numpy as np
from _checks import Check, assert_all, validation
from scipy.constants import m_e, m_p
from scipy.optimize import brentq

from kinroots.io.case import Case, parse_case
from kinroots.physics.dispersion import Dispersion
from kinroots.physics.plasma import Plasma
from kinroots.physics.zfunc_kappa import kappa_z
from kinroots.study.problem import survey
from kinroots.study.rows import is_growing

FAMILY = "Kappa and loss-cone species"
CASES = Path(__file__).resolve().parents[2] / "cases"
ST_SOURCE = "Summers & Thorne, Phys. Fluids B 3, 1835 (1991) (from memory)"


def _plasma_case(electron: dict, ion_t: float, *, window: tuple[float, float, float, float],
                 units: tuple[str, str] = ("plasma:e", "debye:e")) -> Case:
    return parse_case({
        "title": "kappa validation",
        "species": [
            {"name": "e", "charge": -1, "mass": "electron", "density": 1e16, **electron},
            {"name": "p", "charge": 1, "mass": "proton", "density": 1e16,
             "temperature": ion_t},
        ],
        "wave": {"model": "electrostatic"},
        "scan": {"k": {"start": 0.1, "stop": 0.2, "points": 2}},
        "units": {"frequency": units[0], "length": units[1]},
        "search": {"real": list(window[:2]), "imag": list(window[2:])},
    }, "<test_kappa>")


def _roots(case: Case, k: float) -> list[complex]:
    return [r.value for r in survey(case, k).roots if r.converged]


@validation(FAMILY)
def function_checks() -> list[Check]:
    out = []
    for z in (0.5 + 0.5j, 1.5 - 0.7j):
        val = complex(kappa_z(np.array([z]), 1.0)[0][0])
        ref = -(z + 2j) / (2 * (z + 1j) ** 2)
        for part, a, b in (("Re", val.real, ref.real), ("Im", val.imag, ref.imag)):
            out.append(Check(FAMILY, f"{part} Z*_1({z})", "κ = 1", ST_SOURCE, b, a, 1e-12,
                             "closed form, rounding only"))
    return out


@validation(FAMILY)
def shielding_checks() -> list[Check]:
    out = []
    for kappa in (2.0, 3.0):
        case = _plasma_case({"temperature": 10.0, "distribution": "kappa", "kappa": kappa},
                            1.0, window=(0.5, 2.0, -0.5, 0.5))
        e = case.plasma.species[0]
        k = 0.3 / e.debye_length
        d = Dispersion(Plasma((e,), 0.0), k=k, angle_deg=0.0,
                       model="electrostatic", omega_ref=e.plasma_frequency)
        chi0 = float((d(np.array([0j]))[0][0] - 1).real)
        out.append(Check(FAMILY, "χ_e(0)·(kλ_De)²", f"κ = {kappa:g}", ST_SOURCE,
                         (kappa - 0.5) / (kappa - 1.5), chi0 * 0.09, 1e-12,
                         "exact static limit"))
    return out


def _reduced_derivative(v: float, kappa: float) -> float:
    """F′(v) of the kappa profile g_κ(v/θ)/θ in units of w_e = √(2T/m) = √2 (λ_De ω_pe)."""
    theta = math.sqrt((2 * kappa - 3) / kappa)  # θ in λ_De ω_pe (T/m = 1)
    a = math.exp(math.lgamma(kappa) - math.lgamma(kappa - 0.5)) / math.sqrt(math.pi * kappa)
    x = v / theta
    return -2 * a * x * (1 + x * x / kappa) ** (-kappa - 1) / theta**2


@validation(FAMILY)
def langmuir_checks() -> list[Check]:
    out = []
    kappa = 3.0
    case = _plasma_case({"temperature": 10.0, "distribution": "kappa", "kappa": kappa}, 1.0,
                        window=(0.8, 2.0, -0.3, 0.1))
    for k in (0.05, 0.1):
        (w,) = _roots(case, k)
        bg = math.sqrt(1 + m_e / m_p + 3 * k * k)  # ω_pe² + ω_pi² + 3k²T/m
        tol = 15 * k**4 * (kappa - 1.5) / (kappa - 2.5) / bg
        out.append(Check(FAMILY, f"ω_r/ω_pe at kλ_De = {k}", f"κ = {kappa:g} electrons",
                         "Bohm–Gross, moment expansion (common practice)", bg, w.real, tol,
                         "O(k⁴) term with ⟨v⁴⟩ of a kappa"))
        gamma = math.pi / 2 * w.real / k**2 * _reduced_derivative(w.real / k, kappa)
        out.append(Check(FAMILY, f"γ/ω_pe at kλ_De = {k}", f"κ = {kappa:g} electrons",
                         "weak-damping γ = (π/2)(ω_p² ω_r/k²)F′(ω_r/k), Krall & Trivelpiece "
                         "(1973) ch. 8 (from memory)", gamma, w.imag, 0.1,
                         "O(k²λ²), O((γ/ω)²) corrections"))
    maxwell = _plasma_case({"temperature": 10.0}, 1.0, window=(0.8, 2.0, -0.3, 0.1))
    (wm,) = _roots(maxwell, 0.2)
    (wk,) = _roots(_plasma_case({"temperature": 10.0, "distribution": "kappa", "kappa": 2.0},
                                1.0, window=(0.8, 2.0, -0.3, 0.1)), 0.2)
    out.append(Check(FAMILY, "sign(γ_κ=2 − γ_Maxwellian) at kλ_De = 0.2",
                     "same T; −1: stronger damping", ST_SOURCE + ": small κ damps more",
                     -1.0, float(np.sign(wk.imag - wm.imag)), 0.0, "a sign"))
    return out


@validation(FAMILY)
def ion_acoustic_checks() -> list[Check]:
    out = []
    ratio = 0.005  # Ti/Te
    k = 0.05
    for kappa in (2.0, 4.0):
        case = _plasma_case({"temperature": 10.0, "distribution": "kappa", "kappa": kappa},
                            10.0 * ratio, window=(0.005, 0.2, -0.01, 0.01),
                            units=("plasma:p", "debye:e"))
        w = max(_roots(case, k), key=lambda z: z.imag)  # the ion wave (the other: ion beam mode)
        fac = (kappa - 1.5) / (kappa - 0.5)
        ref = math.sqrt(fac / (1 + k * k * fac) + 3 * ratio)
        out.append(Check(FAMILY, f"(ω_r/k)/c_s at kλ_De = {k}",
                         f"κ = {kappa:g} electrons, Ti/Te = {ratio}",
                         "kappa-shielded ion sound, derived (module docstring)", ref,
                         w.real / k, 0.02, "electron dynamics, ion kinetics"))
    return out


@validation(FAMILY)
def whistler_checks() -> list[Check]:
    data = tomllib.loads((CASES / "solar_wind_kappa_whistler.toml").read_text())
    case = parse_case(data, "solar_wind_kappa_whistler.toml")
    anis = data["species"][0]["temperature_par"] / data["species"][0]["temperature_perp"]

    def growth(k: float) -> float:
        roots = [w for w in _roots(case, k) if 0.2 < w.real < 0.9]
        return max(w.imag for w in roots)

    k0 = brentq(growth, 0.9, 1.1, xtol=1e-4)
    (w,) = [w for w in _roots(case, k0) if 0.2 < w.real < 0.9]
    return [Check(FAMILY, "ω_r/|Ω_e| where γ = 0", "bi-kappa electrons κ = 4, T⊥/T∥ = 2",
                  "ω_r = (1 − T∥/T⊥)|Ω_e|, Kennel & Petschek 1966 (from memory), derived "
                  "for bi-kappa", 1 - anis, w.real, 1e-3, "marginal k bracketed to 1e-4")]


@validation(FAMILY)
def loss_cone_checks() -> list[Check]:
    data = tomllib.loads((CASES / "mirror_loss_cone_ions.toml").read_text())
    cone = parse_case(data, "mirror_loss_cone_ions.toml")
    plain = copy.deepcopy(data)
    ions = cone.plasma.species[1]
    del plain["species"][1]["components"]
    plain["species"][1].update(temperature_par=ions.temperature_par,
                               temperature_perp=ions.temperature_perp)
    maxwell = parse_case(plain, "mirror_loss_cone_ions.toml (one Maxwellian)")
    out = []
    for harmonic, k in ((1, 2.25), (2, 3.75)):
        grow = [w for w in _roots(cone, k) if abs(w.real - harmonic) < 0.05
                and is_growing(w, cone.solver.tolerance)]
        out.append(Check(FAMILY, f"growing root within 0.05 Ω_i of {harmonic}Ω_i, kρ_i = {k}",
                         "loss-cone ions (subtracted Maxwellian)",
                         "Dory, Guest & Harris, PRL 14, 131 (1965) (from memory)", 1.0,
                         1.0 if grow else 0.0, 0.0, "presence"))
        # growing = γ beyond what the root tolerance resolves (an undamped Bernstein-like
        # root near 1.87 Ω_i has γ ~ 1e-12 |ω|: rounding, not growth)
        calm = [w for w in _roots(maxwell, k) if is_growing(w, maxwell.solver.tolerance)]
        out.append(Check(FAMILY, f"growing roots, kρ_i = {k}", "one Maxwellian, same T∥, T⊥",
                         "control: without the loss cone (∂f/∂v⊥ ≤ 0) no root grows here", 0.0,
                         float(len(calm)), 0.0, "count"))
    return out


def test_kappa_validation() -> None:
    checks = (function_checks() + shielding_checks() + langmuir_checks()
              + ion_acoustic_checks() + whistler_checks() + loss_cone_checks())
    assert_all(checks)
