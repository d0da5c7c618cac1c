r"""Cyclotron-harmonic poles at k∥ = 0: only the poles that matter are excluded (issue 15.5).

The rule and its derivation are in :mod:`kinroots.physics.harmonic_poles`: a harmonic nΩ_s
is excluded when the bound R_n on its residue exceeds rtol·|nΩ_s|.  Checked here:

* the closed-form bound on Γ_m(λ) = e^{−λ}I_m(λ) against scipy's ``ive`` (it must bound it,
  decrease with m and grow with λ);
* the bound R_n against the residue of the models' χ_s at nΩ_s, measured from χ itself
  (ES scalar and every EM entry);
* the electron Bernstein window of the issue (B = 0.1 T, electrons and ions at 5 eV,
  90°, Re ω ∈ [1.05, 3.95] Ω_ce) with helium, argon and 1e9 u ions: the ion harmonics are
  not excluded, the cost (D evaluations) stays that of the case without ions, and the
  roots agree with an independent mpmath evaluation of the Bernstein relation with the ions
  (Bernstein, Phys. Rev. 109, 10 (1958); Stix 1992, ch. 11, from memory);
* bad windows: too many relevant poles, an edge through a pole (exit 2, key named).
"""

from __future__ import annotations

import math

import mpmath as mp
import numpy as np
import pytest
from scipy.constants import e as E_CHARGE
from scipy.constants import epsilon_0, m_e
from scipy.special import ive

from kinroots.io.case import CaseError, parse_case
from kinroots.io.limits import LIMITS
from kinroots.physics.harmonic_poles import (
    harmonic_residue_bound,
    largest_relevant_harmonic,
    log_weight_bound,
    relevant_harmonic_count,
)
from kinroots.physics.models import em_magnetized, es_magnetized
from kinroots.physics.models._harmonics import DROP_RESIDUE
from kinroots.physics.plasma import AMU, EV, M_PROTON, Species
from kinroots.study.problem import function_at, survey

B_FIELD = 0.1
TEMPERATURE = 5.0
DENSITY = 1e17
ROOT_RTOL = 1e-10


# ----------------------------------------------------------------------- the bound
@pytest.mark.parametrize("lam", [1e-6, 0.3, 2.0, 40.0, 900.0, 3.6e4])
def test_weight_bound_bounds_ive_and_is_monotone(lam):
    m = np.unique(np.concatenate([np.arange(0, 60), np.geomspace(1, 40 * math.sqrt(lam) + 60,
                                                                   80).astype(int)]))
    exact = ive(m, lam)
    bound = np.array([log_weight_bound(float(x), lam) for x in m])
    live = exact > 1e-300
    assert np.all(np.log(exact[live]) <= bound[live] + 1e-12)
    assert np.all(np.diff(bound) <= 1e-15)  # decreasing in m
    grown = np.array([log_weight_bound(float(x), 1.5 * lam) for x in m])
    assert np.all(grown >= bound - 1e-15)  # growing with λ


def _species(mass_kg: float, charge: int = 1, drift: float = 0.0, t_par: float = TEMPERATURE):
    return Species("s", charge, mass_kg, DENSITY, t_par, TEMPERATURE, drift)


@pytest.mark.parametrize("k_rho", [0.3, 2.0, 7.0])
@pytest.mark.parametrize("n", [1, 2, 5, 12])
def test_residue_bound_holds_for_the_models(k_rho, n):
    """|Res χ_ij| at nΩ, measured from χ near the pole, never exceeds R_n (ES scalar and
    the nine EM entries; a drifting, anisotropic species).  With r(δ) = δ[χ(nΩ+δ) −
    χ(nΩ−δ)]/2 = R + cδ² + O(δ⁴), Richardson's (4r(δ) − r(2δ))/3 removes the δ² term; what
    is left of the regular part (and rounding) is below 1e-9 of |δχ(nΩ+δ)|."""
    sp = _species(M_PROTON, drift=2e4, t_par=2.0 * TEMPERATURE)
    om_c = sp.cyclotron_frequency(B_FIELD)
    k_perp = k_rho / (sp.thermal_speed_perp / om_c)
    bound = math.exp(harmonic_residue_bound(sp, n, k_perp=k_perp, B=B_FIELD)) * n * om_c
    delta = 1e-3 * om_c
    om = n * om_c + np.array([delta, -delta, 2 * delta, -2 * delta], dtype=complex)
    for model in (es_magnetized, em_magnetized):
        chi = model.susceptibility(om, sp, k_par=0.0, k_perp=k_perp, B=B_FIELD).value
        r1 = delta * (chi[0] - chi[1]) / 2
        r2 = 2 * delta * (chi[2] - chi[3]) / 2
        res = np.abs((4 * r1 - r2) / 3)
        floor = 1e-9 * np.abs(delta * chi[0]).max()
        assert np.all(res <= bound + floor), (model.__name__, res.max(), bound, floor)
    if n <= 2:  # the bound is not vacuous: there the ES residue is measurable and within
        # the bound's slack ((|n| + 2λ + 2) c_s λ/|n| at most, about 1e5 at k ρ = 7)
        chi = es_magnetized.susceptibility(om, sp, k_par=0.0, k_perp=k_perp, B=B_FIELD).value
        r1 = delta * (chi[0] - chi[1]) / 2
        r2 = 2 * delta * (chi[2] - chi[3]) / 2
        assert abs((4 * r1 - r2) / 3) > 1e-6 * bound


# ------------------------------------------------------- the electron Bernstein case
ION_MASSES = {"helium": 4.002602, "argon": 39.948, "1e9 u": 1e9}


def ebw_case(ion_mass_u: float | None, k: float = 1.0):
    species = [{"name": "e", "charge": -1, "mass": "electron", "density": DENSITY,
                "temperature": TEMPERATURE}]
    if ion_mass_u is not None:
        species.append({"name": "i", "charge": 1, "mass": ion_mass_u, "density": DENSITY,
                        "temperature": TEMPERATURE})
    return parse_case({
        "title": "electron Bernstein waves with ions",
        "magnetic_field": {"B": B_FIELD},
        "species": species,
        "wave": {"model": "electrostatic", "angle": 90.0},
        "scan": {"k": k},
        "units": {"frequency": "cyclotron:e", "length": "gyroradius:e"},
        "search": {"real": [1.05, 3.95], "imag": [-0.05, 0.05]},
        "solver": {"tolerance": ROOT_RTOL},
    }, "<test_harmonic_poles>")


@pytest.mark.parametrize("ion", ["helium", "argon", "1e9 u"])
def test_ion_harmonics_in_an_electron_window_are_not_poles(ion):
    case = ebw_case(ION_MASSES[ion])
    f = function_at(case, 1.0)
    # the electron harmonics 2 and 3 are the only poles; the ion harmonics (1e4 to 1e13
    # of them in the window) all have residues that underflow
    assert f.excluded((1.05, 3.95, -0.05, 0.05)) == pytest.approx([2.0, 3.0], rel=1e-14)
    ion_sp = case.plasma.species[1]
    k_perp = 1.0 / case.units.length_unit
    lo, hi = 1.05 * case.units.omega_unit, 3.95 * case.units.omega_unit
    assert relevant_harmonic_count(ion_sp, lo, hi, k_perp=k_perp, B=B_FIELD,
                                   rtol=ROOT_RTOL) == 0
    # ... while near the ion's own frequencies its harmonics still count
    assert largest_relevant_harmonic(ion_sp, k_perp=k_perp, B=B_FIELD, rtol=ROOT_RTOL) > 10


def _gamma_table(lam: mp.mpf, n_max: int) -> list[mp.mpf]:
    """Γ_n = e^{−λ}I_n(λ), n = 0 … n_max, by Miller's downward recurrence
    I_{n−1} = I_{n+1} + (2n/λ)I_n (A&S 9.6.26) normalized by Σ_n I_n = e^λ (A&S 9.6.33 at
    t = 1), in mpmath; spot-checked against mpmath's besseli."""
    start = n_max + 40 + int(12 * mp.sqrt(lam))
    i_next, i_cur = mp.mpf(0), mp.mpf(10) ** -300
    table = [mp.mpf(0)] * (start + 1)
    table[start] = i_cur
    for n in range(start, 0, -1):
        i_prev = i_next + (2 * n / lam) * i_cur
        i_next, i_cur = i_cur, i_prev
        table[n - 1] = i_cur
    total = table[0] + 2 * mp.fsum(table[1:])
    gam = [t / total for t in table[: n_max + 1]]
    probe = min(n_max, 7)
    assert abs(gam[probe] / (mp.exp(-lam) * mp.besseli(probe, lam)) - 1) < mp.mpf(10) ** -20
    return gam


def reference_roots(case, k_norm: float) -> list[float]:
    """Real roots in [1.05, 3.95] of 1 + Σ_s (1/(k²λ_Ds²))[1 − Γ_0 − Σ_{n≥1}
    2x²Γ_n/(x² − n²x_s²)] (x = ω/|Ω_e|, x_s = |Ω_s|/|Ω_e|; Bernstein 1958) at 30 digits;
    a species with λ > 1e6 enters by its large-ζ unmagnetized form instead."""
    units = case.units
    terms, cold = [], []
    with mp.workdps(30):
        k = mp.mpf(k_norm) / mp.mpf(units.length_unit)
        for s in case.plasma.species:
            om_c = mp.mpf(abs(s.cyclotron_frequency(B_FIELD)))
            t = mp.mpf(s.temperature_perp) * mp.mpf(EV)
            lam = k**2 * t / (mp.mpf(s.mass) * om_c**2)
            if lam > 1e6:
                # Γ_n out of reach (> 20000 terms): far above its harmonics the species
                # responds as an unmagnetized one at large ζ, −(ω_p²/ω²)(1 + 3k²T/(mω²))
                # (common practice; next term O(ζ⁻⁴), ζ ~ 1e4 here)
                wp2 = mp.mpf(s.density) * mp.mpf(E_CHARGE) ** 2 / (mp.mpf(epsilon_0)
                                                                   * mp.mpf(s.mass))
                cold.append((wp2 / mp.mpf(units.omega_unit) ** 2,
                             3 * k**2 * t / (mp.mpf(s.mass) * mp.mpf(units.omega_unit) ** 2)))
                continue
            n_max = int(20 + 12 * mp.sqrt(lam) + 2 * lam ** mp.mpf(0.25))
            gam = _gamma_table(lam, n_max)
            q2 = mp.mpf(E_CHARGE) ** 2
            inv_kld2 = mp.mpf(s.density) * q2 / (mp.mpf(epsilon_0) * k**2 * t)
            terms.append((inv_kld2, om_c / mp.mpf(units.omega_unit), gam))

        def f(x):
            total = mp.mpf(1)
            for inv, xs, gam in terms:
                acc = 1 - gam[0]
                x2 = x * x
                acc -= mp.fsum(2 * x2 * g / (x2 - (n * xs) ** 2)
                               for n, g in enumerate(gam) if n)
                total += inv * acc
            for wp2, th in cold:
                total -= wp2 / x**2 * (1 + th / x**2)
            return total

        grid = [mp.mpf(v) for v in np.linspace(1.05, 3.95, 60)]
        # bracket away from the electron harmonics 2 and 3 (poles), sign changes only
        grid += [mp.mpf(h) + d for h in (2, 3) for d in (-1e-9, 1e-9)]
        grid.sort()
        vals = [f(x) for x in grid]
        out = []
        for a, b, fa, fb in zip(grid, grid[1:], vals, vals[1:], strict=False):
            if mp.sign(fa) != mp.sign(fb) and not any(a < h < b for h in (2, 3)):
                out.append(float(mp.findroot(f, (a, b), solver="anderson")))
    return out


@pytest.mark.parametrize("ion", ["helium", "argon"])
def test_bernstein_roots_with_light_ions_match_mpmath(ion):
    """Same cost as without ions (D evaluations within 3x), roots equal to the mpmath
    Bernstein relation with the ions in it (the ions shift them by about m_e/m_i, so the
    comparison is with the ions, not with the electrons alone)."""
    k = 1.0
    bare = survey(ebw_case(None), k)
    with_ions = survey(ebw_case(ION_MASSES[ion]), k)
    assert bare.complete and with_ions.complete, with_ions.notes
    assert with_ions.evaluations <= 3 * bare.evaluations
    got = sorted(z.real for z in with_ions.values)
    ref = reference_roots(ebw_case(ION_MASSES[ion]), k)
    assert len(got) == len(ref) == 3
    assert np.allclose(got, ref, rtol=10 * ROOT_RTOL, atol=0)
    assert max(abs(z.imag) for z in with_ions.values) < 10 * ROOT_RTOL * 4
    # the ion shift is of the cold-ion size ω_pi²/ω² ~ m_e/m_i relative, far above the
    # tolerance: a survey that dropped the ions would fail the comparison above
    bare_roots = sorted(z.real for z in bare.values)
    shift = max(abs(a / b - 1) for a, b in zip(got, bare_roots, strict=True))
    ratio = m_e / (ION_MASSES[ion] * AMU)
    assert 0.01 * ratio < shift < 10 * ratio


# ------------------------------------------------------------------- bad windows
def _ibw_data(real, imag, k_stop=4.0):
    return {
        "title": "ion Bernstein",
        "magnetic_field": {"B": 0.5},
        "species": [
            {"name": "e", "charge": -1, "mass": "electron", "density": 1e18, "temperature": 5.0},
            {"name": "H+", "charge": 1, "mass": "proton", "density": 1e18, "temperature": 5.0},
        ],
        "wave": {"model": "electrostatic", "angle": 90.0},
        "scan": {"k": {"start": 0.1, "stop": k_stop, "points": 4}},
        "units": {"frequency": "cyclotron:H+", "length": "gyroradius:H+"},
        "search": {"real": real, "imag": imag},
    }


@pytest.mark.parametrize("real, imag, key", [
    ([1.0, 2.98], [-0.05, 0.05], "search.real"),   # left edge on Ω_p
    ([1.02, 3.0], [-0.05, 0.05], "search.real"),   # right edge on 3Ω_p
    ([1.02, 2.98], [0.0, 0.05], "search.imag"),    # bottom edge along the axis through 2Ω_p
    ([1.02, 2.98], [-0.05, 0.0], "search.imag"),   # top edge likewise
])
def test_window_edge_through_an_excluded_pole_is_refused(real, imag, key):
    with pytest.raises(CaseError) as err:
        parse_case(_ibw_data(real, imag), "ibw.toml")
    text = str(err.value)
    assert key in text and "pole" in text, text


def test_window_edge_off_the_poles_is_accepted():
    parse_case(_ibw_data([1.02, 2.98], [-0.05, 0.05]), "ibw.toml")
    # Im = 0 is fine when no relevant harmonic is inside
    parse_case(_ibw_data([1.02, 1.98], [0.0, 0.05]), "ibw.toml")


def test_too_many_relevant_poles_is_refused_and_ion_harmonics_of_no_weight_are_not():
    # k ρ_p up to 500: λ ~ 1.2e5, about 3000 proton harmonics carry weight
    with pytest.raises(CaseError) as err:
        parse_case(_ibw_data([0.5, 4000.5], [-0.05, 0.05], k_stop=500.0), "ibw.toml")
    assert "search.real" in str(err.value) and "residue" in str(err.value)
    # the same number of harmonics at small k ρ_p: only the first few matter
    parse_case(_ibw_data([0.5, 4000.5], [-0.05, 0.05], k_stop=4.0), "ibw.toml")


@pytest.mark.parametrize("ion", ["1e9 u", "1e5 u"])
def test_bernstein_roots_with_immobile_ions(ion):
    """Ions too heavy for any harmonic sum (λ ~ 1e8, 1e12): D comes from the moment series
    (es_magnetized.perpendicular_series); same cost as without ions, roots equal to the
    mpmath reference, and for 1e9 u equal to the roots without ions (shift ~ m_e/m_i =
    5e-13, below the tolerance)."""
    mass = {"1e9 u": 1e9, "1e5 u": 1e5}[ion]
    k = 1.0
    bare = survey(ebw_case(None), k)
    heavy = survey(ebw_case(mass), k)
    assert heavy.complete, heavy.notes
    assert heavy.evaluations <= 3 * bare.evaluations
    got = sorted(z.real for z in heavy.values)
    assert np.allclose(got, reference_roots(ebw_case(mass), k), rtol=10 * ROOT_RTOL, atol=0)
    if mass == 1e9:
        assert np.allclose(got, sorted(z.real for z in bare.values), rtol=10 * ROOT_RTOL,
                           atol=0)


_MEMORY_SCRIPT = """
import resource, sys
cap = 2 * 1024**3
resource.setrlimit(resource.RLIMIT_AS, (cap, cap))
from kinroots.io.case import parse_case
from kinroots.study.problem import survey
species = [{"name": "e", "charge": -1, "mass": "electron", "density": 1e17, "temperature": 5.0},
           {"name": "i", "charge": 1, "mass": float(sys.argv[1]), "density": 1e17,
            "temperature": 5.0}]
case = parse_case({"title": "memory cap", "magnetic_field": {"B": 0.1}, "species": species,
                   "wave": {"model": "electrostatic", "angle": 90.0},
                   "scan": {"k": {"start": 0.5, "stop": 3.0, "points": 2}},
                   "units": {"frequency": "cyclotron:e", "length": "gyroradius:e"},
                   "search": {"real": [1.05, 3.95], "imag": [-0.05, 0.05]}}, "<mem>")
for model in ("electrostatic", "electromagnetic"):
    data = dict(case.raw, wave={"model": model, "angle": 90.0})
    for k in (0.5, 3.0):
        s = survey(parse_case(data, "<mem>"), k)
        assert s.complete, s.notes
print("ok", len(s.values))
"""


@pytest.mark.slow
@pytest.mark.parametrize("mass", [4.002602, 39.948, 1e5, 1e9, 1e12])
def test_any_ion_mass_runs_under_a_2_gb_address_space_cap(mass):
    """The issue's failures (MemoryError at 1e5 u, 24 GB at 1e9 u): parse + survey at the
    first and last k, electrostatic and electromagnetic, in a subprocess whose address
    space is capped at 2 GiB with resource.setrlimit(RLIMIT_AS) (virtual memory, a
    stricter cap than resident)."""
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-c", _MEMORY_SCRIPT, repr(mass)],
                         capture_output=True, text=True, timeout=300)
    assert out.returncode == 0 and out.stdout.startswith("ok"), out.stderr[-2000:]


def test_counting_relevant_harmonics_needs_no_memory():
    """Counting and listing for a 1e12 u ion over 1e17 of its harmonics: a few closed-form
    evaluations (tracemalloc peak below 64 KiB), whatever the ion mass."""
    import tracemalloc

    sp = Species("i", 1, 1e12 * AMU, DENSITY, TEMPERATURE, TEMPERATURE)
    om_e = E_CHARGE * B_FIELD / m_e
    k_perp = 1.0 / (math.sqrt(2 * TEMPERATURE * EV / m_e) / om_e)
    tracemalloc.start()
    try:
        n = relevant_harmonic_count(sp, 0.5 * om_e, 4 * om_e, k_perp=k_perp, B=B_FIELD,
                                    rtol=ROOT_RTOL)
        top = largest_relevant_harmonic(sp, k_perp=k_perp, B=B_FIELD, rtol=ROOT_RTOL)
        low = relevant_harmonic_count(sp, 0.0, 100 * abs(sp.cyclotron_frequency(B_FIELD)),
                                      k_perp=k_perp, B=B_FIELD, rtol=ROOT_RTOL)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert n == 0 and top > 1e6 and low == 100
    assert peak < 64 * 1024


# ------------------------------------------------- the model at and near a harmonic
def _bernstein_sum(om: np.ndarray, sp: Species, k_perp: float) -> tuple[np.ndarray, np.ndarray]:
    """χ = −(ω_p²/λ) Σ_{n≥1} 2n²Γ_n/(ω² − n²Ω²) and dχ/dω summed directly with scipy's
    ive (Bernstein 1958; Stix 1992 ch. 11, from memory), to 40√λ + 50 harmonics."""
    om_c = abs(sp.cyclotron_frequency(B_FIELD))
    lam = (k_perp * sp.thermal_speed_perp / om_c) ** 2 / 2
    n = np.arange(1, int(40 * math.sqrt(lam)) + 50, dtype=float)
    w = 2 * n**2 * ive(n, lam)
    d = om[:, None] ** 2 - (n * om_c) ** 2
    c = sp.plasma_frequency**2 / lam
    return -c * np.sum(w / d, axis=1), c * np.sum(w * 2 * om[:, None] / d**2, axis=1)


@pytest.mark.parametrize("lam", [1e2, 1e3, 1e4])
def test_perpendicular_series_matches_the_harmonic_sum(lam):
    """The moment series (used for λ ≥ 100, |ζ| ≥ 16) against the Bernstein sum with
    scipy's ive, real and complex ω: χ and dχ/dω to 1e-12 relative."""
    sp = _species(M_PROTON)
    om_c = abs(sp.cyclotron_frequency(B_FIELD))
    k_perp = math.sqrt(2 * lam) * om_c / sp.thermal_speed_perp
    kw = k_perp * sp.thermal_speed_perp
    om = kw * np.array([16.0, 16.0 + 0.5j, 30.0, 100.0 - 3j, 1e3 + 1e2j])
    om = om + 0.37 * om_c  # off the harmonics (the series has no poles)
    ref_v, ref_d = _bernstein_sum(om, sp, k_perp)
    ser = es_magnetized.perpendicular_series(om, sp, k_perp=k_perp, B=B_FIELD)
    assert np.allclose(ser.value, ref_v, rtol=1e-12, atol=0)
    assert np.allclose(ser.derivative, ref_d, rtol=1e-12, atol=0)
    # the builder uses it there, and the harmonic sum below |ζ| = 16, where the series
    # refuses (NaN) rather than guess
    got = es_magnetized.susceptibility(om, sp, k_par=0.0, k_perp=k_perp, B=B_FIELD)
    assert np.array_equal(got.value, ser.value) and got.harmonics == 0
    low = np.array([8.0 * kw + 0.37 * om_c])
    assert np.isnan(es_magnetized.perpendicular_series(low, sp, k_perp=k_perp,
                                                       B=B_FIELD).value).all()
    mixed = es_magnetized.susceptibility(np.concatenate([low, om]), sp, k_par=0.0,
                                         k_perp=k_perp, B=B_FIELD)
    assert np.allclose(mixed.value[0], _bernstein_sum(low, sp, k_perp)[0][0], rtol=1e-12)
    assert np.array_equal(mixed.value[1:], ser.value) and mixed.harmonics > 50
    # array k (the tracer's pairs) gives the same values
    arr = es_magnetized.susceptibility(np.concatenate([low, om]), sp, k_par=np.zeros(6),
                                       k_perp=np.full(6, k_perp), B=B_FIELD)
    assert np.allclose(arr.value, mixed.value, rtol=1e-13, atol=0)


@pytest.mark.parametrize("model", [es_magnetized, em_magnetized])
def test_exactly_on_a_harmonic_the_model_drops_that_term_if_negligible(model):
    """At ω = nΩ exactly the k∥ = 0 model drops the term of a harmonic whose residue is
    at most DROP_RESIDUE·|nΩ| (every pole the survey does not exclude, whatever its
    tolerance).  Electrostatic: its coefficient does not depend on ω, so that is the
    finite part of the Laurent series, the mean of χ(nΩ ± δ) (the pole terms ±R/δ
    cancel) to O(δ²).  Electromagnetic: the coefficient's slope is left out too, at most
    2|R|/|nΩ| ≤ 2R_n/|nΩ|.  A pole with a larger residue stays non-finite there."""
    sp = _species(M_PROTON)
    om_c = sp.cyclotron_frequency(B_FIELD)
    k_perp = 0.3 / (sp.thermal_speed_perp / om_c)
    delta = 1e-5 * om_c
    for n in (1, 2, 6, 9):
        ratio = math.exp(harmonic_residue_bound(sp, n, k_perp=k_perp, B=B_FIELD))
        om = n * om_c + np.array([0.0, delta, -delta], dtype=complex)
        chi = model.susceptibility(om, sp, k_par=0.0, k_perp=k_perp, B=B_FIELD).value
        if n <= 2:  # residues of order ω_p²/Ω ≫ 1e-4 nΩ: a pole
            assert ratio > 1e-4 and not np.all(np.isfinite(chi[0]))
            continue
        assert ratio <= DROP_RESIDUE and np.all(np.isfinite(chi[0]))
        mean = (chi[1] + chi[2]) / 2
        floor = np.abs(chi[1]).max() * 1e-8 + np.abs(mean).max() * 1e-6
        if model is em_magnetized:
            floor += 2 * ratio
        assert np.abs(chi[0] - mean).max() < floor


def test_drop_limit_is_the_largest_accepted_tolerance():
    assert DROP_RESIDUE == LIMITS["solver.tolerance"].hi


def test_window_edge_on_a_harmonic_of_no_weight_is_surveyed():
    """A window edge exactly on a harmonic whose pole is below the resolution (a tenuous
    plasma, ω_p < Ω_p, tolerance 1e-6): not refused, surveyed like a window nudged off it
    (D finite on the edge; before, "f is not finite on the left edge")."""
    data = _ibw_data([3.0, 3.5], [-0.05, 0.05])
    for sp in data["species"]:
        sp["density"] = 1e10
    data["solver"] = {"tolerance": 1e-6}
    data["scan"] = {"k": 0.1}
    case = parse_case(data, "ibw.toml")
    assert function_at(case, 0.1).excluded((2.5, 3.5, -0.05, 0.05)) == []
    on = survey(case, 0.1)
    off = survey(case, 0.1, box=(3.0 - 1e-7, 3.5, -0.05, 0.05))
    assert on.complete and off.complete, on.notes
    assert on.count == off.count


# --------------------------------------------------------- electromagnetic, k∥ = 0
@pytest.mark.parametrize("lam", [1e2, 1e3, 1e4])
def test_em_series_matches_the_harmonic_sum(lam):
    """The tensor from the moments of Γ_n and Γ_n' (em_magnetized._series_parts) against
    the builders' own harmonic sums where both converge (drifting, anisotropic species;
    real and complex ω, |ζ| ≥ 16): plain χ and dχ/dω, scaled S to 1e-12 of the largest
    entry, dS/dω to 1e-9 (the sums' rounding grows with their 10√λ terms)."""
    from kinroots.physics.models import _harmonics

    sp = _species(M_PROTON, drift=2e4, t_par=2.0 * TEMPERATURE)
    om_c = abs(sp.cyclotron_frequency(B_FIELD))
    k_perp = math.sqrt(2 * lam) * om_c / sp.thermal_speed_perp
    kw = k_perp * sp.thermal_speed_perp
    om = kw * np.array([16.0, 16.0 + 0.5j, 30.0, 100.0 - 3j, 1e3 + 1e2j]) + 0.37 * om_c
    cases = [
        (em_magnetized.susceptibility(om, sp, k_par=0.0, k_perp=k_perp, B=B_FIELD),
         lambda o, st, p: em_magnetized._tensor_parts(o, st, p, sp), 1e-12),
        (em_magnetized.scaled_susceptibility(om, sp, k_par=0.0, k_perp=k_perp, B=B_FIELD,
                                             omega_ref=1e9),
         lambda o, st, p: em_magnetized._scaled_parts(o, st, p, sp, 1e9), 1e-9),
    ]
    for got, parts, dtol in cases:
        ref = _harmonics.evaluate(om, sp, k_par=0.0, k_perp=k_perp, B=B_FIELD, tol=1e-14,
                                  model="em_magnetized", tail=(3, 3), parts=parts)
        assert got.harmonics == 0 and ref.harmonics > 50
        scale = np.abs(ref.value).max(axis=(1, 2))[:, None, None]
        dscale = np.abs(ref.derivative).max(axis=(1, 2))[:, None, None]
        assert np.all(np.abs(got.value - ref.value) <= 1e-12 * scale)
        assert np.all(np.abs(got.derivative - ref.derivative) <= dtol * dscale)


@pytest.mark.parametrize("lam", [10.0, 999.0, 1e3, 1e5, 1e12])
def test_gamma0_slope_against_mpmath(lam):
    """Γ_0' = Γ_1 − Γ_0 (A&S 9.6.26 at n = 0), without the cancellation of the difference
    at large λ (asymptotic form, A&S 9.7.1), against mpmath besseli at 30 digits."""
    from kinroots.physics.models._harmonics import gamma0_slope

    with mp.workdps(30):
        x = mp.mpf(lam)
        ref = mp.exp(-x) * (mp.besseli(1, x) - mp.besseli(0, x))
    got = gamma0_slope(np.array([lam + 0j]))[0]
    assert abs(got / complex(ref) - 1) < (1e-13 if lam >= 1e3 else 1e-12 * lam)


def test_em_bernstein_window_with_ions_of_any_mass():
    """Electromagnetic model, the issue's window: 1e9 u ions give the roots of the case
    without ions (shift ~ m_e/m_i below the tolerance) for at most 3x its D evaluations;
    argon is complete at the same cost and excludes only the electron harmonics."""
    def em_case(mass):
        case = ebw_case(mass)
        return parse_case(dict(case.raw, wave={"model": "electromagnetic", "angle": 90.0}),
                          "<em>")

    bare = survey(em_case(None), 1.0)
    for mass in (1e9, ION_MASSES["argon"]):
        heavy = survey(em_case(mass), 1.0)
        assert heavy.complete, heavy.notes
        assert heavy.evaluations <= 3 * bare.evaluations
        assert function_at(em_case(mass), 1.0).excluded((1.05, 3.95, -0.05, 0.05)) == \
            pytest.approx([2.0, 3.0], rel=1e-14)
        if mass == 1e9:
            got = sorted(z.real for z in heavy.values)
            assert np.allclose(got, sorted(z.real for z in bare.values),
                               rtol=10 * ROOT_RTOL, atol=0)


def test_moments_of_one_lambda_equal_the_recurrence_and_exact_moments():
    """scaled_moments: the one-λ path (cached integer moment polynomials) equals the
    elementwise cumulant recurrence, and both equal Σ_n n^{2m}Γ_n y^m summed with scipy's
    ive at λ = 40 (and their λ-derivative a central difference)."""
    from kinroots.physics.models._harmonics import scaled_moments

    lam0 = 40.0
    y = np.array([1e-3, 2e-3 + 1e-4j, 5e-4])
    one, done = scaled_moments(np.full(3, lam0 + 0j), y)
    mixed, dmixed = scaled_moments(np.array([lam0, lam0, 41.0]) + 0j, y)
    n = np.arange(-400, 401, dtype=float)
    gam = ive(np.abs(n), lam0)
    h = 1e-4
    gam_p, gam_m = ive(np.abs(n), lam0 + h), ive(np.abs(n), lam0 - h)
    for m in range(1, 9):
        exact = np.sum(n ** (2 * m) * gam) * y**m
        slope = np.sum(n ** (2 * m) * (gam_p - gam_m)) / (2 * h) * y**m
        assert np.allclose(one[m], exact, rtol=1e-12, atol=0)
        assert np.allclose(mixed[m][:2], one[m][:2], rtol=1e-13, atol=0)
        assert np.allclose(done[m], slope, rtol=1e-6, atol=0)
        assert np.allclose(dmixed[m][:2], done[m][:2], rtol=1e-13, atol=0)


def test_check_exits_2_naming_the_key_for_an_edge_through_a_pole(tmp_path):
    """`kinroots check` (CLI): exit 2, the key and file named, no traceback."""
    from typer.testing import CliRunner

    from kinroots.cli import app

    path = tmp_path / "edge.toml"
    path.write_text("""
title = "edge on the proton cyclotron frequency"
[magnetic_field]
B = 0.5
[[species]]
name = "e"
charge = -1
mass = "electron"
density = 1e18
temperature = 5.0
[[species]]
name = "H+"
charge = 1
mass = "proton"
density = 1e18
temperature = 5.0
[wave]
model = "electrostatic"
angle = 90.0
[scan]
k = { start = 0.1, stop = 4.0, points = 4 }
[units]
frequency = "cyclotron:H+"
length = "gyroradius:H+"
[search]
real = [1.0, 2.98]
imag = [-0.05, 0.05]
""")
    result = CliRunner().invoke(app, ["check", str(path)])
    text = result.stdout + result.stderr
    assert result.exit_code == 2, text
    assert "search.real" in text and "edge.toml" in text and "Traceback" not in text
