"""Krook (BGK) species where the Landau exponential exceeds double precision (issue 15):
χ_s = N_s/Q_s formed from mantissas, and the survey of F = (Π_s Q_s) D as F/2^N."""

from __future__ import annotations

from pathlib import Path

import mpmath as mp
import numpy as np
import pytest
from _mp_reference import plasma_z as _z

from kinroots.io.case import load_case, parse_case
from kinroots.physics.models import krook, krook_dispersion
from kinroots.physics.plasma import EV, M_PROTON, Species
from kinroots.study.problem import function_at, survey

DATA = Path(__file__).parent / "data"


def _with_nu(case, **nus: float):
    """``case`` with collision frequencies ν_s = value × the case's frequency unit."""
    raw = dict(case.raw)
    species = [dict(s) for s in raw["species"]]
    for s in species:
        if s["name"] in nus:
            s["collision_frequency"] = nus[s["name"]] * case.units.omega_unit
    raw["species"] = species
    return parse_case(raw, "krook overflow")


# --------------------------------------------------------------------- unmagnetized χ

PROTON = Species("H+", 1, M_PROTON, 1e18, 100.0, 100.0, 0.0, 5e7)
K = 1e4  # 1/m: k w_i ≈ 1.4e9 rad/s


def _krook_chi(s: Species, k: float, om: mp.mpc) -> mp.mpc:
    """χ = (1 + ζ′Z(ζ′))/(k²λ_D²) / (1 + (iν/kw) Z(ζ′)), ζ′ = (ω + iν)/(kw): the
    number-conserving BGK susceptibility (P. L. Bhatnagar, E. P. Gross and M. Krook,
    Phys. Rev. 94, 511 (1954) for the operator; the form of
    :func:`kinroots.physics.models.krook.susceptibility`, re-derived there), mpmath."""
    w = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
    nu = mp.mpf(s.collision_frequency)
    zeta = (om + 1j * nu) / (k * w)
    z = _z(zeta)
    lam2 = mp.mpf(s.debye_length) ** 2
    return (1 + zeta * z) / (k * k * lam2) / (1 + 1j * nu / (k * w) * z)


@pytest.mark.parametrize("zeta", [1 - 35j, 3 - 30j, 0.5 - 27j, 10 - 40j, 20 - 25j,
                                  0.3 - 0.2j, 2 + 1j, 4 - 3j])
def test_unmagnetized_chi_against_mpmath(zeta: complex) -> None:
    w = PROTON.thermal_speed_par
    om = K * w * zeta - 1j * PROTON.collision_frequency  # ζ′ = zeta
    n, q, _, _ = krook.unmagnetized_parts(np.array([om]), PROTON, k_par=K, k_perp=0.0,
                                          dk=False)
    overflow = not (np.isfinite(n[0]) and np.isfinite(q[0]))
    assert overflow == (zeta.imag ** 2 - zeta.real ** 2 > 708)  # where double N, Q overflow
    got = krook.susceptibility(np.array([om, om]), PROTON, k_par=K, k_perp=0.0)
    with mp.workdps(30):
        ref = _krook_chi(PROTON, K, mp.mpc(om))
        dref = mp.diff(lambda x: _krook_chi(PROTON, K, x), mp.mpc(om))
        assert abs(got.value[0] - ref) <= 1e-12 * abs(ref), (zeta, got.value[0], ref)
        # dχ/dω = (N′Q − NQ′)/Q² from the mantissas; its rounding grows like |ζ|²
        assert abs(got.derivative[0] - dref) <= 1e-12 * abs(zeta) ** 2 * abs(dref)
    assert got.value[0] == got.value[1]


# ----------------------------------------------------------------------- magnetized χ

#: Oblique hydrogen plasma (B = 0.1 T, 60°), electrostatic: at Im ω = −8 Ω_ci the ion
#: harmonic terms exp(−ζ_n²) reach about e^1000.
OBLIQUE = DATA / "overflow_oblique.toml"


@pytest.fixture(scope="module")
def oblique_es(tmp_path_factory):
    path = tmp_path_factory.mktemp("krook") / "es.toml"
    path.write_text(OBLIQUE.read_text().replace('"electromagnetic"', '"electrostatic"'))
    return _with_nu(load_case(path), **{"H+": 0.05})


def _magnetized_krook_chi(s: Species, om: mp.mpc, kpar: mp.mpf, kperp: mp.mpf, B: float,
                          n_max: int = 30) -> mp.mpc:
    """χ = (1/(k²λ_D²)) [1 + ζ_0 S]/[1 + (iν/a) S], S = Σ_n e^{−λ}I_n(λ) Z(ζ_n),
    ζ_n = (ω − nΩ + iν)/a, a = k∥w, λ = (k⊥w/Ω)²/2 (BGK operator, Bhatnagar, Gross &
    Krook 1954; the form of :func:`kinroots.physics.models.krook.magnetized_parts`,
    re-derived there), mpmath."""
    om_c = mp.mpf(s.cyclotron_frequency(B))
    w = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
    nu = mp.mpf(s.collision_frequency)
    a = kpar * w
    lam = (kperp * w / om_c) ** 2 / 2
    sum_z = mp.fsum(mp.exp(-lam) * mp.besseli(n, lam) * _z((om - n * om_c + 1j * nu) / a)
                    for n in range(-n_max, n_max + 1))
    k2 = kpar**2 + kperp**2
    zeta0 = (om + 1j * nu) / a
    return (1 + zeta0 * sum_z) / (k2 * mp.mpf(s.debye_length) ** 2) / (1 + 1j * nu / a * sum_z)


def test_magnetized_chi_against_mpmath(oblique_es) -> None:
    disp = function_at(oblique_es, 0.5).dispersion
    ion = oblique_es.plasma.species[1]
    kw = dict(k_par=disp.k_par, k_perp=disp.k_perp, B=oblique_es.plasma.B)
    w = np.array([0.4 - 8.0j, 0.6 - 6.0j, 0.7 - 0.3j, 0.3 + 0.1j])
    om = w * disp.omega_ref
    n, _, q, _, _ = krook.magnetized_parts(om, ion, **kw)
    assert not np.isfinite(n[0]) and not np.isfinite(q[0])  # double overflows there
    assert np.isfinite(n[2:]).all() and np.isfinite(q[2:]).all()
    got = krook.magnetized_susceptibility(om, ion, **kw)
    kpar, kperp = mp.mpf(disp.k_par.real), mp.mpf(disp.k_perp.real)
    with mp.workdps(30):
        for j in range(len(w)):
            ref = _magnetized_krook_chi(ion, mp.mpc(om[j]), kpar, kperp, oblique_es.plasma.B)
            assert abs(got.value[j] - ref) <= 1e-12 * abs(ref), (w[j], got.value[j], ref)


# ---------------------------------------------------------------------------- surveys

HOT_IONS = DATA / "overflow_hot_ions.toml"


@pytest.fixture(scope="module")
def hot_ions():
    return load_case(HOT_IONS)


def _contains(wide, narrow) -> None:
    """Every root of the narrow survey is a root of the wide one (1e-9 relative)."""
    assert narrow.complete and narrow.count == len(narrow.roots) > 0
    for v in narrow.values:
        assert min(abs(u - v) for u in wide.values) <= 1e-9 * abs(v), v


def test_unmagnetized_window_beyond_double_precision(hot_ions) -> None:
    # collisional ions and electrons; down to Im ω = −0.45 ω_pe |F| reaches 1e312
    case = _with_nu(hot_ions, **{"H+": 0.01, "e": 0.001})
    wide = survey(case, 0.5, box=(-0.1, 0.1, -0.45, 0.05))
    assert any("exceeds double precision" in n for n in wide.notes), wide.notes
    assert wide.complete and wide.count == len(wide.roots)
    assert all(r.converged and r.verified for r in wide.roots)
    _contains(wide, survey(case, 0.5, box=(-0.1, 0.1, -0.2, 0.05)))
    # the roots are zeros of D = 1 + Σ N_s/Q_s itself, evaluated overflow-free
    disp = function_at(case, 0.5).dispersion
    rel = disp.relative_residual(np.array(wide.values) * disp.omega_ref)
    assert np.all(rel < 1e-8), rel


def test_magnetized_window_beyond_double_precision(oblique_es) -> None:
    # |F| up to about 1e446 on the window: 40 roots, those of the window to −3 Ω_ci among
    # them
    wide = survey(oblique_es, 0.5, box=(0.2, 0.9, -8.0, 0.2))
    assert any("exceeds double precision" in n for n in wide.notes), wide.notes
    assert wide.complete and wide.count == len(wide.roots) >= 30
    narrow = survey(oblique_es, 0.5, box=(0.2, 0.9, -3.0, 0.2))
    assert not any("exceeds double precision" in n for n in narrow.notes)
    _contains(wide, narrow)
    # each root is a zero of the overflow-free F (a pole of χ would show as |F| ≠ 0)
    f = function_at(oblique_es, 0.5)
    lg = f.log2_magnitude(np.array(wide.values))
    top = f.log2_magnitude(np.array(wide.values) + 0.01)
    assert np.all(lg < top - 20), (lg, top)


def test_zero_collision_limit(hot_ions) -> None:
    # ν = 0 through the mantissa form: F = D (Q = 1) and its log is the collisionless
    # overflow-free log D (itself checked against mpmath in tests/test_overflow_survey.py)
    disp = function_at(hot_ions, 0.5).dispersion
    om = np.array([0.01 - 0.45j, 0.05 - 0.44j, 0.02 + 0.01j]) * disp.omega_ref
    f, _, _, p = krook.split_dispersion(om, hot_ions.plasma.species, k=disp.k,
                                        cos_theta=1.0, sin_theta=0.0)
    assert not np.isfinite(disp(om)[0][0])
    np.testing.assert_allclose(np.log(f) + p * np.log(2.0), disp.log_value(om), rtol=1e-13)
    # ν → 0: on a window where D overflows, the roots approach the collisionless ones
    # linearly in ν (the Krook correction is first order in ν, BGK 1954)
    box = (-0.1, 0.1, -0.45, 0.05)
    ref = survey(hot_ions, 0.5, box=box)
    shifts = []
    for nu in (1e-6, 1e-9):
        res = survey(_with_nu(hot_ions, **{"H+": nu}), 0.5, box=box)
        assert res.complete and res.count == len(res.roots) == len(ref.roots)
        shifts.append(np.array([min(abs(u - v) for u in res.values) for v in ref.values]))
    ratio = shifts[0] / shifts[1]
    assert np.all(np.abs(ratio / 1e3 - 1) < 0.01), ratio


def test_magnetized_split_equals_plain_where_finite(oblique_es) -> None:
    disp = function_at(oblique_es, 0.5).dispersion
    om = np.array([0.7 - 0.3j, 0.3 + 0.1j, 0.55 - 2.0j]) * disp.omega_ref
    kw = dict(k_par=disp.k_par, k_perp=disp.k_perp, B=oblique_es.plasma.B)
    plain, dplain = krook_dispersion.magnetized_scaled_dispersion(
        om, oblique_es.plasma.species, **kw)
    m, dm, p = krook_dispersion.magnetized_split_dispersion(om, oblique_es.plasma.species, **kw)
    np.testing.assert_allclose(m * 2.0**p, plain, rtol=1e-14)
    np.testing.assert_allclose(dm * 2.0**p, dplain, rtol=1e-14)


def test_unmagnetized_split_equals_plain_where_finite(hot_ions) -> None:
    case = _with_nu(hot_ions, **{"H+": 0.01, "e": 0.001})
    disp = function_at(case, 0.5).dispersion
    om = np.array([0.05 - 0.1j, 0.02 + 0.01j, -0.07 - 0.15j]) * disp.omega_ref
    k = disp.k * np.array([1.0, 1.0 + 0.2j, 0.7])
    kw = dict(k=k, cos_theta=0.6, sin_theta=0.8)
    plain = krook.scaled_dispersion(om, case.plasma.species, **kw)
    *split, p = krook.split_dispersion(om, case.plasma.species, **kw)
    for a, b in zip(plain, split, strict=True):
        np.testing.assert_allclose(b * 2.0**p, a, rtol=1e-14)
