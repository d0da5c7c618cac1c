"""The spatial problem (complex k at real ω) where |D| exceeds double precision (issue 15):
D(k) and dD/dk as mantissas times 2^p, and k boxes surveyed as D/2^N or in sub-boxes."""

from __future__ import annotations

import math
from pathlib import Path

import mpmath as mp
import numpy as np
import pytest
from _mp_reference import plasma_z as _z
from _mp_reference import weibel_lambdas

from kinroots.io.case import load_case, parse_case
from kinroots.physics.dispersion import dispersion_in_k, dispersion_in_k_scaled
from kinroots.physics.models import krook_dispersion
from kinroots.physics.plasma import EV
from kinroots.study.launch import launch
from kinroots.study.probe import probe_launch
from kinroots.study.problem import spatial_roots

DATA = Path(__file__).parent / "data"
ARGON = "cases/argon_ion_acoustic.toml"

#: At ω = 0.3 ω_pi the argon ions' ζ = ω/(k w_i) reaches 15 − 37i on the top edge of this
#: box (|D| about 1e618); the roots lie near arg k = 45°, below Im k = 0.0202, where the
#: narrow box (double precision throughout) ends.
WIDE = (0.02, 0.0202, 0.0, 0.05)
NARROW = (0.02, 0.0202, 0.0, 0.022)


def _log_d_es(case, om: float, k: mp.mpc) -> mp.mpc:
    """ln ε_L, ε_L = 1 + Σ_s (2ω_ps²/(k²w_s²))(1 + ζ_s Z(ζ_s)), ζ_s = ω/(k w_s), k along
    z, B = 0, Maxwellians (N. A. Krall and A. W. Trivelpiece, *Principles of Plasma
    Physics*, 1973, ch. 8, from memory); SI ω and k."""
    d = mp.mpf(1)
    for s in case.plasma.species:
        w = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
        zeta = om / (k * w)
        d += 2 * mp.mpf(s.plasma_frequency) ** 2 / (k * w) ** 2 * (1 + zeta * _z(zeta))
    return mp.log(d)


@pytest.fixture(scope="module")
def argon():
    return load_case(ARGON)


def test_es_log_d_and_derivative_against_mpmath(argon) -> None:
    om = 0.3 * argon.units.omega_unit
    L = argon.units.length_unit
    k = np.array([0.02 + 0.04j, 0.0201 + 0.05j, 0.02 + 0.02j, 0.3 + 0.01j]) / L
    plain = dispersion_in_k(argon.plasma, omega=om, k=k, angle_deg=0.0,
                            model="electrostatic", omega_ref=argon.units.omega_unit)[0]
    assert not np.isfinite(plain[:2]).any() and np.isfinite(plain[2:]).all()
    d, dd, p = dispersion_in_k_scaled(argon.plasma, omega=om, k=k, angle_deg=0.0,
                                      model="electrostatic", omega_ref=argon.units.omega_unit)
    with mp.workdps(30):
        for j, kj in enumerate(k):
            ref = _log_d_es(argon, om, mp.mpc(kj))
            got = np.log(d[j]) + p[j] * math.log(2.0)
            assert abs(got - ref) <= 1e-12 * abs(ref), (kj * L, got, ref)
            # dD/dk / D against the derivative of mpmath's ln D
            dref = mp.diff(lambda x: _log_d_es(argon, om, x), mp.mpc(kj))
            assert abs(dd[j] / d[j] - dref) <= 1e-9 * abs(dref), (kj * L, dd[j] / d[j], dref)
    assert float(mp.re(_log_d_es(argon, om, mp.mpc(k[0])))) > 709  # beyond 1e308


def test_em_log_d_against_mpmath() -> None:
    # Weibel plasma, k along the anisotropy axis, B = 0: D = (ω/ω_ref)⁴ Λ_yy² Λ_zz with
    # Λ_yy = 1 − k²c²/ω² + Σ_s (ω_ps²/ω²)[−1 + (T⊥/T∥)(1 + ζ_s Z(ζ_s))] and
    # Λ_zz = 1 + Σ_s (2ω_ps²/(k²w∥s²))(1 + ζ_s Z(ζ_s)) (E. S. Weibel, Phys. Rev. Lett. 2,
    # 83 (1959); R. C. Davidson, Handbook of Plasma Physics vol. 1 (1983), ch. 3.3; from
    # memory); the protons' term overflows at k = 0.01 + 0.03i c/ω_pe, ω = 0.001 ω_pe
    case = load_case(DATA / "overflow_weibel.toml")
    w_ref, L = case.units.omega_unit, case.units.length_unit
    om = 0.001 * w_ref
    k = np.array([0.01 + 0.03j, 0.012 + 0.04j, 0.5 + 0.01j]) / L
    plain = dispersion_in_k(case.plasma, omega=om, k=k, angle_deg=0.0,
                            model="electromagnetic", omega_ref=w_ref)[0]
    assert not np.isfinite(plain[:2]).any() and np.isfinite(plain[2])
    d, _, p = dispersion_in_k_scaled(case.plasma, omega=om, k=k, angle_deg=0.0,
                                     model="electromagnetic", omega_ref=w_ref)
    with mp.workdps(30):
        for j, kj in enumerate(k):
            lyy, lzz = weibel_lambdas(case.plasma, mp.mpc(kj), om)
            ref = mp.log((mp.mpf(om) / w_ref) ** 4 * lyy**2 * lzz)
            got = np.log(d[j]) + p[j] * math.log(2.0)
            assert abs(got - ref) <= 1e-12 * abs(ref), (kj * L, got, ref)


def test_magnetized_log_d_against_mpmath(tmp_path) -> None:
    # oblique hydrogen plasma (B = 0.1 T, 60°), electrostatic, ions drifting along B at
    # 30 w_i, ω = 0.6 Ω_ci: at k ρ_i = 0.0198 + 0.0169i (arg k∥ = 40.6°, where the
    # harmonic sum converges) the n = −1 ion term is about exp(2400);
    # ε_L = 1 + Σ_s (2ω_ps²/(k²w_s²))[1 + ζ₀ Σ_n e^{−λ} I_n(λ) Z(ζ_n)],
    # ζ_n = (ω − k∥V − nΩ)/(k∥w) (T. H. Stix, *Waves in Plasmas*, 1992, ch. 11,
    # electrostatic limit; S. P. Gary, *Theory of Space Plasma Microinstabilities*, 1993,
    # ch. 2, the drift; from memory)
    path = tmp_path / "es.toml"
    text = (DATA / "overflow_oblique.toml").read_text().replace('"electromagnetic"',
                                                                 '"electrostatic"')
    case = load_case(path) if path.write_text(text) else None
    raw = dict(case.raw)
    species = [dict(s) for s in raw["species"]]
    species[1]["drift"] = 30.0 * case.plasma.species[1].thermal_speed_par
    raw["species"] = species
    case = parse_case(raw, "drifting ions")
    w_ref, L, B = case.units.omega_unit, case.units.length_unit, case.plasma.B
    om = 0.6 * w_ref
    k = np.array([0.0198 + 0.0169j, 0.5 + 0.02j, 0.4 + 0.45j]) / L
    kw = dict(omega=om, k=k, angle_deg=60.0, model="electrostatic", omega_ref=w_ref)
    plain = dispersion_in_k(case.plasma, **kw)[0]
    assert not np.isfinite(plain[0]) and np.isfinite(plain[1])
    d, dd, p = dispersion_in_k_scaled(case.plasma, **kw)
    # arg k∥ = 48°: the Landau terms grow like exp(c n²), the Bessel weights fall like
    # (λ/2)^n/n! (A&S 9.6.7): the harmonic sum diverges, D has no value there
    assert np.isnan(d[2]) and np.isnan(plain[2])
    res = spatial_roots(case, 0.6, (0.3, 0.5, 0.0, 0.6))
    assert not res.complete and any("diverges" in n for n in res.notes), res.notes

    def log_d(kc: mp.mpc) -> mp.mpc:
        kpar, kperp = kc * mp.cos(mp.pi / 3), kc * mp.sin(mp.pi / 3)
        total = mp.mpf(1)
        for s in case.plasma.species:
            om_c = mp.mpf(s.cyclotron_frequency(B))
            ws = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
            lam = (kperp * ws / om_c) ** 2 / 2
            x = om - kpar * s.drift
            acc = mp.fsum(mp.exp(-lam) * mp.besseli(n, lam) * _z((x - n * om_c) / (kpar * ws))
                          for n in range(-20, 21))
            total += (2 * mp.mpf(s.plasma_frequency) ** 2 / (kc**2 * ws**2)
                      * (1 + x / (kpar * ws) * acc))
        return mp.log(total)

    with mp.workdps(30):
        for j in range(2):
            ref = log_d(mp.mpc(k[j]))
            got = np.log(d[j]) + p[j] * math.log(2.0)
            assert abs(got - ref) <= 1e-11 * abs(ref), (k[j] * L, got, ref)
            dref = mp.diff(log_d, mp.mpc(k[j]))
            assert abs(dd[j] / d[j] - dref) <= 1e-7 * abs(dref), (k[j] * L, dd[j] / d[j], dref)
        assert float(mp.re(log_d(mp.mpc(k[0])))) > 709


def _contains(wide, narrow) -> None:
    """Every root of the narrow survey is a root of the wide one (1e-9 relative)."""
    assert narrow.complete and narrow.count == len(narrow.roots) > 0
    for v in narrow.values:
        assert min(abs(u - v) for u in wide.values) <= 1e-9 * abs(v), v


def test_k_box_beyond_double_precision(argon) -> None:
    wide = spatial_roots(argon, 0.3, WIDE)
    assert any("exceeds double precision" in n for n in wide.notes), wide.notes
    assert wide.complete and wide.count == len(wide.roots)
    narrow = spatial_roots(argon, 0.3, NARROW)
    assert not narrow.notes
    _contains(wide, narrow)
    assert len(wide.roots) == len(narrow.roots)  # no root where the Landau term is huge


def test_krook_k_box_beyond_double_precision(argon) -> None:
    raw = dict(argon.raw)
    species = [dict(s) for s in raw["species"]]
    species[1]["collision_frequency"] = 1e-3 * argon.units.omega_unit
    raw["species"] = species
    case = parse_case(raw, "argon + collisions")
    wide = spatial_roots(case, 0.3, WIDE)
    assert any("exceeds double precision" in n for n in wide.notes), wide.notes
    assert wide.complete and wide.count == len(wide.roots)
    _contains(wide, spatial_roots(case, 0.3, NARROW))


def test_magnetized_krook_split_in_k_equals_plain_where_finite(tmp_path) -> None:
    case = load_case(DATA / "overflow_hot_ions.toml")
    species = case.plasma.species
    from dataclasses import replace
    ions = replace(species[1], collision_frequency=1e8)
    args = dict(k=np.array([2e4 + 3e3j, 5e4 + 1e3j]), cos_theta=0.8, sin_theta=0.6, B=0.5)
    om = 3e9
    f, fk = krook_dispersion.magnetized_scaled_dispersion_in_k(om, (species[0], ions), **args)
    m, mk, p = krook_dispersion.magnetized_split_dispersion_in_k(om, (species[0], ions), **args)
    np.testing.assert_allclose(m * 2.0**p, f, rtol=1e-13)
    np.testing.assert_allclose(mk * 2.0**p, fk, rtol=1e-10)


def test_launch_and_check_on_a_box_beyond_double_precision(argon) -> None:
    f0 = 0.3 * argon.units.omega_unit / (2 * math.pi)
    res = launch(argon, frequencies_hz=[f0, 1.002 * f0], box=WIDE)
    ref = launch(argon, frequencies_hz=[f0, 1.002 * f0], box=NARROW)
    assert all(c.verified for c in res.point_checks), res.point_checks
    assert len(res.branches) == len(ref.branches) > 0
    raw = dict(argon.raw)
    raw["launch"] = {"frequency": {"start": f0, "stop": 1.002 * f0, "points": 2},
                     "k_real": list(WIDE[:2]), "k_imag": list(WIDE[2:])}
    probe = probe_launch(parse_case(raw, "argon launch"))
    assert probe is not None
    text = " ".join(str(f) for f in probe.findings)
    assert "exceeds double precision" in text and "sub-boxes" in text, text
