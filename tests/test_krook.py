"""Number-conserving Krook (BGK) susceptibility: limits, conservation, derivatives."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from kinroots.io.case import CaseError, load_case, parse_case
from kinroots.physics.models import es_magnetized, es_unmagnetized, krook, krook_dispersion
from kinroots.physics.plasma import AMU, M_ELECTRON, Species
from kinroots.roots import polish
from kinroots.study.problem import dispersion_at, function_at, spatial_roots, survey
from kinroots.study.solve import solve

ARGON = "cases/argon_ion_acoustic.toml"


def _electron(nu: float = 0.0, drift: float = 0.0, tperp: float = 5.0) -> Species:
    return Species("e", -1, M_ELECTRON, 1e18, 5.0, tperp, drift, nu)


def _z_mpmath(zeta: complex) -> complex:
    """Z(ζ) = i√π exp(−ζ²) erfc(−iζ) (Fried & Conte 1961 definition), by mpmath."""
    with mpmath.workdps(30):
        z = mpmath.mpc(zeta)
        return complex(1j * mpmath.sqrt(mpmath.pi) * mpmath.exp(-z * z) * mpmath.erfc(-1j * z))


def test_zero_collisions_is_collisionless_to_1e14():
    # the ν = 0 Krook form is the collisionless Maxwellian χ (Krall & Trivelpiece 1973, ch. 8)
    s = _electron(0.0, drift=3e5, tperp=2.0)
    om = np.array([1e9 + 1e8j, 5e9 - 2e9j, 3e10 + 0j])
    kk = dict(k_par=3e3, k_perp=1e3)
    a = krook.susceptibility(om, s, **kk)
    b = es_unmagnetized.susceptibility(om, s, **kk)
    np.testing.assert_allclose(a.value, b.value, rtol=1e-14)
    np.testing.assert_allclose(a.derivative, b.derivative, rtol=1e-14)
    # and continuously: ν → 0 approaches it (relative change of order ν/(k w))
    s_small = _electron(1e-3, drift=3e5, tperp=2.0)
    c = krook.susceptibility(om, s_small, **kk)
    np.testing.assert_allclose(c.value, b.value, rtol=1e-9)


@pytest.mark.parametrize("nu_over_kw", [0.01, 0.3, 1.0, 10.0, 300.0])
def test_static_debye_value_for_any_nu(nu_over_kw):
    # number conservation: in the species' rest frame (ω = k∥V) χ = 1/(k²λ_D²)
    # (BGK 1954 operator; Debye screening, common practice)
    k = 2e3
    s0 = _electron(0.0, drift=2e5)
    nu = nu_over_kw * k * s0.thermal_speed_par
    s = _electron(nu, drift=2e5)
    chi = krook.susceptibility(np.array([k * s.drift + 0j]), s, k_par=k, k_perp=0.0).value[0]
    # 5e-12: at ν ≫ k w numerator and denominator are both ~1/(2ζ'²) from the asymptotic
    # series; their ratio keeps ~2e-12 (measured 1.9e-12 at ν/(k w) = 300)
    assert chi == pytest.approx(1.0 / (k * s.debye_length) ** 2, rel=5e-12)


def test_against_mpmath_formula():
    # χ = (1 + ζ'Z(ζ'))/(k²λ²) / (1 + iν Z(ζ')/(k w)), Z from mpmath (Sheffield et al. 2011,
    # from memory; re-derived in kinroots.physics.models.krook)
    k = 1.5e3
    s = _electron(4e7)
    w = s.thermal_speed_par
    for om in (2e8 + 3e7j, 9e8 - 1e8j, 4e7 + 0j):
        zeta = (om + 1j * s.collision_frequency) / (k * w)
        z = _z_mpmath(zeta)
        ref = (1 + zeta * z) / (k * s.debye_length) ** 2 / (1 + 1j * s.collision_frequency
                                                              / (k * w) * z)
        got = krook.susceptibility(np.array([om]), s, k_par=k, k_perp=0.0).value[0]
        assert abs(got - ref) <= 1e-12 * abs(ref)


def test_derivatives_match_finite_differences():
    # analytic dχ/dω and dF/dk against central differences (common practice)
    s = _electron(3e7, drift=1e5)
    om = np.array([3e8 - 5e7j])
    h = 1e3
    a = krook.susceptibility(om, s, k_par=2e3, k_perp=5e2)
    fd = (krook.susceptibility(om + h, s, k_par=2e3, k_perp=5e2).value
          - krook.susceptibility(om - h, s, k_par=2e3, k_perp=5e2).value) / (2 * h)
    np.testing.assert_allclose(a.derivative, fd, rtol=1e-6)
    ion = Species("Ar+", 1, 40 * AMU, 1e18, 0.05, 0.05, 0.0, 1e5)
    sp = (s, ion)
    c, sn = math.cos(0.3), math.sin(0.3)
    k = np.array([2e3 + 100j])
    f, fw, fk = krook.scaled_dispersion(om, sp, k=k, cos_theta=c, sin_theta=sn)
    hk = 1e-3
    fkp = krook.scaled_dispersion(om, sp, k=k + hk, cos_theta=c, sin_theta=sn)[0]
    fkm = krook.scaled_dispersion(om, sp, k=k - hk, cos_theta=c, sin_theta=sn)[0]
    np.testing.assert_allclose(fk, (fkp - fkm) / (2 * hk), rtol=1e-6)
    fwp = krook.scaled_dispersion(om + h, sp, k=k, cos_theta=c, sin_theta=sn)[0]
    fwm = krook.scaled_dispersion(om - h, sp, k=k, cos_theta=c, sin_theta=sn)[0]
    np.testing.assert_allclose(fw, (fwp - fwm) / (2 * h), rtol=1e-6)
    # F = (Π Q_s) (1 + Σ χ_s): same zeros as D, no poles
    q = np.prod([krook.denominator(om, x, k_par=k * c, k_perp=k * sn)[0] for x in sp], axis=0)
    d = 1 + sum(krook.susceptibility(om, x, k_par=k * c, k_perp=k * sn).value for x in sp)
    np.testing.assert_allclose(f, q * d, rtol=1e-12)


def _with_ion_collisions(nu_over_wpi: float):
    case = load_case(ARGON)
    raw = dict(case.raw)
    species = [dict(s) for s in raw["species"]]
    wpi = case.units.omega_unit
    species[1]["collision_frequency"] = nu_over_wpi * wpi
    raw["species"] = species
    return parse_case(raw, "argon+collisions")


def test_ion_acoustic_damping_grows_with_nu():
    # collisions add damping to the ion acoustic wave (common practice; BGK 1954)
    k = 0.3
    z0 = survey(load_case(ARGON), k).roots[0].value
    gammas = []
    for nu in (0.0, 0.005, 0.02, 0.05):
        case = _with_ion_collisions(nu)
        r = polish(function_at(case, k), z0, rtol=1e-12)
        assert r.converged
        # the root is a zero of the unscaled D = 1 + Σχ (independent of the scaled F)
        d = dispersion_at(case, k)(np.array([r.value * case.units.omega_unit]))[0][0]
        assert abs(d) < 1e-8
        gammas.append(r.value.imag)
        z0 = r.value
    assert all(b < a for a, b in zip(gammas, gammas[1:], strict=False)), gammas


def test_casefile_rejects_bad_collision_frequency():
    raw = dict(load_case(ARGON).raw)
    species = [dict(s) for s in raw["species"]]
    species[0]["collision_frequency"] = -1.0
    raw["species"] = species
    with pytest.raises(CaseError) as exc:
        parse_case(raw, "x.toml")
    assert any("species[1].collision_frequency" in e and "-1.0" in e for e in exc.value.errors)
    species[0]["collision_frequency"] = 1e6
    raw["wave"] = {"model": "electromagnetic"}
    with pytest.raises(CaseError) as exc:
        parse_case(raw, "x.toml")
    assert any("species[1].collision_frequency" in e and "only for the electrostatic" in e
               for e in exc.value.errors)


# ------------------------------------------------------------------ magnetized Krook

B_TEST = 0.05


def _iso(nu: float = 0.0, drift: float = 2e5) -> Species:
    return Species("e", -1, M_ELECTRON, 1e18, 5.0, 5.0, drift, nu)


def test_magnetized_zero_collisions_is_collisionless_to_1e14():
    # ν = 0: the collisionless magnetized Maxwellian χ (Stix 1992, ch. 11, from memory)
    s = _iso()
    oc = abs(s.cyclotron_frequency(B_TEST))
    om = np.array([1e9 + 1e8j, 5e9 - 2e9j, 3e10 + 0j, (0.7 + 0.1j) * oc])
    for kpar in (3e3, -3e3, 0.0):
        kk = dict(k_par=kpar, k_perp=4e3, B=B_TEST)
        a = krook.magnetized_susceptibility(om, s, **kk)
        b = es_magnetized.susceptibility(om, s, **kk)
        np.testing.assert_allclose(a.value, b.value, rtol=1e-14)
        np.testing.assert_allclose(a.derivative, b.derivative, rtol=1e-14)
    # ν → 0 continuously (relative change of order ν/(k∥w))
    c = es_magnetized.susceptibility(om, _iso(1e-3), k_par=3e3, k_perp=4e3, B=B_TEST)
    b = es_magnetized.susceptibility(om, s, k_par=3e3, k_perp=4e3, B=B_TEST)
    np.testing.assert_allclose(c.value, b.value, rtol=1e-9)


@pytest.mark.parametrize("nu_over_kw", [0.01, 0.3, 1.0, 10.0, 300.0])
@pytest.mark.parametrize("kpar", [3e3, -3e3, 0.0])
def test_magnetized_static_debye_value_for_any_nu(nu_over_kw, kpar):
    # number conservation (BGK 1954 operator): at ω = k∥V, χ = 1/(k²λ_D²) for every ν
    kperp = 4e3
    nu = nu_over_kw * 3e3 * _iso().thermal_speed_par
    s = _iso(nu)
    om = np.array([kpar * s.drift + 0j])
    chi = es_magnetized.susceptibility(om, s, k_par=kpar, k_perp=kperp, B=B_TEST).value[0]
    assert chi == pytest.approx(1.0 / ((kpar**2 + kperp**2) * s.debye_length**2), rel=1e-12)


def test_magnetized_against_mpmath_sum():
    # χ = (1 + ζ_0 S)/(k²λ_D²)/(1 + iνS/(k∥w)), S = Σ e^{−λ}I_n(λ) Z(ζ_n) with mpmath Bessel
    # and Z (Sheffield et al. 2011, from memory; derived in kinroots.physics.models.krook)
    s = _iso(3e8)
    oc = s.cyclotron_frequency(B_TEST)
    kpar, kperp = 3e3, 4e3
    w = s.thermal_speed_par
    lam = kperp**2 * w**2 / (2 * oc**2)
    for om in (0.7 * oc + 0.1j * abs(oc), 2.3 * abs(oc) - 0.3j * abs(oc)):
        with mpmath.workdps(30):
            ssum = sum(
                complex(mpmath.besseli(n, lam) * mpmath.exp(-lam))
                * _z_mpmath((om - kpar * s.drift - n * oc + 1j * s.collision_frequency)
                            / (kpar * w))
                for n in range(-40, 41)
            )
        zeta0 = (om - kpar * s.drift + 1j * s.collision_frequency) / (kpar * w)
        ref = ((1 + zeta0 * ssum) / ((kpar**2 + kperp**2) * s.debye_length**2)
               / (1 + 1j * s.collision_frequency / (kpar * w) * ssum))
        got = krook.magnetized_susceptibility(np.array([om]), s, k_par=kpar, k_perp=kperp,
                                              B=B_TEST).value[0]
        assert abs(got - ref) <= 1e-11 * abs(ref)


def test_magnetized_weak_field_approaches_unmagnetized():
    # B → 0 at Im ω > 0: Σ_n Γ_n Z(ζ_n) → Z of the projected Maxwellian (Stix 1992, from
    # memory), so χ → the unmagnetized Krook χ; the difference falls like B² (measured)
    s = _iso(2e7)
    om = np.array([3e8 + 2e8j])
    ref = krook.susceptibility(om, s, k_par=3e3, k_perp=4e3).value[0]
    errs = []
    for b in (1e-2, 1e-3, 1e-4):
        got = es_magnetized.susceptibility(om, s, k_par=3e3, k_perp=4e3, B=b).value[0]
        errs.append(abs(got - ref) / abs(ref))
    assert errs[2] < 1e-6, errs
    assert errs[0] > 50 * errs[1] > 2500 * errs[2], errs


def test_magnetized_perpendicular_limit_is_continuous():
    # exact k∥ = 0 (Z(ζ) → −1/ζ, Fried & Conte 1961 asymptotics) is the k∥ → 0 limit
    s = _iso(0.3 * abs(_iso().cyclotron_frequency(B_TEST)))
    oc = abs(s.cyclotron_frequency(B_TEST))
    om = np.array([(0.7 + 0.05j) * oc])
    c0 = es_magnetized.susceptibility(om, s, k_par=0.0, k_perp=4e3, B=B_TEST).value[0]
    for kpar, rtol in ((1e-2, 1e-6), (1e-4, 1e-8)):
        c1 = es_magnetized.susceptibility(om, s, k_par=kpar, k_perp=4e3, B=B_TEST).value[0]
        assert abs(c1 - c0) <= rtol * abs(c0)


def test_magnetized_derivatives_match_finite_differences():
    # analytic dχ/dω and dF/dω against central differences (common practice)
    e = Species("e", -1, M_ELECTRON, 1e18, 5.0, 2.0, 1e5, 0.0)  # anisotropic, ν = 0
    ion = Species("Ar+", 1, 40 * AMU, 1e18, 0.05, 0.05, 3e2, 2e5)
    b = 0.3
    oc = ion.cyclotron_frequency(b)
    sp = (e, ion)
    for kpar in (2e3, -2e3, 0.0):
        om = np.array([(3.3 - 0.4j) * oc])
        h = 1e-5 * oc
        kk = dict(k_par=kpar, k_perp=3e3, B=b)
        a = es_magnetized.susceptibility(om, ion, **kk)
        fd = (es_magnetized.susceptibility(om + h, ion, **kk).value
              - es_magnetized.susceptibility(om - h, ion, **kk).value) / (2 * h)
        np.testing.assert_allclose(a.derivative, fd, rtol=1e-8)
        if kpar == 0.0:
            continue
        f, fw = krook_dispersion.magnetized_scaled_dispersion(om, sp, **kk)
        fd = (krook_dispersion.magnetized_scaled_dispersion(om + h, sp, **kk)[0]
              - krook_dispersion.magnetized_scaled_dispersion(om - h, sp, **kk)[0]) / (2 * h)
        np.testing.assert_allclose(fw, fd, rtol=1e-8)
        # F = Q_ion (1 + Σ χ_s): the zeros of D, none of its poles
        q = krook.magnetized_parts(om, ion, **kk)[2]
        d = 1 + sum(es_magnetized.susceptibility(om, x, **kk).value for x in sp)
        np.testing.assert_allclose(f, q * d, rtol=1e-12)
    # ∂F/∂k by the Cauchy circle against a central difference
    c, sn = math.cos(1.0), math.sin(1.0)
    k = np.array([3e3 + 100j])
    om0 = 3.3 * oc
    _, fk = krook_dispersion.magnetized_scaled_dispersion_in_k(om0, sp, k=k, cos_theta=c,
                                                               sin_theta=sn, B=b)
    hk = 1e-2
    fp = krook_dispersion.magnetized_scaled_dispersion_in_k(om0, sp, k=k + hk, cos_theta=c,
                                                 sin_theta=sn, B=b)[0]
    fm = krook_dispersion.magnetized_scaled_dispersion_in_k(om0, sp, k=k - hk, cos_theta=c,
                                                 sin_theta=sn, B=b)[0]
    np.testing.assert_allclose(fk, (fp - fm) / (2 * hk), rtol=1e-7)


def _magnetized_argon(nu_over_wpi: float, **extra):
    case = load_case(ARGON)
    raw = dict(case.raw)
    species = [dict(s) for s in raw["species"]]
    species[1]["collision_frequency"] = nu_over_wpi * case.units.omega_unit
    raw["species"] = species
    raw["magnetic_field"] = {"B": 0.3}
    raw["wave"] = {"model": "electrostatic", "angle": 60.0}
    raw.update(extra)
    return parse_case(raw, "magnetized argon+collisions")


def test_magnetized_oblique_ion_acoustic_damping_grows_with_nu():
    # collisions add damping to the ion acoustic wave (BGK 1954; common practice), here
    # at 60° to B = 0.3 T (ω ≈ 27 Ω_i)
    k = 0.3
    z0 = survey(_magnetized_argon(0.0), k).roots[0].value
    gammas = []
    for nu in (0.0, 0.005, 0.02, 0.05):
        case = _magnetized_argon(nu)
        r = polish(function_at(case, k), z0, rtol=1e-12)
        assert r.converged
        d = dispersion_at(case, k)(np.array([r.value * case.units.omega_unit]))[0][0]
        assert abs(d) < 1e-8  # a zero of the unscaled D = 1 + Σχ
        gammas.append(r.value.imag)
        z0 = r.value
    assert all(b < a for a, b in zip(gammas, gammas[1:], strict=False)), gammas
    case = _magnetized_argon(
        0.02, scan={"k": {"start": 0.1, "stop": 0.5, "points": 8}},
        search={"real": [0.05, 1.0], "imag": [-0.03, 0.1]},
    )
    sol = solve(case)
    assert sol.failed_points == 0
    assert len(sol.branches) == 1 and len(sol.branches[0].points) == 8
    # the spatial problem of the same case: one complex k near the temporal root
    sr = spatial_roots(case, 0.29, (0.1, 0.6, -0.1, 0.1))
    assert len(sr.roots) == 1 and sr.roots[0].converged


def test_casefile_magnetized_collision_errors():
    raw = dict(_magnetized_argon(0.01).raw)  # accepted: isotropic, 60°
    species = [dict(s) for s in raw["species"]]
    species[1].pop("temperature")
    species[1]["temperature_par"] = 0.03
    species[1]["temperature_perp"] = 0.06
    with pytest.raises(CaseError) as exc:
        parse_case({**raw, "species": species}, "x.toml")
    assert any("species[2].collision_frequency" in e and "isotropic" in e
               for e in exc.value.errors), exc.value.errors
    with pytest.raises(CaseError) as exc:
        parse_case({**raw, "wave": {"model": "electrostatic", "angle": 90.0}}, "x.toml")
    assert any("species[2].collision_frequency" in e and "wave.angle = 90" in e
               for e in exc.value.errors), exc.value.errors
    with pytest.raises(CaseError) as exc:
        parse_case({**raw, "wave": {"model": "electromagnetic", "angle": 60.0}}, "x.toml")
    assert any("species[2].collision_frequency" in e and "only for the electrostatic" in e
               for e in exc.value.errors), exc.value.errors


def test_casefile_rejects_collisions_beside_non_maxwellian_species():
    # the collisional form F = (Π Q_s) D is built from Maxwellian susceptibilities: a
    # kappa or component species beside a collisional one is an input error (it was
    # silently treated as a Maxwellian: roots with |D| ~ 0.8 of its terms)
    raw = dict(load_case(ARGON).raw)
    species = [dict(s) for s in raw["species"]]
    species[1]["collision_frequency"] = 1e5
    species[0]["distribution"] = "kappa"
    species[0]["kappa"] = 3.0
    with pytest.raises(CaseError) as exc:
        parse_case({**raw, "species": species}, "x.toml")
    assert any("species[2].collision_frequency" in e and "species[1] ('e')" in e
               and "kappa" in e for e in exc.value.errors), exc.value.errors
