"""Unmagnetized susceptibility builders: electrostatic and electromagnetic.

Every check is against something outside the builders' closed forms: mpmath (Z from
erfc at 40 digits; velocity-space quadrature of the linearized Vlasov response), cold
fluid theory, textbook limits, or an exact symmetry.  The source is named beside each.
"""

from __future__ import annotations

from collections.abc import Callable

import mpmath as mp
import numpy as np
import pytest

from kinroots.physics.models import em_unmagnetized, es_unmagnetized
from kinroots.physics.models.es_unmagnetized import landau_moments
from kinroots.physics.plasma import EPS0, EV, M_ELECTRON, M_PROTON, Species

RNG_SEED = 20240611


def electron(t_par: float = 2.0, t_perp: float = 2.0, drift: float = 0.0) -> Species:
    return Species("e", -1, M_ELECTRON, 1e16, t_par, t_perp, drift)


def proton(t_par: float = 0.5, t_perp: float = 0.5, drift: float = 0.0) -> Species:
    return Species("p", 1, M_PROTON, 1e16, t_par, t_perp, drift)


def z_mpmath(zeta: complex) -> mp.mpc:
    """Z(ζ) = i√π exp(−ζ²) erfc(−iζ) at mpmath precision (Fried & Conte 1961, via
    NIST DLMF 7.2.3 for the Faddeeva function)."""
    z = mp.mpc(zeta)
    return 1j * mp.sqrt(mp.pi) * mp.exp(-z * z) * mp.erfc(-1j * z)


def kappa_of(sp: Species, k_par: complex, k_perp: complex) -> complex:
    wpar2 = 2 * sp.temperature_par * EV / sp.mass
    wperp2 = 2 * sp.temperature_perp * EV / sp.mass
    return complex(np.sqrt(k_perp**2 * wperp2 + k_par**2 * wpar2))


# --------------------------------------------------------------------------- moments
def test_landau_moments_against_mpmath() -> None:
    # Source: Fried & Conte (1961), definition of Z and Z' = -2(1 + ζZ); reference Z
    # from mpmath erfc at 40 digits, M_n from their defining identities in mpmath.
    rng = np.random.default_rng(RNG_SEED)
    radii = np.concatenate([rng.uniform(0, 2, 30), rng.uniform(2, 7, 40), rng.uniform(7, 30, 30)])
    zeta = radii * np.exp(1j * rng.uniform(-np.pi, np.pi, radii.size))
    zeta = np.concatenate([zeta, [7.0, -9.5, 3.0, 1e3 + 0.5j]])  # real axis, region edges
    ms, dms = landau_moments(zeta)
    with mp.workdps(60):
        for i, z in enumerate(zeta):
            zz = mp.mpc(z)
            zf = z_mpmath(z)
            m1 = -(1 + zz * zf)
            dm1 = -zf + 2 * zz * (1 + zz * zf)
            ref = [-zf, m1, zz * m1, -0.5 + zz**2 * m1]
            dref = [-2 * m1, dm1, m1 + zz * dm1, 2 * zz * m1 + zz**2 * dm1]
            for n in range(4):
                if abs(ref[n]) > 1e300:  # beyond double range: must not be finite
                    assert not np.isfinite(ms[n][i])
                    continue
                assert abs(ms[n][i] - complex(ref[n])) <= 1e-12 * abs(complex(ref[n])), (n, z)
                assert abs(dms[n][i] - complex(dref[n])) <= 1e-11 * abs(complex(dref[n])), (n, z)


def test_landau_term_on_real_axis_is_exact() -> None:
    # Source: Fried & Conte (1961): Im Z(x) = √π exp(-x²) for real x (Landau term);
    # here far in the asymptotic region where it is 1e-40 of the real part.
    x = np.array([10.0, -12.0])
    m0 = landau_moments(x, order=0)[0][0]
    np.testing.assert_allclose(-m0.imag, np.sqrt(np.pi) * np.exp(-x * x), rtol=1e-13)


# --------------------------------------------------------------------------- ES
@pytest.mark.parametrize("angle", [0.0, 35.0, 90.0, 140.0])
def test_es_isotropic_textbook_form(angle: float) -> None:
    # Source: Krall & Trivelpiece (1973), ch. 8 (from memory):
    # χ = (1/(k²λ_D²)) [1 + ζ Z(ζ)], ζ = (ω − k·V)/(k w); Z from mpmath.
    sp = electron(drift=3e5)
    k = 2.5e4
    th = np.radians(angle)
    kpar, kperp = k * np.cos(th), k * np.sin(th)
    omega = np.array([3e9 + 1e9j, 5e9 - 2e9j, 1e8 + 0j])
    got = es_unmagnetized.susceptibility(omega, sp, k_par=kpar, k_perp=kperp, B=0.0).value
    lam2 = EPS0 * sp.temperature_par * EV / (sp.density * sp.charge**2)
    w = sp.thermal_speed_par
    for om, g in zip(omega, got, strict=True):
        zeta = (om - kpar * sp.drift) / (k * w)
        ref = complex((1 + mp.mpc(zeta) * z_mpmath(zeta)) / (k * k * lam2))
        assert abs(g - ref) <= 1e-12 * abs(ref)


_GH_X, _GH_W = np.polynomial.hermite.hermgauss(200)


def velocity_integral(
    sp: Species, integrand: Callable[[np.ndarray, np.ndarray], np.ndarray], method: str
) -> complex:
    """∫∫ integrand(v_x, v_z) f0(v_x, v_z) dv_x dv_z for the 2-D drifting bi-Maxwellian
    f0 = exp(−v_x²/w⊥² − (v_z − V)²/w∥²)/(π w⊥ w∥) (v_y already integrated out exactly,
    k_y = 0 and f0 factorizes).

    ``method="hermite"``: 200×200 Gauss-Hermite product rule (numpy, fast; exponential
    convergence for Im ω > 0).  ``method="mpmath"``: mpmath.quad, tanh-sinh on
    (−∞, 0, ∞)², at the current mp precision (slow, arbitrary precision)."""
    wpar, wperp = sp.thermal_speed_par, sp.thermal_speed_perp
    if method == "hermite":
        x, y = np.meshgrid(_GH_X, _GH_X, indexing="ij")
        w = np.outer(_GH_W, _GH_W)
        return complex(np.sum(w * integrand(wperp * x, sp.drift + wpar * y)) / np.pi)

    def f(x: mp.mpf, y: mp.mpf) -> mp.mpc:
        return integrand(wperp * x, sp.drift + wpar * y) * mp.exp(-x * x - y * y) / mp.pi

    return complex(mp.quad(f, [-mp.inf, 0, mp.inf], [-mp.inf, 0, mp.inf]))


def es_quadrature(
    sp: Species, omega: complex, k_par: float, k_perp: float, method: str = "hermite"
) -> complex:
    """χ = (ω_p²/k²) ∫ k·∂f0/∂v / (ω − k·v) d³v by velocity quadrature."""
    wpar2, wperp2 = sp.thermal_speed_par**2, sp.thermal_speed_perp**2

    def g(vx, vz):
        kgrad = -2 * (k_perp * vx / wperp2 + k_par * (vz - sp.drift) / wpar2)  # k·∂f0/f0
        return kgrad / (omega - k_perp * vx - k_par * vz)

    return sp.plasma_frequency**2 / (k_par**2 + k_perp**2) * velocity_integral(sp, g, method)


def em_quadrature(
    sp: Species,
    omega: complex,
    k_par: float,
    k_perp: float,
    i: int,
    j: int,
    method: str = "hermite",
) -> complex:
    """χ_ij from the linearized Vlasov equation with the Lorentz force of E and
    δB = k×E/ω, before any simplification:
    χ_ij = (ω_p²/ω²) ∫ v_i [(ω − k·v) ∂_j f0 + v_j k·∂f0/∂v] / (ω − k·v) d³v,
    i, j ∈ {x, z}, by velocity quadrature."""
    wpar2, wperp2 = sp.thermal_speed_par**2, sp.thermal_speed_perp**2

    def g(vx, vz):
        v = (vx, 0.0, vz)
        grad = (-2 * vx / wperp2, 0.0, -2 * (vz - sp.drift) / wpar2)  # ∂_j f0 / f0
        kgrad = k_perp * grad[0] + k_par * grad[2]
        den = omega - k_perp * vx - k_par * vz
        return v[i] * (den * grad[j] + v[j] * kgrad) / den

    return sp.plasma_frequency**2 / omega**2 * velocity_integral(sp, g, method)


QUAD_CASES = [
    # species, k [1/m], angle [deg], ζ-like offset (Im > 0: upper half-plane)
    (electron(2.0, 5.0, 4e5), 3e3, 40.0, 0.6 + 0.7j),
    (electron(4.0, 1.0, -1e6), 8e3, 120.0, -1.1 + 0.4j),
    (proton(0.3, 0.9, 2e4), 5e4, 75.0, 1.5 + 0.9j),
]


@pytest.mark.parametrize(("sp", "k", "angle", "zoff"), QUAD_CASES)
def test_against_velocity_quadrature(sp: Species, k: float, angle: float, zoff: complex) -> None:
    # Source: linearized Vlasov equation (Krall & Trivelpiece 1973, ch. 8-9, from
    # memory), integrated numerically over velocity (Gauss-Hermite product rule), not
    # through Z; see also the mpmath.quad test for k ∥ z below.
    th = np.radians(angle)
    kpar, kperp = k * np.cos(th), k * np.sin(th)
    omega = kpar * sp.drift + kappa_of(sp, kpar, kperp) * zoff
    es = es_unmagnetized.susceptibility(np.array(omega), sp, k_par=kpar, k_perp=kperp).value
    ref = es_quadrature(sp, omega, kpar, kperp)
    assert abs(es - ref) <= 1e-10 * abs(ref)
    em = em_unmagnetized.susceptibility(np.array(omega), sp, k_par=kpar, k_perp=kperp).value
    scale = np.abs(em).max()
    for i, j in [(0, 0), (0, 2), (2, 0), (2, 2)]:
        ref = em_quadrature(sp, omega, kpar, kperp, i, j)
        assert abs(em[i, j] - ref) <= 1e-10 * scale, (i, j)


@pytest.mark.parametrize("zoff", [0.4 + 0.3j, -1.7 + 0.25j, 2.5 + 1.5j])
def test_parallel_k_against_mpmath_quadrature(zoff: complex) -> None:
    # Source: linearized Vlasov equation (Krall & Trivelpiece 1973, from memory) for
    # k ∥ z, the v_z integral done by mpmath.quad (tanh-sinh, 30 digits) for Im ω > 0:
    #   χ_ES = (ω_p²/k²) ∫ k f_z′/(ω − k v_z) dv_z,
    #   χ_zz = (ω_p²/ω²) ∫ v_z [(ω − k v_z) f_z′ + v_z k f_z′]/(ω − k v_z) dv_z,
    #   χ_xx = (ω_p²/ω²) [−1 + (w⊥²/2) ∫ k f_z′/(ω − k v_z) dv_z]
    # (the v_x integrals ∫ v_x ∂f_x = −1, ∫ v_x² f_x = w⊥²/2 are Gaussian moments).
    sp = electron(1.5, 5.0, 3e5)
    k = 4e3
    wpar, wp2 = sp.thermal_speed_par, sp.plasma_frequency**2
    omega = k * sp.drift + k * wpar * zoff
    es = es_unmagnetized.susceptibility(np.array(omega), sp, k_par=k, k_perp=0.0).value
    em = em_unmagnetized.susceptibility(np.array(omega), sp, k_par=k, k_perp=0.0).value
    with mp.workdps(30):
        om = mp.mpc(omega)

        def fprime(v: mp.mpf) -> mp.mpf:
            x = (v - sp.drift) / wpar
            return -2 * x / wpar * mp.exp(-x * x) / (mp.sqrt(mp.pi) * wpar)

        # split at the drift and at the real part of the resonance v = ω/k
        lim = [-mp.inf, *sorted([sp.drift, omega.real / k]), mp.inf]
        i_es = mp.quad(lambda v: k * fprime(v) / (om - k * v), lim)
        i_zz = mp.quad(
            lambda v: v * ((om - k * v) * fprime(v) + v * k * fprime(v)) / (om - k * v), lim
        )
        ref_es = complex(wp2 / k**2 * i_es)
        ref_zz = complex(wp2 / om**2 * i_zz)
        ref_xx = complex(wp2 / om**2 * (-1 + sp.thermal_speed_perp**2 / 2 * i_es))
    assert abs(es - ref_es) <= 1e-12 * abs(ref_es)
    assert abs(em[2, 2] - ref_zz) <= 1e-12 * abs(ref_zz)
    assert abs(em[0, 0] - ref_xx) <= 1e-12 * abs(ref_xx)
    assert abs(em[1, 1] - ref_xx) <= 1e-12 * abs(ref_xx)


def test_em_yy_by_quadrature() -> None:
    # Source: as above; χ_yy = (ω_p²/ω²)[−1 + (w⊥²/2) ∫ k·∂f0/∂v /(ω − k·v) d²v], the
    # v_y integrals being ∫ v_y ∂_y f_y = −1 and ∫ v_y² f_y = w⊥²/2 (Gaussian moments).
    sp = electron(1.0, 6.0, 2e5)
    k, th = 4e3, np.radians(60.0)
    kpar, kperp = k * np.cos(th), k * np.sin(th)
    omega = kpar * sp.drift + kappa_of(sp, kpar, kperp) * (0.3 + 0.5j)
    em = em_unmagnetized.susceptibility(np.array(omega), sp, k_par=kpar, k_perp=kperp).value
    es_like = es_quadrature(sp, omega, kpar, kperp) * (kpar**2 + kperp**2) / sp.plasma_frequency**2
    ref = sp.plasma_frequency**2 / omega**2 * (-1 + sp.thermal_speed_perp**2 / 2 * es_like)
    assert abs(em[1, 1] - ref) <= 1e-10 * abs(ref)


# --------------------------------------------------------------------------- EM limits
def test_em_isotropic_transverse_and_longitudinal() -> None:
    # Source: Krall & Trivelpiece (1973), ch. 9 (from memory): for an isotropic
    # Maxwellian χ_T = (ω_p²/ω²) ζZ(ζ), χ_L = −Z'(ζ)/(2k²λ_D²) = (1 + ζZ)/(k²λ_D²).
    sp = electron(3.0, 3.0)
    k, th = 1.2e4, np.radians(25.0)
    khat = np.array([np.sin(th), 0.0, np.cos(th)])
    e1 = np.array([np.cos(th), 0.0, -np.sin(th)])
    omega = np.array([2e9 + 3e8j, 7e9 - 1e9j])
    chi = em_unmagnetized.susceptibility(omega, sp, k_par=k * khat[2], k_perp=k * khat[0]).value
    w = sp.thermal_speed_par
    lam2 = EPS0 * sp.temperature_par * EV / (sp.density * sp.charge**2)
    for n, om in enumerate(omega):
        zeta = om / (k * w)
        zf = complex(z_mpmath(zeta))
        chi_t = sp.plasma_frequency**2 / om**2 * zeta * zf
        chi_l = (1 + zeta * zf) / (k * k * lam2)
        assert abs(e1 @ chi[n] @ e1 - chi_t) <= 1e-12 * abs(chi_t)
        assert abs(chi[n, 1, 1] - chi_t) <= 1e-12 * abs(chi_t)
        assert abs(khat @ chi[n] @ khat - chi_l) <= 1e-12 * abs(chi_l)
        assert abs(e1 @ chi[n] @ khat) <= 1e-13 * abs(chi_t)


def cold_fluid_chi(sp: Species, omega: complex, kvec: np.ndarray) -> np.ndarray:
    """Cold drifting fluid: −i(ω − k·V) m u = q (E + V × δB), δB = k×E/ω;
    n1 = n0 k·u/(ω − k·V); J = q(n0 u + n1 V); χ = iJ/(ε0 ω E)
    (Krall & Trivelpiece 1973, ch. 4; Stix 1992, ch. 1 for V = 0; from memory)."""
    vvec = np.array([0.0, 0.0, sp.drift])
    wd = omega - kvec @ vvec
    chi = np.zeros((3, 3), dtype=complex)
    for j in range(3):
        e = np.zeros(3)
        e[j] = 1.0
        db = np.cross(kvec, e) / omega
        u = sp.charge * (e + np.cross(vvec, db)) / (-1j * wd * sp.mass)
        n1 = sp.density * (kvec @ u) / wd
        jcur = sp.charge * (sp.density * u + n1 * vvec)
        chi[:, j] = 1j * jcur / (EPS0 * omega)
    return chi


@pytest.mark.parametrize("angle", [0.0, 30.0, 90.0, 150.0])
def test_cold_limit(angle: float) -> None:
    # Source: cold-plasma ε = 1 − Σ ω_ps²/ω² (Stix 1992, ch. 1) and the cold-beam
    # tensor from the cold fluid equations (Krall & Trivelpiece 1973, from memory).
    t = 1e-8  # eV: thermal corrections (k w/ω)² ~ 1e-13
    k = 40.0
    th = np.radians(angle)
    kvec = np.array([k * np.sin(th), 0.0, k * np.cos(th)])
    omega = np.array([4e9 + 1e9j, 9e9 - 2e8j, 2e8 + 3e7j])
    for sp in [electron(t, t), proton(t, t), electron(t, 3 * t, 2e6), proton(2 * t, t, -3e5)]:
        chi = em_unmagnetized.susceptibility(omega, sp, k_par=kvec[2], k_perp=kvec[0]).value
        for n, om in enumerate(omega):
            ref = cold_fluid_chi(sp, om, kvec)
            if sp.drift == 0.0:
                np.testing.assert_allclose(
                    ref, -(sp.plasma_frequency**2) / om**2 * np.eye(3), rtol=1e-13, atol=0
                )
            assert np.abs(chi[n] - ref).max() <= 1e-8 * np.abs(ref).max(), (sp, om)


def test_es_is_longitudinal_part_of_em() -> None:
    # Source: exact identity k̂·χ·k̂ = χ_ES (charge continuity; common practice),
    # random complex ω, angles, drifts, anisotropies, seeded.
    rng = np.random.default_rng(RNG_SEED + 1)
    for _ in range(40):
        sp = Species(
            "s",
            rng.choice([-1.0, 1.0, 2.0]),
            rng.choice([M_ELECTRON, M_PROTON, 4 * M_PROTON]),
            10 ** rng.uniform(14, 19),
            10 ** rng.uniform(-1, 2),
            10 ** rng.uniform(-1, 2),
            rng.normal() * 1e5 * (1 if rng.random() < 0.7 else 0),
        )
        k = 10 ** rng.uniform(2, 5)
        th = rng.uniform(0, np.pi)
        kpar, kperp = k * np.cos(th), k * np.sin(th)
        kap = kappa_of(sp, kpar, kperp)
        omega = kpar * sp.drift + kap * (rng.normal(size=5) * 3 + 1j * rng.normal(size=5) * 2)
        em = em_unmagnetized.susceptibility(omega, sp, k_par=kpar, k_perp=kperp).value
        es = es_unmagnetized.susceptibility(omega, sp, k_par=kpar, k_perp=kperp).value
        khat = np.array([np.sin(th), 0.0, np.cos(th)])
        lon = np.einsum("i,...ij,j->...", khat, em, khat)
        scale = np.abs(em).max(axis=(-2, -1))
        np.testing.assert_array_less(np.abs(lon - es), 1e-12 * np.maximum(np.abs(es), 1e-3 * scale))


def test_weibel_kernel_k_along_z() -> None:
    # Source: Weibel, Phys. Rev. Lett. 2, 83 (1959) (from memory):
    # χ_yy = (ω_p²/ω²)[−1 + (T⊥/T∥)(1 + ζZ(ζ))], ζ = ω/(k w∥), k ∥ z.
    sp = electron(1.0, 4.0)
    k = 2e3
    omega = np.array([1e7j, 3e8 + 2e8j, 5e8 - 1e8j])
    chi = em_unmagnetized.susceptibility(omega, sp, k_par=k, k_perp=0.0).value
    for n, om in enumerate(omega):
        zeta = om / (k * sp.thermal_speed_par)
        ref = sp.plasma_frequency**2 / om**2 * (-1 + 4.0 * (1 + zeta * complex(z_mpmath(zeta))))
        assert abs(chi[n, 0, 0] - ref) <= 1e-12 * abs(ref)
        assert abs(chi[n, 1, 1] - ref) <= 1e-12 * abs(ref)


def test_reflection_symmetry_of_builders() -> None:
    # Source: mirror symmetry z → −z (common practice): χ(−k∥, −V) = P χ(k∥, V) P,
    # P = diag(1, 1, −1).
    sp = electron(1.5, 3.5, 7e5)
    sp_m = electron(1.5, 3.5, -7e5)
    omega = np.array([1e9 + 4e8j, -2e9 + 1e8j, 5e8 - 6e8j])
    p = np.diag([1.0, 1.0, -1.0])
    a = em_unmagnetized.susceptibility(omega, sp, k_par=3e3, k_perp=2e3).value
    b = em_unmagnetized.susceptibility(omega, sp_m, k_par=-3e3, k_perp=2e3).value
    np.testing.assert_allclose(b, p @ a @ p, rtol=1e-13, atol=1e-13 * np.abs(a).max())


def fd_derivative(f, x: complex, h: complex) -> complex:
    """8th-order central difference (common practice)."""
    c = [4 / 5, -1 / 5, 4 / 105, -1 / 280]
    return sum(cj * (f(x + (j + 1) * h) - f(x - (j + 1) * h)) for j, cj in enumerate(c)) / h


@pytest.mark.parametrize("module", [es_unmagnetized, em_unmagnetized])
def test_builder_derivative_against_finite_difference(module) -> None:
    # Source: Cauchy-Riemann (common practice): the analytic ∂χ/∂ω equals the
    # finite-difference derivative along both the real and the imaginary direction.
    sp = electron(2.0, 4.0, 3e5)
    kpar, kperp = 5e3, 3e3
    kap = kappa_of(sp, kpar, kperp)
    for zoff in [0.4 + 0.3j, 2.5 - 0.5j, 8.0 + 1.0j]:
        om = kpar * sp.drift + kap * zoff
        res = module.susceptibility(np.array(om), sp, k_par=kpar, k_perp=kperp)

        def f(x):
            return module.susceptibility(np.array(x), sp, k_par=kpar, k_perp=kperp).value

        h = 1e-3 * abs(kap)
        for step in (h, 1j * h):
            fd = fd_derivative(f, om, step)
            assert np.abs(res.derivative - fd).max() <= 1e-8 * np.abs(res.derivative).max()


def test_complex_k_is_continuation_from_real_k() -> None:
    # Source: analyticity in k on Re k > 0 (common practice): the value at complex k
    # equals the Taylor extrapolation from real k, using finite differences in k.
    sp = electron(2.0, 2.0, 1e5)
    th = np.radians(50.0)
    om = np.array(3e9 + 0j)

    def chi(k: complex) -> complex:
        return complex(
            es_unmagnetized.susceptibility(
                om, sp, k_par=k * np.cos(th), k_perp=k * np.sin(th)
            ).value
        )

    k0 = 2e4
    dk = 50.0j  # small imaginary part
    h = 20.0
    d1 = fd_derivative(chi, k0, h)
    d2 = (chi(k0 + h) - 2 * chi(k0) + chi(k0 - h)) / h**2
    approx = chi(k0) + d1 * dk + d2 * dk**2 / 2
    assert abs(chi(k0 + dk) - approx) <= 1e-6 * abs(chi(k0))


def test_nan_and_zero_k_give_non_finite() -> None:
    # Source: contract (common practice): never a finite wrong number.
    sp = electron()
    r = em_unmagnetized.susceptibility(np.array([np.nan + 0j]), sp, k_par=1e3, k_perp=0.0)
    assert not np.isfinite(r.value).any()
    r = es_unmagnetized.susceptibility(np.array([1e9 + 0j]), sp, k_par=0.0, k_perp=0.0)
    assert not np.isfinite(r.value).any()


def test_broadcast_over_k() -> None:
    # Source: builder contract (DEVELOPERS.md: builders broadcast ω against k).
    sp = electron(1.0, 2.0, 1e5)
    k = np.array([1e3, 2e3 + 10j, 5e3])
    om = np.array([1e9 + 1e8j])
    res = em_unmagnetized.susceptibility(om, sp, k_par=0.6 * k, k_perp=0.8 * k)
    assert res.value.shape == (3, 3, 3)
    for n, kn in enumerate(k):
        one = em_unmagnetized.susceptibility(om, sp, k_par=0.6 * kn, k_perp=0.8 * kn)
        np.testing.assert_allclose(res.value[n], one.value[0], rtol=1e-15)


# ------------------------------------------------------------- scaled tensor near ω = 0
def _mp_chi_em(omega: complex, sp: Species, k_par: float, k_perp: float) -> mp.matrix:
    """χ_ij = (ω_p²/ω²) B_ij of the em_unmagnetized docstring (Krall & Trivelpiece 1973,
    ch. 9, from memory) evaluated term by term in mpmath, Z from erfc."""
    wpar2 = 2 * mp.mpf(sp.temperature_par) * mp.mpf(EV) / mp.mpf(sp.mass)
    wperp2 = 2 * mp.mpf(sp.temperature_perp) * mp.mpf(EV) / mp.mpf(sp.mass)
    kpar, kperp, v = mp.mpf(k_par), mp.mpf(k_perp), mp.mpf(sp.drift)
    kap2 = kperp**2 * wperp2 + kpar**2 * wpar2
    kap = mp.sqrt(kap2)
    zeta = (mp.mpc(omega) - kpar * v) / kap
    zf = z_mpmath(zeta)
    m1 = -(1 + zeta * zf)
    m = [-zf, m1, zeta * m1, -mp.mpf(1) / 2 + zeta**2 * m1]
    beta = [kperp * wperp2 / kap, 0, kpar * wpar2 / kap]
    vv = [0, 0, v]
    aniso = (wpar2 - wperp2) * kperp * kpar / (2 * kap2)
    g = [aniso * kpar, 0, -aniso * kperp]
    e = [kpar, 0, -kperp]
    q = (kpar**2 + kperp**2) / kap2
    wp2 = mp.mpf(sp.density) * mp.mpf(1.602176634e-19) ** 2 / (mp.mpf(EPS0) * mp.mpf(sp.mass))
    out = mp.matrix(3, 3)
    for i in range(3):
        for j in range(3):
            c = wperp2 * wpar2 / (2 * kap2) * e[i] * e[j] + (wperp2 / 2 if i == j == 1 else 0)
            b = -(1 if i == j else 0) - 2 * (
                q * (beta[i] * beta[j] * m[3] + (beta[i] * vv[j] + vv[i] * beta[j]) * m[2]
                     + vv[i] * vv[j] * m[1] + c * m[1])
                + (g[j] * (beta[i] * m[1] + vv[i] * m[0]) + g[i] * (beta[j] * m[1] + vv[j] * m[0]))
                / kap)
            out[i, j] = wp2 / mp.mpc(omega) ** 2 * b
    return out


@pytest.mark.parametrize("angle", [0.0, 35.0, 90.0, 140.0])
def test_scaled_d_near_zero_against_mpmath(angle: float) -> None:
    # Source: the closed form χ_ij = (ω_p²/ω²)B_ij (Krall & Trivelpiece 1973, ch. 9, from
    # memory) evaluated in mpmath at 40 digits (Z via erfc, Fried & Conte 1961), where
    # the cancellations near ω = 0 are harmless; compared with Dispersion's scaled matrix
    # S = diag(w, w, 1) R Λ Rᵀ diag(w, w, 1) and D = det S at ω = 1e-3 F and 1e-5 F
    # (F the slowest frequency scale), anisotropic and drifting electrons and protons.
    from itertools import permutations

    from kinroots.physics.dispersion import Dispersion
    from kinroots.physics.plasma import C_LIGHT, Plasma

    sps = (electron(2.0, 5.0, 4e5), proton(0.5, 0.2, -1e5))
    wpe = sps[0].plasma_frequency
    k = 0.4 * wpe / sps[0].thermal_speed_par
    disp = Dispersion(Plasma(sps), k=k, angle_deg=angle, model="em", omega_ref=wpe)
    k_par, k_perp = disp.k_par.real, disp.k_perp.real
    for frac in (1e-3, 1e-5):
        om = disp.frequency_scale * frac * (1.0 - 0.4j)
        got, _ = disp._scaled(np.array([om]))
        d = disp.value(np.array([om]))[0]
        with mp.workdps(40):
            chi = mp.eye(3)
            for sp in sps:
                chi += _mp_chi_em(om, sp, k_par, k_perp)
            # the frame of the builders: e₁ = (k∥, 0, −k⊥)/|k|, k̂ = (k⊥, 0, k∥)/|k|
            kk = mp.sqrt(mp.mpf(k_par) ** 2 + mp.mpf(k_perp) ** 2)
            cos, sin = mp.mpf(k_par) / kk, mp.mpf(k_perp) / kk
            rot = mp.matrix([[cos, 0, -sin], [0, 1, 0], [sin, 0, cos]])
            lam = rot * chi * rot.T
            w = mp.mpc(om) / wpe
            dg = [w, w, 1]
            n2 = (mp.mpf(disp.k.real) * mp.mpf(C_LIGHT) / wpe) ** 2
            s = mp.matrix(3, 3)
            for i in range(3):
                for j in range(3):
                    s[i, j] = dg[i] * lam[i, j] * dg[j] - (n2 if i == j < 2 else 0)
            d_ref = complex(mp.det(s))
            ref = np.array([[complex(s[i, j]) for j in range(3)] for i in range(3)])
        tol = 1e-13 * np.maximum(np.abs(ref), 1e-3 * np.abs(ref).max(axis=1, keepdims=True))
        assert np.all(np.abs(got[0] - ref) <= tol), (frac, np.abs(got[0] - ref) / np.abs(ref))
        terms = max(abs(np.prod([ref[i, p[i]] for i in range(3)])) for p in permutations(range(3)))
        assert abs(d - d_ref) <= 1e-12 * terms, (frac, abs(d - d_ref) / terms)


# --------------------------------------------------------------------------- fast paths
def test_first_moment_against_mpmath_array_and_scalar() -> None:
    # Source: Fried & Conte (1961), M_1 = -(1 + ζZ), dM_1/dζ = -Z - 2ζM_1; Z from mpmath
    # erfc at 40 digits. Both the array path (first_moment, every region and the split of
    # the series region) and the one-point Python path (first_moment_scalar).
    rng = np.random.default_rng(RNG_SEED + 1)
    radii = np.concatenate([rng.uniform(0, 2, 20), rng.uniform(2, 7, 30), rng.uniform(7, 20, 20),
                            rng.uniform(20, 300, 20)])
    zeta = radii * np.exp(1j * rng.uniform(-np.pi, np.pi, radii.size))
    # keep the Landau term representable: y² - x² below the overflow threshold
    zeta = zeta[(zeta.imag**2 - zeta.real**2) < 600.0]
    zeta = np.concatenate([zeta, [7.0, -9.5, 3.0, 20.0, 25.0 - 0j, 1e3 + 0.5j, 0j]])
    with np.errstate(all="ignore"):
        m1, dm1 = es_unmagnetized.first_moment(zeta)
    with mp.workdps(40):
        for i, z in enumerate(zeta):
            zz = mp.mpc(z)
            zf = z_mpmath(z)
            ref = complex(-(1 + zz * zf))
            dref = complex(-zf + 2 * zz * (1 + zz * zf))
            sm1, sdm1 = es_unmagnetized.first_moment_scalar(complex(z))
            for got, dgot in ((m1[i], dm1[i]), (sm1, sdm1)):
                assert abs(got - ref) <= 1e-12 * abs(ref), z
                assert abs(dgot - dref) <= 1e-11 * abs(dref), z


@pytest.mark.parametrize("n_omega", [1, 3, 50])
def test_species_sum_equals_builder_sum(n_omega: int) -> None:
    # Source: the builder itself (an identity): SpeciesSum caches the k-dependent
    # constants and evaluates every species in one pass (point by point in Python for
    # few ω); it must equal Σ_s of susceptibility() to rounding, drift and anisotropy
    # included, in both half-planes of ω.
    species = (electron(2.0, 3.0, drift=3e5), proton(0.5, 0.8, drift=-1e4),
               Species("a", 2, 4 * M_PROTON, 1e15, 1.0, 1.0))
    k_par, k_perp = 2.0e3, 1.1e3
    rng = np.random.default_rng(RNG_SEED + n_omega)
    wpe = species[0].plasma_frequency
    omega = (rng.uniform(-3, 3, n_omega) + 1j * rng.uniform(-0.5, 0.5, n_omega)) * wpe
    summed = es_unmagnetized.SpeciesSum.for_species(species, k_par=k_par, k_perp=k_perp)
    assert summed is not None
    value, derivative = summed(omega)
    ref_v = sum(es_unmagnetized.susceptibility(omega, s, k_par=k_par, k_perp=k_perp).value
                for s in species)
    ref_d = sum(es_unmagnetized.susceptibility(omega, s, k_par=k_par, k_perp=k_perp).derivative
                for s in species)
    np.testing.assert_allclose(value, ref_v, rtol=1e-13)
    np.testing.assert_allclose(derivative, ref_d, rtol=1e-13)
    collisional = Species("c", -1, M_ELECTRON, 1e16, 2.0, 2.0, collision_frequency=1e6)
    assert es_unmagnetized.SpeciesSum.for_species(
        (*species, collisional), k_par=k_par, k_perp=k_perp) is None


# Species of one shift k∥V (no drift), of very different temperatures: the one-point path
# sums the cold ones (|ζ| ≥ 7) as one series; plus a drifting species, its own shift.
SHIFT_GROUP = (electron(), proton(), Species("ar", 1, 40 * M_PROTON, 2e15, 0.05, 0.05),
               Species("b", 1, M_PROTON, 1e15, 0.3, 0.3, drift=2e5))
K_GROUP = (2.0e3, 1.1e3)


def _group_points(target: int, radii: list[float], angles: list[float]) -> list[complex]:
    """ω with |ζ| = r of species ``target`` of SHIFT_GROUP, at angles arg ζ, where the
    Landau term of every species stays representable (y² − x² < 600 for each ζ)."""
    kappas = [kappa_of(s, *K_GROUP) for s in SHIFT_GROUP]
    shift = K_GROUP[0] * SHIFT_GROUP[target].drift
    out = []
    for r in radii:
        for a in angles:
            w = shift + r * kappas[target] * complex(np.cos(a), np.sin(a))
            zetas = [(w - K_GROUP[0] * s.drift) / kp
                     for s, kp in zip(SHIFT_GROUP, kappas, strict=True)]
            if all(z.imag**2 - z.real**2 < 600.0 for z in zetas):
                out.append(w)
    return out


def test_species_sum_one_point_series_of_a_shift_group_against_mpmath() -> None:
    # Source: M_1 = -(1 + ζZ), dM_1/dζ = -Z - 2ζM_1 (Fried & Conte 1961), Z from mpmath
    # erfc (DLMF 7.2.3) at 30 digits plus 3 per decade of |ζ|. χ_s = c_s M_1(ζ_s) with
    # c_s = -2ω_ps²/κ_s² (see susceptibility()). The one-point path sums the protons and
    # the argon ions (|ζ| ≥ 7, same shift) as one series whose term count comes from the
    # protons' |ζ|: checked just above the integers where that count changes (its
    # tightest points), across the series region's edge (|ζ_p| = 7) and far beyond, in
    # both half-planes, with the Landau terms of every species.
    summed = es_unmagnetized.SpeciesSum.for_species(SHIFT_GROUP, k_par=K_GROUP[0],
                                                    k_perp=K_GROUP[1])
    assert summed is not None
    radii = [6.999, 7.0 * (1 + 1e-13), 8.0 * (1 + 1e-13), 9.5, 10.0 * (1 + 1e-13),
             13.0 * (1 + 1e-13), 21.0 * (1 + 1e-13), 40.0, 1023.9, 1024.0 * (1 + 1e-13), 5e3]
    angles = [0.0, 0.3, 0.5 * np.pi, np.pi - 0.05, -1e-3, -0.1, -0.6, -np.pi + 0.2]
    points = _group_points(1, radii, angles)
    assert len(points) > 60
    kappas = [kappa_of(s, *K_GROUP) for s in SHIFT_GROUP]
    for w in points:
        got_v, got_d = summed.scalar_sum(np.array([w]))
        terms_v = []
        terms_d = []
        with mp.workdps(30 + 3 * int(np.log10(abs(w) / abs(kappas[2]) + 1.0))):
            for s, kp in zip(SHIFT_GROUP, kappas, strict=True):
                coef = -2.0 * mp.mpf(s.plasma_frequency) ** 2 / mp.mpc(kp) ** 2
                # ζ rounded to double as the code forms it (the functions are compared
                # at the same argument; χ is well conditioned in ζ)
                zeta = mp.mpc((w - K_GROUP[0] * s.drift) / kp)
                zf = z_mpmath(zeta)
                m1 = -(1 + zeta * zf)
                terms_v.append(coef * m1)
                terms_d.append(coef / mp.mpc(kp) * (-zf - 2 * zeta * m1))
            ref_v, ref_d = sum(terms_v), sum(terms_d)
            scale_v = max(abs(t) for t in terms_v)
            scale_d = max(abs(t) for t in terms_d)
            assert abs(mp.mpc(got_v[0]) - ref_v) <= 1e-14 * scale_v, (w, float(
                abs(mp.mpc(got_v[0]) - ref_v) / scale_v))
            assert abs(mp.mpc(got_d[0]) - ref_d) <= 1e-13 * scale_d, w


@pytest.mark.parametrize("bits", [0.0, 300.0, float("inf")])
def test_species_sum_one_point_series_equals_the_species_by_species_sum(bits: float) -> None:
    # Identity: merging the series of the species of one shift reorders the sum of each
    # species' series (first_moment_scalar, checked against mpmath above) and leaves
    # their Landau terms (under any landau_shift, dropped at inf) as they were. Points
    # where the electrons, the protons or only the argon ions head the merged series;
    # complex k (κ complex: no merging) as well.
    from kinroots.physics.zfunc import landau_shift

    points = (_group_points(0, [7.0 * (1 + 1e-13), 9.0, 30.0], [0.2, -0.02, -0.5])
              + _group_points(1, [3.0, 7.5, 60.0], [0.0, -0.05, 2.0, -2.9])
              + _group_points(2, [7.2, 100.0], [0.1, -0.1]))
    for k_par, k_perp in (K_GROUP, (2.0e3 + 30.0j, 1.1e3 - 5.0j)):
        summed = es_unmagnetized.SpeciesSum.for_species(SHIFT_GROUP, k_par=k_par,
                                                        k_perp=k_perp)
        assert summed is not None
        constants = summed._scalar_constants
        with landau_shift(bits):
            for w in points:
                got_v, got_d = summed.scalar_sum(np.array([w]))
                parts = [es_unmagnetized.first_moment_scalar((w - shift) / kappa)
                         for shift, kappa, _, _ in constants]
                ref_v = sum(c[2] * p[0] for c, p in zip(constants, parts, strict=True))
                ref_d = sum(c[3] * p[1] for c, p in zip(constants, parts, strict=True))
                scale_v = max(abs(c[2] * p[0]) for c, p in zip(constants, parts, strict=True))
                scale_d = max(abs(c[3] * p[1]) for c, p in zip(constants, parts, strict=True))
                assert abs(got_v[0] - ref_v) <= 2e-15 * scale_v, (w, bits)
                assert abs(got_d[0] - ref_d) <= 2e-15 * scale_d, (w, bits)
