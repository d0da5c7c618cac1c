"""Boundary-only zero counts across a family, and roots entering the window between
surveys (issue 14 item 3, issue 18 item 2)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from kinroots.roots import find_roots
from kinroots.roots.boundary import BoundaryCounter
from kinroots.study.solve import follow_branches

BOX = (-4.0, 4.0, -1.0, 1.0)


def sine(p: float):
    return lambda z: (np.sin(z - p), np.cos(z - p))


def sine_pairs(p, z):
    return np.sin(z - p), np.cos(z - p)


def test_counts_of_shifted_sine_match_its_zeros():
    """Zeros of sin(z − p) are p + nπ (identity): count those with |Re| ≤ 4, both modes."""
    ps = np.linspace(0.0, 3.0, 31)
    c = BoundaryCounter(BOX)
    got = c.count(ps[:12], pairs=sine_pairs) + c.count(ps[12:], family=sine)
    want = [sum(1 for n in range(-3, 4) if abs(p + n * math.pi) < 4.0) for p in ps]
    assert [g.count for g in got] == want
    assert all(g.evaluations > 0 for g in got)


def test_excluded_point_is_not_counted():
    """z² sin(z − 0.5): the double zero at the excluded 0 is subtracted (as in the survey)."""
    def f(z):
        return z * z * np.sin(z - 0.5), 2 * z * np.sin(z - 0.5) + z * z * np.cos(z - 0.5)

    (got,) = BoundaryCounter(BOX, excluded=[0j]).count([0.0], family=lambda p: f)
    assert got.count == 3  # 0.5, 0.5 ± π


def test_zero_on_the_edge_gives_no_count():
    def f(z):
        return z - 0.1 - 1j, 1 + 0 * z

    (got,) = BoundaryCounter(BOX).count([1.0], family=lambda p: f)
    assert got.count is None and "edge" in got.note


# a root moving on a straight line through one edge into the box, another staying inside
ENTRIES = {
    "bottom": (0.3 - 2.05j, 0.3 + 0.5j),
    "right": (6.1 + 0.2j, 1.0 + 0.2j),
    "top": (-1.0 + 2.5j, -1.0 - 0.3j),
    "left": (-6.5 - 0.4j, -2.0 + 0.1j),
}


@pytest.mark.parametrize("edge", sorted(ENTRIES))
def test_root_entering_through_each_edge_is_found_where_it_enters(edge):
    a, b = ENTRIES[edge]
    stay = 2.5 - 0.5j

    def zero(p):
        return a + (b - a) * p

    def family(p):
        return lambda z: ((z - zero(p)) * (z - stay), 2 * z - zero(p) - stay)

    def pairs(p, z):
        zp = a + (b - a) * np.asarray(p)
        return (z - zp) * (z - stay), 2 * z - zp - stay

    params = [float(p) for p in np.linspace(0.0, 1.0, 41)]
    branches, _, _, _, checks = follow_branches(
        family, params, BOX, lambda p: find_roots(family(p), BOX), rtol=1e-12,
        resurvey_every=10, label=str, pairs=pairs)
    inside = [BOX[0] <= zero(p).real <= BOX[1] and BOX[2] <= zero(p).imag <= BOX[3]
              for p in params]
    assert [c.count for c in checks] == [1 + int(i) for i in inside]
    assert all(c.verified for c in checks)
    moving = [br for br in branches if abs(br.points[br.found_at].value - stay) > 1e-6]
    (m,) = moving
    assert sorted(m.points) == [p for p, i in zip(params, inside, strict=True) if i]
    for p, r in m.points.items():
        assert r.value == pytest.approx(zero(p), abs=1e-10)
