"""Tests of kinroots.physics.zfunc_kappa against sources outside the project.

References: mpmath quadrature of the defining integrals at 30 digits (contour on the
real axis, the residue 2πi g(ζ) added where the pole lies below it: the Landau
continuation); a closed form of Z*_1 derived by residues; identities between the
profiles; the Maxwellian limit (Fried & Conte 1961 Z, via kinroots' own tested Z and
mpmath's erfc).
"""

from __future__ import annotations

import math

import mpmath as mp
import numpy as np
import pytest

from kinroots.physics.zfunc_kappa import (
    beyond_branch_point,
    kappa_transforms,
    kappa_z,
    second_moment,
)


def mp_y(zeta: complex, kappa: float, power: float, dps: int = 30) -> complex:
    """Y_p(ζ) = ∫ g_p(x)/(x − ζ) dx by mpmath, continued: real-axis contour plus 2πi g(ζ)
    when Im ζ < 0 (pole below the contour), g_p = A(1 + x²/κ)^−p normalized."""
    with mp.workdps(dps):
        k = mp.mpf(kappa)
        p = mp.mpf(power)
        a = mp.gamma(p) / (mp.sqrt(mp.pi * k) * mp.gamma(p - mp.mpf(1) / 2))
        z = mp.mpc(zeta)
        pts = sorted({-abs(z.real) - 5, mp.re(z), abs(z.real) + 5, mp.mpf(0)})
        val = mp.quad(lambda x: a * (1 + x * x / k) ** (-p) / (x - z), [-mp.inf, *pts, mp.inf])
        if z.imag < 0:
            val += 2j * mp.pi * a * (1 + z * z / k) ** (-p)
        return complex(val)


ZETAS = [0.3 + 0.2j, 1.1 + 1e-3j, 2.0 - 1.0j, 0.05 - 0.05j, 10 + 0.1j, 25 - 3j, 0.7 - 0.4j,
         -1.3 - 0.6j]


@pytest.mark.parametrize("kappa", [1.7, 2.0, 3.5, 12.0])
def test_y_and_f_against_mpmath_quadrature(kappa: float) -> None:
    """Both half-planes, p = κ and κ + 1, to 1e-10 relative (the issue's floor)."""
    for power in (kappa, kappa + 1.0):
        y, _, f, _ = kappa_transforms(np.array(ZETAS), kappa, power)
        for z, yy, ff in zip(ZETAS, y, f, strict=True):
            ref = mp_y(z, kappa, power)
            assert abs(yy - ref) <= 1e-10 * abs(ref), (kappa, power, z, yy, ref)
            assert abs(ff - (1 + z * ref)) <= 1e-10 * max(abs(1 + z * ref), 1e-3), (z, ff)


@pytest.mark.parametrize("kappa", [1.7, 2.0, 5.5])
def test_below_the_branch_point_against_mpmath(kappa: float) -> None:
    """Deep in the lower half-plane, Im ζ < −√κ (principal sheet), off the cut."""
    root = math.sqrt(kappa)
    zetas = [0.8 - 1.3 * root * 1j, -2.0 - 2.0 * root * 1j]
    y, _, _, _ = kappa_transforms(np.array(zetas), kappa, kappa)
    for z, yy in zip(zetas, y, strict=True):
        ref = mp_y(z, kappa, kappa)
        assert abs(yy - ref) <= 1e-10 * abs(ref), (z, yy, ref)
    flags = beyond_branch_point(np.array(zetas + [0.5 - 0.5j]), kappa)
    assert list(flags) == ([False, False, False] if kappa.is_integer() else [True, True, False])


def test_summers_thorne_z1_closed_form() -> None:
    """Z*_1(ζ) = −(ζ + 2i)/(2(ζ + i)²) (Summers & Thorne 1991, from memory).

    Derivation: for Im ζ > 0 close the contour of ∫ dx/((1 + x²)²(x − ζ)) in the lower
    half-plane: −2πi d/dx[1/((x − i)²(x − ζ))] at x = −i = −π(ζ + 2i)/(2(ζ + i)²); the
    prefactor Γ(2)/(√π Γ(1/2)) = 1/π.  The rational function is its own continuation
    (pole at ζ = −i only), so the check holds in both half-planes.
    """
    zetas = np.array([0.3 + 0.2j, 2.0 - 0.5j, -1.0 - 3.0j, 0.1 - 0.9j, 7.0 + 0j, 0.5 - 5.0j])
    z, dz = kappa_z(zetas, 1.0)
    ref = -(zetas + 2j) / (2 * (zetas + 1j) ** 2)
    dref = -1 / (2 * (zetas + 1j) ** 2) + (zetas + 2j) / (zetas + 1j) ** 3
    np.testing.assert_allclose(z, ref, rtol=1e-12)
    np.testing.assert_allclose(dz, dref, rtol=1e-11)


@pytest.mark.parametrize("kappa", [1.6, 2.5, 8.0])
def test_derivative_identity(kappa: float) -> None:
    """dY_p/dζ = ∫ g_p/(x − ζ)² dx = ∫ g_p′/(x − ζ) dx (by parts) = −(2p − 1)/κ · F_{p+1}(ζ),
    from g_p′ = −(2p − 1)/κ · x g_{p+1} (as Z′ = −2(1 + ζZ) for the Maxwellian);
    dF/dζ = Y + ζ dY/dζ (from F = 1 + ζY).  Two separately computed profiles."""
    z = np.array(ZETAS)
    y, dy, _, df = kappa_transforms(z, kappa, kappa)
    _, _, f_next, _ = kappa_transforms(z, kappa, kappa + 1.0)
    np.testing.assert_allclose(dy, -(2 * kappa - 1) / kappa * f_next, rtol=1e-10)
    np.testing.assert_allclose(df, y + z * dy, rtol=1e-9, atol=1e-13)


def test_large_zeta_has_no_cancellation() -> None:
    """F_p(ζ) → −⟨x²⟩/ζ² (⟨x²⟩ = κ/(2p − 3)) for real ζ → ∞ (moment expansion of the
    integral, common practice); 1 + ζY would lose every digit at ζ = 1e7."""
    kappa = 6.0
    zeta = np.array([1e4, 1e7])
    _, _, f, _ = kappa_transforms(zeta, kappa, kappa)
    ref = -second_moment(kappa, kappa) / zeta**2
    np.testing.assert_allclose(f.real, ref, rtol=1e-6)


def test_maxwellian_limit_is_order_one_over_kappa() -> None:
    """Y_κ → Z (Fried & Conte 1961) with a difference O(1/κ): the differences at κ and 2κ
    have a ratio near 2 (issue 13).  Z from mpmath's erfc."""

    def z_ref(z: complex) -> complex:
        with mp.workdps(30):
            w = mp.mpc(z)
            return complex(1j * mp.sqrt(mp.pi) * mp.exp(-w * w) * mp.erfc(-1j * w))

    for z in (0.7 + 0.3j, 1.5 - 0.4j):
        d1 = abs(kappa_transforms(np.array([z]), 200.0, 200.0)[0][0] - z_ref(z))
        d2 = abs(kappa_transforms(np.array([z]), 400.0, 400.0)[0][0] - z_ref(z))
        assert 1.8 < d1 / d2 < 2.2, (z, d1, d2)
        assert d1 < 0.05


def test_nonfinite_input_gives_nan() -> None:
    y, dy, f, df = kappa_transforms(np.array([np.nan + 0j, complex(np.inf, 0)]), 3.0, 3.0)
    assert np.all(np.isnan(y)) and np.all(np.isnan(f))


def test_one_point_path_agrees_with_the_array_path() -> None:
    """The Python-arithmetic path for a single ζ equals the vectorized one."""
    for kappa, power in ((1.6, 2.6), (4.0, 4.0), (40.0, 41.0)):
        zs = np.array([0.3 + 0.2j, 2.0 - 1.0j, 25 - 3j, 1e-8 + 0j, -0.4 - 0.7 * kappa**0.5 * 1j])
        arr = kappa_transforms(zs, kappa, power)
        for i, z in enumerate(zs):
            one = kappa_transforms(np.array([z]), kappa, power)
            for a, b in zip(one, arr, strict=True):
                assert abs(a[0] - b[i]) <= 1e-13 * abs(b[i]), (kappa, z)


def test_not_evaluated_about_the_cut() -> None:
    """Non-integer κ: NaN on and about the cut Re ζ = 0, Im ζ < −√κ (module notes);
    integer κ (rational profile, no cut): finite there."""
    root = math.sqrt(2.5)
    z = np.array([0.01 - 1.5 * root * 1j, 0.3 - 5 * root * 1j, 0.5 - 1.5 * root * 1j])
    y = kappa_transforms(z, 2.5, 2.5)[0]
    assert np.isnan(y[0]) and np.isnan(y[1]) and np.isfinite(y[2])
    assert np.isnan(kappa_transforms(z[:1], 2.5, 2.5)[0][0])  # one-point path too
    assert np.all(np.isfinite(kappa_transforms(z * math.sqrt(3 / 2.5), 3.0, 3.0)[0]))
