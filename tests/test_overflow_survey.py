"""Windows where |D| exceeds double precision (issue 15): the survey scales D by a
constant 2^-N (same zeros, same D'/D) chosen from an overflow-free log|D|."""

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
