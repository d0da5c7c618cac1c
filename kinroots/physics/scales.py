"""Characteristic frequencies of a plasma at one wavevector (for choosing a search window).

The frequencies where a species or the plasma as a whole responds: plasma and cyclotron
frequencies, the thermal and drift Doppler frequencies k·w and k∥V, the Bohm–Gross and
light-wave dispersion at k, the hybrid and cutoff frequencies of a magnetized plasma, and
the Alfvén frequency k v_A.  Every root of the linear dispersion relation that is not
strongly damped lies near a combination of these (the textbook wave branches: T. H. Stix,
*Waves in Plasmas*, AIP 1992, ch. 1–2 and 10–11; D. G. Swanson, *Plasma Waves*, 2nd ed.,
IOP 2003, ch. 2–4).  They are scales, not roots: :func:`kinroots.study.problem.window`
turns them into a search window when a case gives none.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from kinroots.physics.plasma import C_LIGHT, EV, Plasma

__all__ = ["Scale", "characteristic_frequencies"]


@dataclass(frozen=True)
class Scale:
    """One characteristic frequency: ``centre`` ± ``spread`` [rad/s] and what it is."""

    name: str
    centre: float
    spread: float = 0.0

    @property
    def low(self) -> float:
        """Lowest frequency of the scale [rad/s]."""
        return self.centre - self.spread

    @property
    def high(self) -> float:
        """Highest frequency of the scale [rad/s]."""
        return self.centre + self.spread


def characteristic_frequencies(plasma: Plasma, k: float, angle_deg: float,
                               electromagnetic: bool) -> list[Scale]:
    """The plasma's characteristic frequencies at wavenumber ``k`` [1/m], angle θ to B.

    Parameters
    ----------
    plasma : Plasma
        Species and B.
    k : float
        Wavenumber [1/m] (≥ 0).
    angle_deg : float
        Angle between k and B (z when B = 0) [degrees].
    electromagnetic : bool
        Include the electromagnetic branches (light wave, cutoffs, Alfvén, whistler).

    Returns
    -------
    list of Scale
        Finite, non-negative centres except the drift Doppler frequencies k∥V_s, which
        carry their sign; each species part (component) contributes its own.

    Notes
    -----
    Per species s (w = √(2T/m) from the larger of T∥, T⊥; the kinetic temperature for
    a kappa species):

    * ω_ps (electrons; every species when B = 0: a magnetized ion species oscillates at
      the lower-hybrid frequency and, along B, at its ion sound frequency, which
      saturates at ω_pi);
    * when B ≠ 0, |Ω_s| and the harmonics n|Ω_s| its Bessel weights reach (n up to
      k⊥w⊥s/|Ω_s|, at least 1, at most 3);
    * a drifting species' Doppler frequency k∥V_s with its spread k w_s;
    * an ion species' sound frequency k c_s/(1 + k²λ_De²)^½, c_s² = Z T_e/m_i
      (Stix 1992 §8-5, from memory).

    Of the plasma: the Bohm–Gross frequency (ω_p² + 3/2 (k w)²)^½ of the lightest
    species, ω_p = (Σ ω_ps²)^½ (Stix 1992 §8-2, from memory); electromagnetic: the light
    wave (ω_p² + k²c²)^½; magnetized: the upper-hybrid frequency (ω_pe² + Ω_e²)^½, the
    lower-hybrid frequency (:attr:`kinroots.physics.plasma.Plasma.lower_hybrid_frequency`),
    the R cutoff (|Ω_e| + (Ω_e² + 4ω_p²)^½)/2 (Stix 1992 §1-4), the Alfvén frequency
    k v_A and the whistler branch of Hall MHD, k v_A ((1 + (k d_i/2)²)^½ + k d_i/2) /
    (1 + k² d_e²) (d_i = v_A/Ω_i of the ion species with the largest mass density,
    d_e = c/ω_pe; common practice).
    """
    theta = math.radians(angle_deg)
    kpar = k * math.cos(theta)
    out: list[Scale] = []
    wp2 = 0.0
    lightest = None
    for s in plasma.species:
        wp2 += s.plasma_frequency**2
        if s.is_electron or not plasma.magnetized:
            # a magnetized ion species oscillates at the lower-hybrid frequency (below)
            # and, along B, at its ion sound frequency, which saturates at omega_pi
            out.append(Scale(f"plasma frequency of {s.name}", s.plasma_frequency))
        if plasma.magnetized:
            out.append(Scale(f"cyclotron frequency of {s.name}",
                             abs(s.cyclotron_frequency(plasma.B))))
        for _, part in s.component_species():
            w = math.sqrt(2.0 * max(part.temperature_par, part.temperature_perp) * EV
                          / part.mass)
            if part.drift != 0.0 and kpar != 0.0:
                out.append(Scale(f"Doppler frequency of {s.name}", kpar * part.drift, k * w))
            if plasma.magnetized:
                wperp = math.sqrt(2.0 * part.temperature_perp * EV / part.mass)
                wc = abs(s.cyclotron_frequency(plasma.B))
                reach = abs(k * math.sin(theta)) * wperp / wc if wc > 0 else 0.0
                out.append(Scale(f"cyclotron harmonics of {s.name} (k_perp w_perp, at most 3)",
                                 wc * min(3.0, max(1.0, reach))))
        if lightest is None or s.mass < lightest.mass:
            lightest = s
    electrons = [s for s in plasma.species if s.is_electron]
    if electrons:
        te = max(s.temperature_par for s in electrons)
        lde = plasma.electron_debye_length or 0.0
        for s in plasma.species:
            if not s.is_electron:
                cs = math.sqrt(abs(s.charge_number) * te * EV / s.mass)
                out.append(Scale(f"ion sound of {s.name}",
                                 k * cs / math.sqrt(1.0 + (k * lde) ** 2)))
    if lightest is not None:
        w_l = math.sqrt(2.0 * max(lightest.temperature_par, lightest.temperature_perp) * EV
                        / lightest.mass)
        out.append(Scale("Bohm-Gross frequency", math.sqrt(wp2 + 1.5 * (k * w_l) ** 2)))
    if electromagnetic:
        out.append(Scale("light wave", math.sqrt(wp2 + (k * C_LIGHT) ** 2)))
    wpe2 = sum(s.plasma_frequency**2 for s in electrons)
    if plasma.magnetized:
        if electrons:
            wce = max(abs(s.cyclotron_frequency(plasma.B)) for s in electrons)
            out.append(Scale("upper-hybrid frequency", math.sqrt(wpe2 + wce * wce)))
            if electromagnetic:
                out.append(Scale("R cutoff", 0.5 * (wce + math.sqrt(wce * wce + 4.0 * wp2))))
        lh = plasma.lower_hybrid_frequency
        if lh is not None:
            out.append(Scale("lower-hybrid frequency", lh))
        va = plasma.alfven_speed
        if electromagnetic and va is not None and math.isfinite(va):
            out.append(Scale("Alfven frequency", k * min(va, C_LIGHT)))
            ions = [s for s in plasma.species if not s.is_electron]
            if ions:
                ion = max(ions, key=lambda s: s.density * s.mass)
                di = va / abs(ion.cyclotron_frequency(plasma.B))
                de2 = C_LIGHT**2 / wpe2 if wpe2 > 0 else 0.0
                kd = 0.5 * k * di
                out.append(Scale("whistler (Hall) frequency",
                                 k * va * (math.sqrt(1.0 + kd * kd) + kd)
                                 / (1.0 + k * k * de2)))
    return [s for s in out if math.isfinite(s.centre) and math.isfinite(s.spread)]
