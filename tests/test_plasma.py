"""Derived quantities and normalization (kinroots.physics.plasma).

Reference formulas: NRL Plasma Formulary (J. D. Huba), "Fundamental plasma parameters",
quoted from memory; coefficients are printed there to three significant figures, so each
check allows half a unit in the third printed digit.  n in cm^-3, T in eV, B in gauss,
μ = m_i/m_p; the formulary's thermal speeds are sqrt(T/m) (ours: sqrt(2T/m)).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from kinroots.physics.plasma import (
    EV,
    M_ELECTRON,
    M_PROTON,
    MU0,
    Normalization,
    NormalizationError,
    Plasma,
    Species,
    derived_quantities,
)

GAUSS = 1e-4  # T
CM3 = 1e6  # m^-3 per cm^-3


def printed(value: float, coefficient: float) -> None:
    """``value`` agrees with a 3-significant-figure printed ``coefficient``."""
    half_unit = 0.5 * 10 ** (math.floor(math.log10(abs(coefficient))) - 2)
    assert abs(value - coefficient) <= half_unit * (1 + 1e-9), (value, coefficient)


def electron(n: float = 1e6, t: float = 1.0) -> Species:
    return Species("e", -1, M_ELECTRON, n, t, t)


def ion(n: float = 1e6, t: float = 1.0, mu: float = 1.0, z: float = 1.0) -> Species:
    return Species("i", z, mu * M_PROTON, n, t, t)


# NRL Plasma Formulary (from memory) -----------------------------------------------------


def test_electron_plasma_frequency_nrl() -> None:
    # f_pe = 8.98e3 n_e^1/2 Hz  (NRL Plasma Formulary, from memory)
    s = electron(n=CM3)
    printed(s.plasma_frequency / (2 * np.pi), 8.98e3)


def test_ion_plasma_frequency_nrl() -> None:
    # f_pi = 2.10e2 Z μ^-1/2 n_i^1/2 Hz  (NRL Plasma Formulary, from memory)
    for mu, z in ((1.0, 1.0), (4.0, 2.0), (40.0, 1.0)):
        s = ion(n=CM3, mu=mu, z=z)
        printed(s.plasma_frequency / (2 * np.pi) / z * np.sqrt(mu), 2.10e2)


def test_cyclotron_frequencies_nrl() -> None:
    # f_ce = 2.80e6 B Hz, f_ci = 1.52e3 Z μ^-1 B Hz  (NRL Plasma Formulary, from memory)
    B = 1 * GAUSS
    assert electron().cyclotron_frequency(B) < 0  # signed (docs/design.md, conventions)
    printed(abs(electron().cyclotron_frequency(B)) / (2 * np.pi), 2.80e6)
    printed(ion(mu=4.0, z=2.0).cyclotron_frequency(B) / (2 * np.pi) * 4.0 / 2.0, 1.52e3)


def test_debye_length_nrl() -> None:
    # λ_De = 7.43e2 T_e^1/2 n_e^-1/2 cm  (NRL Plasma Formulary, from memory)
    printed(electron(n=CM3, t=1.0).debye_length * 100, 7.43e2)
    printed(electron(n=4 * CM3, t=9.0).debye_length * 100 * np.sqrt(4 / 9), 7.43e2)


def test_thermal_speeds_nrl() -> None:
    # v_Te = 4.19e7 T_e^1/2 cm/s, v_Ti = 9.79e5 μ^-1/2 T_i^1/2 cm/s, with v = sqrt(T/m)
    # (NRL Plasma Formulary, from memory); our w = sqrt(2T/m) = sqrt(2) v.
    printed(electron().thermal_speed_par * 100 / np.sqrt(2), 4.19e7)
    printed(ion(mu=2.0).thermal_speed_perp * 100 / np.sqrt(2) * np.sqrt(2.0), 9.79e5)


def test_gyroradii_nrl() -> None:
    # r_e = 2.38 T_e^1/2 B^-1 cm; r_i = 1.02e2 μ^1/2 Z^-1 T_i^1/2 B^-1 cm, with sqrt(T/m)
    # speeds (NRL Plasma Formulary, from memory); ours uses w⊥ = sqrt(2T⊥/m).
    B = 1 * GAUSS
    printed(electron().gyroradius(B) * 100 / np.sqrt(2), 2.38)
    printed(ion(mu=4.0, z=2.0).gyroradius(B) * 100 / np.sqrt(2) * 2.0 / 2.0, 1.02e2)


def test_inertial_lengths_nrl() -> None:
    # c/ω_pe = 5.31e5 n_e^-1/2 cm; c/ω_pi = 2.28e7 Z^-1 (μ/n_i)^1/2 cm
    # (NRL Plasma Formulary, from memory)
    printed(electron(n=CM3).inertial_length * 100, 5.31e5)
    printed(ion(n=CM3, mu=4.0, z=2.0).inertial_length * 100 * 2.0 / 2.0, 2.28e7)


def test_alfven_speed_nrl() -> None:
    # v_A = 2.18e11 μ^-1/2 n_i^-1/2 B cm/s, ion mass density only
    # (NRL Plasma Formulary, from memory)
    p = Plasma((ion(n=CM3, mu=4.0, z=1.0),), B=1 * GAUSS)
    printed(p.alfven_speed * 100 * 2.0, 2.18e11)


def test_beta_nrl() -> None:
    # β = 8π n T / B² = 4.03e-11 n T B^-2 (gaussian; NRL Plasma Formulary, from memory)
    s = Species("x", 1, M_PROTON, CM3, 3.0, 5.0)
    p = Plasma((s,), B=1 * GAUSS)
    printed(s.beta_par(p.B) / 3.0, 4.03e-11)
    printed(p.beta_perp / 5.0, 4.03e-11)


# identities (common practice) -----------------------------------------------------------


def test_identities() -> None:
    # β B²/(2μ0) = n T; v_A = Ω_i d_i for a single ion species (common practice)
    e = electron(n=1e18, t=10.0)
    i = Species("p", 1, M_PROTON, 1e18, 2.0, 6.0)
    p = Plasma((e, i), B=0.5)
    assert i.beta_perp(p.B) * p.B**2 / (2 * MU0) == pytest.approx(1e18 * 6.0 * EV, rel=1e-14)
    p_ion = Plasma((i,), B=0.5)
    # CODATA's ε0 and μ0 satisfy ε0 μ0 c² = 1 only to ~1e-12 (both measured since 2019)
    assert p_ion.alfven_speed == pytest.approx(
        i.cyclotron_frequency(0.5) * i.inertial_length, rel=1e-10
    )
    assert p.electron_debye_length == pytest.approx(e.debye_length, rel=1e-15)
    # total Debye length: 1/λ² = Σ 1/λ_s²  (common practice)
    assert p.debye_length**-2 == pytest.approx(e.debye_length**-2 + i.debye_length**-2)


def test_unmagnetized_quantities_are_none() -> None:
    p = Plasma((electron(), ion()), B=0.0)
    d = derived_quantities(p)
    for entry in d["species"]:
        for key in ("cyclotron_frequency", "gyroradius", "beta_par", "beta_perp"):
            assert entry["si"][key] is None
    for key in ("beta_par", "beta_perp", "alfven_speed", "lower_hybrid_frequency"):
        assert d["plasma"]["si"][key] is None
    assert all(v is None or math.isfinite(v) for v in d["plasma"]["si"].values())


def test_electron_debye_length_without_electrons_is_none() -> None:
    assert Plasma((ion(),)).electron_debye_length is None


# lower hybrid -----------------------------------------------------------------------------


def _lh_quadratic(e: Species, i: Species, B: float) -> float:
    """Smaller root of S = 0 for one ion species, cleared of fractions:
    x² − (Ωe² + Ωi² + ωpe² + ωpi²) x + (Ωe²Ωi² + ωpe²Ωi² + ωpi²Ωe²) = 0, x = ω²
    (Stix 1992, ch. 1, S of S, D, P; from memory)."""
    oe2, oi2 = e.cyclotron_frequency(B) ** 2, i.cyclotron_frequency(B) ** 2
    pe2, pi2 = e.plasma_frequency**2, i.plasma_frequency**2
    b = oe2 + oi2 + pe2 + pi2
    c = oe2 * oi2 + pe2 * oi2 + pi2 * oe2
    return math.sqrt(2 * c / (b + math.sqrt(b * b - 4 * c)))


@pytest.mark.parametrize("n, B", [(1e19, 2.0), (1e17, 0.1), (1e12, 1.0), (5e6, 6e-9)])
def test_lower_hybrid_single_ion(n: float, B: float) -> None:
    e, i = electron(n=n, t=10.0), Species("D", 1, 2.0 * M_PROTON, n, 5.0, 5.0)
    p = Plasma((e, i), B=B)
    assert p.lower_hybrid_frequency == pytest.approx(_lh_quadratic(e, i, B), rel=1e-12)
    # handbook approximation 1/ω_LH² ≈ 1/(ω_pi² + Ω_i²) + 1/(|Ω_e|Ω_i), valid to O(m_e/m_i)
    # (NRL Plasma Formulary, from memory)
    oe, oi = abs(e.cyclotron_frequency(B)), i.cyclotron_frequency(B)
    approx = (1 / (i.plasma_frequency**2 + oi**2) + 1 / (oe * oi)) ** -0.5
    assert p.lower_hybrid_frequency == pytest.approx(approx, rel=2e-3)


def test_lower_hybrid_two_ions_dense_limit() -> None:
    # dense plasma (ω_pe ≫ |Ω_e|): S = 0 above all ion cyclotron frequencies gives
    # ω_LH² ≈ Σ_i ω_pi² / (1 + ω_pe²/Ω_e²)  (Stix 1992 ch. 2, from memory), with
    # corrections of order Ω_i²/ω_LH².
    e = electron(n=1.2e20)
    h = Species("H", 1, M_PROTON, 1e20, 1.0, 1.0)
    a = Species("He", 2, 4.0026 * 1.66053906660e-27, 0.1e20, 1.0, 1.0)
    p = Plasma((e, h, a), B=3.0)
    oe = e.cyclotron_frequency(3.0)
    expected2 = (h.plasma_frequency**2 + a.plasma_frequency**2) / (
        1 + e.plasma_frequency**2 / oe**2
    )
    assert p.lower_hybrid_frequency == pytest.approx(math.sqrt(expected2), rel=2e-3)
    assert p.lower_hybrid_frequency > h.cyclotron_frequency(3.0)


# normalization ----------------------------------------------------------------------------


def _plasma(B: float = 0.3) -> Plasma:
    return Plasma((electron(n=1e18, t=5.0), Species("H+", 1, M_PROTON, 1e18, 1.0, 2.0)), B)


def test_normalization_units_and_labels() -> None:
    p = _plasma()
    u = Normalization("plasma:e", "debye:e", p)
    assert u.omega_unit == p.species[0].plasma_frequency
    assert u.length_unit == p.species[0].debye_length
    assert (u.frequency_label, u.length_label) == ("ω_pe", "λ_De")
    assert (u.frequency_label_ascii, u.length_label_ascii) == ("omega_pe", "lambda_De")
    # ω_pe λ_De = sqrt(T/m) (common practice)
    assert u.speed_unit == pytest.approx(np.sqrt(5.0 * EV / M_ELECTRON), rel=1e-14)
    c = Normalization("cyclotron:H+", "gyroradius:H+", p)
    assert c.omega_unit == pytest.approx(abs(p.species[1].cyclotron_frequency(0.3)))
    assert c.length_unit == p.species[1].gyroradius(0.3)
    assert c.frequency_label == "|Ω_c(H+)|"
    d = Normalization("cyclotron:e", "inertial:H+", p)
    assert d.omega_unit > 0  # |Ω_e| used
    assert d.length_unit == pytest.approx(p.species[1].inertial_length)


@pytest.mark.parametrize(
    "freq, length, needle",
    [
        ("cyclotron:e", "debye:e", "magnetic field"),
        ("plasma:e", "gyroradius:e", "magnetic field"),
        ("plasma:x", "debye:e", "'x'"),
        ("plasmа:e", "debye:e", "plasmа:e"),
        ("plasma", "debye:e", "'plasma'"),
    ],
)
def test_normalization_errors(freq: str, length: str, needle: str) -> None:
    with pytest.raises(NormalizationError, match=needle):
        Normalization(freq, length, _plasma(B=0.0))


finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False).filter(
    lambda x: abs(x) > 1e-6 or x == 0
)


@given(
    re=finite,
    im=finite,
    k=finite,
    length=finite,
    v=finite,
    which=st.sampled_from(
        ["plasma:e/debye:e", "cyclotron:H+/gyroradius:H+", "cyclotron:e/inertial:e"]
    ),
)
def test_round_trip(re: float, im: float, k: float, length: float, v: float, which: str) -> None:
    # normalized → SI → normalized is the identity to 1e-14 (common practice)
    f, ln = which.split("/")
    u = Normalization(f, ln, _plasma())
    w = complex(re, im)
    assert u.omega_from_si(u.omega_to_si(w)) == pytest.approx(w, rel=1e-14, abs=0)
    assert u.k_from_si(u.k_to_si(k)) == pytest.approx(k, rel=1e-14, abs=0)
    assert u.length_from_si(u.length_to_si(length)) == pytest.approx(length, rel=1e-14, abs=0)
    assert u.speed_from_si(u.speed_to_si(v)) == pytest.approx(v, rel=1e-14, abs=0)


def test_derived_quantities_keys_and_normalized_values() -> None:
    p = _plasma()
    u = Normalization("plasma:e", "debye:e", p)
    d = derived_quantities(p, u)
    assert set(d) == {"conventions", "magnetic_field_T", "si_units", "species", "plasma", "units"}
    e = d["species"][0]
    assert e["normalized"]["plasma_frequency"] == pytest.approx(1.0, rel=1e-15)
    assert e["normalized"]["debye_length"] == pytest.approx(1.0, rel=1e-15)
    # w_e = sqrt(2) ω_pe λ_De for w = sqrt(2T/m) (common practice)
    assert e["normalized"]["thermal_speed_par"] == pytest.approx(np.sqrt(2), rel=1e-14)
    assert d["units"]["omega_unit_rad_per_s"] == u.omega_unit


def test_constants_are_scipys_codata() -> None:
    # the module writes the CODATA values out (to keep scipy out of its import); they must
    # be exactly those of scipy.constants (CODATA 2022 in scipy >= 1.15)
    from scipy import constants as const

    from kinroots.physics import plasma

    pairs = {
        "E_CHARGE": const.e, "EPS0": const.epsilon_0, "MU0": const.mu_0, "C_LIGHT": const.c,
        "M_ELECTRON": const.m_e, "M_PROTON": const.m_p, "AMU": const.atomic_mass,
        "EV": const.electron_volt,
    }
    for name, value in pairs.items():
        assert getattr(plasma, name) == value, name
