"""Thermal fluctuation spectrum S(k, ω) and the collective-scattering spectrum.

The electron density fluctuation spectral density of a collisionless, unmagnetized
plasma of drifting (bi-)Maxwellian species, from the same susceptibilities as the
dispersion relation (:mod:`kinroots.physics.models.es_unmagnetized`), built by superposing
dressed test particles: a particle of species s moving with velocity v drags an
electron cloud δn_e = Z_s (χ_e/ε) per unit charge (χ_e summed over electron species,
ε = 1 + Σ_s χ_s, all at (k, ω)), and an electron also counts itself.  So::

    S(k, ω) = (2π/k) Σ_s (n_s/n_e) |δ_s,e + Z_s χ_e/ε|² F_s(ω/k),

δ_s,e = 1 for electron species, 0 otherwise; F_s(u) the distribution of v·k̂ normalized
to 1 (Gaussian of width w_k = sqrt(w∥²cos²θ + w⊥²sin²θ) around V_s cos θ).  For one
electron and one ion species this is the familiar form
(2π/k)[|1 − χ_e/ε|² f_e(ω/k) + Z²(n_i/n_e)|χ_e/ε|² f_i(ω/k)] (with quasi-neutrality
Z²n_i/n_e = Z).  Units: S is per unit angular frequency [s], normalized so that
(1/2π)∫S dω = S(k) (the static form factor; 1 without correlations).

Scattering geometry: a probe of wavelength λ_i (ω_i = 2πc/λ_i, k_i = 2π/λ_i) scattered
through the angle θ_s to wavelength λ_s (ω_s, k_s = ω_s/c) probes k = k_s − k_i,
|k|² = k_i² + k_s² − 2k_i k_s cos θ_s (≈ 2k_i sin(θ_s/2) for |ω| ≪ ω_i), and
ω = ω_s − ω_i.  Scattering parameter α = 1/(kλ_De).  The power per unit scattered
wavelength is proportional to (1 + 2ω/ω_i) S(k, ω) |dω_s/dλ_s| (the first factor is the
usual first-order relativistic correction for the scattered power; from memory).

References
----------
J. Sheffield, D. Froula, S. H. Glenzer and N. C. Luhmann, *Plasma Scattering of
Electromagnetic Radiation*, 2nd ed. (Academic Press, 2011), ch. 3 and 5 (S(k, ω),
α, the geometry), from memory.
E. E. Salpeter, Phys. Rev. 120, 1528 (1960): static form factor (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from kinroots.physics.models import es_unmagnetized
from kinroots.physics.plasma import C_LIGHT, Plasma

__all__ = [
    "SPECTRUM_COLUMNS",
    "ScatteredSpectrum",
    "bragg_wavenumber",
    "refine_samples",
    "salpeter_form_factor",
    "scattered_spectrum",
    "sum_rule_check",
    "spectral_density",
]

#: Columns of ``spectrum.csv`` (see README "Output").
SPECTRUM_COLUMNS: tuple[str, ...] = (
    "scattered_wavelength_nm",
    "wavelength_shift_nm",
    "frequency_shift_hz",
    "omega_rad_per_s",
    "k_per_m",
    "alpha",
    "spectral_density_s",
    "relative_power_per_nm",
)


def _check_plasma(plasma: Plasma) -> None:
    if plasma.magnetized:
        raise ValueError("the fluctuation spectrum is implemented for B = 0 only")
    if any(s.collision_frequency > 0 for s in plasma.species):
        raise ValueError("the fluctuation spectrum is implemented for collisionless "
                         "species only (collision_frequency = 0)")
    if not any(s.is_electron for s in plasma.species):
        raise ValueError("the plasma has no electron species")
    odd = [s.name for s in plasma.species if not s.is_plain_maxwellian]
    if odd:
        raise ValueError("the fluctuation spectrum is implemented for drifting "
                         "bi-Maxwellian species only; not for kappa or component species "
                         f"({', '.join(odd)})")


def spectral_density(
    plasma: Plasma, /, *, k: float | np.ndarray, omega: np.ndarray, angle_deg: float = 0.0
) -> np.ndarray:
    """Electron density fluctuation spectral density S(k, ω) [s].

    Parameters
    ----------
    plasma : Plasma
        Unmagnetized, collisionless; drifting (bi-)Maxwellian species.
    k : float or array_like
        |k| [1/m], > 0; broadcast against ``omega``.
    omega : array_like of float
        Real angular frequency ω [rad/s].
    angle_deg : float
        Angle between k and z (the drift axis) [degrees].

    Returns
    -------
    ndarray of float
        S(k, ω), shaped like the broadcast of ``k`` and ``omega``; (1/2π)∫S dω = S(k).

    Raises
    ------
    ValueError
        Magnetized or collisional plasma, or no electron species.

    Notes
    -----
    Formula in the module docstring (Sheffield et al. 2011, ch. 5, from memory).
    """
    _check_plasma(plasma)
    om, kk = np.broadcast_arrays(np.asarray(omega, dtype=float), np.asarray(k, dtype=float))
    theta = math.radians(angle_deg)
    cos, sin = math.cos(theta), math.sin(theta)
    chis = []
    with np.errstate(all="ignore"):
        for s in plasma.species:
            res = es_unmagnetized.susceptibility(om.astype(complex), s, k_par=kk * cos,
                                                 k_perp=kk * sin)
            chis.append(np.asarray(res.value))
        eps = 1.0 + sum(chis)
        chi_e = sum(c for c, s in zip(chis, plasma.species, strict=True) if s.is_electron)
        ratio = chi_e / eps
        n_e = sum(s.density for s in plasma.species if s.is_electron)
        u = om / kk
        total = np.zeros(om.shape)
        for s in plasma.species:
            wk = math.sqrt((s.thermal_speed_par * cos) ** 2 + (s.thermal_speed_perp * sin) ** 2)
            f = np.exp(-(((u - s.drift * cos) / wk) ** 2)) / (math.sqrt(math.pi) * wk)
            amp = (1.0 if s.is_electron else 0.0) + s.charge_number * ratio
            total = total + (s.density / n_e) * np.abs(amp) ** 2 * f
        return 2.0 * math.pi / kk * total


def salpeter_form_factor(alpha: float, charge_number: float, te_over_ti: float) -> float:
    """Static form factor S(k) of an electron–ion plasma in Salpeter's approximation.

    S(k) = 1/(1 + α²) + Zα⁴/[(1 + α²)(1 + α² + α²ZT_e/T_i)]
    (E. E. Salpeter, Phys. Rev. 120, 1528, 1960; from memory).  Exact for T_e = T_i.
    """
    a2 = alpha * alpha
    z = charge_number
    return 1.0 / (1.0 + a2) + z * a2 * a2 / ((1.0 + a2) * (1.0 + a2 + a2 * z * te_over_ti))


def bragg_wavenumber(laser_wavelength: float, scattering_angle_deg: float) -> float:
    """|k| = 2 k_i sin(θ_s/2) [1/m] (|ω| ≪ ω_i)."""
    return 4.0 * math.pi / laser_wavelength * math.sin(math.radians(scattering_angle_deg) / 2)


#: Shortest probe wavelength [m] :func:`scattered_spectrum` accepts: 10 pm, a photon energy
#: of 124 keV, where Compton recoil (neglected here) starts to matter (common practice).
SHORTEST_PROBE_M: float = 1e-11


def probe_problems(plasma: Plasma, laser_wavelength: Any, scattering_angle_deg: Any,
                   k_angle_deg: float = 0.0) -> dict[str, str]:
    """What makes a probe unusable for :func:`scattered_spectrum` (empty list: usable).

    The probe and the scattered light are taken as vacuum waves (k = ω/c), and the
    spectrum spans |ω_s − ω_i| ≤ ω_max (the electron plasma wave and the electron thermal
    width at the Bragg k, :func:`_default_window`). Both waves propagate only above the
    cutoff ω_pe, and the vacuum form needs ω_i ≫ ω_pe; the check asks ω_i > 2 ω_max
    (ω_max > ω_pe), so that every scattered frequency ω_i + ω stays above ω_max > ω_pe
    (cutoff of an unmagnetized plasma, ω² = ω_pe² + k²c²: Chen, *Introduction to Plasma
    Physics and Controlled Fusion*, 3rd ed. 2016, ch. 4;
    chapter from memory).

    Parameters
    ----------
    plasma : Plasma
    laser_wavelength : float
        Probe wavelength λ_i [m].
    scattering_angle_deg : float
        Scattering angle θ_s [degrees].
    k_angle_deg : float
        Angle between k and z [degrees].

    Returns
    -------
    dict
        ``{"laser_wavelength" or "scattering_angle": "got ..., expected ..."}``, one
        entry per unusable parameter.
    """
    out: dict[str, str] = {}
    try:
        lam = float(laser_wavelength)
    except (TypeError, ValueError):
        lam = math.nan
    try:
        theta = float(scattering_angle_deg)
    except (TypeError, ValueError):
        theta = math.nan
    if not (math.isfinite(lam) and lam >= SHORTEST_PROBE_M):
        out["laser_wavelength"] = (
            f"got {laser_wavelength!r}, expected a wavelength >= {SHORTEST_PROBE_M:g} m "
            "(shorter probes recoil: Compton, not Thomson)")
    if not (math.isfinite(theta) and 0 < theta <= 180):
        out["scattering_angle"] = f"got {scattering_angle_deg!r}, expected degrees in (0, 180]"
    if out or not any(s.is_electron for s in plasma.species):
        return out
    full, _ = _default_window(plasma, bragg_wavenumber(lam, theta), k_angle_deg)
    w_i = 2.0 * math.pi * C_LIGHT / lam
    if not w_i > 2.0 * full:
        longest = math.pi * C_LIGHT / full
        out["laser_wavelength"] = (
            f"got {lam!r} m, a probe at {w_i:.4g} rad/s, but the spectrum spans "
            f"|omega_s - omega_i| up to {full:.4g} rad/s (above omega_pe): the scattered "
            f"light would not propagate; expected a wavelength shorter than about "
            f"{longest:.4g} m")
    return out


@dataclass
class ScatteredSpectrum:
    """Spectrum against scattered wavelength (arrays of equal length, λ_s increasing)."""

    laser_wavelength_m: float
    scattering_angle_deg: float
    k_bragg_per_m: float
    alpha_bragg: float
    columns: dict[str, np.ndarray]

    def rows(self) -> list[dict[str, Any]]:
        """Table rows (columns of :data:`SPECTRUM_COLUMNS`)."""
        n = len(self.columns[SPECTRUM_COLUMNS[0]])
        return [{c: float(self.columns[c][i]) for c in SPECTRUM_COLUMNS} for i in range(n)]


def _default_window(plasma: Plasma, k: float, angle_deg: float) -> tuple[float, float]:
    """(|ω| range of the whole spectrum, |ω| range of the ion feature) [rad/s]."""
    theta = math.radians(angle_deg)
    cos, sin = math.cos(theta), math.sin(theta)

    def wk(s: Any) -> float:
        return math.sqrt((s.thermal_speed_par * cos) ** 2 + (s.thermal_speed_perp * sin) ** 2)

    electrons = [s for s in plasma.species if s.is_electron]
    ions = [s for s in plasma.species if not s.is_electron]
    wpe2 = sum(s.plasma_frequency**2 for s in electrons)
    we = max(wk(s) for s in electrons)
    vmax_e = max(abs(s.drift * cos) for s in electrons)
    w_epw = math.sqrt(wpe2 + 1.5 * (k * we) ** 2)
    full = 1.3 * max(w_epw, 4.0 * k * we) + k * vmax_e
    if not ions:
        return full, full
    te = max(s.temperature_par for s in electrons)
    cs = max(math.sqrt(abs(s.charge_number) * te * 1.602176634e-19 / s.mass) + wk(s)
             for s in ions)
    vmax_i = max(abs(s.drift * cos) for s in ions)
    return full, min(full, 4.0 * k * cs + k * vmax_i)


def refine_samples(f: Any, x: np.ndarray, *, max_points: int, rtol: float = 1e-3,
                   floor: float = 1e-9, passes: int = 40) -> tuple[np.ndarray, np.ndarray]:
    """Samples of a smooth positive function, bisected where it is not yet resolved.

    An interval [a, b] is split when f at its midpoint differs from the mean of its ends
    by more than ``rtol`` times the largest of the three (and that is above ``floor``
    times the largest value anywhere): narrow peaks (an ion-acoustic feature whose width
    is far below the starting spacing) get samples a fraction of their width apart, flat
    stretches none.  Stops after ``passes`` passes or before exceeding ``max_points``.
    Returns the sorted abscissae and f there.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(f(x), dtype=float)
    for _ in range(passes):
        mid = 0.5 * (x[1:] + x[:-1])
        ym = np.asarray(f(mid), dtype=float)
        local = np.maximum(np.maximum(y[1:], y[:-1]), ym)
        top = max(float(np.max(y)), float(np.max(ym)))
        bad = (np.abs(ym - 0.5 * (y[1:] + y[:-1])) > rtol * local) & (local > floor * top)
        n_bad = int(np.count_nonzero(bad))
        if n_bad == 0 or x.size + n_bad > max_points:
            break
        x = np.concatenate([x, mid[bad]])
        y = np.concatenate([y, ym[bad]])
        order = np.argsort(x)
        x, y = x[order], y[order]
    return x, y


def sum_rule_check(plasma: Plasma, spectrum: ScatteredSpectrum) -> dict[str, Any]:
    """(1/2π)∫S dω of a computed spectrum against Salpeter's S(k), where that applies.

    Salpeter's form factor (:func:`salpeter_form_factor`) is exact in equilibrium and
    close for one ion species without drifts while the electron Landau part of the ion
    feature is small, (w_i/w_e)·exp(ZT_e/(2T_i)) < 0.05 (the same criterion as the tests).
    Returns ``area``, ``salpeter`` (None when it does not apply), ``relative_difference``
    and ``applies`` with the reason.
    """
    om = spectrum.columns["omega_rad_per_s"]
    s = spectrum.columns["spectral_density_s"]
    order = np.argsort(om)
    area = float(np.trapezoid(s[order], om[order]) / (2.0 * math.pi))
    electrons = [sp for sp in plasma.species if sp.is_electron]
    ions = [sp for sp in plasma.species if not sp.is_electron]
    out: dict[str, Any] = {"area": area, "salpeter": None, "relative_difference": None}
    if len(electrons) != 1 or len(ions) != 1 or any(sp.drift for sp in plasma.species):
        out["applies"] = "no: Salpeter's form factor is for one electron and one ion " \
            "species without drifts"
        return out
    e, i = electrons[0], ions[0]
    tr = e.temperature_par / i.temperature_par
    z = abs(i.charge_number)
    with np.errstate(over="ignore"):
        landau = i.thermal_speed_par / e.thermal_speed_par * math.exp(min(z * tr / 2, 700.0))
    if landau >= 0.05:
        out["applies"] = (f"no: T_e/T_i = {tr:.3g}, the electron Landau part of the ion "
                          "feature is not small")
        return out
    ref = salpeter_form_factor(spectrum.alpha_bragg, z, tr)
    out.update(salpeter=ref, relative_difference=abs(area - ref) / ref, applies="yes")
    return out


def scattered_spectrum(
    plasma: Plasma, /, *, laser_wavelength: float, scattering_angle_deg: float,
    k_angle_deg: float = 0.0, points: int = 4001,
    omega_max: float | None = None,
) -> ScatteredSpectrum:
    """Scattered spectrum against wavelength for a probe laser (see module docstring).

    Parameters
    ----------
    plasma : Plasma
        Unmagnetized, collisionless.
    laser_wavelength : float
        Probe wavelength λ_i [m].
    scattering_angle_deg : float
        Angle θ_s between incident and scattered wave vectors [degrees], in (0, 180].
    k_angle_deg : float
        Angle between k = k_s − k_i and z (the drift axis) [degrees].
    points : int
        Starting samples; half cover the whole spectrum uniformly in ω, half the ion
        feature; then intervals are bisected where S is not resolved
        (:func:`refine_samples`: narrow ion-acoustic peaks get samples a fraction of
        their width apart), up to 20 × ``points`` (at least 200,000) samples.
    omega_max : float, optional
        Largest |ω| = |ω_s − ω_i| [rad/s] (default: from the electron plasma wave and the
        electron thermal width, 1.3× the larger).

    Returns
    -------
    ScatteredSpectrum
    """
    problems = probe_problems(plasma, laser_wavelength, scattering_angle_deg, k_angle_deg)
    if isinstance(points, bool) or not isinstance(points, int | np.integer) or points < 11:
        problems["points"] = f"got {points!r}, expected an integer >= 11"
    if problems:
        raise ValueError("; ".join(f"{k}: {v}" for k, v in problems.items()))
    _check_plasma(plasma)
    w_i = 2.0 * math.pi * C_LIGHT / laser_wavelength
    k_i = 2.0 * math.pi / laser_wavelength
    k0 = bragg_wavenumber(laser_wavelength, scattering_angle_deg)
    full, ion = _default_window(plasma, k0, k_angle_deg)
    if omega_max is not None:
        full = float(omega_max)
        ion = min(ion, full)
    full = min(full, 0.5 * w_i)
    half = max(points // 2, 2)
    om = np.unique(np.concatenate([np.linspace(-full, full, half),
                                   np.linspace(-ion, ion, points - half)]))
    cos_s = math.cos(math.radians(scattering_angle_deg))

    def k_of(o: np.ndarray) -> np.ndarray:
        k_s = (w_i + o) / C_LIGHT
        return np.sqrt(np.maximum(k_i**2 + k_s**2 - 2.0 * k_i * k_s * cos_s, 0.0))

    def density(o: np.ndarray) -> np.ndarray:
        return spectral_density(plasma, k=k_of(o), omega=o, angle_deg=k_angle_deg)

    om, s_kw = refine_samples(density, om, max_points=max(20 * points, 200_000))
    w_s = w_i + om
    k = k_of(om)
    lam_s = 2.0 * math.pi * C_LIGHT / w_s
    power = (1.0 + 2.0 * om / w_i) * s_kw * (2.0 * math.pi * C_LIGHT / lam_s**2)
    power = power / np.max(power)
    lde = plasma.electron_debye_length
    assert lde is not None
    order = np.argsort(lam_s)
    cols = {
        "scattered_wavelength_nm": lam_s * 1e9,
        "wavelength_shift_nm": (lam_s - laser_wavelength) * 1e9,
        "frequency_shift_hz": om / (2.0 * math.pi),
        "omega_rad_per_s": om,
        "k_per_m": k,
        "alpha": 1.0 / (k * lde),
        "spectral_density_s": s_kw,
        "relative_power_per_nm": power,
    }
    cols = {name: np.asarray(v)[order] for name, v in cols.items()}
    return ScatteredSpectrum(
        laser_wavelength_m=float(laser_wavelength),
        scattering_angle_deg=float(scattering_angle_deg),
        k_bragg_per_m=k0,
        alpha_bragg=1.0 / (k0 * lde),
        columns=cols,
    )
