"""Windows where |D| exceeds double precision (issue 15): the survey scales D by a
constant 2^-N (same zeros, same D'/D) chosen from an overflow-free log|D|; the Landau
exponentials are carried with a common scale where a single χ_s overflows."""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest

from kinroots.io.case import load_case
from kinroots.physics.plasma import C_LIGHT, EV
from kinroots.study.problem import function_at, survey

# Weibel instability with k along the anisotropy axis: electrons T⊥/T∥ = 5, hot protons,
# B = 0, electromagnetic.  The window reaches Im ω = −0.01 ω_pe, where the protons'
# Landau term makes |D| about 1e490 (each tensor entry stays finite).
WEIBEL = """
title = "Weibel, k along the anisotropy axis, window below the real axis"
[magnetic_field]
B = 0.0
[[species]]
name = "e"
charge = -1
mass = "electron"
density = 1.0e18
temperature_par = 100.0
temperature_perp = 500.0
[[species]]
name = "H+"
charge = 1
mass = "proton"
density = 1.0e18
temperature = 500.0
[wave]
model = "electromagnetic"
angle = 0.0
[scan]
k = { start = 0.5, stop = 0.6, points = 2 }
[units]
frequency = "plasma:e"
length = "inertial:e"
[search]
real = [-0.002, 0.002]
imag = [-0.01, 0.02]
"""

mp.mp.dps = 40


def _z(zeta: mp.mpc) -> mp.mpc:
    """Z(ζ) = i√π exp(−ζ²) erfc(−iζ) (Fried & Conte 1961; NIST DLMF 7.2.3)."""
    return 1j * mp.sqrt(mp.pi) * mp.exp(-zeta * zeta) * mp.erfc(-1j * zeta)


def _lambdas(case, k_hat: float, w: mp.mpc) -> tuple[mp.mpc, mp.mpc]:
    """Λ_yy (= Λ_xx) and Λ_zz at normalized ω = w, k ∥ z, B = 0, bi-Maxwellians.

    Transverse: Λ_yy = 1 − k²c²/ω² + Σ_s (ω_ps²/ω²)[−1 + (T⊥/T∥)(1 + ζ_s Z(ζ_s))];
    longitudinal: Λ_zz = 1 + Σ_s (2ω_ps²/(k²w∥s²))(1 + ζ_s Z(ζ_s)), ζ_s = ω/(k w∥s),
    w∥s² = 2T∥s/m_s (E. S. Weibel, Phys. Rev. Lett. 2, 83 (1959); R. C. Davidson, in
    Handbook of Plasma Physics vol. 1 (1983), ch. 3.3; from memory).
    """
    w_pe = case.units.omega_unit
    k = mp.mpf(k_hat) / case.units.length_unit
    om = mp.mpc(w) * w_pe
    lyy = 1 - (k * C_LIGHT / om) ** 2
    lzz = mp.mpf(1)
    for s in case.plasma.species:
        wpar = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
        zeta = om / (k * wpar)
        g = 1 + zeta * _z(zeta)
        wp2 = mp.mpf(s.plasma_frequency) ** 2
        lyy += wp2 / om**2 * (-1 + mp.mpf(s.temperature_perp) / s.temperature_par * g)
        lzz += 2 * wp2 / (k * wpar) ** 2 * g
    return lyy, lzz


@pytest.fixture(scope="module")
def weibel(tmp_path_factory):
    path = tmp_path_factory.mktemp("weibel") / "weibel.toml"
    path.write_text(WEIBEL)
    return load_case(path)


def test_weibel_window_below_the_real_axis(weibel) -> None:
    k = 0.5
    res = survey(weibel, k)
    assert not any("not finite" in n or "exhausted" in n for n in res.notes), res.notes
    assert any("exceeds double precision" in n for n in res.notes)
    growing = [r for r in res.roots if r.converged and r.value.imag > 1e-3]
    assert len(growing) == 1
    root = growing[0]
    assert root.verified
    # k ∥ z: the two transverse polarizations are degenerate (Λ_xx = Λ_yy; symmetry,
    # common practice), so the purely growing zero of D is double
    assert root.multiplicity == 2
    # independent route: Λ_yy(iγ) = 0 solved with mpmath at 40 digits
    gamma = mp.findroot(lambda g: mp.re(-(g**2) * _lambdas(weibel, k, mp.mpc(0, g))[0]),
                        (0.005, 0.012), solver="anderson")
    assert abs(root.value.real) < 1e-12
    assert abs(root.value.imag - float(gamma)) <= 1e-9 * float(gamma)
    # every root found is a zero of Λ_yy or Λ_zz (D = w⁴ Λ_yy² Λ_zz here)
    # (mpmath's secant from the root found converges to a zero of one of them nearby)
    for r in res.roots:
        assert r.converged and r.verified
        dist = []
        for i in (0, 1):
            try:
                z = mp.findroot(lambda w, i=i: _lambdas(weibel, k, w)[i],
                                (mp.mpc(r.value), mp.mpc(r.value) * (1 + 1e-7)), verify=False)
            except (ValueError, ZeroDivisionError):
                continue
            dist.append(abs(complex(z) - r.value))
        assert dist and min(dist) <= 1e-9 * abs(r.value), r.value


def test_scaled_d_matches_mpmath_where_double_d_overflows(weibel) -> None:
    k = 0.5
    f = function_at(weibel, k)
    w = np.array([1e-4 - 0.01j, -3e-4 - 0.008j, 0.0015 + 0.01j])
    plain = f(w)[0]
    assert not np.isfinite(plain[0])  # the case needs the scale at all
    lg = f.dispersion.log2_magnitude(w * f.dispersion.omega_ref)
    f.dispersion.log2_offset = 700
    scaled, dscaled = f(w)
    for j, wj in enumerate(w):
        lyy, lzz = _lambdas(weibel, k, mp.mpc(wj))
        ref = mp.mpc(wj) ** 4 * lyy**2 * lzz  # D = (ω/ω_pe)⁴ det Λ, Λ diagonal
        assert abs(float(mp.log(abs(ref), 2)) - lg[j]) < 1e-10 * max(1.0, abs(lg[j]))
        got = mp.mpc(scaled[j]) * mp.mpf(2) ** 700
        assert abs(got - ref) <= 1e-9 * abs(ref)
        if np.isfinite(plain[j]):
            assert abs(scaled[j] * 2.0**700 - plain[j]) <= 1e-14 * abs(plain[j])
    f.dispersion.log2_offset = 0
    dplain = f(w)[1]
    for j in np.flatnonzero(np.isfinite(plain)):  # D'/D does not depend on the scale
        assert abs(dscaled[j] / scaled[j] - dplain[j] / plain[j]) <= 1e-13 * abs(
            dplain[j] / plain[j])


# Ion acoustic with hot ions (T_i = T_e), electrostatic: at k λ_De = 0.5 the protons'
# k w_i is about 0.0165 ω_pe, so at Im ω = −0.45 ω_pe Im ζ_i ≈ −27 and the protons' own
# χ_i ≈ exp(ζ_i²) is near 1e318: it overflows before any sum is formed.
HOT_IONS = """
title = "hot-ion ion acoustic, window deep below the real axis"
[[species]]
name = "e"
charge = -1
mass = "electron"
density = 1.0e18
temperature = 100.0
[[species]]
name = "H+"
charge = 1
mass = "proton"
density = 1.0e18
temperature = 100.0
[wave]
model = "electrostatic"
angle = 0.0
[scan]
k = { start = 0.5, stop = 0.6, points = 2 }
[units]
frequency = "plasma:e"
length = "debye:e"
[search]
real = [-0.1, 0.1]
imag = [-0.45, 0.05]
"""


def _es_d(case, k_hat: float, w: mp.mpc) -> mp.mpc:
    """ε_L = 1 + Σ_s (2ω_ps²/(k²w_s²))(1 + ζ_s Z(ζ_s)), ζ_s = ω/(k w_s), w_s² = 2T_s/m_s
    (unmagnetized Maxwellians; Fried & Conte 1961; T. H. Stix, *Waves in Plasmas*, 1992,
    ch. 8, from memory), at normalized ω = w, mpmath throughout."""
    k = mp.mpf(k_hat) / case.units.length_unit
    om = mp.mpc(w) * case.units.omega_unit
    d = mp.mpf(1)
    for s in case.plasma.species:
        ws = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
        zeta = om / (k * ws)
        d += 2 * mp.mpf(s.plasma_frequency) ** 2 / (k * ws) ** 2 * (1 + zeta * _z(zeta))
    return d


@pytest.fixture(scope="module")
def hot_ions(tmp_path_factory):
    path = tmp_path_factory.mktemp("hot") / "hot_ions.toml"
    path.write_text(HOT_IONS)
    return load_case(path)


def test_es_log_d_where_a_single_chi_overflows(hot_ions) -> None:
    k = 0.5
    disp = function_at(hot_ions, k).dispersion
    w = np.array([0.01 - 0.45j, 0.05 - 0.44j, -0.003 - 0.2j, 0.02 + 0.01j, 0.3 - 0.1j])
    chis = disp.susceptibilities(w * disp.omega_ref)
    assert not np.isfinite(chis["H+"][0])  # the protons' χ alone overflows there
    plain = disp(w * disp.omega_ref)[0]
    logd = disp.log_value(w * disp.omega_ref)
    for j, wj in enumerate(w):
        ref = mp.log(_es_d(hot_ions, k, mp.mpc(wj)))
        assert abs(complex(ref) - logd[j]) <= 1e-12 * abs(ref), (wj, logd[j], ref)
        if np.isfinite(plain[j]):  # the plain value is unchanged where it is finite
            assert abs(np.log(plain[j]) - logd[j]) <= 1e-13 * abs(logd[j])
    assert float(mp.re(mp.log(_es_d(hot_ions, k, mp.mpc(w[0]))))) > 709  # beyond 1e308


def test_es_window_where_a_single_chi_overflows(hot_ions) -> None:
    k = 0.5
    res = survey(hot_ions, k)
    assert any("exceeds double precision" in n for n in res.notes), res.notes
    assert not any("not finite" in n for n in res.notes), res.notes
    assert res.complete and res.count == len(res.roots) >= 10
    # the ion-acoustic family: symmetric under ω → −ω* (D(−ω*) = D(ω)* for a plasma
    # without drifts, common practice)
    values = [r.value for r in res.roots]
    for v in values:
        assert min(abs(u + v.conjugate()) for u in values) <= 1e-9 * abs(v)
    for r in res.roots:
        assert r.converged and r.verified
        # mpmath's secant from the root converges to the same zero of ε_L
        z = mp.findroot(lambda w: _es_d(hot_ions, k, w),
                        (mp.mpc(r.value), mp.mpc(r.value) * (1 + 1e-7)))
        assert abs(complex(z) - r.value) <= 1e-9 * abs(r.value), r.value
    # the roots of the part of the window that double precision handles unscaled
    narrow = survey(hot_ions, k, box=(-0.1, 0.1, -0.2, 0.05))
    assert not any("exceeds double precision" in n for n in narrow.notes)
    inside = [r.value for r in res.roots if r.value.imag > -0.2]
    assert len(inside) == len(narrow.roots) == narrow.count
    for v in narrow.values:
        assert min(abs(u - v) for u in inside) <= 1e-9 * abs(v)
