"""Mode identity: cold-plasma polarizations, Langmuir wave, Gauss's law, Boltzmann electrons."""

from __future__ import annotations

import math

import numpy as np
import pytest

from kinroots.io.case import load_case
from kinroots.physics import modes
from kinroots.physics.dispersion import Dispersion
from kinroots.physics.plasma import E_CHARGE, EPS0, EV, M_ELECTRON, M_PROTON, Plasma, Species
from kinroots.roots import polish
from kinroots.study.problem import survey
from kinroots.study.rows import root_row

B = 0.1
N = 1e18
COLD = 1e-4  # eV: thermal effects negligible (k ρ, k∥ w/ω ≪ 1 below)


def _cold_plasma() -> Plasma:
    return Plasma((Species("e", -1, M_ELECTRON, N, COLD, COLD),
                   Species("p", 1, M_PROTON, N, COLD, COLD)), B)


def _stix(plasma: Plasma, w: float) -> tuple[float, float, float]:
    """Cold-plasma S, D, P (Stix 1992, eqs. 1-19..1-21, from memory)."""
    s = 1.0
    d = 0.0
    p = 1.0
    for sp in plasma.species:
        wp2 = sp.plasma_frequency**2
        om = sp.cyclotron_frequency(plasma.B)
        s -= wp2 / (w * w - om * om)
        d += om * wp2 / (w * (w * w - om * om))
        p -= wp2 / (w * w)
    return s, d, p


def _root(plasma: Plasma, w0: float, angle: float) -> tuple[complex, float, Dispersion]:
    """Cold n² (Stix 1992, eq. 1-29 biquadratic, from memory) → k; polish ω kinetically."""
    s, d, p = _stix(plasma, w0)
    r, left = s + d, s - d
    th = math.radians(angle)
    a = s * math.sin(th) ** 2 + p * math.cos(th) ** 2
    b = r * left * math.sin(th) ** 2 + p * s * (1 + math.cos(th) ** 2)
    c = p * r * left
    disc = math.sqrt(b * b - 4 * a * c)
    n2 = max((b + disc) / (2 * a), (b - disc) / (2 * a))
    k = math.sqrt(n2) * w0 / 299792458.0
    disp = Dispersion(plasma, k=k, angle_deg=angle, model="em", omega_ref=w0)

    def f(z):
        v, dv = disp(np.asarray(z) * w0)
        return v, dv * w0

    res = polish(f, 1.0 + 0j, rtol=1e-12)
    assert res.converged
    return res.value * w0, k, disp


def test_parallel_whistler_is_right_handed():
    # R wave: E_y = i E_x, right-handed about B (Stix 1992, §1-4, from memory)
    pl = _cold_plasma()
    w0 = 0.3 * abs(pl.species[0].cyclotron_frequency(B))
    w, k, _ = _root(pl, w0, 0.0)
    assert abs(w / w0 - 1) < 1e-4  # cold limit reproduced by the hot tensor
    m = modes.mode_identity(pl, omega=w, k=k, angle_deg=0.0, model="em", omega_ref=w0)
    assert m.handedness == pytest.approx(1.0, abs=1e-6)
    ex, ey, ez = m.e
    assert ey / ex == pytest.approx(1j, abs=1e-6)
    assert abs(ez) < 1e-8 and m.electrostatic_fraction < 1e-8
    assert abs(ex.imag) < 1e-15 and ex.real > 0  # phase convention: first component real
    # |δB| c/|δE| = |n| for a transverse wave (Faraday's law)
    assert m.db_c_over_de == pytest.approx(k * 299792458.0 / abs(w), rel=1e-8)
    assert m.magnetic_compressibility < 1e-8


def test_parallel_ion_cyclotron_wave_is_left_handed():
    # L wave below Ω_p: E_y = −i E_x, left-handed (Stix 1992, §1-4, from memory)
    pl = _cold_plasma()
    w0 = 0.5 * pl.species[1].cyclotron_frequency(B)
    w, k, _ = _root(pl, w0, 0.0)
    m = modes.mode_identity(pl, omega=w, k=k, angle_deg=0.0, model="em", omega_ref=w0)
    assert m.handedness == pytest.approx(-1.0, abs=1e-6)
    assert m.e[1] / m.e[0] == pytest.approx(-1j, abs=1e-6)


def test_oblique_whistler_polarization_matches_stix():
    # i E_x / E_y = (n² − S)/D (Stix 1992, eq. 1-33, from memory), cold limit
    pl = _cold_plasma()
    w0 = 0.3 * abs(pl.species[0].cyclotron_frequency(B))
    w, k, _ = _root(pl, w0, 30.0)
    m = modes.mode_identity(pl, omega=w, k=k, angle_deg=30.0, model="em", omega_ref=w0)
    s, d, _ = _stix(pl, w.real)
    n2 = (k * 299792458.0 / w.real) ** 2
    assert (1j * m.e[0] / m.e[1]).real == pytest.approx((n2 - s) / d, rel=1e-4)
    assert 0 < m.handedness < 1


def test_langmuir_wave_is_electrostatic_in_the_em_model():
    # an unmagnetized Langmuir wave is longitudinal: δE ∥ k, δB = 0 (common practice)
    pl = Plasma((Species("e", -1, M_ELECTRON, 1e18, 10.0, 10.0),
                 Species("p", 1, M_PROTON, 1e18, 1.0, 1.0)))
    wpe = pl.species[0].plasma_frequency
    k = 0.3 / pl.species[0].debye_length
    disp = Dispersion(pl, k=k, angle_deg=40.0, model="em", omega_ref=wpe)

    def f(z):
        v, dv = disp(np.asarray(z) * wpe)
        return v, dv * wpe

    r = polish(f, math.sqrt(1 + 3 * 0.09) + 0j, rtol=1e-12)
    assert r.converged
    m = modes.mode_identity(pl, omega=r.value * wpe, k=k, angle_deg=40.0, model="em",
                            omega_ref=wpe)
    assert m.electrostatic_fraction == pytest.approx(1.0, abs=1e-8)
    assert m.db_c_over_de < 1e-6
    es = modes.mode_identity(pl, omega=r.value * wpe, k=k, angle_deg=40.0, model="es",
                             omega_ref=wpe)
    assert es.electrostatic_fraction == 1.0 and es.db_c_over_de == 0.0


def test_ion_acoustic_density_responses():
    case = load_case("cases/argon_ion_acoustic.toml")
    k = 0.3
    r = survey(case, k).roots[0]
    row = root_row(case, 0, k, r)
    # Boltzmann electrons δn_e/n_e = eφ/T_e, φ = i|E|/k for E = k̂ (common practice);
    # corrections of order ω/(k w_e) ~ 1e-3 here
    assert row["density_abs_e"] == pytest.approx(1.0, abs=5e-3)
    assert row["density_phase_deg_e"] == pytest.approx(90.0, abs=0.5)
    # Gauss's law: Σ q_s δn_s = i ε0 k |E| (exact at a root, to its residual)
    u = case.units
    k_si = float(u.k_to_si(k))
    t_ref = case.plasma.species[0].temperature_par * EV
    unit = E_CHARGE / (k_si * t_ref)
    total = 0j
    for s in case.plasma.species:
        dn = row[f"density_abs_{s.name}"] * np.exp(1j * math.radians(
            row[f"density_phase_deg_{s.name}"]))
        total += s.charge * s.density * dn * unit
    assert total == pytest.approx(1j * EPS0 * k_si, rel=1e-6)
    assert row["electrostatic_fraction"] == 1.0 and row["handedness"] is None
