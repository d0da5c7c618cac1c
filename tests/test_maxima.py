"""True maxima of γ over (k, θ): every family's local maximum refined, flags, thresholds."""

from __future__ import annotations

import copy
import math
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent / "validation"))

from test_thresholds import fit, hellinger_case  # noqa: E402

from kinroots.io.case import parse_case  # noqa: E402
from kinroots.io.parameters import with_parameter  # noqa: E402
from kinroots.roots import polish  # noqa: E402
from kinroots.study import threshold as threshold_module  # noqa: E402
from kinroots.study.growth import GrowthResult, max_growth  # noqa: E402
from kinroots.study.problem import function_at  # noqa: E402


def firehose_trial(anisotropy: float, k_points: int = 8,
                   angles: tuple[float, ...] = (30.0, 40.0, 50.0, 60.0, 70.0)):
    """The oblique-firehose set-up of issue 16: β∥p = 2, v_A/c = 1e-4, T_e = T∥p,
    k d_p = 0.1–1.2, angles 30–70°, window Re ω ∈ ±0.02, Im ω ∈ [−0.01, 0.5] Ω_p."""
    case, _ = hellinger_case("oblique_firehose", 2.0, anisotropy)
    raw = copy.deepcopy(case.raw)
    raw["scan"]["k"] = {"start": 0.1, "stop": 1.2, "points": k_points}
    return parse_case(raw, "oblique firehose trial"), list(angles)


def lattice_maximum(case, k0: float, a0: float, z0: complex, dk: float, da: float,
                    n: int = 11) -> float:
    """Independent brute force: largest γ on an n × n lattice of (k, θ) around (k0, a0),
    each root polished by scalar Newton (roots.polish) from its lattice neighbour."""
    best = -math.inf
    ks = k0 + dk * np.linspace(-1, 1, n)
    for a in a0 + da * np.linspace(-1, 1, n):
        c = replace(case, angle_deg=float(a))
        for order in (ks[n // 2:], ks[:n // 2 + 1][::-1]):
            z = z0
            for k in order:
                r = polish(function_at(c, float(k)), z, rtol=1e-12)
                if not r.converged:
                    break
                z = r.value
                best = max(best, z.imag)
    return best


def test_fast_mode_between_grid_points_beats_the_best_grid_root():
    # Issue 16: at T⊥/T∥ = 0.3371 the best grid root is a damped wave at the grid's corner
    # (k d_p = 0.1, θ = 70°, γ ≈ −7.3e-6 Ω_p) while the oblique firehose, damped at every
    # grid point, grows between them (γ ≈ 3.6e-3 Ω_p near k d_p ≈ 0.48, θ ≈ 46°).
    case, angles = firehose_trial(0.3371)
    grid = max_growth(case, angles, refine=False)
    assert grid.growth < 0 and grid.k_at_edge and grid.angle_at_edge
    g = max_growth(case, angles)
    assert g.growing and g.growth > 3e-3
    assert not (g.k_at_edge or g.angle_at_edge or g.root_at_window_edge)
    assert 0.4 < g.k < 0.6 and 40 < g.angle < 52
    assert abs(g.omega.real) < 1e-9  # the oblique firehose does not propagate
    assert g.root is not None and g.root.converged and g.root.verified
    # independent route: a lattice 0.002 in k and 0.1° apart (offset from the answer),
    # no quadratic models: it may not exceed the climbed maximum, and comes close to it
    brute = lattice_maximum(case, g.k + 0.0013, g.angle - 0.07, g.omega, 0.01, 0.5)
    assert brute <= g.growth * (1 + 1e-9)
    assert brute >= g.growth * (1 - 2e-3)


@pytest.mark.slow
def test_coarse_and_fine_grids_give_the_same_maximum():
    # Grid independence: 8 × 5 against 12 × 9 (k, θ) points over the same ranges.
    case, angles = firehose_trial(0.335)
    coarse = max_growth(case, angles)
    fine_case, fine_angles = firehose_trial(0.335, 12, tuple(np.linspace(30, 70, 9)))
    fine = max_growth(fine_case, fine_angles)
    assert coarse.growing
    assert fine.growth == pytest.approx(coarse.growth, rel=1e-6)
    assert fine.k == pytest.approx(coarse.k, rel=1e-3)
    assert fine.angle == pytest.approx(coarse.angle, rel=1e-3)


def test_a_maximum_beyond_the_k_range_raises_the_flag():
    # Proton-cyclotron growth along B (Hellinger et al. 2006 conditions, β∥p = 1,
    # T⊥/T∥ = 1.6) peaks near k d_p ≈ 0.5 (from memory): a scan stopping at 0.3 ends on it.
    case, _ = hellinger_case("proton_cyclotron", 1.0, 1.6)
    raw = copy.deepcopy(case.raw)
    raw["scan"]["k"] = {"start": 0.1, "stop": 0.3, "points": 3}
    g = max_growth(parse_case(raw, "short scan"), None)
    assert g.growing and g.k_at_edge and g.k == pytest.approx(0.3)
    assert not g.angle_at_edge
    assert any("extend [scan] k" in w for w in g.edge_warnings())
    raw["scan"]["k"] = {"start": 0.1, "stop": 1.0, "points": 6}
    raw["search"]["imag"] = [-0.05, 0.5]
    full = max_growth(parse_case(raw, "full scan"), None)
    assert full.growth > g.growth and not full.k_at_edge


def _fake_growth(table):
    """max_growth stand-in: γ_max(p) from ``table(p)`` (NaN: no root in the window)."""
    def fake(case, angles=None, *, refine=True, seeds=()):
        p = case.plasma.species[0].temperature_perp / case.plasma.species[0].temperature_par
        g = table(p)
        return GrowthResult(growth=g, omega=complex(0.0, g), k=0.5, angle=0.0)
    return fake


def test_threshold_is_verified_where_the_maximum_jumps(monkeypatch):
    # γ_max jumps from 0 to 2e-3 at T⊥/T∥ = 1.5: Brent converges onto the jump, where
    # γ_max never equals the level 1e-3; the answer must be flagged with the reason.
    monkeypatch.setattr(threshold_module, "max_growth",
                        _fake_growth(lambda p: 0.0 if p < 1.5 else 2e-3))
    case, _ = hellinger_case("proton_cyclotron", 1.0, 1.2)
    t = threshold_module.find_threshold(case, "species.p.anisotropy", (1.1, 2.0), 1e-3)
    assert t.value == pytest.approx(1.5, abs=1e-5)
    assert not t.converged and "jumps" in t.reason
    # a continuous γ_max(p) = (p − 1.4)·1e-2 passes: threshold 1.5 exactly (algebra)
    monkeypatch.setattr(threshold_module, "max_growth",
                        _fake_growth(lambda p: (p - 1.4) * 1e-2))
    t = threshold_module.find_threshold(case, "species.p.anisotropy", (1.1, 2.0), 1e-3)
    assert t.converged and t.value == pytest.approx(1.5, rel=1e-6)


def test_threshold_says_when_a_bracket_end_has_no_root(monkeypatch):
    monkeypatch.setattr(threshold_module, "max_growth",
                        _fake_growth(lambda p: math.nan if p < 1.3 else (p - 1.4) * 1e-2))
    case, _ = hellinger_case("proton_cyclotron", 1.0, 1.2)
    t = threshold_module.find_threshold(case, "species.p.anisotropy", (1.1, 2.0), 1e-3)
    assert t.converged and t.value == pytest.approx(1.5, rel=1e-6)
    assert math.isnan(t.growth_low) and t.growth_high == pytest.approx(6e-3)
    assert any("no root in the search window at the lower bracket end" in n for n in t.notes)
    with_parameter(case, "species.p.anisotropy", 1.5)  # the answer is a valid case


@pytest.mark.slow
def test_issue_firehose_threshold_is_the_true_maximum_crossing_the_level():
    # The trial of issue 16 (reported T⊥/T∥ = 0.3371, from a damped grid-corner root).
    # Hellinger et al. (2006) oblique-firehose fit (coefficients from memory, as in
    # tests/validation/test_thresholds.py): 1 − 1.4/(β∥ + 0.11) = 0.3365 at β∥ = 2.
    case, angles = firehose_trial(0.34)
    t = threshold_module.find_threshold(case, "species.p.anisotropy", (0.25, 0.6), 1e-3,
                                        angles, xtol=1e-7)
    assert t.converged, t.reason
    at = t.at
    assert at.growth == pytest.approx(1e-3, rel=1e-3)
    assert not (at.k_at_edge or at.angle_at_edge or at.root_at_window_edge)
    expected = 1 - 1.4 / (2.0 + 0.11)
    assert abs((t.value - expected) / (1 - expected)) < 0.10
    # independent route at the answer: the lattice brute force around the maximizer
    # finds no larger γ and comes within 0.2 % of it
    c = with_parameter(case, "species.p.anisotropy", t.value)
    brute = lattice_maximum(c, at.k + 0.0013, at.angle - 0.07, at.omega, 0.01, 0.5)
    assert at.growth * (1 - 2e-3) <= brute <= at.growth * (1 + 1e-9)


@pytest.mark.slow
@pytest.mark.parametrize(("kind", "beta"), [("proton_cyclotron", 1.0),
                                            ("parallel_firehose", 2.0)])
def test_threshold_does_not_depend_on_the_k_grid(kind, beta):
    # Issue 16 grid independence: the threshold from the 6-point k grid of the published-fit
    # check (tests/validation/test_thresholds.py) and from 12 points over the same range
    # agree within 0.1 % in T⊥/T∥ − 1, and each row's root grows at the level within 5 %.
    expected = fit(kind, beta)  # Hellinger et al. (2006) fit, only to place the bracket
    bracket = tuple(sorted((1 + 0.6 * (expected - 1), 1 + 1.4 * (expected - 1))))
    case, angles = hellinger_case(kind, beta, expected)
    raw = copy.deepcopy(case.raw)
    raw["scan"]["k"] = {**raw["scan"]["k"], "points": 12}
    fine = with_parameter(parse_case(raw, "fine k grid"), "species.p.beta_par", beta)
    values = []
    for c in (case, fine):
        t = threshold_module.find_threshold(c, "species.p.anisotropy", bracket, 1e-3, angles,
                                            xtol=1e-5 * abs(expected - 1))
        assert t.converged, t.reason
        assert t.at.growth == pytest.approx(1e-3, rel=0.05)
        assert not (t.at.k_at_edge or t.at.root_at_window_edge)
        values.append(t.value)
    assert abs((values[0] - values[1]) / (values[1] - 1)) < 1e-3
