"""ID-tagged analytic functions with known zeros, shared by tests and benchmarks.

Every problem names where its zeros come from.  Functions follow the root layer's
convention ``f(z) -> (f(z), f'(z))`` for a 1-D complex array.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
import scipy.special

Func = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class Problem:
    """A function, a box, and the zeros it has there (with multiplicity)."""

    id: str
    f: Func
    box: tuple[float, float, float, float]
    zeros: tuple[complex, ...]
    multiplicities: tuple[int, ...]
    source: str
    excluded: tuple[complex, ...] = field(default=())

    @property
    def count(self) -> int:
        return sum(self.multiplicities)


def product_of_linear(roots: Sequence[complex]) -> Func:
    """f(z) = Π (z − r_k) in factored form (zeros exact by construction).

    f' = Σ_k Π_{j≠k}(z − r_j), computed without dividing by (z − r_k).
    """
    r = np.asarray(list(roots), dtype=complex)

    def f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        d = z[:, None] - r[None, :]
        val = np.prod(d, axis=1)
        der = np.zeros_like(val)
        for k in range(r.size):
            der += np.prod(np.delete(d, k, axis=1), axis=1)
        return val, der

    return f


def sin_f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    return np.sin(z), np.cos(z)


def cos_f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    return np.cos(z), -np.sin(z)


def bessel_j0_j1(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """J0(z)·J1(z); derivatives by the recurrences J0' = −J1, J1' = J0 − J1/z."""
    j0 = scipy.special.jv(0, z)
    j1 = scipy.special.jv(1, z)
    j2 = scipy.special.jv(2, z)
    d1 = 0.5 * (j0 - j2)  # J1' = (J0 − J2)/2, regular at z = 0
    return j0 * j1, -j1 * j1 + j0 * d1


def rational_poles(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(z − a)(z − b) / ((z − p)(z − q)) with a, b, p, q below."""
    a, b, p, q = 0.5 + 0.25j, -1.0 - 0.5j, 0.2 - 0.4j, -0.6 + 0.7j
    num = (z - a) * (z - b)
    den = (z - p) * (z - q)
    dnum = 2 * z - a - b
    dden = 2 * z - p - q
    return num / den, (dnum * den - num * dden) / den**2


def tan_f(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """tan z: zeros kπ, poles (k + ½)π (closed form)."""
    c = np.cos(z)
    return np.sin(z) / c, 1.0 / c**2


def scaled_double_zero(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """z²·(z − 1.5)(z + 0.7 − 0.3j): a spurious double zero at 0, as a scaling brings."""
    g, dg = product_of_linear([1.5, -0.7 + 0.3j])(z)
    return z * z * g, 2 * z * g + z * z * dg


_J0 = scipy.special.jn_zeros(0, 3)
_J1 = scipy.special.jn_zeros(1, 3)
#: Two close pairs, far apart: moments of a cell holding both blur each pair.
_PAIRS = (0.5, 0.5 + 2e-3, -0.7 + 0.2j, -0.7 + 0.203j, 0.1 - 0.4j)
_CLUSTER = tuple(0.4 + 0.3j + 1e-3 * np.exp(1j * (0.7 + np.pi / 2 * np.arange(4))))

PROBLEMS: dict[str, Problem] = {
    p.id: p
    for p in [
        Problem("poly-simple", product_of_linear([1 + 1j, -2 + 0.5j, 0.3 - 1.2j, 2.5]),
                (-3.0, 3.0, -2.0, 2.0), (1 + 1j, -2 + 0.5j, 0.3 - 1.2j, 2.5), (1, 1, 1, 1),
                "roots by construction"),
        Problem("poly-double", product_of_linear([1, 1, -2]), (-3.0, 3.0, -1.0, 1.2),
                (1, -2), (2, 1), "(z − 1)²(z + 2), roots by construction"),
        Problem("poly-cluster", product_of_linear([*_CLUSTER, 2 - 1j, -1.5 + 0.5j]),
                (-3.0, 3.0, -2.0, 2.1), (*_CLUSTER, 2 - 1j, -1.5 + 0.5j), (1,) * 6,
                "4 roots on a circle of radius 1e-3, roots by construction"),
        Problem("poly-pairs", product_of_linear(_PAIRS), (-1.0, 1.1, -1.0, 0.9), _PAIRS,
                (1,) * 5, "two pairs 2e-3 and 3e-3 apart, roots by construction"),
        Problem("sin", sin_f, (-10.0, 10.0, -1.0, 1.3),
                tuple(k * np.pi for k in range(-3, 4)), (1,) * 7, "zeros kπ (closed form)"),
        Problem("cos", cos_f, (-7.0, 7.5, -2.0, 0.8),
                tuple((k + 0.5) * np.pi for k in range(-2, 2)), (1,) * 4,
                "zeros (k + ½)π (closed form)"),
        Problem("bessel-j0j1", bessel_j0_j1, (0.5, 11.0, -0.7, 0.6),
                tuple(np.sort(np.concatenate((_J0, _J1)))), (1,) * 6,
                "scipy.special.jn_zeros(0, 3) and jn_zeros(1, 3)"),
        Problem("rational-poles", rational_poles, (-2.0, 2.0, -1.5, 1.5),
                (0.5 + 0.25j, -1.0 - 0.5j), (1, 1), "numerator roots by construction",
                excluded=(0.2 - 0.4j, -0.6 + 0.7j)),
        Problem("tan", tan_f, (-4.0, 4.1, -1.0, 1.2), (-np.pi, 0.0, np.pi), (1, 1, 1),
                "zeros kπ, poles (k + ½)π (closed form)",
                excluded=tuple((k + 0.5) * np.pi for k in range(-2, 1))),
        Problem("scaled-double-zero", scaled_double_zero, (-2.0, 2.0, -1.0, 1.1),
                (1.5, -0.7 + 0.3j), (1, 1), "factors by construction; 0 excluded",
                excluded=(0.0,)),
    ]
}
