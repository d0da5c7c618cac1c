"""Newton polishing and winding-number verification (kinroots.roots.polish / verify).

Reference zeros: closed forms (sin z = 0 at kπ; z² + 1 = 0 at ±i) and roots by
construction of factored polynomials.
"""

from __future__ import annotations

import math

import numpy as np
from _problems import product_of_linear, sin_f

from kinroots.roots import CountedFunction, Status, polish, verify


def test_sin_converges_to_pi() -> None:
    r = polish(sin_f, 3.0, rtol=1e-14)
    assert r.converged and r.status is Status.CONVERGED and r.reason == ""
    assert abs(r.value - math.pi) < 1e-14  # closed form kπ
    assert r.residual < 1e-14 and r.step <= 1e-14
    assert r.evaluations >= r.iterations + 1


def test_evaluations_counted_exactly() -> None:
    counted = CountedFunction(sin_f)
    r = polish(counted, 3.0, rtol=1e-12)
    assert r.evaluations == counted.evaluations


def test_looser_tolerance_stops_earlier() -> None:
    tight = polish(sin_f, 2.0, rtol=1e-14)
    loose = polish(sin_f, 2.0, rtol=1e-3)
    assert loose.converged and tight.converged
    assert loose.iterations < tight.iterations
    assert abs(loose.value - math.pi) < 1e-3 * math.pi


def test_no_real_zero_from_real_start_is_reported_failed() -> None:
    # z² + 1 has zeros ±i (closed form); Newton from a real start stays real
    def f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return z * z + 1, 2 * z

    r = polish(f, 0.5, maxiter=30)
    assert not r.converged
    assert r.status in (Status.MAX_ITER, Status.STALLED)
    assert r.reason
    assert abs(r.value.imag) == 0.0  # the iterate is not presented as a root


def test_zero_derivative_is_stalled() -> None:
    def f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return z * z + 1, 2 * z

    r = polish(f, 0.0)
    assert r.status is Status.STALLED and "f' vanishes" in r.reason


def test_function_without_zeros_does_not_converge() -> None:
    def f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        e = np.exp(z)
        return e, e

    r = polish(f, 0.0, maxiter=20)
    assert not r.converged and r.status is Status.MAX_ITER


def test_nonfinite_is_reported() -> None:
    def f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        bad = z.real > 1.0
        v = np.where(bad, np.nan, z - 2.0)
        return v, np.where(bad, np.nan, 1.0 + 0j)

    r = polish(f, 1.5)
    assert r.status is Status.NONFINITE and not r.converged


def test_region_is_respected() -> None:
    r = polish(sin_f, 2.0, region=(1.5, 2.5, -1.0, 1.0))  # first step lands at 4.19
    assert r.status is Status.LEFT_REGION and not r.converged


def test_double_root_detected_and_verified() -> None:
    # (z − 1)²(z + 2): 1 is a double zero (by construction)
    f = product_of_linear([1, 1, -2])
    plain = polish(f, 1.4, detect_multiplicity=False, maxiter=200)
    auto = polish(f, 1.4, verify_radius=1e-3)
    assert auto.converged and auto.multiplicity == 2 and auto.verified
    assert abs(auto.value - 1) < 1e-12
    assert auto.iterations < plain.iterations


def test_verify_counts_zeros_in_circle() -> None:
    f = product_of_linear([0.0, 0.1, 0.5j, 2.0])  # by construction
    assert verify(f, 0.0, radius=0.05) == 1
    assert verify(f, 0.0, radius=0.2) == 2
    assert verify(f, 0.0, radius=1.0) == 3
    assert verify(f, 0.0, radius=3.0) == 4
