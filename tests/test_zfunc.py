"""Tests of kinroots.physics.zfunc against sources outside the project.

Each source is named beside its check.
"""

from __future__ import annotations

import math
import warnings

import mpmath as mp
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinroots.physics import zfunc
from kinroots.physics.zfunc import plasma_z, plasma_z_and_prime, plasma_z_prime

SQRT_PI = math.sqrt(math.pi)


def mp_z_and_prime(zeta: complex, dps: int = 30) -> tuple[complex, complex]:
    """Independent reference: Z = i√π exp(-ζ²) erfc(-iζ), Z' = -2(1 + ζZ) in mpmath."""
    with mp.workdps(dps):
        z = mp.mpc(zeta)
        zz = 1j * mp.sqrt(mp.pi) * mp.exp(-z * z) * mp.erfc(-1j * z)
        return complex(zz), complex(-2 * (1 + z * zz))


def mp_z_prime_by_diff(zeta: complex) -> complex:
    """Z' as the mpmath numerical derivative of Z (does not use Z' = -2(1 + ζZ))."""
    with mp.workdps(40):
        return complex(
            mp.diff(lambda t: 1j * mp.sqrt(mp.pi) * mp.exp(-t * t) * mp.erfc(-1j * t), mp.mpc(zeta))
        )


def _sample_points() -> np.ndarray:
    rng = np.random.default_rng(20240611)
    n = 400
    parts = [
        rng.uniform(-1e3, 1e3, n) + 1j * rng.uniform(-6, 1e3, n),  # whole box
        rng.uniform(-12, 12, n) + 1j * 10.0 ** rng.uniform(-14, 0.5, n),  # near real axis
        rng.uniform(-12, 12, n) + 1j * rng.uniform(-6, 0, n),  # lower half-plane
        10.0 ** rng.uniform(-10, 0.5, n) * np.exp(2j * np.pi * rng.uniform(0, 1, n)),  # origin
        rng.choice([-1, 1], n) * 10.0 ** rng.uniform(-8, 3, n)
        + 1j * rng.choice([-1e-300, 0.0, 1e-9, 0.5, 3.0], n),
        np.array([2.0, 8.0, -8.0 + 0j, 8j, 2j, 7.999999, 1.9999999, 0.0, 1e3 + 0j, -6j]),
    ]
    z = np.concatenate(parts)
    return z[(z.imag >= -6) & (np.abs(z.real) <= 1e3)]


POINTS = _sample_points()


@pytest.fixture(scope="module")
def reference() -> tuple[np.ndarray, np.ndarray]:
    ref = np.array([mp_z_and_prime(complex(v)) for v in POINTS])
    return ref[:, 0], ref[:, 1]


def _zeros_of(f, guesses) -> np.ndarray:
    with mp.workdps(30):
        return np.array([complex(mp.findroot(f, mp.mpc(g), verify=False)) for g in guesses])


def _check(got: np.ndarray, ref: np.ndarray, tol: float, zeros: np.ndarray) -> None:
    # Near a zero of the function (within 1e-3) the relative error is meaningless: there the
    # criterion is |err| <= tol * max(|ref|, scale) with scale = |ζ - ζ0|-independent size of
    # the cancelling terms, taken as 1 (|Z| and |Z'| are O(1) at the zeros used here).
    err = np.abs(got - ref)
    near = np.zeros(POINTS.shape, bool)
    for z0 in zeros:
        near |= np.abs(POINTS - z0) < 1e-3
    bound = tol * np.where(near, np.maximum(np.abs(ref), 1.0), np.abs(ref))
    bad = ~(err <= bound)
    assert not bad.any(), list(zip(POINTS[bad][:5], (err / np.abs(ref))[bad][:5], strict=True))


def test_z_against_mpmath(reference: tuple[np.ndarray, np.ndarray]) -> None:
    # Source: mpmath at 30 digits (independent arbitrary-precision evaluation).
    assert POINTS.size >= 2000
    z, zp = plasma_z_and_prime(POINTS)
    # first zeros of Z in the lower half-plane (mpmath findroot from rough guesses)
    zeros = _zeros_of(lambda t: mp.exp(-t * t) * mp.erfc(-1j * t), [2 - 1.3j, -2 - 1.3j])
    _check(z, reference[0], 1e-13, zeros)
    _check(plasma_z(POINTS), reference[0], 1e-13, zeros)
    assert np.isfinite(z).all()


def test_z_prime_against_mpmath(reference: tuple[np.ndarray, np.ndarray]) -> None:
    # Source: mpmath at 30 digits. Zeros of Z' = zeros of 1 + ζZ (Landau roots).
    f = lambda t: 1 + t * 1j * mp.sqrt(mp.pi) * mp.exp(-t * t) * mp.erfc(-1j * t)  # noqa: E731
    zeros = _zeros_of(f, [1.99 - 0.2j, -1.99 - 0.2j, 2.5 - 1.5j, -2.5 - 1.5j])
    _check(plasma_z_prime(POINTS), reference[1], 1e-12, zeros)
    _check(plasma_z_and_prime(POINTS)[1], reference[1], 1e-12, zeros)


@pytest.mark.parametrize("zeta", [0.3 + 0.1j, 2.5 - 0.4j, 5.0 + 0.01j, 9.0 + 2j, -3 - 2j, 0.0])
def test_z_prime_against_mpmath_derivative(zeta: complex) -> None:
    # Source: mpmath numerical differentiation of Z (independent of the identity).
    ref = mp_z_prime_by_diff(zeta)
    assert abs(plasma_z_prime(zeta) - ref) <= 1e-13 * abs(ref)


# Fried & Conte (1961) real-axis entries, 6 significant digits, from memory;
# each is cross-checked against mpmath below so a misremembered digit is caught.
FRIED_CONTE = [
    (0.0, 0.0, 1.77245),
    (1.0, -1.07616, 0.652049),
    (2.0, -0.602681, 0.0324636),
]


@pytest.mark.parametrize(("x", "re", "im"), FRIED_CONTE)
def test_fried_conte_table(x: float, re: float, im: float) -> None:
    # Source: Fried & Conte (1961) table, from memory; tolerance = the printed digits.
    got = plasma_z(x)
    assert abs(got.real - re) <= 6e-6 * max(abs(re), 1e-300) + 1e-12
    assert abs(got.imag - im) <= 6e-6 * abs(im)
    ref = mp_z_and_prime(x)[0]
    assert abs(ref.real - re) <= 6e-6 * abs(re) + 1e-12  # the recalled value itself
    assert abs(ref.imag - im) <= 6e-6 * abs(im)


def test_z_at_origin() -> None:
    # Source: Fried & Conte (1961): Z(0) = i√π, Z'(0) = -2.
    assert plasma_z(0.0) == pytest.approx(1j * SQRT_PI, rel=1e-15)
    assert plasma_z_prime(0.0) == pytest.approx(-2.0, rel=1e-15)


def test_symmetry() -> None:
    # Source: Fried & Conte (1961): Z(-ζ*) = -Z(ζ)*.
    z = POINTS
    assert np.allclose(plasma_z(-np.conj(z)), -np.conj(plasma_z(z)), rtol=1e-14, atol=0)


def test_identity_z_prime() -> None:
    # Source: Fried & Conte (1961): Z' = -2(1 + ζZ); checked where no cancellation (|ζ| < 1).
    z = POINTS[np.abs(POINTS) < 1]
    zz, zp = plasma_z_and_prime(z)
    assert np.allclose(zp, -2 * (1 + z * zz), rtol=1e-14, atol=0)


def test_power_series_small_zeta() -> None:
    # Source: Fried & Conte (1961) small-argument series
    # Z = i√π exp(-ζ²) - 2ζ(1 - 2ζ²/3 + 4ζ⁴/15 - 8ζ⁶/105 + ...).
    rng = np.random.default_rng(3)
    z = 1e-2 * (rng.uniform(-1, 1, 50) + 1j * rng.uniform(-1, 1, 50))
    z2 = z * z
    poly = 1 - 2 * z2 / 3 + 4 * z2**2 / 15 - 8 * z2**3 / 105
    series = 1j * SQRT_PI * np.exp(-z2) - 2 * z * poly
    assert np.allclose(plasma_z(z), series, rtol=1e-14, atol=0)


def test_asymptotic_series_upper_half_plane() -> None:
    # Source: Fried & Conte (1961) / DLMF 7.12.1: Z ≈ -1/ζ - 1/(2ζ³) - 3/(4ζ⁵) - 15/(8ζ⁷), Im ζ > 0.
    rng = np.random.default_rng(4)
    z = 200 * np.exp(1j * np.pi * rng.uniform(0.05, 0.95, 50))
    asym = -1 / z - 1 / (2 * z**3) - 3 / (4 * z**5) - 15 / (8 * z**7)
    assert np.allclose(plasma_z(z), asym, rtol=1e-15, atol=0)
    # Z' ≈ 1/ζ² + 3/(2ζ⁴) + 15/(4ζ⁶) (term-by-term derivative)
    asym_p = 1 / z**2 + 3 / (2 * z**4) + 15 / (4 * z**6)
    assert np.allclose(plasma_z_prime(z), asym_p, rtol=1e-12, atol=0)


def test_series_truncation_is_below_double_precision() -> None:
    # Source: DLMF 7.12.1 coefficients (2n-1)!!; the first omitted term at |ζ| = 8 is
    # below 1e-17 of the first term (common practice for choosing the switch radius).
    n = zfunc._N_SERIES + 1
    u = 1 / (2 * zfunc._R_SERIES**2)
    first_omitted = math.prod(range(1, 2 * n, 2)) * u**n
    assert first_omitted / u < 1e-17


def test_shapes_and_scalars() -> None:
    # Common practice (numpy ufunc conventions).
    out = plasma_z(np.zeros((3, 4)))
    assert out.shape == (3, 4) and out.dtype == np.complex128
    s = plasma_z(1.0)
    assert isinstance(s, np.complex128)
    a, b = plasma_z_and_prime([1.0, 2.0 + 1j])
    assert a.shape == b.shape == (2,)
    a0, b0 = plasma_z_and_prime(0.5)
    assert isinstance(a0, np.complex128) and isinstance(b0, np.complex128)
    big = np.linspace(-5, 5, 20000) + 0.1j  # spans several internal blocks
    one_by_one = np.array([plasma_z(v) for v in big[::997]])
    assert np.allclose(plasma_z(big)[::997], one_by_one, rtol=1e-15, atol=0)


@pytest.mark.parametrize("bad", ["1.0", ["a", "b"], object(), None, {"x": 1}, [1.0, "2"], True])
def test_non_numeric_raises(bad: object) -> None:
    for f in (plasma_z, plasma_z_prime, plasma_z_and_prime):
        with pytest.raises(TypeError, match="number"):
            f(bad)


def test_nan_gives_nan_without_warnings() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        z, zp = plasma_z_and_prime(np.array([np.nan, complex(np.nan, -1.0), complex(1.0, np.nan)]))
        assert np.isnan(z).all() and np.isnan(zp).all()
        assert np.isnan(plasma_z(np.nan)) and np.isnan(plasma_z_prime(np.nan))


def test_overflow_region_is_non_finite_without_warnings() -> None:
    # Boundary stated in the docstring: non-finite for y² - x² > ln(DBL_MAX/(2√π)).
    lim = math.log(np.finfo(float).max / (2 * SQRT_PI))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        edge = 3 - 1j * math.sqrt(9 + lim + 0.01)
        z = np.array([-27j, 5 - 28j, 100 - 104j, 1e200 - 1e200j, edge])
        assert not np.isfinite(plasma_z(z)).any()
        assert not np.isfinite(plasma_z_prime(z)).any()
        inside = 3 - 1j * math.sqrt(9 + lim - 1.0)
        ref = mp_z_and_prime(inside)[0]
        assert abs(plasma_z(inside) - ref) <= 1e-14 * abs(ref)


@settings(max_examples=200, deadline=None)
@given(
    x=st.floats(-1e6, 1e6, allow_nan=False),
    d=st.floats(-800, 800, allow_nan=False),
)
def test_deep_lower_half_plane_correct_or_non_finite(x: float, d: float) -> None:
    # Source: mpmath at 40 digits. y chosen so that y² - x² ≈ d: the exponential term
    # ranges from negligible to overflowing.
    y = -math.sqrt(max(x * x + d, 0.0))
    zeta = complex(x, y)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        z, zp = plasma_z_and_prime(zeta)
    rz, rp = mp_z_and_prime(zeta, dps=40)
    for got, ref in ((z, rz), (zp, rp)):
        if np.isfinite(got):
            # compare in mpmath: the reference may lie beyond double range (then any
            # finite result is wrong and the comparison fails, as it must)
            assert mp.fabs(mp.mpc(got) - ref) <= 1e-12 * mp.fabs(ref), (zeta, got, ref)


def test_scalar_path_against_mpmath() -> None:
    # Source: mpmath erfc (DLMF 7.2.3) at 30 digits, F = 1 + ζZ = -Z'/2 (Fried & Conte 1961).
    # The one-point Python path must give Z and F to the accuracy of the array path, in
    # all three regions of both half-planes, on the real axis and on the region edges.
    rng = np.random.default_rng(7)
    radii = np.concatenate([rng.uniform(0, 2, 40), rng.uniform(2, 8, 60), rng.uniform(8, 12, 30)])
    zeta = radii * np.exp(1j * rng.uniform(-np.pi, np.pi, radii.size))
    zeta = np.concatenate([zeta, [2.0, -3.0, 4.0 + 0j, 8.0, -5.3 - 1e-9j, 2.4 + 0.01j]])
    for zv in zeta:
        z, f = zfunc.z_and_f_scalar(complex(zv))
        z_ref, zp_ref = mp_z_and_prime(complex(zv))
        f_ref = -0.5 * zp_ref
        assert abs(z - z_ref) <= 1e-12 * abs(z_ref), zv
        assert abs(f - f_ref) <= 1e-12 * abs(f_ref), zv
        z_arr, zp_arr = plasma_z_and_prime(np.array([zv]))
        assert abs(z - z_arr[0]) <= 1e-13 * abs(z_arr[0]), zv
        assert abs(f + 0.5 * zp_arr[0]) <= 1e-13 * abs(zp_arr[0]), zv


def test_scalar_path_overflow_raises() -> None:
    # Where exp(-ζ²) overflows the array functions give inf/nan; the scalar path raises
    # OverflowError instead (its callers then fall back to the array path).
    with pytest.raises(OverflowError):
        zfunc.z_and_f_scalar(complex(0.5, -30.0))
    z, zp = plasma_z_and_prime(np.array([0.5 - 30.0j]))
    assert not (np.isfinite(z[0]) and np.isfinite(zp[0]))


def _middle_region_points() -> np.ndarray:
    """2 ≤ |ζ| < 8 in both half-planes: random, on and near the real axis (where the
    Landau term matters and 1 + ζZ cancels most against wofz), on the region's edges."""
    rng = np.random.default_rng(20261204)
    radii = rng.uniform(2.0, 8.0, 300)
    random = radii * np.exp(1j * rng.uniform(-np.pi, np.pi, radii.size))
    x = np.linspace(-7.99, 7.99, 97)
    near = (x[:, None] + 1j * np.array([0.0, 1e-12, -1e-12, 1e-3, -1e-3, 0.05, -0.05, 0.4,
                                        -0.4])[None, :]).ravel()
    edges = np.array([2.0, -2.0, 2j, 2.0000000001 - 1e-9j, 7.9999999, -7.9999999 + 0.5j,
                      5.0 * np.exp(0.25j * np.pi), 3.0 - 3.0j])
    z = np.concatenate([random, near, edges])
    return z[(np.abs(z) >= 2.0) & (np.abs(z) < 8.0)]


def test_middle_region_z_prime_against_mpmath() -> None:
    # Source: mpmath erfc at 30 digits (DLMF 7.2.3), F = 1 + ζZ = -Z'/2 (Fried & Conte 1961).
    # The Taylor table for 2 ≤ |ζ| < 8 claims a relative error of F below 3e-15 in the
    # upper half-plane and on the real axis; below it, where F(ζ) = F(-ζ) + 2i√π ζ e^{-ζ²},
    # below 3e-15 of the larger of the two terms. Array and one-point paths alike.
    points = _middle_region_points()
    assert points.size > 900
    ref_f = []
    ref_e = []
    for zv in points:
        with mp.workdps(30):
            t = mp.mpc(complex(zv))
            ref_f.append(complex(1 + t * 1j * mp.sqrt(mp.pi) * mp.exp(-t * t) * mp.erfc(-1j * t)))
            ref_e.append(complex(2j * mp.sqrt(mp.pi) * t * mp.exp(-t * t)))
    f_ref = np.array(ref_f)
    e_ref = np.array(ref_e)
    scale = np.where(points.imag >= 0.0, np.abs(f_ref),
                     np.maximum(np.abs(f_ref - e_ref), np.abs(e_ref)))
    f_array = -0.5 * plasma_z_and_prime(points)[1]
    f_scalar = np.array([zfunc.z_and_f_scalar(complex(zv))[1] for zv in points])
    for got in (f_array, f_scalar):
        err = np.abs(got - f_ref) / scale
        assert err.max() < 3e-15, (points[np.argmax(err)], err.max())
    # the naive form 1 + ζZ from wofz is far worse here (the reason for the table)
    naive = 1.0 + points * plasma_z(points)
    assert (np.abs(naive - f_ref) / scale).max() > 1e-13


def test_taylor_table_agrees_with_its_trapezoid_source() -> None:
    # Identity check of the construction: the table reproduces the pole-corrected
    # trapezoidal rule it is built from (Lyness & Moler 1967: Taylor coefficients from a
    # circle), to rounding, at points away from the sampling circles.
    rng = np.random.default_rng(5)
    s = rng.uniform(2.0, 7.9, 400) * np.exp(1j * rng.uniform(0.0, np.pi, 400))
    with np.errstate(all="ignore"):
        trap = zfunc._f_trapezoid(s)
    assert np.max(np.abs(zfunc._f_table(s) - trap) / np.abs(trap)) < 3e-15


def test_scalar_series_term_counts_against_mpmath() -> None:
    # Source: mpmath erfc (DLMF 7.2.3) at 30 digits plus 3 per decade of |ζ| (exp(-ζ²)
    # erfc(-iζ) loses about 2 digits per decade), F = 1 + ζZ (Fried & Conte 1961); series
    # coefficients (2n-1)!! of DLMF 7.12.1. The one-point path sums, for |ζ| in [n, n + 1),
    # the terms the rule of _series_terms keeps at |ζ| = n: F must keep its rounding-level
    # accuracy just above every integer n (the tightest point of each count), in both
    # half-planes (below: relative to the larger of F(-ζ) and the Landau term, as in
    # test_middle_region_z_prime_against_mpmath).
    rows = zfunc._SERIES_ROWS
    coef = zfunc._SERIES_COEF
    for n in range(8, zfunc._SERIES_ROWS_END + 1):
        count = len(rows[n][1]) + 1
        u = 0.5 / n**2
        # the first omitted term is below 1e-17 of the first, and the last kept one is not
        # (the count is no larger than the rule needs)
        if count < zfunc._N_SERIES:
            assert coef[count] * u ** (count + 1) < 1e-17 * u, n
        assert count == 1 or coef[count - 1] * u**count >= 1e-17 * u, n
    radii = [n * (1.0 + 1e-13) for n in range(8, 64)] + [100.0, 200.5, 1023.9, 1024.0, 1e6]
    angles = [0.0, 1e-9, 0.1, 0.25 * math.pi, 0.5 * math.pi, 0.75 * math.pi, math.pi - 0.1,
              math.pi, -0.01, -0.1, -0.25 * math.pi + 0.05, -0.5 * math.pi + 1.4, -3.0]
    worst = 0.0
    for r in radii:
        for a in angles:
            zeta = r * complex(math.cos(a), math.sin(a))
            if zeta.imag**2 - zeta.real**2 > 600.0:  # beyond the Landau term's range
                continue
            with mp.workdps(30 + 3 * int(math.log10(r))):
                t = mp.mpc(zeta)
                e = 2j * mp.sqrt(mp.pi) * t * mp.exp(-t * t)
                f_ref = 1 + t * 1j * mp.sqrt(mp.pi) * mp.exp(-t * t) * mp.erfc(-1j * t)
                scale = abs(f_ref) if a >= 0.0 else max(abs(f_ref - e), abs(e))
                err = abs(mp.mpc(zfunc.z_and_f_scalar(zeta)[1]) - f_ref) / scale
            worst = max(worst, float(err))
            assert err < 1e-15, (zeta, float(err))
    assert worst > 0.0
