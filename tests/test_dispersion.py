"""The dispersion layer: D(ω), dD/dω, scaling near ω = 0, dD/dk, symmetries, errors.

Each check names its source: a published limit, an exact symmetry, or numerics
(finite differences, Cauchy integrals) that do not share code with the layer.
"""

from __future__ import annotations

import dataclasses
import importlib.util

import numpy as np
import pytest
from scipy.optimize import brentq

from kinroots.physics.dispersion import Dispersion, dispersion_in_k, dispersion_pairs
from kinroots.physics.plasma import C_LIGHT, M_ELECTRON, M_PROTON, Plasma, Species


def two_species(drift: float = 0.0, t_perp: float = 2.0) -> Plasma:
    return Plasma(
        (
            Species("e", -1, M_ELECTRON, 1e16, 2.0, t_perp, drift),
            Species("p", 1, M_PROTON, 1e16, 0.5, 0.5),
        )
    )


WPE = two_species().species[0].plasma_frequency
K0 = 0.3 * WPE / two_species().species[0].thermal_speed_par  # k λ-ish ~ 0.2


def fd_derivative(f, x: complex, h: complex) -> complex:
    """8th-order central difference (common practice)."""
    c = [4 / 5, -1 / 5, 4 / 105, -1 / 280]
    return sum(cj * (f(x + (j + 1) * h) - f(x - (j + 1) * h)) for j, cj in enumerate(c)) / h


def winding(disp: Dispersion, center: complex, radius: float, n: int = 512) -> complex:
    """(1/2πi) ∮ D'/D dω on a circle, trapezoid rule (argument principle; common
    practice): the number of zeros minus poles inside."""
    phi = 2 * np.pi * np.arange(n) / n
    om = center + radius * np.exp(1j * phi)
    d, dd = disp(om)
    return complex(np.mean(dd / d * radius * np.exp(1j * phi)))


# --------------------------------------------------------------------------- scaling
def test_scaled_d_is_the_determinant() -> None:
    # Source: definition Λ = ε − n²(I − k̂k̂) (Stix 1992, ch. 1), D = (ω/ω_ref)⁴ det Λ.
    for plasma in [two_species(), two_species(drift=3e5), two_species(t_perp=5)]:
        disp = Dispersion(plasma, k=K0, angle_deg=35.0, model="em", omega_ref=WPE)
        om = np.array([1.3 * WPE + 0.2j * WPE, 0.05 * WPE - 0.01j * WPE])
        ref = np.linalg.det(disp.tensor(om)) * (om / WPE) ** 4
        np.testing.assert_allclose(disp.value(om), ref, rtol=1e-9)  # unscaled det: ill-conditioned


@pytest.mark.parametrize(
    ("plasma", "angle"),
    [
        (two_species(), 35.0),  # isotropic, no drift: k̂·χ has no pole
        (two_species(drift=3e5), 35.0),  # oblique drift: k̂·χ·e⊥ ~ 1/ω
        (two_species(drift=3e5), 0.0),  # k ∥ V: k̂·χ·e⊥ = 0 by symmetry
        (two_species(t_perp=5.0), 60.0),  # oblique anisotropy: k̂·χ·e⊥ ~ 1/ω
    ],
)
def test_d_entire_near_zero(plasma: Plasma, angle: float) -> None:
    # Source: argument principle (common practice): on circles around ω = 0 the
    # winding number of D = (ω/ω_ref)⁴ det Λ is 0: no pole is left (the scaling
    # suffices even with the 1/ω of k̂·χ) and D(0) ≠ 0 (the power 4 is minimal, and a
    # further factor ω on the longitudinal row would only add a zero).
    zeros = 0
    disp = Dispersion(plasma, k=K0, angle_deg=angle, model="em", omega_ref=WPE)
    r0 = (0.2 * disp.frequency_scale)  # radius of the Cauchy-circle neighbourhood of ω = 0
    for radius in (0.5 * r0, 3 * r0):
        n = winding(disp, 0.0, radius)
        assert abs(n - zeros) < 1e-6, (radius, n)
    # Correct at exactly ω = 0: mean-value property against points evaluated directly.
    d0, dd0 = disp(np.array([0j]))
    phi = 2 * np.pi * (np.arange(64) + 0.25) / 64
    ring = 3 * r0 * np.exp(1j * phi)
    dr, _ = disp(ring)
    scale = np.abs(dr).max()
    assert np.isfinite(d0).all() and np.isfinite(dd0).all()
    assert abs(d0[0] - dr.mean()) <= 1e-10 * scale
    assert abs(dd0[0] - np.mean(dr * np.exp(-1j * phi)) / (3 * r0)) <= 1e-9 * scale / (3 * r0)
    if zeros == 0:
        assert abs(d0[0]) > 1e-6 * scale


# --------------------------------------------------------------------------- Weibel
def test_weibel_threshold_and_growth() -> None:
    # Source: E. S. Weibel, Phys. Rev. Lett. 2, 83 (1959) (from memory): for k ∥ z the
    # transverse ε at ω → 0 vanishes at k²c²/ω_pe² = T⊥/T∥ − 1; near threshold the
    # purely growing root has γ ≈ k w∥ (ω_pe² A − k²c²)/(√π ω_pe² (A + 1)), A = T⊥/T∥ − 1
    # (small-ζ expansion Z ≈ i√π of the same dispersion relation; from memory).
    t_par, t_perp = 1.0, 4.0
    e = Species("e", -1, M_ELECTRON, 1e16, t_par, t_perp)
    plasma = Plasma((e,))
    wp, wpar, a = e.plasma_frequency, e.thermal_speed_par, t_perp / t_par - 1
    k_c = np.sqrt(a) * wp / C_LIGHT
    # D = M_xx M_yy M_zz with M_zz = ε_L, so D(0) = M_yy(0)² ε_L(0), M_yy = (ω/ω_ref)²Λ_yy.
    for frac in (0.5, 0.999, 1.0, 1.001, 2.0):
        k = frac * k_c
        em = Dispersion(plasma, k=k, angle_deg=0.0, model="em", omega_ref=wp)
        es = Dispersion(plasma, k=k, angle_deg=0.0, model="es", omega_ref=wp)
        d0 = em.value(np.array([0j]))[0]
        m_yy = (wp**2 * a - (k * C_LIGHT) ** 2) / wp**2
        eps_l = es.value(np.array([0j]))[0]
        assert abs(d0 - m_yy**2 * eps_l) <= 1e-9 * abs(eps_l) * max(1.0, abs(m_yy) ** 2)
    # Purely growing root of Λ_yy(iγ) (real on the imaginary axis for V = 0).
    for delta in (1e-3, 1e-4):
        k = k_c * (1 - delta)
        em = Dispersion(plasma, k=k, angle_deg=0.0, model="em", omega_ref=wp)

        def lam_yy(g: float, em: Dispersion = em) -> float:
            return float((em.tensor(np.array([1j * g]))[0, 1, 1] * (-(g**2))).real)

        gamma_est = k * wpar * (wp**2 * a - (k * C_LIGHT) ** 2) / (np.sqrt(np.pi) * wp**2 * (a + 1))
        gamma = brentq(lam_yy, 0.2 * gamma_est, 5 * gamma_est, xtol=1e-14 * gamma_est)
        assert abs(gamma / gamma_est - 1) < 5 * delta
    assert lam_yy(1e-6 * gamma_est) > 0 > lam_yy(10 * gamma_est)


# --------------------------------------------------------------------------- symmetry
@pytest.mark.parametrize("model", ["es", "em"])
def test_angle_reflection_with_reversed_drift(model: str) -> None:
    # Source: mirror symmetry z → −z (common practice): D(θ, V) = D(180° − θ, −V).
    om = np.array([1.1 * WPE + 0.3j * WPE, 0.2 * WPE - 0.05j * WPE, 0j, 3e-4 * WPE])
    for angle in (20.0, 70.0, 90.0):
        a = Dispersion(two_species(drift=4e5, t_perp=3.0), k=K0, angle_deg=angle, model=model,
                       omega_ref=WPE)
        b = Dispersion(two_species(drift=-4e5, t_perp=3.0), k=K0, angle_deg=180.0 - angle,
                       model=model, omega_ref=WPE)
        da, dda = a(om)
        db, ddb = b(om)
        np.testing.assert_allclose(db, da, rtol=1e-12, atol=1e-12 * np.abs(da).max())
        np.testing.assert_allclose(ddb, dda, rtol=1e-10, atol=1e-10 * np.abs(dda).max())


@pytest.mark.parametrize(("model", "t_perp"), [("es", 2.0), ("em", 2.0), ("em", 6.0)])
def test_reality_condition(model: str, t_perp: float) -> None:
    # Source: Z(−ζ*) = −Z(ζ)* (Fried & Conte 1961) ⇒ for V = 0, ε(−ω*) = ε(ω)*, and the
    # scaling (ω/ω_ref)⁴ keeps it: D(−ω*) = D(ω)* (common practice).
    disp = Dispersion(two_species(t_perp=t_perp), k=K0, angle_deg=40.0, model=model,
                      omega_ref=WPE)
    om = np.array([1.2 * WPE + 0.1j * WPE, 0.3 * WPE - 0.02j * WPE, 0.01j * WPE, 1e-5 * WPE])
    np.testing.assert_allclose(disp.value(-om.conj()), disp.value(om).conj(),
                               rtol=1e-12, atol=1e-13 * np.abs(disp.value(om)).max())


# --------------------------------------------------------------------------- derivatives
@pytest.mark.parametrize("model", ["es", "em"])
@pytest.mark.parametrize("drift", [0.0, 5e5])
def test_d_omega_against_finite_difference(model: str, drift: float) -> None:
    # Source: Cauchy-Riemann (common practice): the analytic dD/dω equals the
    # finite-difference derivative along the real and along the imaginary direction.
    disp = Dispersion(two_species(drift=drift, t_perp=3.0), k=K0, angle_deg=55.0, model=model,
                      omega_ref=WPE)
    r0 = (0.2 * disp.frequency_scale)
    points = [1.05 * WPE + 0.1j * WPE, 0.4 * WPE - 0.2j * WPE, 0.3 * r0 + 0.1j * r0, 2 * r0]
    for om in points:
        _, dd = disp(np.array([om]))
        h = 2e-3 * max(abs(om), 5 * r0)  # D varies on the scale 5 r0 near 0
        for step in (h, 1j * h):
            fd = fd_derivative(lambda x: disp.value(np.array([x]))[0], om, step)
            assert abs(dd[0] - fd) <= 1e-8 * abs(dd[0]), (om, step)


@pytest.mark.parametrize("model", ["es", "em"])
def test_d_k_against_finite_difference(model: str) -> None:
    # Source: Cauchy-Riemann in k (common practice); value consistency with Dispersion.
    plasma = two_species(drift=2e5, t_perp=3.0)
    om = 1.2 * WPE
    ks = np.array([K0 + 0.02j * K0, 0.5 * K0 - 0.05j * K0, 2 * K0])
    d, dk = dispersion_in_k(plasma, omega=om, k=ks, angle_deg=65.0, model=model, omega_ref=WPE)
    for n, k in enumerate(ks):
        disp = Dispersion(plasma, k=k, angle_deg=65.0, model=model, omega_ref=WPE)
        assert abs(d[n] - disp.value(np.array([om]))[0]) <= 1e-13 * abs(d[n])

        def f(x: complex) -> complex:
            return dispersion_in_k(plasma, omega=om, k=np.array([x]), angle_deg=65.0,
                                   model=model, omega_ref=WPE)[0][0]

        for step in (1e-3 * K0, 1e-3j * K0):
            assert abs(dk[n] - fd_derivative(f, k, step)) <= 1e-8 * abs(dk[n])


# --------------------------------------------------------------------------- contract
def test_vectorized_matches_elementwise() -> None:
    # Source: contract (one call, any shape; common practice).
    disp = Dispersion(two_species(drift=1e5), k=K0, angle_deg=30.0, model="em", omega_ref=WPE)
    rng = np.random.default_rng(3)
    om = (rng.normal(size=(20, 50)) + 0.3j * rng.normal(size=(20, 50))) * WPE
    om[0, 0] = 0.0
    d, dd = disp(om)
    assert d.shape == om.shape and dd.shape == om.shape
    for idx in [(0, 0), (3, 7), (19, 49)]:
        d1, dd1 = disp(np.array([om[idx]]))
        assert abs(d[idx] - d1[0]) <= 1e-14 * abs(d1[0])
        assert abs(dd[idx] - dd1[0]) <= 1e-14 * abs(dd1[0])
    assert disp.harmonics == {"e": 0, "p": 0}


@pytest.mark.parametrize("model", ["es", "em"])
def test_bad_inputs(model: str) -> None:
    # Source: contract: k = 0 is an input error; non-finite ω gives NaN, never a number.
    with pytest.raises(ValueError):
        Dispersion(two_species(), k=0.0, angle_deg=10.0, model=model, omega_ref=WPE)
    with pytest.raises(ValueError):
        Dispersion(two_species(), k=K0, angle_deg=10.0, model="magic", omega_ref=WPE)
    disp = Dispersion(two_species(), k=K0, angle_deg=10.0, model=model, omega_ref=WPE)
    d, dd = disp(np.array([np.nan, np.inf, complex(WPE, np.nan), WPE]))
    assert np.isnan(d[:3]).all() and np.isnan(dd[:3]).all() and np.isfinite(d[3])
    d, dk = dispersion_in_k(two_species(), omega=WPE, k=np.array([0.0, np.nan, K0]),
                            angle_deg=10.0, model=model, omega_ref=WPE)
    assert np.isnan(d[:2]).all() and np.isnan(dk[:2]).all() and np.isfinite(d[2])


def test_singular_points_unmagnetized() -> None:
    # Source: contract: the scaling's possible zero at ω = 0 (EM only).
    em = Dispersion(two_species(), k=K0, angle_deg=10.0, model="em", omega_ref=WPE)
    es = Dispersion(two_species(), k=K0, angle_deg=10.0, model="es", omega_ref=WPE)
    assert em.singular_points(-1.0, 1.0, -1.0, 1.0) == [0j]
    assert em.singular_points(0.5, 1.0, -1.0, 1.0) == []
    assert es.singular_points(-1.0, 1.0, -1.0, 1.0) == []
    assert "omega_ref" in em.scaling


@pytest.mark.skipif(
    importlib.util.find_spec("kinroots.physics.models.es_magnetized") is None,
    reason="magnetized electrostatic builder not present yet",
)
def test_singular_points_perpendicular_magnetized() -> None:
    # Source: k∥ = 0 hot-plasma χ has poles at ω = nΩ_s, n ≠ 0 (Stix 1992, ch. 11).
    b = 0.1
    plasma = Plasma((Species("p", 1, M_PROTON, 1e16, 1.0, 1.0),), B=b)
    om_c = 1.602176634e-19 * b / M_PROTON
    disp = Dispersion(plasma, k=100.0, angle_deg=90.0, model="es", omega_ref=om_c)
    got = disp.singular_points(-2.5 * om_c, 3.5 * om_c, -1.0, 1.0)
    np.testing.assert_allclose(np.array(got), om_c * np.array([-2, -1, 1, 2, 3]), rtol=1e-6)
    assert disp.singular_points(-2.5 * om_c, 3.5 * om_c, 0.1, 1.0) == []


@pytest.mark.parametrize(
    ("model", "magnetized", "collisional"),
    # Krook collisions exist for the electrostatic models only
    [(m, b, False) for m in ("es", "em") for b in (False, True)]
    + [("es", False, True), ("es", True, True)],
)
def test_pairs_equal_one_k_at_a_time(model: str, magnetized: bool, collisional: bool) -> None:
    """dispersion_pairs(k_j, ω_j) = Dispersion(k_j)(ω_j): two code paths of this project
    (array-k builders, or one k at a time for Krook species), to 1e-12 of the scale of D."""
    base = two_species(drift=0.0 if collisional else 3e5, t_perp=2.0 if collisional else 3.0)
    species = base.species
    if collisional:  # Krook species: isotropic (the magnetized Krook model needs it)
        nu = 0.01 * base.species[0].plasma_frequency
        species = tuple(dataclasses.replace(s, collision_frequency=nu) for s in species)
    plasma = Plasma(species, 0.02 if magnetized else 0.0)
    wpe = plasma.species[0].plasma_frequency
    rng = np.random.default_rng(3)
    k = rng.uniform(0.2, 2.0, 9) * wpe / 3e6 * (1 + 0.05j * rng.standard_normal(9))
    om = wpe * (rng.uniform(0.1, 2.0, 9) + 1j * rng.uniform(-0.3, 0.1, 9))
    opts = dict(angle_deg=35.0, model=model, omega_ref=wpe)
    d, dd = dispersion_pairs(plasma, k=k, omega=om, **opts)
    for j in range(k.size):
        disp = Dispersion(plasma, k=complex(k[j]), **opts)
        d1, dd1 = disp(np.array([om[j]]))
        scale = max(1.0, float(np.max(np.abs(disp(om)[0]))))
        assert abs(d[j] - d1[0]) <= 1e-12 * scale
        assert abs(dd[j] - dd1[0]) <= 1e-12 * float(np.max(np.abs(disp(om)[1])))


def test_pairs_bad_elements_are_nan_only_there() -> None:
    plasma = two_species()
    wpe = plasma.species[0].plasma_frequency
    k = np.array([1e4, 0.0, np.inf, 2e4])
    om = np.array([wpe, wpe, wpe, np.nan])
    d, dd = dispersion_pairs(plasma, k=k, omega=om, angle_deg=0.0, model="es", omega_ref=wpe)
    assert np.isfinite(d[0]) and np.isfinite(dd[0])
    assert np.all(np.isnan(d[1:])) and np.all(np.isnan(dd[1:]))
