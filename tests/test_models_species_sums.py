"""Species sums at fixed k: em_magnetized.ScaledSum and es_magnetized.SpeciesSum.

The reference is the builder itself (``scaled_susceptibility`` summed over species),
which tests/test_models_magnetized.py checks against mpmath recomputations, published
limits and identities; ScaledSum reorders the same formulas (issue 14: one Z call for all
species, linear maps per k), so the two must agree to rounding, including at small ω and
ω = 0 where the scaled form is designed to stay accurate, for either sign of k∥, drifts,
anisotropy and complex k.
"""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest

from kinroots.physics.models import em_magnetized as em
from kinroots.physics.plasma import M_ELECTRON, M_PROTON, Species

M_ALPHA = 6.6446573357e-27  # alpha-particle mass [kg] (CODATA 2018)

ELECTRON = Species("e", -1, M_ELECTRON, 1.1e19, 100.0, 100.0, drift=-2.0e4)
PROTON = Species("p", 1, M_PROTON, 0.9e19, 50.0, 120.0)
ALPHA = Species("a", 2, M_ALPHA, 0.1e19, 200.0, 200.0, drift=3.0e5)
THREE = (ELECTRON, PROTON, ALPHA)
B0 = 1.0
WPE = ELECTRON.plasma_frequency
WCP = PROTON.cyclotron_frequency(B0)


def _builder_sum(omega, k_par, k_perp, tol=1e-14):
    v = d = 0
    for s in THREE:
        r = em.scaled_susceptibility(omega, s, k_par=k_par, k_perp=k_perp, B=B0, tol=tol,
                                     omega_ref=WPE)
        v = v + r.value
        d = d + r.derivative
    return v, d


def _k(angle: float, kfac: complex) -> tuple[complex, complex]:
    """k∥, k⊥ at ``angle`` degrees for |k| = kfac ω_pe/w_e (k∥ = 0 exactly at 90°)."""
    k = kfac * WPE / ELECTRON.thermal_speed_par
    t = np.radians(angle)
    return (0.0 if angle == 90.0 else k * np.cos(t)), k * np.sin(t)


def _close(a: np.ndarray, b: np.ndarray, rtol: float) -> None:
    # entry by entry, relative to the size of that entry over all ω (entries that vanish
    # identically compare absolutely against the matrix's scale)
    scale = np.maximum(np.max(np.abs(b), axis=0), 1e-300 + np.max(np.abs(b)) * 1e-3)
    assert np.all(np.abs(a - b) <= rtol * scale), np.max(np.abs(a - b) / scale)


@pytest.mark.parametrize("angle", [5.0, 45.0, 80.0, 100.0, 150.0])
@pytest.mark.parametrize("kfac", [0.05, 0.4, 1.5 + 0.2j])
def test_scaled_sum_matches_the_builders(angle: float, kfac: complex) -> None:
    k_par, k_perp = _k(angle, kfac)
    fast = em.ScaledSum.for_species(THREE, k_par=k_par, k_perp=k_perp, B=B0, tol=1e-14,
                                    omega_ref=WPE)
    assert fast is not None
    rng = np.random.default_rng(1)
    om = np.concatenate([
        (rng.uniform(-2.0, 2.0, 40) + 1j * rng.uniform(-0.05, 0.3, 40)) * WPE,
        (rng.uniform(-3.0, 3.0, 20) + 1j * rng.uniform(-0.2, 0.5, 20)) * WCP,
        [0.0, 1e-5 * WCP, 1e-5j * WCP, 1e-3 * WCP * (1 + 1j)],
    ])
    with np.errstate(all="ignore"):
        v, d = fast(om)
        rv, rd = _builder_sum(om, k_par, k_perp)
    ok = np.all(np.isfinite(rv), axis=(1, 2))
    assert ok.sum() > 50
    _close(v[ok], rv[ok], 1e-12)
    _close(d[ok], rd[ok], 1e-12)
    # and each ω alone (the single-frequency calls of the tracer)
    with np.errstate(all="ignore"):
        for i in (0, 45, 60, 61):
            v1, d1 = fast(om[i : i + 1])
            np.testing.assert_allclose(v1[0], v[i], rtol=1e-13, atol=1e-13 * np.abs(v[i]).max())
            np.testing.assert_allclose(d1[0], d[i], rtol=1e-13, atol=1e-13 * np.abs(d[i]).max())


@pytest.mark.parametrize("angle", [45.0, 150.0])
@pytest.mark.parametrize("kfac", [0.005, 0.01 + 0.001j])
@pytest.mark.parametrize("ion", [PROTON, ALPHA])
def test_resonant_term_is_the_exponential_part_of_the_sum(angle: float, kfac: complex,
                                                         ion: Species) -> None:
    # Below the harmonics of anisotropic protons or of drifting alphas (with electrons;
    # for k∥ < 0 at 150°, complex k too): the sum minus the sum with that ion harmonic's
    # exp(−ζ²) left out is the factored S_E = c·L g Rᵀ of resonant_term (its derivative
    # likewise); and g is the Gram matrix it claims to be: det g as formed equals
    # g₁₁g₂₂ − g₁₂² where that product does not cancel and is non-negative
    # (Cauchy–Schwarz) for real k.
    k_par, k_perp = _k(angle, kfac)
    fast = em.ScaledSum.for_species((ELECTRON, ion), k_par=k_par, k_perp=k_perp, B=B0,
                                    tol=1e-14, omega_ref=WPE)
    assert fast is not None
    zeta = np.array([1.0 - 3.0j, -2.0 - 2.5j, 0.5 - 4.0j, 3.0 - 3.5j])
    sign = 1.0 if np.real(k_par) >= 0 else -1.0  # the Landau sign: sζ is given
    om = np.concatenate([
        n * ion.cyclotron_frequency(B0) + k_par * ion.drift
        + sign * k_par * ion.thermal_speed_par * zeta for n in (1, 2)])
    with np.errstate(all="ignore"):
        cols = fast.resonant_columns(om)
        # the ion's own harmonics are picked (row 5: ω_p² of the column)
        assert np.all(fast._res[5, cols].real == ion.plasma_frequency**2)
        v, d = fast(om)
        rest, drest, t = fast.resonant_parts(om, cols)
    c = t.coef * 2.0 ** t.exponent
    dc = t.dcoef * 2.0 ** t.exponent
    y = np.einsum("mik,mkl,mjl->mij", t.L, t.g, t.R)
    dy = (np.einsum("mik,mkl,mjl->mij", t.dL, t.g, t.R)
          + np.einsum("mik,mkl,mjl->mij", t.L, t.g, t.dR))
    se = c[:, None, None] * y
    dse = dc[:, None, None] * y + c[:, None, None] * dy
    for full, got, want in ((v, v - rest, se), (d, d - drest, dse)):
        # to rounding of the difference: relative to S_E, or to S where S_E is far smaller
        size = (np.max(np.abs(want), axis=(1, 2))
                + 1e-2 * np.max(np.abs(full), axis=(1, 2)))
        err = np.max(np.abs(got - want), axis=(1, 2)) / size
        assert np.all(err < 1e-12), err
    # det g against the same Gram determinant g₁₁g₂₂ − g₁₂² at 50 digits, from mpmath's
    # I_n and I_n' (at λ ~ 1e-3 to 1e-5 it cancels by 3 to 10 decades in double)
    lam = mp.mpc(k_perp) ** 2 * ion.thermal_speed_perp**2 / (
        2 * mp.mpf(ion.cyclotron_frequency(B0)) ** 2)
    with mp.workdps(50):
        for j, col in enumerate(cols):
            n = int(fast._res[0, col].real)
            gam = mp.exp(-lam) * mp.besseli(n, lam)
            dgam = mp.exp(-lam) * (mp.besseli(n, lam, derivative=1) - mp.besseli(n, lam))
            g22 = n * n * gam / lam - 2 * lam * dgam
            g11, g12 = (gam / lam, dgam) if n else (gam, mp.sqrt(lam) * dgam)
            ref = complex(g11 * g22 - g12 * g12)
            assert abs(t.det_g[j] - ref) <= 1e-12 * abs(ref), (n, t.det_g[j], ref)


def test_scaled_sum_declines_where_the_builders_must_serve() -> None:
    kw = {"B": B0, "tol": 1e-14, "omega_ref": WPE}
    assert em.ScaledSum.for_species(THREE, k_par=0.0, k_perp=1e3, **kw) is None  # k∥ = 0
    cold = Species("c", 1, M_PROTON, 1e18, 0.0, 0.0)
    assert em.ScaledSum.for_species((ELECTRON, cold), k_par=1e3, k_perp=1e3, **kw) is None
    krook = Species("k", 1, M_PROTON, 1e18, 5.0, 5.0, collision_frequency=1e6)
    assert em.ScaledSum.for_species((ELECTRON, krook), k_par=1e3, k_perp=1e3, **kw) is None


@pytest.mark.parametrize("angle", [5.0, 60.0, 89.0, 120.0])
@pytest.mark.parametrize("kfac", [0.05, 0.4, 1.5 + 0.2j])
def test_es_species_sum_matches_the_builder(angle: float, kfac: complex) -> None:
    from kinroots.physics.models import es_magnetized as es

    k_par, k_perp = _k(angle, kfac)
    fast = es.SpeciesSum.for_species(THREE, k_par=k_par, k_perp=k_perp, B=B0, tol=1e-14)
    assert fast is not None
    rng = np.random.default_rng(2)
    om = np.concatenate([
        (rng.uniform(-2.0, 2.0, 40) + 1j * rng.uniform(-0.05, 0.3, 40)) * WPE,
        (rng.uniform(-3.0, 3.0, 20) + 1j * rng.uniform(-0.2, 0.5, 20)) * WCP,
        [0.0, 1e-5 * WCP],
    ])
    with np.errstate(all="ignore"):
        v, d = fast(om)
        rv = rd = 0
        for s in THREE:
            r = es.susceptibility(om, s, k_par=k_par, k_perp=k_perp, B=B0, tol=1e-14)
            rv = rv + r.value
            rd = rd + r.derivative
    ok = np.isfinite(rv)
    assert ok.sum() > 50
    # relative to the size of the terms: the species sum may cancel (1 + Σχ ≈ 0 at roots)
    np.testing.assert_allclose(v[ok], rv[ok], rtol=1e-12, atol=1e-12 * np.abs(rv[ok]).max())
    np.testing.assert_allclose(d[ok], rd[ok], rtol=1e-12, atol=1e-12 * np.abs(rd[ok]).max())


def test_es_species_sum_declines_where_the_builder_must_serve() -> None:
    from kinroots.physics.models import es_magnetized as es

    kw = {"B": B0, "tol": 1e-14}
    assert es.SpeciesSum.for_species(THREE, k_par=0.0, k_perp=1e3, **kw) is None
    krook = Species("k", 1, M_PROTON, 1e18, 5.0, 5.0, collision_frequency=1e6)
    assert es.SpeciesSum.for_species((ELECTRON, krook), k_par=1e3, k_perp=1e3, **kw) is None


@pytest.mark.parametrize("model", ["em", "es"])
def test_dispersion_with_the_sums_keeps_shapes_and_nan(model: str) -> None:
    # the fixed-k sums serve Dispersion: empty, 0-d and 2-d ω keep their shapes, non-finite
    # ω give NaN, and the values equal those of the builders' path
    from kinroots.physics.dispersion import Dispersion
    from kinroots.physics.plasma import Plasma

    disp = Dispersion(Plasma(THREE, B=B0), k=0.4 * WPE / ELECTRON.thermal_speed_par,
                      angle_deg=50.0, model=model, omega_ref=WPE)
    assert (disp._scaled_sum if model == "em" else disp._species_sum) is not None
    assert disp(np.array([], dtype=complex))[0].shape == (0,)
    assert disp(np.zeros((2, 0)))[1].shape == (2, 0)
    assert disp(0.7 * WPE)[0].shape == ()
    om = np.array([[0.7 * WPE, (1.3 + 0.1j) * WPE, np.nan], [np.inf, 0.2j * WPE, 2.0 * WPE]])
    d, dd = disp(om)
    assert d.shape == dd.shape == (2, 3)
    assert np.isnan(d[0, 2]) and np.isnan(d[1, 0]) and np.isnan(dd[0, 2])
    disp._scaled_sum_ = disp._species_sum_ = None  # the builders' path
    d_ref, dd_ref = disp(om)
    ok = np.isfinite(d_ref)
    np.testing.assert_allclose(d[ok], d_ref[ok], rtol=1e-11)
    np.testing.assert_allclose(dd[ok], dd_ref[ok], rtol=1e-11)


@pytest.mark.parametrize("angle", [0.0, 30.0, 90.0, 135.0])
@pytest.mark.parametrize("kfac", [0.05, 0.4, 1.5 + 0.2j])
def test_unmagnetized_scaled_sum_matches_the_builder(angle: float, kfac: complex) -> None:
    from kinroots.physics.models import em_unmagnetized as emu

    k_par, k_perp = _k(angle, kfac)
    fast = emu.ScaledSum.for_species(THREE, k_par=k_par, k_perp=k_perp, omega_ref=WPE)
    assert fast is not None
    rng = np.random.default_rng(3)
    om = np.concatenate([
        (rng.uniform(-2.0, 2.0, 40) + 1j * rng.uniform(-0.05, 0.3, 40)) * WPE,
        (rng.uniform(-0.05, 0.05, 20) + 1j * rng.uniform(-0.01, 0.05, 20)) * WPE,
        [0.0, 1e-7 * WPE, 1e-7j * WPE],
    ])
    with np.errstate(all="ignore"):
        v, d = fast(om)
        rv = rd = 0
        for s in THREE:
            r = emu.scaled_susceptibility(om, s, k_par=k_par, k_perp=k_perp, omega_ref=WPE)
            rv = rv + r.value
            rd = rd + r.derivative
    ok = np.all(np.isfinite(rv), axis=(1, 2))
    assert ok.sum() > 50
    _close(v[ok], rv[ok], 1e-12)
    _close(d[ok], rd[ok], 1e-12)
