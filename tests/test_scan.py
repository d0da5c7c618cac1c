"""The main job end to end in the library: survey, tracing, spatial problem.

References
----------
Langmuir root at k λ_De = 0.5 with fixed ions, ω = 1.4157 − 0.1534i ω_pe: the value
quoted widely in the kinetic-simulation literature (Landau-damping test problems of
Vlasov codes); from memory — and recomputed here independently with mpmath.
"""

from __future__ import annotations

import math
from pathlib import Path

import mpmath as mp
import numpy as np
import pytest

from kinroots.io.case import load_case, parse_case
from kinroots.study.problem import (
    dispersion_at,
    function_at,
    pair_function,
    spatial_roots,
    survey,
    window,
)
from kinroots.study.rows import branch_rows
from kinroots.study.solve import solve

CASES = sorted(Path(__file__).resolve().parent.parent.joinpath("cases").glob("*.toml"))


def electrons_only(k_start: float = 0.5, k_stop: float = 0.6, points: int = 2,
                   window: tuple[float, float, float, float] = (0.8, 3.0, -0.5, 0.05)):
    """Maxwellian electrons with a fixed neutralizing background (ions omitted)."""
    data = {
        "title": "Langmuir waves, fixed ions",
        "species": [{"name": "e", "charge": -1, "mass": "electron", "density": 1e18,
                     "temperature": 10.0}],
        "wave": {"model": "electrostatic", "angle": 0.0},
        "scan": {"k": {"start": k_start, "stop": k_stop, "points": points}},
        "units": {"frequency": "plasma:e", "length": "debye:e"},
        "search": {"real": list(window[:2]), "imag": list(window[2:])},
        "solver": {"tolerance": 1e-13},
    }
    return parse_case(data, "<test>")


def mpmath_langmuir_root(k: float, guess: complex) -> complex:
    """Root of 1 − Z'(ζ)/(2k²) = 0, ζ = ω/(√2 k), in ω_pe units, with mpmath's erfc.

    Independent route: Z(ζ) = i√π exp(−ζ²) erfc(−iζ) (Fried & Conte 1961), Z' = −2(1+ζZ).
    """
    with mp.workdps(40):
        def disp(w):
            zeta = w / (mp.sqrt(2) * k)
            z = 1j * mp.sqrt(mp.pi) * mp.exp(-zeta**2) * mp.erfc(-1j * zeta)
            zp = -2 * (1 + zeta * z)
            return 1 - zp / (2 * k**2)

        return complex(mp.findroot(disp, mp.mpc(guess)))


def test_langmuir_root_at_half_debye_wavenumber():
    case = electrons_only()
    s = survey(case, 0.5)
    assert s.complete and s.count == 1
    (root,) = s.roots
    assert root.converged and root.verified
    # widely quoted value (from memory), to its 4 printed digits
    assert abs(root.value.real - 1.4157) < 5e-5
    assert abs(root.value.imag - (-0.1534)) < 5e-5
    # independent mpmath root of the same dispersion relation
    ref = mpmath_langmuir_root(0.5, 1.4 - 0.15j)
    assert abs(root.value - ref) < 1e-10 * abs(ref)


def test_langmuir_weak_damping_formula_at_small_k():
    """Landau's weak-damping result (e.g. Krall & Trivelpiece 1973, ch. 8, from memory):
    γ/ω_pe ≈ −√(π/8) (kλ_D)^-3 exp(−1/(2k²λ_D²) − 3/2) and the Bohm–Gross frequency
    ω² = ω_pe²(1 + 3k²λ_D²).  Both are the leading terms of an expansion in k²λ_D², so
    the kinetic root must approach them as k → 0: the relative differences must shrink
    like k² (measured: 4.6 % at kλ_D = 0.12, 7.6 % at 0.15, 15 % at 0.2 for γ)."""
    errs = []
    for k in (0.12, 0.15, 0.2):
        case = electrons_only(k, k + 0.1, 2, (0.8, 3.0, -0.05, 0.05))
        (root,) = survey(case, k).roots
        gamma_landau = -math.sqrt(math.pi / 8) / k**3 * math.exp(-1 / (2 * k**2) - 1.5)
        err = abs(root.value.imag / gamma_landau - 1)
        assert err < 4 * k**2
        assert abs(root.value.real / math.sqrt(1 + 3 * k**2) - 1) < 0.2 * k**2
        errs.append(err)
    assert errs[0] < errs[1] < errs[2]


def _multistart_roots(f, box, excluded, n: int = 26, iters: int = 60):
    """Brute force: vectorized Newton from an n×n grid of starts; distinct converged
    roots inside the box (and away from excluded points)."""
    re = np.linspace(box[0], box[1], n)
    im = np.linspace(box[2], box[3], n)
    z = (re[None, :] + 1j * im[:, None]).ravel()
    with np.errstate(all="ignore"):
        for _ in range(iters):
            d, dd = f(z)
            step = d / dd
            step[~np.isfinite(step)] = 0
            z = z - step
        d, dd = f(z)
        step = np.abs(d / dd)
    diam = math.hypot(box[1] - box[0], box[3] - box[2])
    ok = np.isfinite(step) & (step < 1e-10 * np.maximum(1.0, np.abs(z)))
    ok &= (z.real > box[0]) & (z.real < box[1]) & (z.imag > box[2]) & (z.imag < box[3])
    for p in excluded:
        ok &= np.abs(z - p) > 1e-6 * diam
    found: list[complex] = []
    for zz in z[ok]:
        if all(abs(zz - g) > 1e-7 * diam for g in found):
            found.append(complex(zz))
    return found


@pytest.mark.slow
@pytest.mark.parametrize("path", CASES, ids=[p.stem for p in CASES])
def test_survey_misses_no_root_that_multistart_newton_finds(path):
    case = load_case(path)
    box = window(case)
    diam = math.hypot(box[1] - box[0], box[3] - box[2])
    ks = case.k_values
    for k in (ks[0], ks[len(ks) // 2], ks[-1]):
        f = function_at(case, float(k))
        s = survey(case, float(k))
        assert s.complete, (k, s.notes)
        brute = _multistart_roots(f, s.box, f.excluded(s.box))
        for z in brute:
            assert any(abs(z - r) < 1e-7 * diam for r in s.values), (path.stem, k, z, s.values)
        assert len(s.values) >= len(brute)


def test_solve_traces_langmuir_branch_and_matches_surveys():
    case = electrons_only(0.3, 0.6, 31)
    sol = solve(case)
    assert sol.failed_points == 0
    assert len(sol.branches) == 1
    b = sol.branches[0]
    assert len(b.points) == 31 and b.end_reason == "end of scan"
    # every traced point is a root to tolerance; compare a mid point with a fresh survey
    k_mid, r_mid = b.sorted_points()[15]
    s = survey(case, k_mid)
    assert abs(s.values[0] - r_mid.value) < 1e-11
    rows = branch_rows(sol)
    assert all(r["converged"] for r in rows)
    # SI columns follow from the normalized ones
    r0 = rows[0]
    w_pe = case.units.omega_unit
    assert r0["freq_hz"] == pytest.approx(r0["omega_real"] * w_pe / (2 * math.pi), rel=1e-14)
    assert r0["gamma_per_s"] == pytest.approx(r0["omega_imag"] * w_pe, rel=1e-14)


def test_branch_leaving_window_ends_with_that_reason():
    case = electrons_only(0.3, 0.7, 21, (0.8, 3.0, -0.2, 0.05))
    sol = solve(case)
    (b,) = sol.branches
    assert b.end_reason == "left the window"
    # Langmuir damping reaches −0.2 ω_pe between kλ_D = 0.5 (−0.153) and 0.6 (−0.26)
    assert 0.5 < b.end_k < 0.6


def test_root_entering_window_later_is_found_and_backfilled():
    # window starts at Im ω = −0.1: at k = 0.55 the Langmuir root (γ ≈ −0.21) is outside,
    # scanning k downward is not possible, so scan upward in a window that excludes small
    # k roots by Re ω instead: Re ω ≥ 1.3 is reached near k λ_D ≈ 0.44.
    case = electrons_only(0.3, 0.6, 31, (1.3, 3.0, -0.5, 0.05))
    sol = solve(case)
    (b,) = sol.branches
    assert b.found_at > 0.3
    ks = sorted(b.points)
    assert ks[0] == b.found_at  # counted at every k: found at the first k inside
    assert b.points[ks[0]].value.real >= 1.3
    assert b.points[ks[0]].value.real < 1.33  # it entered the window there
    # every k counted: no rows (and count 0) before it entered, one row after
    assert all(c.verified for c in sol.point_checks)
    assert [c.rows for c in sol.point_checks] == [int(k >= b.found_at) for k in case.k_values]


def test_spatial_damping_of_ion_acoustic_wave_matches_group_velocity():
    """Complex k at real ω versus the temporal root: Im k ≈ −γ / v_g for weak damping
    (common practice; e.g. Stix 1992, ch. on wave energy, from memory)."""
    case = load_case(Path(__file__).resolve().parent.parent / "cases" / "argon_ion_acoustic.toml")
    k0 = 0.3
    s = survey(case, k0)
    ia = min(s.values, key=lambda z: abs(z.imag))
    h = 1e-4
    sp = survey(case, k0 + h, box=(ia.real * 0.5, ia.real * 2, ia.imag * 3, -ia.imag))
    sm = survey(case, k0 - h, box=(ia.real * 0.5, ia.real * 2, ia.imag * 3, -ia.imag))
    wp = min(sp.values, key=lambda z: abs(z - ia))
    wm = min(sm.values, key=lambda z: abs(z - ia))
    vg = ((wp - wm) / (2 * h)).real
    box = (k0 * 0.8, k0 * 1.2, -0.05 * k0, 0.05 * k0)
    ks = spatial_roots(case, ia.real, box)
    assert ks.complete and len(ks.values) == 1
    kc = ks.values[0]
    assert kc.real == pytest.approx(k0, rel=2 * abs(ia.imag / ia.real))
    assert kc.imag == pytest.approx(-ia.imag / vg, rel=0.05)
    # the spatial root is an exact root of the temporal function at complex k
    d = dispersion_at(case, kc)(np.array([ia.real * case.units.omega_unit]))[0]
    assert abs(d[0]) < 1e-8


@pytest.mark.parametrize("name", ["magnetized_oblique_electron_waves", "space_protons_alphas"])
def test_spatial_damping_in_magnetized_models_matches_group_velocity(name):
    """Magnetized spatial problem (dD/dk by a Cauchy circle, ES and EM): Im k ≈ −γ/v_g
    for weak damping (common practice; corrections O((γ/ω)²), here < 1e-6 relative)."""
    case = load_case(Path(__file__).resolve().parent.parent / "cases" / f"{name}.toml")
    k0 = float(case.k_values[len(case.k_values) // 4])
    w = min(survey(case, k0).values, key=lambda z: abs(z.imag))
    assert w.imag < 0 and abs(w.imag) < 1e-4 * abs(w)
    h = 1e-4 * k0
    box = (w.real - 0.05 * abs(w), w.real + 0.05 * abs(w), w.imag - 0.05 * abs(w),
           w.imag + 0.05 * abs(w))
    wp = min(survey(case, k0 + h, box=box).values, key=lambda z: abs(z - w))
    wm = min(survey(case, k0 - h, box=box).values, key=lambda z: abs(z - w))
    vg = ((wp - wm) / (2 * h)).real
    sp = spatial_roots(case, w.real, (0.9 * k0, 1.1 * k0, -0.05 * k0, 0.05 * k0))
    assert sp.complete and len(sp.values) == 1
    kc = sp.values[0]
    assert kc.real == pytest.approx(k0, rel=1e-6)
    assert kc.imag == pytest.approx(-w.imag / vg, rel=1e-3)


def test_window_reaching_the_overflow_region_is_reported_with_a_hint():
    # Cold-ion Landau term exp(−ζ_i²) overflows where (Im ζ_i)² − (Re ζ_i)² > ~708
    # (Fried & Conte continuation; common practice).  The survey carries the exponent
    # apart and halves the window (issue 15), but at 1 eV protons |D| reaches beyond
    # 2^(2^20) at the bottom: the parts it cannot survey are reported, with a hint, and
    # the result is flagged incomplete.
    case = electrons_only(0.3, 0.4, 2, (0.01, 3.0, -1.0, 0.5))
    data = dict(case.raw)
    data["species"] = [*data["species"], {"name": "H+", "charge": 1, "mass": "proton",
                                          "density": 1e18, "temperature": 1.0}]
    case = parse_case(data, "<test>")
    s = survey(case, 0.3)
    assert not s.complete and s.count is None
    assert any("overflows" in n and "lower edge" in n for n in s.notes)


@pytest.mark.parametrize("path", CASES, ids=[p.stem for p in CASES])
def test_pair_function_equals_one_k_at_a_time(path):
    """The batched evaluation (several k in one call) is the same function as
    ``function_at(k)`` at each pair: an identity between two code paths of this project
    (array-k builders vs one-k builders), to 1e-12 relative to the scale of D."""
    case = load_case(path)
    pairs = pair_function(case)
    if pairs is None:  # Krook collisions: formed one k at a time, nothing to compare
        assert any(s.collision_frequency > 0 for s in case.plasma.species)
        return
    rng = np.random.default_rng(7)
    k0, k1 = float(case.k_values[0]), float(case.k_values[-1])
    ks = rng.uniform(min(k0, k1), max(k0, k1), 12)
    box = window(case)
    om = rng.uniform(box[0], box[1], 12) + 1j * rng.uniform(box[2], box[3], 12)
    d, dd = pairs(ks, om)
    for j in range(ks.size):
        f = function_at(case, ks[j])
        d1, dd1 = f(np.array([om[j]]))
        scale = max(1.0, float(np.max(np.abs(f(om)[0]))))
        assert abs(d[j] - d1[0]) <= 1e-12 * scale, (ks[j], om[j])
        dscale = max(abs(dd1[0]), float(np.max(np.abs(f(om)[1]))))
        assert abs(dd[j] - dd1[0]) <= 1e-12 * dscale, (ks[j], om[j])


@pytest.mark.parametrize("name", [
    "hydrogen_cold_ions",
    pytest.param("weibel_hot_electrons", marks=pytest.mark.slow),
    pytest.param("space_protons_alphas", marks=pytest.mark.slow),
    pytest.param("ion_bernstein_perpendicular", marks=pytest.mark.slow),
])
def test_solve_with_blocks_equals_solve_one_k_at_a_time(monkeypatch, name):
    """`solve` traces several k per dispersion call; switched off, it must give the same
    branches to the root tolerance (the speculative blocks accept only what single steps
    would).  One case per model: ES/EM unmagnetized, EM magnetized, ES magnetized k∥ = 0."""
    case = load_case(CASES[0].parent / f"{name}.toml")
    batched = solve(case)
    import kinroots.study.solve as solve_module

    monkeypatch.setattr(solve_module, "pair_function", lambda case: None)
    single = solve(case)
    assert len(batched.branches) == len(single.branches)
    tol = 10 * case.solver.tolerance
    for a, b in zip(batched.branches, single.branches, strict=True):
        assert sorted(a.points) == sorted(b.points)
        assert a.end_reason == b.end_reason
        for k in a.points:
            ra, rb = a.points[k], b.points[k]
            assert ra.converged and rb.converged
            assert abs(ra.value - rb.value) <= tol * abs(rb.value)
    assert batched.evaluations > 0


def test_every_k_counted_in_the_reported_reproduction():
    """Issue 18: hydrogen_cold_ions without [units], 4 points: the rows at each k equal an
    independent argument-principle survey of the window there (was 1 and 0 rows against
    4 and 2 zeros)."""
    import tomllib

    raw = tomllib.loads((Path(__file__).resolve().parent.parent / "cases"
                         / "hydrogen_cold_ions.toml").read_text())
    raw.pop("units")
    raw["scan"]["k"]["points"] = 4
    case = parse_case(raw, "<hydrogen, 4 points>")
    sol = solve(case)
    for c in sol.point_checks:
        s = survey(case, c.param)
        assert s.complete
        assert c.verified and c.rows == c.count == s.count
        rows = sorted((b.points[c.param].value for b in sol.branches if c.param in b.points),
                      key=lambda z: z.real)
        assert np.allclose(rows, sorted(s.values, key=lambda z: z.real), rtol=1e-8)


def test_counts_carried_on_the_tracers_call_see_what_their_own_call_would():
    """The tracer's dispersion call also evaluates the start loop of the zero counts
    (``_Carrier``): the tracer gets the values of its own call, unscaled, even where the
    counts' points overflow at the same k (that k's constant scale is applied to the
    counts' values when the counts take them); both equal two separate calls in that order
    (an identity between code paths, to 1e-12 of the scale of D). No tracer call: the
    counts get nothing and evaluate themselves."""
    from kinroots.study.solve import _Carrier

    case = electrons_only(0.3, 0.4, 2, (0.01, 3.0, -0.2, 0.5))
    data = dict(case.raw)
    data["species"] = [*data["species"], {"name": "H+", "charge": 1, "mass": "proton",
                                          "density": 1e18, "temperature": 1.0}]
    case = parse_case(data, "<cold ions, window into the overflow>")
    box = window(case)
    ks, om = np.array([0.3, 0.35]), np.array([1.2 + 0.1j, 1.3 + 0.05j])
    loop = np.linspace(box[0], box[1], 50) + 1j * box[2]  # bottom edge: D overflows there
    lk, lz = np.repeat(ks, loop.size), np.tile(loop, ks.size)

    separate = pair_function(case)
    assert separate is not None
    want_t = separate(ks, om)
    assert not separate.scaled  # the tracer's points alone need no scale
    want_c = separate(lk, lz)
    assert set(separate.scaled) == {0.3, 0.35}

    pairs = pair_function(case)
    assert pairs is not None
    carrier = _Carrier(pairs)
    assert carrier.take() is None
    carrier.carry(lk, lz)
    got_t = carrier(ks, om)
    assert not pairs.scaled
    got_c = carrier.take()
    assert got_c is not None and set(pairs.scaled) == {0.3, 0.35}
    assert carrier.take() is None
    for got, want in ((got_t, want_t), (got_c, want_c)):
        for g, w in zip(got, want, strict=True):
            fin = np.isfinite(w)
            assert np.array_equal(fin, np.isfinite(g))
            assert np.all(np.abs(g[fin] - w[fin]) <= 1e-12 * np.max(np.abs(w[fin])))


def test_marginal_wave_on_the_windows_top_edge_is_counted():
    """The beam case with its window's top edge at Im ω = 0: past the instability
    (k λ_De ≳ 0.07) the beam wave is marginal, its γ at rounding level, so it sits on
    that edge and no count on the window's own edges resolves there.  The survey moves
    the edge off it; its count and the rows are compared inside the moved box, so every
    k is verified and the wave is in the table (it was left out, the k unverified)."""
    import tomllib

    raw = tomllib.loads((Path(__file__).resolve().parent.parent / "cases"
                         / "electron_beam_plasma.toml").read_text())
    raw["search"]["imag"] = [-0.005, 0.0]
    raw["scan"]["k"]["points"] = 5
    case = parse_case(raw, "<beam, top edge on the real axis>")
    sol = solve(case)
    assert all(c.verified and c.count == c.rows for c in sol.point_checks), sol.point_checks
    for k in (0.095, 0.12):
        got = [b.points[k].value for b in sol.branches
               if k in b.points and b.points[k].converged]
        assert len(got) == 1 and abs(got[0].imag) <= 1e-9 * abs(got[0])
        s = survey(case, k)  # the survey at that k alone, with its edge moved
        assert s.count == 1 and abs(s.values[0] - got[0]) <= 1e-9 * abs(got[0])
