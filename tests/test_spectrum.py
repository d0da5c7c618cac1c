"""Fluctuation spectrum S(k, ω): Salpeter form factor, non-collective limit, feature positions."""

from __future__ import annotations

import math

import numpy as np
import pytest

from kinroots.physics.dispersion import Dispersion
from kinroots.physics.plasma import AMU, EV, M_ELECTRON, M_PROTON, Plasma, Species
from kinroots.physics.spectrum import (
    bragg_wavenumber,
    salpeter_form_factor,
    scattered_spectrum,
    spectral_density,
    sum_rule_check,
)
from kinroots.roots import polish


def _plasma(te: float, ti: float, mi: float = M_PROTON, n: float = 1e19) -> Plasma:
    return Plasma((Species("e", -1, M_ELECTRON, n, te, te), Species("i", 1, mi, n, ti, ti)))


def _form_factor(p: Plasma, alpha: float) -> float:
    """(1/2π) ∫ S dω on a grid dense over both the electron and the ion scale."""
    k = 1.0 / (alpha * p.electron_debye_length)
    we = p.species[0].thermal_speed_par
    wi = p.species[1].thermal_speed_par
    cs = math.sqrt(p.species[0].temperature_par * EV / p.species[1].mass)
    om = np.unique(np.concatenate([np.linspace(-12 * k * we, 12 * k * we, 200001),
                                   np.linspace(-8 * k * (wi + cs), 8 * k * (wi + cs), 50001)]))
    return float(np.trapezoid(spectral_density(p, k=k, omega=om), om) / (2 * math.pi))


@pytest.mark.parametrize("alpha", [0.3, 1.0, 2.0])
def test_equilibrium_integral_is_salpeter(alpha):
    # T_e = T_i: (1/2π)∫S dω = S(k) of Salpeter (Phys. Rev. 120, 1528, 1960, from memory),
    # exact in equilibrium; 1e-7 is the quadrature accuracy of the grid
    got = _form_factor(_plasma(10.0, 10.0), alpha)
    assert got == pytest.approx(salpeter_form_factor(alpha, 1, 1.0), rel=1e-7)


@pytest.mark.parametrize("alpha", [1.0, 3.0])
def test_two_temperature_integral_close_to_salpeter(alpha):
    # T_e/T_i = 2, argon: Salpeter's approximation drops the electron-Landau part of the ion
    # feature, small while f_e(ω/k)/f_i(ω/k) at the ion acoustic speed is small (here
    # ~ (w_i/w_e) e^{T_e/(2T_i)} ≈ 0.01): 1 % covers it (measured 0.03 % and 0.4 %)
    got = _form_factor(_plasma(10.0, 5.0, 40 * AMU), alpha)
    assert got == pytest.approx(salpeter_form_factor(alpha, 1, 2.0), rel=1e-2)


def test_non_collective_limit_is_gaussian():
    # α ≪ 1: S → (2π/k) f_e(ω/k), deviations O(α²) (Sheffield et al. 2011, ch. 3, from memory)
    p = _plasma(10.0, 1.0)
    alpha = 0.02
    k = 1.0 / (alpha * p.electron_debye_length)
    we = p.species[0].thermal_speed_par
    om = np.linspace(-4 * k * we, 4 * k * we, 2001)
    gauss = 2 * math.pi / k * np.exp(-((om / (k * we)) ** 2)) / (math.sqrt(math.pi) * we)
    s = spectral_density(p, k=k, omega=om)
    assert np.max(np.abs(s - gauss)) < 2 * alpha**2 * np.max(gauss)


def _least_damped(p: Plasma, k: float, guess: float) -> complex:
    wpe = p.species[0].plasma_frequency
    d = Dispersion(p, k=k, angle_deg=0.0, model="es", omega_ref=wpe)

    def f(z):
        v, dv = d(np.asarray(z) * wpe)
        return v, dv * wpe

    r = polish(f, guess + 0j, rtol=1e-12)
    assert r.converged
    return r.value * wpe


def test_features_sit_at_the_roots():
    # the ion acoustic and electron plasma peaks of S lie at Re ω of the least-damped roots
    # at that k, within the width |γ| (fluctuation-dissipation, Sheffield et al. 2011, ch. 5)
    p = _plasma(10.0, 1.0, 40 * AMU)
    alpha = 3.0
    k = 1.0 / (alpha * p.electron_debye_length)
    wpe = p.species[0].plasma_frequency
    cs = math.sqrt(10.0 * EV / (40 * AMU))
    ia = _least_damped(p, k, k * cs / wpe / math.sqrt(1 + 1 / alpha**2))
    epw = _least_damped(p, k, math.sqrt(1 + 3 / alpha**2))
    om_i = np.linspace(0.2 * ia.real, 2 * ia.real, 20001)
    peak_i = om_i[np.argmax(spectral_density(p, k=k, omega=om_i))]
    assert abs(peak_i - ia.real) < abs(ia.imag)
    om_e = np.linspace(0.5 * epw.real, 1.5 * epw.real, 20001)
    peak_e = om_e[np.argmax(spectral_density(p, k=k, omega=om_e))]
    assert abs(peak_e - epw.real) < abs(epw.imag)


def test_scattered_spectrum_geometry():
    p = _plasma(10.0, 1.0, n=1e23)
    sp = scattered_spectrum(p, laser_wavelength=532e-9, scattering_angle_deg=90.0, points=801)
    # Bragg condition |k| = 2 k_i sin(θ/2) (Sheffield et al. 2011, from memory)
    assert sp.k_bragg_per_m == pytest.approx(4 * math.pi / 532e-9 * math.sin(math.pi / 4))
    assert bragg_wavenumber(532e-9, 180.0) == pytest.approx(2 * 2 * math.pi / 532e-9)
    c = sp.columns
    assert np.all(np.diff(c["scattered_wavelength_nm"]) > 0)
    assert np.max(c["relative_power_per_nm"]) == pytest.approx(1.0)
    # λ_s = 2πc/(ω_i + ω) holds row by row
    w_i = 2 * math.pi * 299792458.0 / 532e-9
    lam = 2 * math.pi * 299792458.0 / (w_i + c["omega_rad_per_s"]) * 1e9
    np.testing.assert_allclose(c["scattered_wavelength_nm"], lam, rtol=1e-12)
    with pytest.raises(ValueError, match="B = 0"):
        spectral_density(Plasma(p.species, 0.1), k=1e6, omega=np.zeros(1))


def test_lab_spectrum_resolves_its_ion_acoustic_peaks():
    # Issue 18: the lab example probed at 10.6 µm, 1°: 4,001 even samples gave a peak of
    # 6.8e-6 s (true 2.03e-5 s) and an ion-feature area of 0.533 (true 0.711).  The
    # adaptive samples must give both within 1 % of a dense even grid (400,001 points
    # over the ion feature: an independent quadrature of the same S).
    from pathlib import Path

    from kinroots import load_case
    from kinroots.physics import spectrum as sp

    case = load_case(Path(__file__).resolve().parent.parent / "cases"
                     / "lab_launched_ion_acoustic.toml")
    res = sp.scattered_spectrum(case.plasma, laser_wavelength=10.6e-6,
                                scattering_angle_deg=1.0, k_angle_deg=case.angle_deg)
    om, s = res.columns["omega_rad_per_s"], res.columns["spectral_density_s"]
    order = np.argsort(om)
    om, s = om[order], s[order]
    _, ion = sp._default_window(case.plasma, res.k_bragg_per_m, case.angle_deg)
    w_i = 2 * math.pi * sp.C_LIGHT / 10.6e-6
    k_i = 2 * math.pi / 10.6e-6
    x = np.linspace(-ion, ion, 400_001)
    k_s = (w_i + x) / sp.C_LIGHT
    k = np.sqrt(k_i**2 + k_s**2 - 2 * k_i * k_s * math.cos(math.radians(1.0)))
    dense = sp.spectral_density(case.plasma, k=k, omega=x, angle_deg=case.angle_deg)
    assert s.max() == pytest.approx(dense.max(), rel=1e-2)
    inside = np.abs(om) <= ion
    area = np.trapezoid(s[inside], om[inside])
    assert area == pytest.approx(np.trapezoid(dense, x), rel=1e-2)
    assert om.size < 20_000  # dense only where it must be


def test_sum_rule_check_in_equilibrium():
    p = _plasma(10.0, 10.0)
    res = scattered_spectrum(p, laser_wavelength=532e-9, scattering_angle_deg=90.0)
    rule = sum_rule_check(p, res)
    assert rule["applies"] == "yes" and rule["relative_difference"] < 0.02


def test_probe_below_the_cutoff_is_refused():
    # ω² = ω_pe² + k²c² (Chen, Introduction to Plasma Physics and Controlled Fusion, 3rd
    # ed. 2016, ch. 4, chapter from memory): a probe at 0.9 ω_pe does not propagate; ω_pe from
    # scipy.constants, independently of kinroots' own plasma frequency
    from scipy import constants as sc

    from kinroots.physics.spectrum import probe_problems

    p = _plasma(10.0, 1.0)
    wpe = math.sqrt(1e19 * sc.e**2 / (sc.epsilon_0 * sc.m_e))
    below = 2 * math.pi * sc.c / (0.9 * wpe)
    assert "propagate" in probe_problems(p, below, 90.0)["laser_wavelength"]
    with pytest.raises(ValueError, match="propagate"):
        scattered_spectrum(p, laser_wavelength=below, scattering_angle_deg=90.0)
    assert probe_problems(p, 532e-9, 90.0) == {}
    # shorter than 10 pm (Compton recoil), or not a number: refused before any arithmetic
    for bad in (1e-300, 0.0, -1.0, math.nan, math.inf, "a"):
        assert "expected a wavelength" in probe_problems(p, bad, 90.0)["laser_wavelength"]
    for bad in (0.0, 181.0, math.nan):
        assert "(0, 180]" in probe_problems(p, 532e-9, bad)["scattering_angle"]
    for bad in (0, 10, 2.5, True):
        with pytest.raises(ValueError, match="points"):
            scattered_spectrum(p, laser_wavelength=532e-9, scattering_angle_deg=90.0,
                               points=bad)
