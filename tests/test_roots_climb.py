"""Batched Newton and the local climb of the root layer, on functions with known answers."""

from __future__ import annotations

import numpy as np
import pytest

from kinroots.roots.climb import maximize_local, newton_batch


def test_newton_batch_finds_each_members_root_and_reports_failures():
    # f_j(z) = z² − a_j: roots ±sqrt(a_j) (identity); z0 = 0 has f' = 0 (must fail).
    a = np.array([4.0, 2.0 + 1.0j, -9.0, 1.0])
    z0 = np.array([1.5, 1.0 + 0.5j, 2.5j, 0.0])

    def f(idx, z):
        return z * z - a[idx], 2 * z

    res = newton_batch(f, z0, rtol=1e-13)
    assert list(res.converged) == [True, True, True, False]
    expected = np.sqrt(a[:3].astype(complex))
    assert np.allclose(res.values[:3], expected, rtol=1e-13, atol=0)
    assert np.all(res.residual[:3] < 1e-12)
    assert res.evaluations > 4


def test_newton_batch_region_stops_an_escaping_iterate():
    res = newton_batch(lambda idx, z: (z - 10.0, np.ones_like(z)), np.array([0.0 + 0j]),
                       region=(-1.0, 1.0, -1.0, 1.0))
    assert not res.converged[0]


def _gaussian(centre, width):
    def fun(p):
        q = (np.asarray(p) - centre) / width
        return np.exp(-np.sum(q * q, axis=1)) * 3.0
    return fun


@pytest.mark.parametrize("start", [(0.2, 10.0), (1.9, 80.0), (1.0, 45.0)])
def test_climb_reaches_the_peak_of_a_gaussian_from_far_away(start):
    # Started where the surface is convex (Hessian not negative definite): ascent steps
    # first, then Newton steps; the exact maximum is known.
    centre, width = np.array([1.23456, 47.1]), np.array([0.4, 12.0])
    out = maximize_local(_gaussian(centre, width), np.array(start), lower=np.array([0.1, 0.0]),
                         upper=np.array([2.0, 90.0]), scale=np.array([0.15, 10.0]))
    assert out.converged, out.reason
    assert np.allclose(out.x, centre, rtol=1e-6)
    assert out.value == pytest.approx(3.0, rel=1e-10)
    assert not out.at_lower.any() and not out.at_upper.any()


def test_climb_stops_on_the_face_and_flags_it():
    # Peak outside the box in x: the constrained maximum is on x = upper, y at the peak's y.
    centre, width = np.array([2.5, 40.0]), np.array([0.4, 12.0])
    out = maximize_local(_gaussian(centre, width), np.array([1.0, 60.0]),
                         lower=np.array([0.1, 30.0]), upper=np.array([2.0, 70.0]),
                         scale=np.array([0.15, 10.0]), hard_upper=np.array([2.2, 90.0]),
                         hard_lower=np.array([0.05, 0.0]))
    assert out.converged
    assert out.at_upper[0] and not out.at_upper[1] and not out.at_lower.any()
    assert out.x[0] == pytest.approx(2.0) and out.x[1] == pytest.approx(40.0, rel=1e-6)


def test_climb_in_one_variable():
    # γ(k) = k exp(−k²): maximum 1/sqrt(2e) at k = 1/sqrt(2) (calculus).
    out = maximize_local(lambda p: p[:, 0] * np.exp(-p[:, 0] ** 2), np.array([0.3]),
                         lower=np.array([0.1]), upper=np.array([3.0]), scale=np.array([0.2]))
    assert out.converged
    assert out.x[0] == pytest.approx(2 ** -0.5, rel=1e-6)
    assert out.value == pytest.approx((2 * np.e) ** -0.5, rel=1e-12)
