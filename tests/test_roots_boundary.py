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


def test_first_values_handed_in_replace_the_first_call():
    """``start`` gives the pairs a count evaluates first; handed their values (``first``),
    the count makes one call fewer and gives the same counts and evaluations."""
    ps = [float(p) for p in np.linspace(0.0, 3.0, 10)]
    plain, handed = BoundaryCounter(BOX), BoundaryCounter(BOX)
    calls: dict[str, list[int]] = {"plain": [], "handed": []}

    def counted(name):
        def pairs(q, w):
            calls[name].append(w.size)
            return sine_pairs(q, w)
        return pairs

    for batch in (ps[:5], ps[5:]):
        calls["plain"].clear()
        calls["handed"].clear()
        a = plain.count(batch, pairs=counted("plain"))
        p, z = handed.start(batch)
        b = handed.count(batch, pairs=counted("handed"), first=sine_pairs(p, z))
        assert [(x.count, x.evaluations) for x in a] == [(x.count, x.evaluations) for x in b]
        assert calls["plain"] == [z.size, *calls["handed"]]
    assert plain.evaluations == handed.evaluations


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


def _drifting_sine(c: complex):
    """sin(z − p)·exp(c z²): the zeros of sin(z − p) (p + nπ), under a factor with no
    zeros whose phase turns fast along the edges (its winding on any loop is 0)."""
    def pairs(p, z):
        e = np.exp(c * z * z)
        s, co = np.sin(z - p), np.cos(z - p)
        return s * e, (co + 2 * c * z * s) * e
    return pairs


@pytest.mark.parametrize("c", [0.4, 0.3j, 0.25 - 0.25j])
def test_smooth_factor_keeps_the_counts_and_saves_samples(c):
    """With the smooth factor exp(P) divided out (P learnt from earlier loops, once the
    zeros known inside are divided out too, as solve does with the traced roots), the
    counts are still the zeros of sin(z − p) in the box (identity), with fewer samples;
    the known list is off by one zero in one batch (its count must not follow it)."""
    ps = np.linspace(0.0, 6.0, 80)
    zeros = [[p + n * math.pi for n in range(-4, 5) if abs(p + n * math.pi) < 4.0]
             for p in ps]
    want = [len(z) for z in zeros]
    known = [z if not 30 <= i < 40 else z[1:] for i, z in enumerate(zeros)]
    evals = {}
    for degree in (0, 16):
        counter = BoundaryCounter(BOX)
        counter.smooth_degree = degree
        got = []
        for j, batch in enumerate(np.split(ps, 8)):
            if j == 4:  # learnt by now: samples of the second half
                evals[degree] = -counter.evaluations
            got += counter.count(list(batch), pairs=_drifting_sine(c),
                                 known=known[10 * j:10 * j + 10])
        assert [g.count for g in got] == want, degree
        evals[degree] += counter.evaluations
    assert evals[16] < 0.75 * evals[0]


@pytest.mark.parametrize("c", [0.4, 0.3j, 0.25 - 0.25j])
def test_respaced_loops_keep_the_counts_with_fewer_samples_than_thinned_ones(c):
    """Each batch's loop respaced for the next one (points spread by the share of the
    tests' allowance each segment used) instead of thinned: the same counts (the zeros of
    sin(z − p), identity), fewer samples, and every loop closed through the four corners
    in counter-clockwise order on the boundary."""
    ps = np.linspace(0.0, 6.0, 80)
    zeros = [[p + n * math.pi for n in range(-4, 5) if abs(p + n * math.pi) < 4.0]
             for p in ps]
    evals = {}
    for respace in (False, True):
        counter = BoundaryCounter(BOX)
        counter.respace = respace
        got = []
        for j, batch in enumerate(np.split(ps, 8)):
            got += counter.count(list(batch), pairs=_drifting_sine(c),
                                 known=zeros[10 * j:10 * j + 10])
            s = counter._perimeter(counter.loop)
            assert np.all(np.diff(s) > 0) and s[0] == 0 and set(range(4)) <= set(s.tolist())
            x, y = counter.loop.real, counter.loop.imag
            on_edge = np.isin(x, BOX[:2]) | np.isin(y, BOX[2:])
            assert on_edge.all() and np.all((x >= BOX[0]) & (x <= BOX[1]))
            assert np.all((y >= BOX[2]) & (y <= BOX[3]))
        assert [g.count for g in got] == [len(z) for z in zeros], respace
        evals[respace] = counter.evaluations
    assert evals[True] < 0.9 * evals[False]


@pytest.mark.parametrize("edge", sorted(ENTRIES))
def test_root_jumping_in_after_the_factor_was_learnt_is_counted(edge):
    """A zero far outside for two batches (the factor learns the landscape with it), then
    just inside the edge: counted at once, whatever the factor had absorbed."""
    a, b = ENTRIES[edge]
    inner = a + 0.93 * (b - a) if edge in ("bottom", "top") else a + 0.98 * (b - a)
    assert BOX[0] < inner.real < BOX[1] and BOX[2] < inner.imag < BOX[3]

    def pairs(p, z):
        r = np.where(np.asarray(p) < 0.5, a, inner)
        e = np.exp(0.3 * z * z)
        return (z - r) * e, (1 + 0.6 * z * (z - r)) * e

    counter = BoundaryCounter(BOX)
    got = []
    for batch in np.split(np.linspace(0.0, 1.0, 40, endpoint=False), 4):
        got += [g.count for g in counter.count(list(batch), pairs=pairs)]
    assert got == [0] * 20 + [1] * 20


def test_factor_linearity_bound_holds_on_dense_samples():
    """The Chebyshev bound of P minus its chord on a segment is at least the deviation seen
    on 2,001 points of it (a degree-m polynomial equals its interpolant on m + 1
    Chebyshev–Lobatto nodes, and |T_j| ≤ 1 on [−1, 1]); a segment past a fast turn of P
    is refused."""
    rng = np.random.default_rng(7)
    counter = BoundaryCounter(BOX)
    for _ in range(20):
        coef = (rng.standard_normal(13) + 1j * rng.standard_normal(13)) / np.arange(1, 14) ** 2
        counter._smooth = (0j, 4.0, coef)
        za = rng.uniform(-4, 4, 30) + 1j * rng.uniform(-1, 1, 30)
        zb = za + (rng.uniform(-1, 1, 30) + 1j * rng.uniform(-1, 1, 30)) * rng.uniform(0.01, 3)
        t = np.linspace(0.0, 1.0, 2001)
        zz = za[:, None] + t * (zb - za)[:, None]
        pv = np.polynomial.polynomial.polyval(zz / 4.0, coef)
        dev = np.max(np.abs(pv - (pv[:, :1] + t * (pv[:, -1:] - pv[:, :1]))), axis=1)
        ok = counter._factor_linear(za, zb)
        assert not np.any(ok & (dev > 0.5 * math.pi / 4 * (1 + 1e-9)))
    counter._smooth = (0j, 1.0, np.array([0, 0, 0, 0, 0, 0, 0, 0, 30.0 + 0j]))  # 30 z⁸
    assert not counter._factor_linear(np.array([-1.0 + 0j]), np.array([1.0 + 0j]))[0]
