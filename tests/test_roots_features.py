"""Narrow features of f: samples placed about them so no winding is stepped over.

A resonance much narrower than the window (a cyclotron harmonic at small k∥, a cold
beam) can sit between two uniform boundary samples that each pass the phase test, and
the zeros next to it are then never counted.  The survey and the boundary counts take
the features' centres and widths and sample about them first.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.special import wofz

from kinroots import load_case
from kinroots.physics.plasma import EV
from kinroots.roots import find_roots
from kinroots.roots.boundary import BoundaryCounter
from kinroots.roots.contour import Edge, feature_params
from kinroots.study.problem import function_at, survey, window

SQPI = math.sqrt(math.pi)
CASES_DIR = Path(__file__).resolve().parent.parent / "cases"


def langmuir_like(c: complex, h: float, a: float):
    """f(z) = 1 + a(1 + ζZ(ζ)), ζ = (z − c)/h: the electrostatic response of one
    Maxwellian species (Z from scipy's Faddeeva function, Z = i√π w), whose zeros sit
    a few widths h from c."""

    def f(z):
        z = np.asarray(z, complex)
        zeta = (z - c) / h
        big_z = 1j * SQPI * wofz(zeta)
        dz = -2.0 * (1.0 + zeta * big_z)  # Z' = −2(1 + ζZ), handbook identity
        return 1.0 + a * (1.0 + zeta * big_z), a * (big_z + zeta * dz) / h

    return f


def dense_winding(f, box, n: int = 400_000) -> float:
    """Argument principle by brute force: n uniform samples per unit of perimeter
    fraction, far finer than any feature here (independent of the adaptive sampler)."""
    x0, x1, y0, y1 = box
    c = [complex(x0, y0), complex(x1, y0), complex(x1, y1), complex(x0, y1)]
    t = np.arange(n) / n
    z = np.concatenate([c[i] + (c[(i + 1) % 4] - c[i]) * t for i in range(4)])
    v = f(z)[0]
    step = np.angle(np.roll(v, -1) / v)
    assert np.max(np.abs(step)) < 0.5, "brute-force sampling too coarse"
    return float(np.sum(step) / (2 * math.pi))


@pytest.mark.parametrize(("a", "h"), [(3.0, 1e-2), (8.0, 1e-3), (30.0, 1e-2)])
def test_zeros_next_to_a_narrow_resonance_are_all_found(a, h):
    c = 5.1234
    f = langmuir_like(c, h, a)
    box = (0.0, 10.0, -0.5 * h * math.sqrt(a), 1.0)
    res = find_roots(f, box, features=[(complex(c), h)])
    assert res.complete
    assert res.count == round(dense_winding(f, box)) >= 2
    for r in res.values:
        assert abs(f(np.array([r]))[0][0]) < 1e-9
        assert abs(r - c) < 10 * h


def test_feature_params_are_geometric_about_the_projection():
    edge = Edge(("h", -0.01), 0.0, 10.0)
    t = np.sort(feature_params(edge, [(complex(5.0, 0.0), 1e-3)], spacing=1.25))
    assert 5.0 in t and t.min() > 0.0 and t.max() < 10.0
    right = t[t > 5.0] - 5.0
    assert right[0] == pytest.approx(0.005)  # s = max(w, d)/2, d = 0.01
    assert np.allclose(right[1:] / right[:-1], 4.0)
    assert right[-1] >= 1.25  # reaches the uniform spacing
    # a pole a/(z − c) at distance d turns by less than π/4 between these samples
    c = complex(5.0, 0.0)
    z = np.concatenate(([5.0], 5.0 + right)) - 0.01j
    assert np.max(np.abs(np.diff(np.unwrap(np.angle(1.0 / (z - c)))))) < math.pi / 4
    # a feature the uniform samples resolve (scale ≥ spacing/8) needs nothing
    assert feature_params(edge, [(complex(5.0, 0.0), 0.4)], spacing=1.25).size == 0


def _landau_zeros(c: complex, w: float, low: float, high: float) -> list[complex]:
    """Zeros of f = 1 + exp(−ζ²), ζ = (z − c)/w, with −low < Im ζ < high: exp(−ζ²) = −1
    where ζ² = −iπ(2m + 1), m integer, so ζ = ±√(π|2m + 1|) e^{∓iπ/4} (m ≥ 0) or
    e^{±iπ/4} (m < 0): the pair x = ±|y|, |y| = √(π|2m + 1|/2), for each m ≥ 0 below
    the axis and each m < 0 above it."""
    out = []
    m = 0
    while (y := math.sqrt(math.pi * (2 * m + 1) / 2)) < max(low, high):
        if y < low:
            out += [c + w * complex(y, -y), c + w * complex(-y, -y)]
        if y < high:
            out += [c + w * complex(y, y), c + w * complex(-y, y)]
        m += 1
    return out


@pytest.mark.parametrize(("w", "low"), [(0.006, 5.5), (0.005, 7.0), (0.004, 8.0)])
def test_zeros_of_a_landau_exponential_hidden_between_uniform_samples(w, low):
    # f = 1 + exp(−ζ²) models the Landau term of a resonance taking over D below the
    # axis (Fried & Conte 1961, eq. 7): its zeros (derived in _landau_zeros) crowd
    # along Re ζ = ±Im ζ.  The centre lies midway between the first uniform samples of
    # the bottom edge (0.5 and 0.625), over 10 widths from each, where exp(−ζ²) is
    # negligible and f'/f shows nothing, and seen from the edge the feature is too wide
    # for geometric samples; between those samples the exponential winds about 2y²/π
    # times (y = `low`).  Found only because a sample is placed below the centre
    # (feature_params), where the term is largest on the line: without it the survey
    # reports 2 zeros (those above the axis), complete.
    c = 0.5625
    expected = _landau_zeros(c, w, low, 2.0)
    assert len(expected) >= 12

    def f(z):
        e = np.exp(-(((z - c) / w) ** 2))
        return 1.0 + e, -2.0 * (z - c) / w**2 * e

    box = (0.0, 1.0, -low * w, 2.0 * w)  # (higher, this model's exp(−ζ²) overflows)
    res = find_roots(f, box, features=[(complex(c), w)], rtol=1e-10)
    assert res.complete and res.count == len(expected), res.notes
    for z in expected:
        assert min(abs(v - z) for v in res.values) <= 1e-9 * abs(z)


def test_boundary_counts_see_zeros_next_to_a_resonance():
    h, c = 1e-3, 5.1234
    box = (0.0, 10.0, -0.5 * h * math.sqrt(8.0), 1.0)

    def family(p):
        return langmuir_like(c, h, p)

    counter = BoundaryCounter(box, features=lambda p: [(complex(c), h)])
    counts = counter.count([3.0, 8.0, 30.0], family=family)
    for bc in counts:
        assert bc.count == round(dense_winding(family(bc.param), box)), bc


def test_resonances_are_the_harmonics_of_each_component():
    case = load_case(CASES_DIR / "mirror_loss_cone_ions.toml")
    k = 3.0
    d = function_at(case, k).dispersion
    ions = case.plasma.species[1]
    om_c = abs(ions.cyclotron_frequency(case.plasma.B))
    width = abs(d.k_par) * math.sqrt(2 * 200.0 * EV / ions.mass)  # T∥ = 200 eV, both parts
    feats = d.resonances(0.5 * om_c, 2.7 * om_c)
    centres = sorted(c.real / om_c for c, _ in feats)
    assert centres == pytest.approx([-1.0, 0.0, 1.0, 2.0, 3.0, 4.0])  # span 2.2 either side
    assert all(w == pytest.approx(width, rel=1e-12) for _, w in feats)


@pytest.mark.parametrize("k", [3.0, 4.5])
def test_loss_cone_roots_next_to_harmonics_are_counted(k):
    # The growing loss-cone root next to Ω_i (k ρ_i = 3) and the one next to 2Ω_i
    # (k ρ_i = 4.5) lie within 0.004 Ω_i of a harmonic whose width is 0.016 Ω_i:
    # uniform samples used to step over them.
    case = load_case(CASES_DIR / "mirror_loss_cone_ions.toml")
    box = window(case)
    s = survey(case, k)
    assert s.complete
    assert s.count == round(dense_winding(function_at(case, k), box, n=20_000))
    assert s.count == 2
