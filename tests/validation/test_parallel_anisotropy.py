r"""Marginal stability of the parallel whistler and proton-cyclotron anisotropy instabilities.

Source: C. F. Kennel and H. E. Petschek, "Limit on stably trapped particle fluxes",
J. Geophys. Res. 71, 1 (1966) (from memory): a parallel cyclotron wave driven by a
species with T⊥ > T∥ grows while ω_r/|Ω_s| < A/(A + 1), A = T⊥/T∥ − 1, and is damped
above; the marginal point of the growth rate therefore sits at ω_r/|Ω_s| = A/(A + 1).

Why this is exact for bi-Maxwellians (derived here, the form of the parallel
susceptibility as in S. P. Gary, *Theory of Space Plasma Microinstabilities*, 1993,
ch. 7, from memory).  At k ∥ B the determinant factors into circularly polarized parts

    D_±(ω, k) = ω² − k²c² + Σ_s ω_ps² [ ω/(k w∥s) Z(ζ_s) + A_s (1 + ζ_s Z(ζ_s)) ],
    ζ_s = (ω ∓ Ω_s)/(k w∥s).

For real ω and real ζ every term is real except Im Z(ζ) = √π exp(−ζ²) and
Im[1 + ζZ] = ζ √π exp(−ζ²), so

    Im D_± = Σ_s ω_ps² √π exp(−ζ_s²) [ω + A_s(ω ∓ Ω_s)] / (k w∥s).

At the k where the traced root crosses γ = 0 the root ω is real and D = 0, so Im D = 0.
With one resonant species (the others have |ζ| > 40 here, exp(−ζ²) < 1e-690, zero in
double precision) this forces ω (1 + A) = A |Ω_s|: exactly ω_r/|Ω_s| = A/(A + 1),
whatever β, k or the dispersive part of the wave.  The only error is numerical: the
root tolerance (1e-12 relative) and the bracket on k (1e-12), which move ω_r by ~1e-12;
the tolerance 1e-9 is 1000 times that.

Cases are invented: bi-Maxwellian electrons with isotropic protons (whistler anisotropy
instability, ω_pe/|Ω_e| = 4) and bi-Maxwellian protons with isotropic electrons
(proton-cyclotron anisotropy instability, ω_pp/Ω_p = 1000); the isotropic species has
the parallel temperature of the driver.  Frequencies in |Ω| and lengths in the inertial
length of the driving species.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
from _checks import Check, assert_all, validation
from scipy.constants import e as E_CHARGE
from scipy.constants import epsilon_0, m_e, m_p, mu_0
from scipy.optimize import brentq

from kinroots.io.case import Case, parse_case
from kinroots.roots import polish
from kinroots.study.problem import function_at, survey

FAMILY = "Parallel anisotropy instabilities"
SOURCE = (
    "C. F. Kennel and H. E. Petschek, J. Geophys. Res. 71, 1 (1966), marginal condition "
    "ω_r/|Ω| = A/(A+1) (from memory)"
)
ROOT_RTOL = 1e-12
K_XTOL = 1e-12
TOLERANCE = 1e-9
REASON = (
    "exact for bi-Maxwellians (Im D = 0 at a real root); 1000× the root tolerance "
    "and the bracket on k (1e-12)"
)

#: (driver species, β∥ of the driver, T⊥/T∥ of the driver, first k of the step search)
CASES: tuple[tuple[str, float, float, float], ...] = (
    ("e", 1.0, 2.0, 0.5),
    ("e", 0.5, 3.0, 0.8),
    ("p", 1.0, 2.0, 0.4),
    ("p", 3.0, 1.5, 0.3),
)


def make_case(driver: str, beta_par: float, ratio: float) -> Case:
    """Electron–proton plasma with a bi-Maxwellian ``driver`` ("e" or "p")."""
    B = 1e-3 if driver == "e" else 1e-7
    mass = m_e if driver == "e" else m_p
    wc = E_CHARGE * B / mass
    wp_over_wc = 4.0 if driver == "e" else 1e3
    n = (wp_over_wc * wc) ** 2 * epsilon_0 * mass / E_CHARGE**2
    t_par = beta_par * B**2 / (2 * mu_0 * n) / E_CHARGE  # eV
    aniso = {"temperature_par": t_par, "temperature_perp": t_par * ratio}
    iso = {"temperature": t_par}
    species = [
        {"name": "e", "charge": -1, "mass": "electron", "density": n,
         **(aniso if driver == "e" else iso)},
        {"name": "p", "charge": 1, "mass": "proton", "density": n,
         **(aniso if driver == "p" else iso)},
    ]
    data = {
        "title": f"parallel anisotropy instability driven by {driver}",
        "magnetic_field": {"B": B},
        "species": species,
        "wave": {"model": "electromagnetic", "angle": 0.0},
        "scan": {"k": {"start": 0.1, "stop": 2.0, "points": 2}},
        "units": {"frequency": f"cyclotron:{driver}", "length": f"inertial:{driver}"},
        "search": {"real": [0.05, 0.999], "imag": [5e-4, 0.5]},
        "solver": {"tolerance": ROOT_RTOL},
    }
    return parse_case(data, "<test_parallel_anisotropy>")


class Follower:
    """A root followed along a real parameter by Newton polishing from the nearest
    known points (linear extrapolation from the two nearest)."""

    def __init__(self, family: Callable[[float], Callable], p0: float, z0: complex,
                 rtol: float = ROOT_RTOL) -> None:
        self.family = family
        self.rtol = rtol
        self.known: list[tuple[float, complex]] = [(p0, z0)]

    def at(self, p: float) -> complex:
        near = sorted(self.known, key=lambda pz: abs(pz[0] - p))[:2]
        guess = near[0][1]
        if len(near) == 2 and near[0][0] != near[1][0]:
            (p1, z1), (p2, z2) = near
            guess = z1 + (z1 - z2) * (p - p1) / (p1 - p2)
        r = polish(self.family(p), guess, rtol=self.rtol)
        if not r.converged:
            raise RuntimeError(f"root lost at parameter {p!r}: {r.reason}")
        self.known.append((p, r.value))
        return complex(r.value)


def growing_root(case: Case, k: float) -> complex:
    """The single growing root in the window at ``k`` (argument-principle survey)."""
    s = survey(case, k)
    assert s.complete and len(s.values) == 1, (k, s.values, s.notes)
    return complex(s.values[0])


def marginal_point(case: Case, k0: float, dk: float = 0.1) -> tuple[float, complex, Follower]:
    """k where the growing root's γ changes sign above ``k0``, and the root there."""
    fol = Follower(lambda k: function_at(case, k), k0, growing_root(case, k0))
    k = k0
    while fol.at(k).imag > 0:
        k += dk
        assert k < 5.0, "no marginal point found"
    k_m = brentq(lambda kk: fol.at(kk).imag, k - dk, k, xtol=K_XTOL, rtol=1e-15)
    return k_m, fol.at(k_m), fol


@validation(FAMILY)
def marginal_frequency_checks() -> list[Check]:
    checks = []
    for driver, beta, ratio, k0 in CASES:
        a = ratio - 1.0
        k_m, w_m, _ = marginal_point(make_case(driver, beta, ratio), k0)
        name = "whistler (bi-Maxwellian e)" if driver == "e" else "proton cyclotron (bi-Maxw. p)"
        checks.append(Check(
            family=FAMILY,
            quantity=f"ω_r/|Ω_{driver}| where γ = 0 (k d_{driver} = {k_m:.6f})",
            case=f"{name}, β∥{driver} = {beta:g}, T⊥/T∥ = {ratio:g}, θ = 0",
            source=SOURCE,
            reference=a / (a + 1.0),
            value=w_m.real,
            tolerance=TOLERANCE,
            tolerance_reason=REASON,
            extra={"k_marginal": k_m, "gamma_at_marginal": w_m.imag},
        ))
    return checks


def test_marginal_frequency_is_kennel_petschek():
    assert_all(marginal_frequency_checks())


def figure(path: str | Path) -> None:
    """ω_r and γ of the growing roots versus k, with A/(A+1) and the marginal points."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 2, figsize=(9, 3.6), dpi=90)
    for (driver, beta, ratio, k0), color in zip(CASES, ("C0", "C1", "C2", "C3"), strict=True):
        ax = axes[0 if driver == "e" else 1]
        case = make_case(driver, beta, ratio)
        k_m, w_m, fol = marginal_point(case, k0)
        ks = np.linspace(k0, k_m + 0.1, 25)
        ws = np.array([fol.at(float(k)) for k in ks])
        a = ratio - 1.0
        label = f"β∥ = {beta:g}, T⊥/T∥ = {ratio:g}"
        ax.plot(ks, ws.real, color=color, label=f"ω_r, {label}")
        ax.plot(ks, 10 * ws.imag, color=color, ls=":", label="10 γ")
        ax.axhline(a / (a + 1.0), color=color, lw=0.7, ls="--")
        ax.plot([k_m], [w_m.real], "o", color=color, ms=5)
    for ax, d in zip(axes, ("e", "p"), strict=True):
        ax.axhline(0.0, color="k", lw=0.5)
        ax.set_xlabel(f"k d_{d}")
        ax.set_ylabel(f"ω / |Ω_{d}|")
        ax.legend(fontsize=6)
    axes[0].set_title("whistler anisotropy (dashed: A/(A+1))", fontsize=9)
    axes[1].set_title("proton-cyclotron anisotropy", fontsize=9)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)


if __name__ == "__main__":
    for c in marginal_frequency_checks():
        print(c.quantity, c.case, c.reference, c.value, c.difference)
    figure("/tmp/parallel_anisotropy.png")

