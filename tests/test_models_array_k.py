"""Array-k calls of the magnetized builders against element-by-element scalar-k calls.

With ``k_par`` and ``k_perp`` given as arrays (broadcast against ω), every element of the
result must be the scalar-k result at that element's (k∥, k⊥, ω). The two evaluations
differ only in rounding: the array path contracts over the harmonics in another order
(batched products instead of one BLAS dot) and keeps the largest harmonic count any
element needs, the extra harmonics being below the truncation tolerance (1e-14 of the
kept sum, rule in ``kinroots.physics.models._harmonics.bessel_weights``).

Comparison criterion, |a − b| ≤ rtol · max(|b|, scale):

* ``scale`` is the largest |entry| of the element's 3×3 tensor (χ_s itself for the
  electrostatic builder). Each entry is a sum over harmonics whose terms are of the
  tensor's size; an entry that is small because its terms cancel (χ_xy at small λ, the
  off-diagonal entries near k∥ = 0) carries rounding of ε times those terms, so a purely
  relative test of that entry would measure the cancellation, not the agreement.
* rtol = 1e-13 for values. For derivatives it is widened by 4ε|ζ|², ζ = (|ω − k∥V| + |Ω|)
  /|k∥w∥| (nothing at k∥ = 0): the builders document that dχ/dω loses ε|ζ_n|² relative
  for |ζ_n| ≫ 1 (cancellation between the terms Z and ζZ′), and both evaluations carry
  that rounding, in different orders.
"""

from __future__ import annotations

import numpy as np
import pytest

from kinroots.physics.models import _harmonics
from kinroots.physics.models import em_magnetized as em
from kinroots.physics.models import es_magnetized as es
from kinroots.physics.plasma import M_ELECTRON, M_PROTON, Species

M_ALPHA = 6.6446573357e-27  # alpha-particle mass [kg] (CODATA 2018)
EPS = np.finfo(float).eps
RTOL = 1e-13
BUILDERS = ("es", "em", "em_scaled")


def call(name, omega, species, k_par, k_perp, B, omega_ref):
    """One builder by name (``omega_ref`` used by the scaled tensor only)."""
    if name == "es":
        return es.susceptibility(omega, species, k_par=k_par, k_perp=k_perp, B=B)
    if name == "em":
        return em.susceptibility(omega, species, k_par=k_par, k_perp=k_perp, B=B)
    return em.scaled_susceptibility(omega, species, k_par=k_par, k_perp=k_perp, B=B,
                                    omega_ref=omega_ref)


def random_species(rng):
    """A drifting bi-Maxwellian of charge −1 (electrons), +1 (protons) or +2 (alphas)."""
    charge, mass = [(-1, M_ELECTRON), (1, M_PROTON), (2, M_ALPHA)][rng.integers(3)]
    t_par, t_perp = rng.uniform(1.0, 100.0, 2)
    species = Species("s", charge, mass, 10 ** rng.uniform(6, 19), t_par, t_perp)
    drift = rng.normal() * 0.5 * species.thermal_speed_par
    return Species("s", charge, mass, species.density, t_par, t_perp, drift=drift)


def random_elements(rng, species, B, size):
    """(k∥, k⊥, ω) arrays: angles 0°, 90° (k∥ = 0 exactly), 120° (Re k∥ < 0) and random
    ones; kρ from 0.03 to 5, some k complex; ω complex within ±4|Ω|."""
    omega_c = abs(species.cyclotron_frequency(B))
    theta = np.concatenate([np.radians([0.0, 90.0, 120.0]), rng.uniform(0, np.pi, size - 3)])
    k = 10 ** rng.uniform(-1.5, 0.7, size) * omega_c / species.thermal_speed_perp
    k = k * (1 + 0.1j * rng.normal(size=size) * (rng.random(size) < 0.4))
    k_par, k_perp = k * np.cos(theta), k * np.sin(theta)
    k_par[1] = 0.0
    omega = (rng.uniform(-4, 4, size) + 1j * rng.uniform(-0.5, 0.5, size)) * omega_c
    return k_par, k_perp, omega


def derivative_rtol(omega, k_par, species, B):
    """RTOL widened by the documented ε|ζ|² loss of dχ/dω (module docstring)."""
    if k_par == 0:
        return RTOL
    zeta = (abs(omega - k_par * species.drift) + abs(species.cyclotron_frequency(B))) / abs(
        k_par * species.thermal_speed_par)
    return RTOL + 4.0 * EPS * zeta**2


def assert_close(got, want, rtol, what):
    """|got − want| ≤ rtol · max(|want|, largest |entry| of want) (module docstring)."""
    got, want = np.asarray(got), np.asarray(want)
    assert got.shape == want.shape, what
    scale = np.max(np.abs(want))
    err = np.abs(got - want)
    assert np.all(err <= rtol * np.maximum(np.abs(want), scale)), (
        f"{what}: max |a - b| / max(|b|, scale) = {np.max(err / scale):.3e} > {rtol:.1e}"
    )


def assert_elements_match(res, name, omega, species, k_par, k_perp, B, omega_ref):
    """Every element of the array result ``res`` equals the scalar-k call at it."""
    shape = np.broadcast_shapes(np.shape(omega), np.shape(k_par), np.shape(k_perp))
    tail = () if name == "es" else (3, 3)
    assert res.value.shape == shape + tail
    assert res.derivative.shape == shape + tail
    om, kp, kq = np.broadcast_arrays(np.asarray(omega, dtype=complex),
                                     np.asarray(k_par, dtype=complex),
                                     np.asarray(k_perp, dtype=complex))
    needed = 0
    for idx in np.ndindex(shape):
        one = call(name, om[idx], species, complex(kp[idx]), complex(kq[idx]), B, omega_ref)
        needed = max(needed, one.harmonics)
        what = f"{name} element {idx} (k_par={kp[idx]:.3g}, k_perp={kq[idx]:.3g})"
        assert_close(res.value[idx], one.value, RTOL, what + " value")
        assert_close(res.derivative[idx], one.derivative,
                     derivative_rtol(om[idx], kp[idx], species, B), what + " derivative")
    assert res.harmonics >= needed
    return needed


@pytest.mark.parametrize("name", BUILDERS)
@pytest.mark.parametrize("seed", range(6))
def test_array_call_equals_scalar_calls(name, seed):
    rng = np.random.default_rng(seed)
    species = random_species(rng)
    B = [1e-8, 1.0, -0.5][seed % 3]
    k_par, k_perp, omega = random_elements(rng, species, B, 12)
    omega_ref = abs(species.cyclotron_frequency(B)) * rng.uniform(0.5, 5.0)
    res = call(name, omega, species, k_par, k_perp, B, omega_ref)
    needed = assert_elements_match(res, name, omega, species, k_par, k_perp, B, omega_ref)
    # N = the largest any element needs (the element of largest λ sets it, on its own table)
    assert res.harmonics == needed


@pytest.mark.parametrize("name", BUILDERS)
def test_shapes_broadcast(name):
    rng = np.random.default_rng(11)
    species = random_species(rng)
    B = 1.0
    omega_c = abs(species.cyclotron_frequency(B))
    k_par, k_perp, omega = random_elements(rng, species, B, 6)
    # scalar ω with array k
    res = call(name, omega[0], species, k_par, k_perp, B, omega_c)
    assert_elements_match(res, name, omega[0], species, k_par, k_perp, B, omega_c)
    # array ω (5,) against array k (3, 1): a (3, 5) grid
    om = omega[:5]
    kp, kq = k_par[3:6, None], k_perp[3:6, None]
    res = call(name, om, species, kp, kq, B, omega_c)
    assert_elements_match(res, name, om, species, kp, kq, B, omega_c)
    # k_par an array, k_perp a scalar
    res = call(name, om, species, k_par[:5], complex(k_perp[4]), B, omega_c)
    assert_elements_match(res, name, om, species, k_par[:5], complex(k_perp[4]), B, omega_c)
    # a 0-d k is a scalar k: the result is shaped like ω
    res = call(name, om, species, np.asarray(k_par[4]), np.asarray(k_perp[4]), B, omega_c)
    assert res.value.shape[:1] == om.shape


@pytest.mark.parametrize("name", BUILDERS)
def test_mixed_perpendicular_and_oblique(name):
    """k∥ = 0 (rational limit) and k∥ ≠ 0 (oblique formulas) elements in one array."""
    rng = np.random.default_rng(5)
    species = random_species(rng)
    B = -0.5
    omega_c = abs(species.cyclotron_frequency(B))
    k = np.array([0.3, 1.0, 2.0, 0.5, 1.5, 3.0]) * omega_c / species.thermal_speed_perp
    k_par = k * np.array([0.0, 0.4, 0.0, -0.7, 0.0, 0.1j + 0.2])
    k_perp = k * np.array([1.0, 0.9, 1.0, 0.7, 1.0, 0.95])
    omega = (np.array([0.5, 1.3, 2.7, -0.4, 1.1, 3.3]) + 0.05j) * omega_c
    res = call(name, omega, species, k_par, k_perp, B, omega_c)
    assert_elements_match(res, name, omega, species, k_par, k_perp, B, omega_c)


@pytest.mark.parametrize("name", BUILDERS)
def test_non_finite_element_is_nan_there_only(name):
    rng = np.random.default_rng(7)
    species = random_species(rng)
    B = 1.0
    omega_c = abs(species.cyclotron_frequency(B))
    k_par, k_perp, omega = random_elements(rng, species, B, 8)
    omega[2] = np.nan
    k_par[4] = np.inf
    k_perp[6] = complex(1.0, np.nan)
    res = call(name, omega, species, k_par, k_perp, B, omega_c)
    bad = [2, 4, 6]
    for field in (res.value, res.derivative):
        assert np.all(np.isnan(field[bad]))
        assert np.all(np.isfinite(np.delete(field, bad, axis=0)))
    good = np.delete(np.arange(8), bad)
    sub = call(name, omega[good], species, k_par[good], k_perp[good], B, omega_c)
    assert_elements_match(sub, name, omega[good], species, k_par[good], k_perp[good], B,
                          omega_c)
    for idx in good:
        one = call(name, omega[idx], species, complex(k_par[idx]), complex(k_perp[idx]), B,
                   omega_c)
        assert_close(res.value[idx], one.value, RTOL, f"{name} element {idx}")


@pytest.mark.parametrize("name", BUILDERS)
def test_many_omega_per_k_use_shared_weights(name, monkeypatch):
    """A k carrying at least SHARED_ROW_MIN finite ω is evaluated with shared weights, the
    others per element; both kinds in one call agree with the scalar calls."""
    monkeypatch.setattr(_harmonics, "SHARED_ROW_MIN", 4)
    rng = np.random.default_rng(3)
    species = random_species(rng)
    B = 1e-8
    omega_c = abs(species.cyclotron_frequency(B))
    k_par, k_perp, _ = random_elements(rng, species, B, 4)
    omega = (rng.uniform(-3, 3, (4, 5)) + 0.1j) * omega_c
    omega[1, :2] = np.nan  # row 1 keeps 3 finite ω: per-element weights
    kp, kq = k_par[:, None], k_perp[:, None]
    res = call(name, omega, species, kp, kq, B, omega_c)
    assert np.all(np.isnan(res.value[1, :2]))
    finite = np.isfinite(omega)
    ref = call(name, omega[finite], species, np.broadcast_to(kp, omega.shape)[finite],
               np.broadcast_to(kq, omega.shape)[finite], B, omega_c)
    assert_elements_match(ref, name, omega[finite], species,
                          np.broadcast_to(kp, omega.shape)[finite],
                          np.broadcast_to(kq, omega.shape)[finite], B, omega_c)
    rows = [0, 2, 3]
    assert_elements_match(call(name, omega[rows], species, kp[rows], kq[rows], B, omega_c),
                          name, omega[rows], species, kp[rows], kq[rows], B, omega_c)
    for idx in np.ndindex(omega.shape):
        if finite[idx]:
            one = call(name, omega[idx], species, complex(kp[idx[0], 0]),
                       complex(kq[idx[0], 0]), B, omega_c)
            assert_close(res.value[idx], one.value, RTOL, f"{name} {idx}")


def test_collisional_species_refuses_array_k():
    species = Species("e", -1, M_ELECTRON, 1e18, 10.0, 10.0, collision_frequency=1e6)
    with pytest.raises(ValueError, match="array k is not supported for collisional species"):
        es.susceptibility(np.array([1e10 + 1e8j]), species, k_par=np.array([10.0, 20.0]),
                          k_perp=np.array([5.0, 5.0]), B=0.1)


def test_bessel_weights_array_rows_match_scalar_weights():
    """Each row equals the scalar weights on the scalar's harmonics (same Γ_n table, same
    elementwise recurrences) and is below the tolerance beyond them; a non-finite λ and
    a λ whose sum exceeds MAX_HARMONICS give NaN rows only."""
    tol = 1e-14
    lam = np.array([0.0, 1e-4, 0.3, 2.5 + 0.7j, 40.0, -1.5 + 2.0j, np.nan, 1e9])
    weights = _harmonics.bessel_weights_array(lam, tol)
    big = weights.harmonics
    assert weights.gamma.shape == (lam.size, 2 * big + 1)
    np.testing.assert_array_equal(weights.converged, [True] * 6 + [False] * 2)
    assert big == max(_harmonics.bessel_weights(x, tol).harmonics for x in lam[:6])
    for i, x in enumerate(lam[:6]):
        one = _harmonics.bessel_weights(x, tol)
        inner = slice(big - one.harmonics, big + one.harmonics + 1)
        for row, ref in ((weights.gamma[i], one.gamma), (weights.dgamma[i], one.dgamma),
                         (weights.g[i], one.g)):
            np.testing.assert_array_equal(row[inner], ref)
            outer = np.delete(row, np.arange(2 * big + 1)[inner])
            assert np.all(np.abs(outer) <= tol * np.sum(np.abs(one.gamma)))
    assert np.all(np.isnan(weights.gamma[6:])) and np.all(np.isnan(weights.g[6:]))


def test_bessel_weight_rows_from_the_cache_equal_the_scalar_weights():
    """Rows kept from earlier calls (bessel_weights_array caches them per λ) mixed with new
    ones and with a larger common N: every row is its scalar weights, zeros beyond them,
    the same as in a call that computes them all afresh."""
    tol = 1e-14
    first = np.array([0.2, 1.5 + 0.1j, 7.0])
    _harmonics._ROWS.clear()
    _harmonics.bessel_weights_array(first, tol)
    assert len(_harmonics._ROWS) == 3
    lam = np.array([[7.0, 300.0], [0.2, np.nan]])
    mixed = _harmonics.bessel_weights_array(lam, tol)
    _harmonics._ROWS.clear()
    fresh = _harmonics.bessel_weights_array(lam, tol)
    big = mixed.harmonics
    assert big == fresh.harmonics == _harmonics.bessel_weights(300.0, tol).harmonics
    for field in ("gamma", "dgamma", "g"):
        np.testing.assert_array_equal(getattr(mixed, field), getattr(fresh, field))
    for (i, j), x in (((0, 0), 7.0), ((0, 1), 300.0), ((1, 0), 0.2)):
        one = _harmonics.bessel_weights(x, tol)
        inner = slice(big - one.harmonics, big + one.harmonics + 1)
        np.testing.assert_array_equal(mixed.g[i, j][inner], one.g)
        assert not np.any(np.delete(mixed.gamma[i, j], np.arange(2 * big + 1)[inner]))
    assert np.all(np.isnan(mixed.gamma[1, 1])) and not mixed.converged[1, 1]


def test_cached_bessel_weights_are_the_computed_ones_and_read_only():
    """bessel_weights keeps recent results: a hit must equal a fresh computation
    (bit for bit) and must not be writable, so no caller can change another's weights."""
    lam, tol = 3.7 + 0.2j, 1e-14
    first = _harmonics.bessel_weights(lam, tol)
    again = _harmonics.bessel_weights(lam, tol)
    fresh = _harmonics._bessel_weights(complex(lam), tol)
    assert again is first
    for a, b in ((first.gamma, fresh.gamma), (first.dgamma, fresh.dgamma), (first.g, fresh.g)):
        assert np.array_equal(a, b)
        with pytest.raises(ValueError):
            a[0] = 1.0
    assert first.harmonics == fresh.harmonics


@pytest.mark.parametrize("name", BUILDERS)
def test_flattened_pairs_with_repeated_wavevectors_share_rows_correctly(name, monkeypatch):
    """Pairs as the tracer and the zero counts send them: each (k∥, k⊥) repeated with
    many ω, flattened, and two wavevectors with the same k⊥ but different k∥ (parallel
    propagation: k⊥ = 0). Rows are shared per distinct wavevector, never per k⊥ alone;
    every element equals its scalar call."""
    monkeypatch.setattr(_harmonics, "SHARED_ROW_MIN", 4)
    rng = np.random.default_rng(11)
    species = random_species(rng)
    B = 1.0
    omega_c = abs(species.cyclotron_frequency(B))
    scale = omega_c / species.thermal_speed_par
    k_par = np.array([0.3, 0.7, 0.5]) * scale
    k_perp = np.array([0.4, 0.4, 0.0]) * scale  # the first two: same k_perp, other k_par
    kp = np.repeat(k_par, 6)
    kq = np.repeat(k_perp, 6)
    omega = (rng.uniform(-3, 3, kp.size) + 0.1j) * omega_c
    res = call(name, omega, species, kp, kq, B, omega_c)
    for i in range(kp.size):
        one = call(name, omega[i], species, complex(kp[i]), complex(kq[i]), B, omega_c)
        assert_close(res.value[i], one.value, RTOL, f"{name} element {i}")


def test_distinct_rows_group_equal_wavevectors_exactly():
    """The rows grouped by bit pattern: each row is its distinct row exactly, the distinct
    rows differ from one another, and their number is numpy's ``unique(axis=0)`` count
    (the definition of the grouping it replaces), on pairs with many repeats, complex
    entries and rows equal in one column only."""
    rng = np.random.default_rng(11)
    kpar = rng.choice([0.3, 0.3 + 1e-16, 0.45 - 0.02j, 1.2], 500).astype(complex)
    kperp = rng.choice([0.3, 0.7, 0.7 + 0.1j], 500).astype(complex)
    rows = np.stack((kpar, kperp), axis=1)
    distinct, inverse = _harmonics._distinct_rows(rows)
    assert np.array_equal(distinct[inverse], rows)
    assert len({tuple(r) for r in distinct.tolist()}) == len(distinct)
    assert len(distinct) == len(np.unique(rows, axis=0))
