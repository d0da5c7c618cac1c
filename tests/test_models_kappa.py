"""Kappa species and species made of components: susceptibilities and D.

Sources beside each check: mpmath quadrature of the Landau integral (contour on the real
axis, residue added where the pole lies below it), the static-shielding limit derived
in its docstring, the κ → ∞ limit (the bi-Maxwellian builders), the reduction of the
three-dimensional distribution checked by mpmath, and exact identities for components.
"""

from __future__ import annotations

import math
from dataclasses import replace

import mpmath as mp
import numpy as np
import pytest

from kinroots.physics.dispersion import Dispersion, dispersion_pairs
from kinroots.physics.models import (
    em_magnetized,
    em_unmagnetized,
    es_magnetized,
    es_unmagnetized,
    kappa_magnetized,
    kappa_unmagnetized,
)
from kinroots.physics.models.species_models import negative_region
from kinroots.physics.plasma import EV, M_ELECTRON, M_PROTON, Component, Plasma, Species
from kinroots.physics.zfunc import plasma_z_and_prime


def kappa_species(kappa: float, t_par: float = 10.0, t_perp: float | None = None,
                  drift: float = 0.0) -> Species:
    return Species("e", -1, M_ELECTRON, 1e16, t_par, t_par if t_perp is None else t_perp,
                   drift, distribution="kappa", kappa=kappa)


def maxwellian_moments(z: np.ndarray) -> dict[str, np.ndarray]:
    """Y = Z, F = F⁺ = 1 + ζZ, c = 2: the Maxwellian profile exp(−s²)/√π."""
    zf, zp = plasma_z_and_prime(z)
    zf, zp = np.asarray(zf), np.asarray(zp)
    f, df = -zp / 2, zf + z * zp
    return {"y": zf, "dy": zp, "f": f, "df": df, "fp": f, "dfp": df,
            "c": np.full(np.shape(z), 2.0)}


def test_static_shielding() -> None:
    """χ(ω → 0) = (κ − 1/2)/(κ − 3/2) / (kλ_D)² (issue 13).

    Derivation: χ = ω_p² ∫ G′(s)/(ω − s) ds with G(s) = g_κ(s/Θ)/Θ the distribution of
    s = k·v.  At ω = 0, ∫ G′(s)/(−s) ds = (1/Θ²) ∫ (−g′(x)/x) dx and
    −g_κ′(x)/x = 2A_κ(1 + x²/κ)^−(κ+1), whose integral is 2A_κ√(πκ)Γ(κ + 1/2)/Γ(κ + 1)
    = (2κ − 1)/κ.  With Θ² = k²(2κ − 3)/κ · T/m: χ(0) = ω_p² m (2κ − 1)/(k²T(2κ − 3)).
    """
    for kappa in (1.6, 2.0, 4.5):
        s = kappa_species(kappa)
        k = 0.3 / s.debye_length
        chi = kappa_unmagnetized.susceptibility(np.array([0j, 1e-9 * s.plasma_frequency]), s,
                                                k_par=k, k_perp=0.0).value
        ref = (kappa - 0.5) / (kappa - 1.5) / (k * s.debye_length) ** 2
        np.testing.assert_allclose(chi.real, ref, rtol=1e-12)
        assert abs(chi[0].imag) < 1e-12 * ref


def _es_landau_mp(omega: complex, s: Species, k_par: float, k_perp: float) -> complex:
    """χ = −ω_p² ∫ G′(s)/(s − ω′) ds by mpmath, G the projection of the bi-kappa on k
    (a one-dimensional kappa of index κ and width Θ, checked in
    test_projection_of_the_kappa_distribution), real-axis contour plus residue
    −2πi G′(ω′) where the pole lies below it."""
    kappa = s.kappa
    theta2 = (2 * kappa - 3) / kappa * EV / s.mass
    with mp.workdps(30):
        big = mp.sqrt(k_perp**2 * theta2 * s.temperature_perp
                      + k_par**2 * theta2 * s.temperature_par)
        kp = mp.mpf(kappa)
        a = mp.gamma(kp) / (mp.sqrt(mp.pi * kp) * mp.gamma(kp - mp.mpf(1) / 2))

        def g_prime(x):  # d/ds of g(s/Θ)/Θ
            u = x / big
            return -2 * a * u * (1 + u * u / kp) ** (-kp - 1) / big**2

        w = mp.mpc(omega - k_par * s.drift)
        pts = sorted({-abs(w.real) - 10 * big, mp.re(w), abs(w.real) + 10 * big})
        val = mp.quad(lambda x: g_prime(x) / (x - w), [-mp.inf, *pts, mp.inf])
        if w.imag < 0:
            val += 2j * mp.pi * g_prime(w)
        return complex(-s.plasma_frequency**2 * val)


def test_electrostatic_against_landau_quadrature() -> None:
    """Bi-kappa with drift at an oblique angle, both half-planes, 1e-10 (issue 13)."""
    s = kappa_species(2.7, t_par=10.0, t_perp=25.0, drift=4e5)
    wp = s.plasma_frequency
    k_par, k_perp = 0.2 / s.debye_length, 0.15 / s.debye_length
    omegas = np.array([1.1 + 0.05j, 0.9 - 0.2j, 0.3 - 0.6j, 2.0 + 0.4j]) * wp
    chi = kappa_unmagnetized.susceptibility(omegas, s, k_par=k_par, k_perp=k_perp).value
    for om, c in zip(omegas, chi, strict=True):
        ref = _es_landau_mp(complex(om), s, k_par, k_perp)
        assert abs(c - ref) <= 1e-10 * abs(ref), (om, c, ref)


def test_projection_of_the_kappa_distribution() -> None:
    """The reductions the builders rest on, by mpmath over v⊥ (bi-kappa, κ = 2.5):
    ∫ f 2πv⊥ dv⊥ = g_κ(x)/θ∥ and ∫ (v⊥²/2) f 2πv⊥ dv⊥ = (T⊥/m) g_{κ−1}(x)/θ∥,
    x = v∥/θ∥, f normalized with c = Γ(κ+1)/((πκ)^{3/2} Γ(κ−1/2) θ⊥²θ∥) (the usual
    bi-kappa normalization, Summers & Thorne 1991, from memory; checked here by ∫f = 1)."""
    kappa, t_par, t_perp = 2.5, 1.0, 3.0  # units with m = 1, T in the same units
    with mp.workdps(20):
        k = mp.mpf(kappa)
        th_par = mp.sqrt((2 * k - 3) / k * t_par)
        th_perp = mp.sqrt((2 * k - 3) / k * t_perp)
        c = mp.gamma(k + 1) / ((mp.pi * k) ** 1.5 * mp.gamma(k - 0.5) * th_perp**2 * th_par)

        def f(vpar, vperp):
            return c * (1 + vpar**2 / (k * th_par**2) + vperp**2 / (k * th_perp**2)) ** (-k - 1)

        def g(p, x):
            return (mp.gamma(p) / (mp.sqrt(mp.pi * k) * mp.gamma(p - 0.5))
                    * (1 + x * x / k) ** (-p))

        total = mp.quad(lambda v: mp.quad(lambda w: f(v, w) * 2 * mp.pi * w, [0, mp.inf]),
                        [-mp.inf, 0, mp.inf])
        assert abs(total - 1) < 1e-12
        for v in (0.3, 2.1):
            red = mp.quad(lambda w, v=v: f(v, w) * 2 * mp.pi * w, [0, mp.inf])
            hh = mp.quad(lambda w, v=v: w * w / 2 * f(v, w) * 2 * mp.pi * w, [0, mp.inf])
            x = v / th_par
            assert abs(red - g(k, x) / th_par) < 1e-12 * red
            assert abs(hh - t_perp * g(k - 1, x) / th_par) < 1e-12 * hh


@pytest.mark.parametrize("angle", [0.0, 35.0, 90.0, 150.0])
def test_em_unmagnetized_algebra_reproduces_bi_maxwellian(angle: float) -> None:
    """With the Maxwellian profile's moments the kappa tensor formulas must give the
    bi-Maxwellian builder (Krall & Trivelpiece 1973, ch. 9; Weibel 1959) exactly:
    drifting, anisotropic, tensor and scaled form, ω down to 1e-4 ω_p."""
    s = Species("e", -1, M_ELECTRON, 1e18, 100.0, 300.0, 2e6)
    wp = s.plasma_frequency
    om = np.array([0.3 + 0.05j, 1.2 - 0.1j, 2.0 + 0.3j, 1e-4 + 1e-5j]) * wp
    k = 5e3
    kp, kq = k * math.cos(math.radians(angle)), k * math.sin(math.radians(angle))
    kw = {"wp2": wp**2, "drift": s.drift,
          "widths2": (s.thermal_speed_par**2, s.thermal_speed_perp**2),
          "moments": maxwellian_moments}
    kpa, kqa = np.full(4, kp + 0j), np.full(4, kq + 0j)
    ref = em_unmagnetized.susceptibility(om, s, k_par=kp, k_perp=kq)
    v, d = kappa_unmagnetized.em_tensor(om, kpa, kqa, **kw)
    np.testing.assert_allclose(v, ref.value, rtol=0, atol=1e-13 * np.abs(ref.value).max())
    np.testing.assert_allclose(d, ref.derivative, rtol=0,
                               atol=1e-13 * np.abs(ref.derivative).max())
    ref = em_unmagnetized.scaled_susceptibility(om, s, k_par=kp, k_perp=kq, omega_ref=wp)
    v, d = kappa_unmagnetized.em_scaled(om, kpa, kqa, omega_ref=wp, **kw)
    np.testing.assert_allclose(v, ref.value, rtol=0, atol=1e-13 * np.abs(ref.value).max())
    np.testing.assert_allclose(d, ref.derivative, rtol=0,
                               atol=1e-13 * np.abs(ref.derivative).max())


def test_em_magnetized_parallel_algebra_reproduces_bi_maxwellian() -> None:
    """The parallel kappa form with Z, 1 + ζZ in place of Y_κ, F_κ gives the drifting
    bi-Maxwellian magnetized builder at k⊥ = 0 (Stix 1992 ch. 11, from memory), k∥ of
    both signs."""
    s = Species("p", 1, M_PROTON, 1e7, 10.0, 25.0, 3e4)
    B = 1e-8
    oc = s.cyclotron_frequency(B)

    def maxw(z):
        m = maxwellian_moments(z)
        return m["y"], m["dy"], m["f"], m["df"]

    om = np.array([0.3 + 0.05j, 1.2 - 0.1j, 2.0 + 0.3j]) * abs(oc)
    p = s.plasma_frequency**2 / om**2
    for kpar in (2e-5, -2e-5):
        ref = em_magnetized.susceptibility(om, s, k_par=kpar, k_perp=0.0, B=B).value
        tp, _, tm, _ = kappa_magnetized.parallel_parts(
            om, np.full(3, kpar + 0j), drift=s.drift, omega_c=oc,
            width_par=s.thermal_speed_par, anisotropy=2.5, transforms=maxw)
        np.testing.assert_allclose(0.5 * p * (tp + tm), ref[:, 0, 0], rtol=1e-13)
        np.testing.assert_allclose(0.5j * p * (tp - tm), ref[:, 0, 1], rtol=1e-13)


def _ratio_of_differences(fn, kappa: float) -> float:
    d1 = fn(kappa)
    d2 = fn(2 * kappa)
    return float(np.max(np.abs(d1)) / np.max(np.abs(d2)))


def test_large_kappa_limit_of_every_model() -> None:
    """κ → ∞: the Maxwellian builders, with a difference O(1/κ) (ratio at κ and 2κ near 2,
    issue 13): electrostatic and electromagnetic, unmagnetized at 40°, magnetized k ∥ B."""
    base = Species("e", -1, M_ELECTRON, 1e16, 10.0, 20.0, 1e5)
    wp = base.plasma_frequency
    om = np.array([1.2 - 0.1j, 0.8 + 0.2j]) * wp
    k = 0.4 / base.debye_length
    kp, kq = k * math.cos(math.radians(40)), k * math.sin(math.radians(40))
    B = 1e-3
    pairs = [
        (kappa_unmagnetized.susceptibility, es_unmagnetized.susceptibility, kp, kq, 0.0),
        (kappa_unmagnetized.tensor_susceptibility, em_unmagnetized.susceptibility, kp, kq, 0.0),
        (kappa_magnetized.susceptibility, es_magnetized.susceptibility, k, 0.0, B),
        (kappa_magnetized.tensor_susceptibility, em_magnetized.susceptibility, k, 0.0, B),
    ]
    for kap_b, max_b, kpar, kperp, b in pairs:
        ref = max_b(om, base, k_par=kpar, k_perp=kperp, B=b).value

        def diff(kappa, kap_b=kap_b, kpar=kpar, kperp=kperp, b=b, ref=ref):
            s = replace(base, distribution="kappa", kappa=kappa)
            return kap_b(om, s, k_par=kpar, k_perp=kperp, B=b).value - ref

        r = _ratio_of_differences(diff, 100.0)
        assert 1.8 < r < 2.2, (kap_b.__module__, kap_b.__name__, r)
        assert np.max(np.abs(diff(400.0))) < 0.02 * np.max(np.abs(ref))


def test_oblique_magnetized_kappa_is_refused() -> None:
    s = kappa_species(3.0)
    with pytest.raises(ValueError, match="parallel propagation only"):
        kappa_magnetized.susceptibility(np.array([1e9 + 0j]), s, k_par=1.0, k_perp=1.0, B=0.1)


# ----------------------------------------------------------------------------- components


def _with_components(s: Species, comps: tuple[Component, ...]) -> Species:
    return replace(s, components=comps)


@pytest.mark.parametrize(("model", "B", "angle"), [
    ("electrostatic", 0.0, 30.0), ("electromagnetic", 0.0, 60.0),
    ("electrostatic", 0.05, 70.0), ("electromagnetic", 0.05, 45.0)])
def test_identical_components_equal_the_species(model: str, B: float, angle: float) -> None:
    """Two identical components of weight 1/2 (and a weight-1 drifting component) are the
    one drifting bi-Maxwellian exactly (χ is linear in the density): every model."""
    plain = Species("e", -1, M_ELECTRON, 1e18, 10.0, 14.0, 3e5)
    ions = Species("p", 1, M_PROTON, 1e18, 2.0, 2.0)
    half = Component(0.5, 10.0, 14.0, 3e5)
    split = _with_components(plain, (half, half))
    whole = _with_components(plain, (Component(1.0, 10.0, 14.0, 3e5),))
    k = 0.3 / plain.debye_length
    om = np.array([1.1 - 0.05j, 0.4 + 0.2j, 2.0 + 0.0j]) * plain.plasma_frequency
    ref = Dispersion(Plasma((plain, ions), B), k=k, angle_deg=angle, model=model,
                     omega_ref=plain.plasma_frequency)(om)
    for sp in (split, whole):
        got = Dispersion(Plasma((sp, ions), B), k=k, angle_deg=angle, model=model,
                         omega_ref=plain.plasma_frequency)(om)
        for a, b in zip(got, ref, strict=True):
            np.testing.assert_allclose(a, b, rtol=1e-12, atol=1e-13 * np.abs(b).max())
        pairs = dispersion_pairs(Plasma((sp, ions), B), k=np.full(3, k), omega=om,
                                 angle_deg=angle, model=model,
                                 omega_ref=plain.plasma_frequency)
        np.testing.assert_allclose(pairs[0], ref[0], rtol=1e-12,
                                   atol=1e-13 * np.abs(ref[0]).max())


def test_subtracted_component_is_a_difference() -> None:
    """A negative weight subtracts its Maxwellian: χ(w₁M₁ + w₂M₂) = w₁χ(M₁) + w₂χ(M₂)."""
    n, t1, t2 = 1e18, 10.0, 3.0
    w1, w2 = t1 / (t1 - t2), -t2 / (t1 - t2)
    cone = Species("i", 1, M_PROTON, n, 5.0, 5.0, components=(
        Component(w1, 5.0, t1), Component(w2, 5.0, t2)))
    m1 = Species("i", 1, M_PROTON, w1 * n, 5.0, t1)
    m2 = Species("i", 1, M_PROTON, -w2 * n, 5.0, t2)
    k = 3e3
    om = np.array([1e8 + 1e6j])
    got = Dispersion(Plasma((cone,), 1.0), k=k, angle_deg=80.0, model="electrostatic",
                     omega_ref=1e8)(om)[0] - 1
    ref = sum(sgn * (Dispersion(Plasma((m,), 1.0), k=k, angle_deg=80.0,
                                model="electrostatic", omega_ref=1e8)(om)[0] - 1)
              for sgn, m in ((1, m1), (-1, m2)))
    np.testing.assert_allclose(got, ref, rtol=1e-12)


def test_negative_region() -> None:
    """A loss cone (narrower Maxwellian in v⊥ subtracted, f(v⊥ = 0) = 0) is a
    distribution; subtracting a wider one, or too much, is not."""
    m = M_PROTON
    t1, t2 = 10.0, 3.0
    cone = (Component(t1 / (t1 - t2), 5.0, t1), Component(-t2 / (t1 - t2), 5.0, t2))
    assert negative_region(cone, m) is None
    wider = (Component(2.0, 5.0, 3.0), Component(-1.0, 5.0, 10.0))
    where = negative_region(wider, m)
    assert where is not None
    # f < 0 far out along v⊥ where the subtracted (hotter) term dominates
    a = math.sqrt(2 * 10.0 * EV / m)
    assert where[1] > a
    too_much = (Component(1.5, 5.0, t1), Component(-0.5, 5.0, t2))  # f(0) < 0
    assert negative_region(too_much, m) is not None
    core_halo = (Component(0.9, 10.0, 10.0), Component(0.1, 100.0, 100.0, 1e6))
    assert negative_region(core_halo, M_ELECTRON) is None


def test_branch_point_note() -> None:
    """A root with Im ζ < −√κ for a non-integer κ is flagged (zfunc_kappa, "Where the
    continuation holds"); integer κ and roots above the branch point are not."""
    from kinroots.physics.models.species_models import branch_point_note

    for kappa, flagged in ((2.5, True), (3.0, False)):
        s = kappa_species(kappa)
        theta = math.sqrt((2 * kappa - 3) / kappa * s.temperature_par * EV / s.mass)
        k = 0.5 / s.debye_length
        deep = complex(0.3, -1.2 * math.sqrt(kappa)) * k * theta
        note = branch_point_note(Plasma((s,), 0.0), omega=deep, k=k, angle_deg=0.0)
        assert bool(note) is flagged, note
        shallow = complex(0.3, -0.8 * math.sqrt(kappa)) * k * theta
        assert branch_point_note(Plasma((s,), 0.0), omega=shallow, k=k, angle_deg=0.0) == ""


def test_landau_moments_at_huge_zeta_do_not_raise() -> None:
    """|ζ| ≥ 1.3e154 once raised OverflowError (float ** 2) in the series truncation rule;
    the asymptotic M_0 = −Z → 1/ζ (Fried & Conte 1961) must come out instead."""
    z = np.array([1e200 + 1j, 2e200 + 0j])
    ms, _ = es_unmagnetized.landau_moments(z, 3)
    np.testing.assert_allclose(ms[0], 1 / z, rtol=1e-15)
    with np.errstate(all="ignore"):  # first_moment leaves errstate to its caller
        m1, _ = es_unmagnetized.first_moment(z)
    assert np.all(np.isfinite(m1))


def test_integer_kappa_pole_is_excluded_from_surveys() -> None:
    """Integer κ: D has a pole at ζ = −i√κ (rational profile); it is listed among the
    singular points, so that a survey box around it still counts zeros only (argument
    principle, poles excluded) and completes."""
    from kinroots.roots import find_roots

    e = kappa_species(2.0)  # electrons alone (ions would overflow this deep)
    wp = e.plasma_frequency
    k = 0.6 / e.debye_length
    d = Dispersion(Plasma((e,), 0.0), k=k, angle_deg=0.0, model="electrostatic",
                   omega_ref=wp)
    theta = math.sqrt((2 * 2.0 - 3) / 2.0 * e.temperature_par * EV / e.mass)
    pole = -1j * math.sqrt(2.0) * k * theta
    box = (-0.3 * wp, 0.3 * wp, 1.5 * pole.imag, 0.5 * pole.imag)
    pts = d.singular_points(*box)
    assert any(abs(q - pole) < 1e-9 * abs(pole) for q in pts)
    res = find_roots(lambda w: d(w), box, excluded=pts)
    assert res.complete, res.notes


@pytest.mark.parametrize(("model", "B", "angle"), [
    ("electrostatic", 0.0, 30.0), ("electromagnetic", 0.0, 50.0),
    ("electromagnetic", 1e-6, 0.0)])
def test_spatial_derivative_with_kappa_species(model: str, B: float, angle: float) -> None:
    """dD/dk of the spatial problem (Euler homogeneity unmagnetized, Cauchy circle
    magnetized) against a central difference, with kappa electrons and a component
    species of protons (complex k)."""
    from kinroots.physics.dispersion import dispersion_in_k

    e = kappa_species(2.5, t_par=10.0, t_perp=14.0)
    p = Species("p", 1, M_PROTON, 1e16, 2.0, 2.0, components=(
        Component(0.7, 2.0, 2.0), Component(0.3, 8.0, 8.0, 1e4)))
    plasma = Plasma((e, p), B)
    wp = e.plasma_frequency
    k = np.array([0.5, 0.7 + 0.02j]) / e.debye_length
    om = 0.9 * wp
    kw = {"omega": om, "angle_deg": angle, "model": model, "omega_ref": wp}
    d, dd = dispersion_in_k(plasma, k=k, **kw)
    h = 1e-6 * np.abs(k)
    fd = (dispersion_in_k(plasma, k=k + h, **kw)[0] - dispersion_in_k(plasma, k=k - h, **kw)[0])
    np.testing.assert_allclose(fd / (2 * h), dd, rtol=1e-7)
