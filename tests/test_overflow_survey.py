"""Windows where |D| exceeds double precision (issue 15): the survey scales D by a
constant 2^-N (same zeros, same D'/D) chosen from an overflow-free log|D|; the Landau
exponentials are carried with a common scale where a single χ_s overflows."""

from __future__ import annotations

from pathlib import Path

import mpmath as mp
import numpy as np
import pytest
from _mp_reference import plasma_z as _z
from _mp_reference import weibel_lambdas

from kinroots.io.case import load_case
from kinroots.physics.plasma import C_LIGHT, EV
from kinroots.study.problem import function_at, survey

#: Case files of this module (also read by benchmarks/bench_overflow.py).
DATA = Path(__file__).parent / "data"

# Weibel instability with k along the anisotropy axis: electrons T⊥/T∥ = 5, hot protons,
# B = 0, electromagnetic.  The window reaches Im ω = −0.01 ω_pe, where the protons'
# Landau term makes |D| about 1e490 (each tensor entry stays finite).
WEIBEL_FILE = DATA / "overflow_weibel.toml"
WEIBEL = WEIBEL_FILE.read_text(encoding="utf-8")  # the text (tests/test_cli_check.py)

mp.mp.dps = 40


def _lambdas(case, k_hat: float, w: mp.mpc) -> tuple[mp.mpc, mp.mpc]:
    """Λ_yy (= Λ_xx) and Λ_zz (:func:`_mp_reference.weibel_lambdas`) at normalized
    k = k_hat and ω = w."""
    k = mp.mpf(k_hat) / case.units.length_unit
    return weibel_lambdas(case.plasma, k, mp.mpc(w) * case.units.omega_unit)


@pytest.fixture(scope="module")
def weibel():
    return load_case(WEIBEL_FILE)


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
HOT_IONS = DATA / "overflow_hot_ions.toml"


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
def hot_ions():
    return load_case(HOT_IONS)


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
    # down to Im ω = −ω_pe |D| reaches 1e1598 and spans ~5300 binary orders on the
    # boundary, more than one constant scale holds: surveyed in sub-boxes, same roots
    deep = survey(hot_ions, k, box=(-0.1, 0.1, -1.0, 0.05))
    assert any("sub-boxes" in n for n in deep.notes), deep.notes
    assert deep.complete and deep.count == len(deep.roots) == len(res.roots)
    for v in res.values:
        assert min(abs(u - v) for u in deep.values) <= 1e-9 * abs(v)


# Oblique electromagnetic hydrogen plasma, B = 0.1 T, θ = 60°, T_e = T_i = 10 eV: at
# k ρ_i = 0.5 the ion resonances are k∥w_i = 0.25 Ω_ci wide, so at Im ω = −5 Ω_ci
# |exp(−ζ_n²)| ≈ e^400: tensor entries reach 1e181 and |D| 1e535 on the contour.
OBLIQUE = DATA / "overflow_oblique.toml"


def _stix_chi(s, om: mp.mpc, kpar: mp.mpf, kperp: mp.mpf, B: float, n_max: int = 30):
    """χ_s of an isotropic, non-drifting Maxwellian in a magnetic field (x, y, z frame,
    B ∥ z, k = (k⊥, 0, k∥)), mpmath throughout:

    χ = (ω_p²/ω²) ζ₀ Σ_n e^{−λ} Y_n, ζ_n = (ω − nΩ)/(k∥w), w² = 2T/m, λ = (k⊥w/Ω)²/2,
    Y_xx = n²I_n Z_n/λ, Y_xy = −Y_yx = i n (I_n' − I_n) Z_n,
    Y_yy = (n²I_n/λ + 2λ(I_n − I_n')) Z_n, Y_xz = Y_zx = σ (2/λ)^½ n I_n (1 + ζ_n Z_n),
    Y_yz = −Y_zy = −σ i (2λ)^½ (I_n' − I_n)(1 + ζ_n Z_n), Y_zz = 2 I_n ζ_n (1 + ζ_n Z_n),
    σ = sign Ω, I_n = I_n(λ), Z = Fried–Conte function
    (T. H. Stix, *Waves in Plasmas*, AIP 1992, ch. 10-11, from memory; the signs of the
    σ terms were fixed against this project's tensor where both are finite).
    """
    om_c = mp.mpf(s.cyclotron_frequency(B))
    sigma = 1 if om_c > 0 else -1
    w = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
    lam = (kperp * w / om_c) ** 2 / 2
    y = mp.zeros(3, 3)
    e = mp.exp(-lam)
    for n in range(-n_max, n_max + 1):
        zn = (om - n * om_c) / (kpar * w)
        zz = _z(zn)
        g = 1 + zn * zz
        i_n = mp.besseli(n, lam)
        di = mp.besseli(n, lam, derivative=1)
        y[0, 0] += e * n * n * i_n / lam * zz
        y[0, 1] += e * 1j * n * (di - i_n) * zz
        y[1, 1] += e * (n * n * i_n / lam + 2 * lam * (i_n - di)) * zz
        y[0, 2] += e * sigma * mp.sqrt(2 / lam) * n * i_n * g
        y[1, 2] += -e * sigma * 1j * mp.sqrt(2 * lam) * (di - i_n) * g
        y[2, 2] += e * 2 * i_n * zn * g
    y[1, 0], y[2, 0], y[2, 1] = -y[0, 1], y[0, 2], -y[1, 2]
    return mp.mpf(s.plasma_frequency) ** 2 / om**2 * om / (kpar * w) * y


def _stix_d(case, disp, w: complex) -> mp.mpc:
    """D = (ω/ω_ref)⁴ det Λ, Λ = I + Σχ_s − n²(I − k̂k̂), n² = k²c²/ω² (Stix 1992,
    ch. 1 and 10), at normalized ω = w, from :func:`_stix_chi`."""
    om = mp.mpc(w) * disp.omega_ref
    kpar, kperp = mp.mpf(disp.k_par.real), mp.mpf(disp.k_perp.real)
    k2 = kpar**2 + kperp**2
    n2 = k2 * mp.mpf(C_LIGHT) ** 2 / om**2
    khat = [kperp, 0, kpar]
    lam = mp.eye(3)
    for s in case.plasma.species:
        lam += _stix_chi(s, om, kpar, kperp, case.plasma.B)
    for i in range(3):
        for j in range(3):
            lam[i, j] -= n2 * ((1 if i == j else 0) - khat[i] * khat[j] / k2)
    return (om / disp.omega_ref) ** 4 * mp.det(lam)


@pytest.fixture(scope="module")
def oblique():
    return load_case(OBLIQUE)


def test_oblique_em_log_d_against_stix(oblique) -> None:
    k = 0.5
    disp = function_at(oblique, k).dispersion
    mp.mp.dps = 30
    try:
        w = np.array([0.7 - 0.3j, 0.3 + 0.1j, 0.55 - 2.0j, 0.6 - 4.9j, 0.25 - 5.0j])
        om = w * disp.omega_ref
        entries = np.abs(disp.tensor(om))
        plain = disp(om)[0]
        logd = disp.log_value(om)
        assert np.all(np.isfinite(logd))
        assert np.nanmax(entries[3]) > 1e160 or not np.all(np.isfinite(entries[3]))
        assert not np.isfinite(plain[3]) and np.isfinite(plain[0])
        for j, wj in enumerate(w):
            ref = mp.log(_stix_d(oblique, disp, wj))
            assert abs(complex(ref) - logd[j]) <= 1e-12 * abs(ref), (wj, logd[j], ref)
    finally:
        mp.mp.dps = 40


def test_oblique_em_window_beyond_double_precision(oblique) -> None:
    k = 0.5
    wide = survey(oblique, k)
    assert any("exceeds double precision" in n for n in wide.notes), wide.notes
    assert wide.complete and wide.count == len(wide.roots)
    # the roots of the part of the window that double precision handles unscaled
    narrow = survey(oblique, k, box=(0.2, 0.9, -3.0, 0.2))
    assert not any("exceeds double precision" in n for n in narrow.notes), narrow.notes
    assert narrow.complete
    inside = [r.value for r in wide.roots if r.value.imag > -3.0]
    assert len(inside) == narrow.count == len(narrow.roots)
    for v in narrow.values:
        assert min(abs(u - v) for u in inside) <= 1e-9 * abs(v)
    deep = [r for r in wide.roots if r.value.imag < -3.0]
    assert deep and all(r.converged and r.verified for r in deep)
    # the deepest root, where |D| ~ 1e500 around it, is a zero of the Stix D: mpmath's
    # secant from it converges to it, and D there is far below D a relative 1e-8 away.
    # (Not mpmath's own check |D|² < 1e-34: 30 digits of terms near 1e500 leave |D|
    # near 1e470 at the best point; that check passed only by chance.)
    disp = function_at(oblique, k).dispersion
    r = min(deep, key=lambda q: q.value.imag)
    mp.mp.dps = 60
    try:
        def stix(w: mp.mpc) -> mp.mpc:
            return _stix_d(oblique, disp, w)

        z = mp.findroot(stix, (mp.mpc(r.value), mp.mpc(r.value) * (1 + 1e-7)),
                        verify=False)
        assert abs(stix(z)) <= 1e-12 * abs(stix(z * (1 + mp.mpf("1e-8"))))
    finally:
        mp.mp.dps = 40
    assert abs(complex(z) - r.value) <= 1e-9 * abs(r.value), (r.value, z)


def test_oblique_es_magnetized_log_d_against_mpmath(tmp_path) -> None:
    # the same plasma, electrostatic: ε_L = 1 + Σ_s (2ω_ps²/(k²w_s²))
    # [1 + ζ₀ Σ_n e^{−λ} I_n(λ) Z(ζ_n)] (T. H. Stix, *Waves in Plasmas*, 1992, ch. 11,
    # electrostatic limit, from memory); at Im ω = −8 Ω_ci |ε_L| ≈ 1e450
    path = tmp_path / "es.toml"
    path.write_text(OBLIQUE.read_text().replace('"electromagnetic"', '"electrostatic"'))
    case = load_case(path)
    disp = function_at(case, 0.5).dispersion
    kpar, kperp = mp.mpf(disp.k_par.real), mp.mpf(disp.k_perp.real)
    w = np.array([0.7 - 0.3j, 0.3 + 0.1j, 0.6 - 4.9j, 0.4 - 8.0j])
    plain = disp(w * disp.omega_ref)[0]
    logd = disp.log_value(w * disp.omega_ref)
    assert not np.isfinite(plain[-1])
    mp.mp.dps = 30
    try:
        for j, wj in enumerate(w):
            om = mp.mpc(wj) * disp.omega_ref
            d = mp.mpf(1)
            for s in case.plasma.species:
                om_c = mp.mpf(s.cyclotron_frequency(case.plasma.B))
                ws = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
                lam = (kperp * ws / om_c) ** 2 / 2
                acc = mp.fsum(mp.exp(-lam) * mp.besseli(n, lam) * _z((om - n * om_c) / (kpar * ws))
                              for n in range(-30, 31))
                d += (2 * mp.mpf(s.plasma_frequency) ** 2 / ((kpar**2 + kperp**2) * ws**2)
                      * (1 + om / (kpar * ws) * acc))
            ref = mp.log(d)
            assert abs(complex(ref) - logd[j]) <= 1e-12 * abs(ref), (wj, logd[j], ref)
    finally:
        mp.mp.dps = 40
