"""Which builder serves which species: Maxwellian, kappa, or a sum of components.

The dispersion layer asks :func:`builder_for_plasma` for the builder of a model; when
every species is one drifting bi-Maxwellian it gets the model module's own builder
unchanged (no cost), otherwise a dispatching builder of the same signature that

* sums sign_j · χ(component j) over the components of a species (χ is linear in the
  density, so a component of weight w_j is a Maxwellian of density |w_j| n with the sign
  of w_j: a negative weight subtracts it);
* sends a kappa species to the kappa builder of the model
  (:mod:`kinroots.physics.models.kappa_unmagnetized`, ``kappa_magnetized``).

Also here: :func:`negative_region`, the check that a component sum is a distribution
(f ≥ 0 everywhere).
"""

from __future__ import annotations

import importlib
import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from kinroots.physics.models.base import Builder, Susceptibility
from kinroots.physics.plasma import EV, Component, Plasma, Species

__all__ = [
    "branch_point_note",
    "builder_for_plasma",
    "kappa_poles",
    "negative_region",
    "plain_species",
]

#: (model, magnetized, scaled) -> "module:function" of the kappa builder.
_KAPPA: dict[tuple[str, bool, bool], str] = {
    ("electrostatic", False, False): "kappa_unmagnetized:susceptibility",
    ("electromagnetic", False, False): "kappa_unmagnetized:tensor_susceptibility",
    ("electromagnetic", False, True): "kappa_unmagnetized:scaled_susceptibility",
    ("electrostatic", True, False): "kappa_magnetized:susceptibility",
    ("electromagnetic", True, False): "kappa_magnetized:tensor_susceptibility",
    ("electromagnetic", True, True): "kappa_magnetized:scaled_susceptibility",
}


def plain_species(species: Sequence[Species]) -> bool:
    """True when every species is one drifting bi-Maxwellian."""
    return all(s.is_plain_maxwellian for s in species)


def _kappa_builder(model: str, magnetized: bool, scaled: bool) -> Builder:
    module, _, name = _KAPPA[(model, magnetized, scaled)].partition(":")
    mod = importlib.import_module(f"kinroots.physics.models.{module}")
    builder: Builder = getattr(mod, name)
    return builder


def builder_for_plasma(
    base: Builder, species: Sequence[Species], *, model: str, magnetized: bool,
    scaled: bool = False,
) -> Builder:
    """``base`` itself for plain species, else a builder that dispatches per species.

    Parameters
    ----------
    base : Builder
        The model's Maxwellian builder (``susceptibility`` or ``scaled_susceptibility``).
    species : sequence of Species
        The plasma's species.
    model : str
        ``"electrostatic"`` or ``"electromagnetic"`` (canonical names).
    magnetized : bool
        B ≠ 0.
    scaled : bool
        Whether ``base`` is the electromagnetic ``scaled_susceptibility``.
    """
    if plain_species(species):
        return base
    kappa = (
        _kappa_builder(model, magnetized, scaled)
        if any(s.distribution == "kappa" for s in species) else None
    )

    def dispatch(omega: Any, species: Species, /, **kw: Any) -> Susceptibility:
        if species.components:
            value = deriv = None
            harmonics = 0
            for sign, part in species.component_species():
                res = base(omega, part, **kw)
                v = sign * np.asarray(res.value)
                d = sign * np.asarray(res.derivative)
                value = v if value is None else value + v
                deriv = d if deriv is None else deriv + d
                harmonics = max(harmonics, int(res.harmonics))
            assert value is not None and deriv is not None
            return Susceptibility(value=value, derivative=deriv, harmonics=harmonics)
        if species.distribution == "kappa":
            assert kappa is not None
            return kappa(omega, species, **kw)
        return base(omega, species, **kw)

    return dispatch


def negative_region(
    components: Sequence[Component], mass: float, *, rtol: float = 1e-10
) -> tuple[float, float] | None:
    """Where a sum of drifting bi-Maxwellians is negative, or None if f ≥ 0 everywhere.

    Parameters
    ----------
    components : sequence of Component
        Weights (any sign), temperatures [eV] and drifts [m/s].
    mass : float
        Particle mass [kg].
    rtol : float
        f counts as negative below −rtol times the largest term at that point (rounding
        at a point where f vanishes exactly, as at the edge of a full loss cone), plus
        the rounding of the exponents (64 ε times their size).

    Returns
    -------
    (v_par, v_perp) or None
        The velocity [m/s] of the most negative f (relative to its largest term) found,
        v_par measured in the lab frame.

    Notes
    -----
    f(v∥, v⊥) = Σ_j w_j exp(−(v∥ − V_j)²/a∥j² − v⊥²/a⊥j²)/(π^{3/2} a⊥j² a∥j),
    a = √(2T/m), is evaluated in the log domain (each term relative to the largest one at
    the point, so that nothing underflows) on a polar grid about the mean drift: 361
    directions (v⊥ ≥ 0, both ends on the axis v⊥ = 0) and radii 0 and 10⁻³ … 10⁴ times the
    largest thermal speed and drift spread (geometric, 241 radii).  Beyond the grid every
    term is a Gaussian whose sign order along a ray no longer changes (the widest term in
    that direction dominates), so the sign at the largest radius is the asymptotic one.
    A grid check (common practice), not a proof: a negative pocket narrower than the
    grid spacing could be missed.
    """
    w = np.array([c.weight for c in components], dtype=float)
    a_par = np.sqrt(2.0 * EV * np.array([c.temperature_par for c in components]) / mass)
    a_perp = np.sqrt(2.0 * EV * np.array([c.temperature_perp for c in components]) / mass)
    v0 = np.array([c.drift for c in components], dtype=float)
    center = float(np.sum(w * v0))
    scale = max(float(np.max(a_par)), float(np.max(a_perp)),
                float(np.max(np.abs(v0 - center))))
    radii = np.concatenate([[0.0], np.geomspace(1e-3, 1e4, 241)]) * scale
    angles = np.linspace(0.0, math.pi, 361)
    vpar = center + radii[:, None] * np.cos(angles)[None, :]
    vperp = radii[:, None] * np.sin(angles)[None, :]
    log_terms = (
        np.log(np.abs(w))[:, None, None]
        - np.log(a_perp * a_perp * a_par)[:, None, None]
        - ((vpar[None] - v0[:, None, None]) / a_par[:, None, None]) ** 2
        - (vperp[None] / a_perp[:, None, None]) ** 2
    )
    top = np.max(log_terms, axis=0)
    rel = np.sum(np.sign(w)[:, None, None] * np.exp(log_terms - top[None]), axis=0)
    # the exponents carry an absolute rounding error of a few ε·|exponent|
    rel = rel + rtol + 64.0 * np.finfo(float).eps * np.abs(top)
    worst = np.unravel_index(int(np.argmin(rel)), rel.shape)
    if rel[worst] >= 0.0:
        return None
    return float(vpar[worst]), float(vperp[worst])


def branch_point_note(plasma: Plasma, *, omega: complex, k: complex, angle_deg: float) -> str:
    """A note for a root lying beyond a kappa species' branch point, else ``""``.

    Parameters
    ----------
    plasma : Plasma
        The species (only kappa species with non-integer κ can give a note).
    omega : complex
        The root ω [rad/s] (or the real ω of a spatial root).
    k : complex
        |k| [1/m] (complex for a spatial root).
    angle_deg : float
        Angle between k and z [degrees].

    Returns
    -------
    str
        Empty, or which species has Im ζ < −√κ at the root, ζ = (ω − k∥V)/Θ
        (:func:`kinroots.physics.zfunc_kappa.beyond_branch_point`): such a root is on the
        principal sheet but is damped faster than the branch-point response and depends
        on the choice of the cut.
    """
    from kinroots.physics.models.kappa_unmagnetized import kappa_widths_squared
    from kinroots.physics.zfunc_kappa import beyond_branch_point

    t = math.radians(angle_deg)
    kpar, kperp = k * math.cos(t), k * math.sin(t)
    names = []
    for s in plasma.species:
        if s.distribution != "kappa" or s.kappa is None:
            continue
        tpar2, tperp2 = kappa_widths_squared(s)
        with np.errstate(all="ignore"):
            theta = np.sqrt(kperp * kperp * tperp2 + kpar * kpar * tpar2)
            zeta = (omega - kpar * s.drift) / theta
        if bool(beyond_branch_point(np.asarray(zeta), s.kappa)):
            names.append(s.name)
    if not names:
        return ""
    return ("beyond the branch point of kappa species " + ", ".join(names)
            + " (Im zeta < -sqrt(kappa)): not the dominant response; depends on the cut")


def kappa_poles(plasma: Plasma, *, k_par: complex, k_perp: complex,
                electromagnetic: bool) -> list[complex]:
    """Poles of D [rad/s] from kappa species with integer κ: ζ = −i√κ.

    For an integer κ the continued profile (1 + ζ²/κ)^−p is rational with a pole of
    order p at ζ = −i√κ (:mod:`kinroots.physics.zfunc_kappa`), i.e. at
    ω = k∥V + nΩ − i√κ Θ, Θ = √(k⊥²θ⊥² + k∥²θ∥²), with n = 0 and, for the magnetized
    electromagnetic model (k ∥ B), n = ±1.  The root finder excludes them (a pole
    inside a contour would cancel zeros in the count).  Non-integer κ: branch points,
    see :func:`kinroots.physics.zfunc_kappa.kappa_transforms` (NaN about the cut).
    """
    from kinroots.physics.models.kappa_unmagnetized import kappa_widths_squared

    out = []
    for s in plasma.species:
        if s.distribution != "kappa" or s.kappa is None or not float(s.kappa).is_integer():
            continue
        tpar2, tperp2 = kappa_widths_squared(s)
        theta = complex(np.sqrt(complex(k_perp) ** 2 * tperp2 + complex(k_par) ** 2 * tpar2))
        base = complex(k_par) * s.drift - 1j * math.sqrt(s.kappa) * theta
        shifts = [0.0]
        if plasma.magnetized and electromagnetic:
            oc = s.cyclotron_frequency(plasma.B)
            shifts += [oc, -oc]
        out += [base + d for d in shifts]
    return out
