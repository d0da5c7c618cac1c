"""Tests of the magnetized susceptibility builders (es_magnetized, em_magnetized).

Every check compares with something outside the code under test: a published limit or
closed form (source named beside it), an identity, or an independent mpmath / scipy
recomputation written here from its own formula.
"""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest
from scipy.special import iv, wofz

from kinroots.physics.models import _harmonics
from kinroots.physics.models import em_magnetized as em
from kinroots.physics.models import es_magnetized as es
from kinroots.physics.plasma import EPS0, M_ELECTRON, M_PROTON, Species

M_ALPHA = 6.6446573357e-27  # alpha-particle mass [kg] (CODATA 2018)

ELECTRON = Species("e", -1, M_ELECTRON, 1.1e19, 100.0, 100.0)
PROTON = Species("p", 1, M_PROTON, 0.9e19, 50.0, 120.0)
ALPHA = Species("a", 2, M_ALPHA, 0.1e19, 200.0, 200.0, drift=3.0e5)
THREE = (ELECTRON, PROTON, ALPHA)
B0 = 1.0


def z_scipy(zeta):
    """Z(ζ) = i√π w(ζ) from scipy's Faddeeva function (Fried & Conte 1961)."""
    return 1j * np.sqrt(np.pi) * wofz(zeta)


def eps_tensor(omega, species, *, k_par, k_perp, B, tol=1e-14):
    out = np.eye(3, dtype=complex) + 0j
    for s in species:
        out = out + em.susceptibility(omega, s, k_par=k_par, k_perp=k_perp, B=B, tol=tol).value
    return out


def khat_chi_khat(chi, k_par, k_perp):
    k = np.array([k_perp, 0.0, k_par], dtype=complex)
    k2 = k_perp**2 + k_par**2
    return np.einsum("i,...ij,j->...", k, chi, k) / k2


# --------------------------------------------------------------------------- cold limit
def test_cold_limit_is_stix_sdp():
    """Cold limit: ε = [[S, −iD, 0], [iD, S, 0], [0, 0, P]].

    Source: T. H. Stix, Waves in Plasmas (1992), eqs. 1-19 to 1-21 (S, D, P), from memory.
    T = 1e-6 eV at k = 0.5 /m: k⊥ρ_e < 1e-7 and |ζ| > 5e4, thermal corrections < 1e-9.
    """
    cold = (
        Species("e", -1, M_ELECTRON, 1e18, 1e-6, 1e-6),
        Species("p", 1, M_PROTON, 1e18, 1e-6, 1e-6),
    )
    B = 0.1
    omega = np.array([3e9 + 1e7j, 1.3e10 + 2e7j, 2.0e7 + 1e5j])
    for theta in (0.3, 0.7, 1.4):
        k_par, k_perp = 0.5 * np.cos(theta), 0.5 * np.sin(theta)
        eps = eps_tensor(omega, cold, k_par=k_par, k_perp=k_perp, B=B)
        S = 1.0 + 0j
        D = 0.0 + 0j
        P = 1.0 + 0j
        for s in cold:
            wp2, om_c = s.plasma_frequency**2, s.cyclotron_frequency(B)
            S = S - wp2 / (omega**2 - om_c**2)
            D = D + om_c * wp2 / (omega * (omega**2 - om_c**2))
            P = P - wp2 / omega**2
        ref = np.zeros_like(eps)
        ref[:, 0, 0] = ref[:, 1, 1] = S
        ref[:, 0, 1] = -1j * D
        ref[:, 1, 0] = 1j * D
        ref[:, 2, 2] = P
        scale = np.abs(ref).max(axis=(1, 2))[:, None, None]
        assert np.all(np.abs(eps - ref) <= 1e-8 * scale)
        for i, j in ((0, 0), (0, 1), (2, 2)):
            assert np.allclose(eps[:, i, j], ref[:, i, j], rtol=1e-8, atol=0)


# ------------------------------------------------------------ electrostatic consistency
def test_es_equals_longitudinal_part_of_em():
    """k̂·χ·k̂ of the tensor equals the separately derived electrostatic χ.

    Source: common practice (χ_ES = k·χ·k/k² from continuity and E = −ik φ; Stix 1992,
    ch. 11, from memory). Random complex ω, angles (both signs of k∥, k∥ = 0), drifts,
    anisotropies, B of both signs.
    """
    rng = np.random.default_rng(20240611)
    for _ in range(12):
        sp = Species(
            "x",
            rng.choice([-1.0, 1.0, 2.0]),
            rng.choice([M_ELECTRON, M_PROTON]),
            1e18,
            rng.uniform(5, 200),
            rng.uniform(5, 200),
            drift=0.0,
        )
        w = sp.thermal_speed_par
        sp = Species(
            sp.name, sp.charge_number, sp.mass, sp.density, sp.temperature_par,
            sp.temperature_perp, drift=rng.uniform(-2, 2) * w,
        )
        B = rng.choice([-1.0, 1.0]) * rng.uniform(0.05, 2.0)
        om_c = abs(sp.cyclotron_frequency(B))
        k = rng.uniform(0.2, 3.0) * om_c / w
        theta = rng.choice([rng.uniform(0.05, 3.1), np.pi / 2])
        k_par, k_perp = k * np.cos(theta), k * np.sin(theta)
        if theta == np.pi / 2:
            k_par = 0.0
        omega = om_c * (rng.uniform(-3, 3, 5) + 1j * rng.uniform(-0.3, 1.0, 5))
        chi = em.susceptibility(omega, sp, k_par=k_par, k_perp=k_perp, B=B).value
        ref = es.susceptibility(omega, sp, k_par=k_par, k_perp=k_perp, B=B).value
        got = khat_chi_khat(chi, k_par, k_perp)
        assert np.allclose(got, ref, rtol=1e-12, atol=1e-12 * np.abs(ref).max())


# ----------------------------------------------------------------- parallel propagation
def test_parallel_propagation_matches_closed_form():
    """k⊥ = 0: only n = 0 (zz) and n = ±1 (xx, xy) contribute.

    Source: S. P. Gary, Theory of Space Plasma Microinstabilities (1993), ch. 7, the
    parallel drifting bi-Maxwellian (from memory):
    χ_± = (ω_p²/ω²)[(ω − k∥V)/(k∥w∥) Z(ζ_∓1) + (T⊥/T∥ − 1)(1 + ζ_∓1 Z(ζ_∓1))],
    ζ_n = (ω − k∥V − nΩ)/(k∥w∥); ε_xx = 1 + Σ(χ_R + χ_L)/2, ε_xy = −iΣ(χ_R − χ_L)/2
    (Stix 1992, eq. 1-19, R/L/D, from memory); χ_zz = (2ω_p²/(k∥²w∥²))(1 + ζ_0 Z(ζ_0)).
    Z here from scipy.special.wofz (not kinroots.physics.zfunc).
    """
    k_par = 400.0
    omega = PROTON.cyclotron_frequency(B0) * np.array([0.7 + 0.05j, 1.3 - 0.02j, 2.2 + 0.3j])
    for kp in (k_par, -k_par):
        total = eps_tensor(omega, THREE, k_par=kp, k_perp=0.0, B=B0)
        ref = np.zeros((omega.size, 3, 3), dtype=complex)
        ref[:, 0, 0] = ref[:, 1, 1] = ref[:, 2, 2] = 1.0
        for s in THREE:
            r = em.susceptibility(omega, s, k_par=kp, k_perp=0.0, B=B0)
            assert r.harmonics == 1
            # kp < 0 is the same wave for the species drifting the other way, mirrored
            sgn = 1.0 if kp > 0 else -1.0
            kk, V = abs(kp), sgn * s.drift
            wp2, om_c, w = s.plasma_frequency**2, s.cyclotron_frequency(B0), s.thermal_speed_par
            A = s.temperature_perp / s.temperature_par - 1.0

            def chi_pm(n, kk=kk, V=V, wp2=wp2, om_c=om_c, w=w, A=A):
                zeta = (omega - kk * V - n * om_c) / (kk * w)
                z = z_scipy(zeta)
                return wp2 / omega**2 * ((omega - kk * V) / (kk * w) * z + A * (1 + zeta * z))

            chi_r, chi_l = chi_pm(-1), chi_pm(+1)
            ref[:, 0, 0] += 0.5 * (chi_r + chi_l)
            ref[:, 1, 1] += 0.5 * (chi_r + chi_l)
            ref[:, 0, 1] += -0.5j * (chi_r - chi_l)
            ref[:, 1, 0] += 0.5j * (chi_r - chi_l)
            z0 = (omega - kk * V) / (kk * w)
            ref[:, 2, 2] += 2 * wp2 / (kk * w) ** 2 * (1 + z0 * z_scipy(z0))
        scale = np.abs(ref).max()
        assert np.allclose(total, ref, rtol=1e-11, atol=1e-11 * scale)
        assert np.all(total[:, 0, 2] == 0) and np.all(total[:, 1, 2] == 0)


# ----------------------------------------------------------------------------- B → 0
def test_b_to_zero_approaches_unmagnetized():
    """B → 0 at fixed ω (Im ω > 0), k: magnetized → unmagnetized builders.

    Source: common practice (for Im ω > 0 the orbit integral converges to the
    straight-line one as Ω → 0). EM corrections are first order in Ω/ω (gyrotropy,
    Stix's D ∝ Ω), ES corrections second order (χ_ES is even in B).
    """
    from kinroots.physics.models import em_unmagnetized as emu
    from kinroots.physics.models import es_unmagnetized as esu
    sp = Species("e", -1, M_ELECTRON, 1e18, 10.0, 30.0, drift=2e6)
    w, wp = sp.thermal_speed_par, sp.plasma_frequency
    omega = np.array([wp * (1.2 + 0.3j), wp * (0.4 + 0.5j)])
    k = wp / w
    k_par, k_perp = k * np.cos(0.6), k * np.sin(0.6)
    u_em = emu.susceptibility(omega, sp, k_par=k_par, k_perp=k_perp).value
    u_es = esu.susceptibility(omega, sp, k_par=k_par, k_perp=k_perp).value
    d_em, d_es = [], []
    for B in (1e-2, 1e-3):
        assert abs(sp.cyclotron_frequency(B)) / abs(omega[0]) < 0.03
        r_em = em.susceptibility(omega, sp, k_par=k_par, k_perp=k_perp, B=B)
        r_es = es.susceptibility(omega, sp, k_par=k_par, k_perp=k_perp, B=B)
        d_em.append(np.abs(r_em.value - u_em).max() / np.abs(u_em).max())
        d_es.append(np.abs(r_es.value - u_es).max() / np.abs(u_es).max())
    assert d_em[1] < 2e-3 and d_es[1] < 2e-6
    assert 7 < d_em[0] / d_em[1] < 13  # ∝ B
    assert 70 < d_es[0] / d_es[1] < 130  # ∝ B²


# ------------------------------------------------------------------------- symmetries
def test_onsager_and_field_reversal_nondrifting():
    """Onsager: ε_ij(k, B) = ε_ji(−k, −B); with f even in v, ε(−k) = ε(k), so
    ε(k, −B) = ε(k, B)ᵀ, i.e. ε_xy = −ε_yx, ε_xz = ε_zx, ε_yz = −ε_zy with the B-odd
    parts flipping sign.

    Source: L. Onsager (1931); Landau & Lifshitz, Electrodynamics of Continuous Media,
    §103 (from memory); Stix 1992 ch. 10 (from memory). Common practice.
    """
    species = (ELECTRON, PROTON)
    omega = PROTON.cyclotron_frequency(B0) * np.array([1.3 + 0.1j, 2.6 - 0.05j])
    for k_par, k_perp in ((300.0, 600.0), (0.0, 800.0), (-250.0, 400.0)):
        e_p = eps_tensor(omega, species, k_par=k_par, k_perp=k_perp, B=B0)
        e_m = eps_tensor(omega, species, k_par=k_par, k_perp=k_perp, B=-B0)
        e_k = eps_tensor(omega, species, k_par=-k_par, k_perp=-k_perp, B=B0)
        scale = np.abs(e_p).max()
        assert np.allclose(e_m, np.swapaxes(e_p, -1, -2), atol=1e-12 * scale, rtol=0)
        assert np.allclose(e_k, e_p, atol=1e-12 * scale, rtol=0)
        assert np.allclose(e_p[:, 0, 1], -e_p[:, 1, 0], atol=1e-13 * scale)
        assert np.allclose(e_p[:, 0, 2], e_p[:, 2, 0], atol=1e-13 * scale)
        assert np.allclose(e_p[:, 1, 2], -e_p[:, 2, 1], atol=1e-13 * scale)


def test_mirror_symmetry_theta_to_pi_minus_theta():
    """z-mirror (B_z axial, unchanged): χ(k∥, V) = M χ(−k∥, −V) M, M = diag(1, 1, −1),
    so D(θ) = D(180° − θ) with V → −V. Checks the Landau continuation for k∥ < 0,
    including Im ω < 0. Source: common practice (reflection symmetry).
    """
    M = np.diag([1.0, 1.0, -1.0])
    flipped = Species("a", 2, M_ALPHA, 0.1e19, 200.0, 200.0, drift=-ALPHA.drift)
    omega = PROTON.cyclotron_frequency(B0) * np.array([0.8 + 0.05j, 1.7 - 0.2j, 2.9 - 0.6j])
    for sp, sp_f in ((ALPHA, flipped), (PROTON, PROTON)):
        a = em.susceptibility(omega, sp, k_par=300.0, k_perp=500.0, B=B0).value
        b = em.susceptibility(omega, sp_f, k_par=-300.0, k_perp=500.0, B=B0).value
        assert np.allclose(a, M @ b @ M, rtol=1e-13, atol=1e-13 * np.abs(a).max())
        xa = es.susceptibility(omega, sp, k_par=300.0, k_perp=500.0, B=B0).value
        xb = es.susceptibility(omega, sp_f, k_par=-300.0, k_perp=500.0, B=B0).value
        assert np.allclose(xa, xb, rtol=1e-13)


# ------------------------------------------------------------------ mpmath recomputation
def _poly_mul(p, q):
    out = [mp.mpf(0)] * (len(p) + len(q) - 1)
    for i, a in enumerate(p):
        for j, b in enumerate(q):
            out[i + j] += a * b
    return out


def _mp_species_tensor(omega, s: Species, k_par, k_perp, B, nmax):
    """χ_s from the Stix integral form, at mpmath precision.

    χ = (ω_p²/ω) Σ_n ∫d³v S_n/(ω − k∥v∥ − nΩ) with S_n built from
    U = ∂f/∂v⊥ + (k∥/ω)(v⊥∂f/∂v∥ − v∥∂f/∂v⊥), W = (1 − nΩ/ω)∂f/∂v∥ + (nΩv∥/(ωv⊥))∂f/∂v⊥
    (Stix 1992, eqs. 10-48, 10-57, from memory). Perpendicular averages by Weber's integral
    ⟨J_n²(bv⊥)⟩ = e^{−λ}I_n(λ) and its b-derivatives (Watson 1944, §13.31, from memory);
    parallel moments R_m = ⟨t^m/(t − ζ)⟩ by R_0 = Z, R_{m+1} = ζR_m + ⟨t^m⟩ with
    Z(ζ) = i√π exp(−ζ²) erfc(−iζ) (Fried & Conte 1961).
    """
    e = mp.mpf("1.602176634e-19")
    q = s.charge_number * e
    m = mp.mpf(s.mass)
    wpar = mp.sqrt(2 * mp.mpf(s.temperature_par) * e / m)
    wperp = mp.sqrt(2 * mp.mpf(s.temperature_perp) * e / m)
    V = mp.mpf(s.drift)
    om_c = q * mp.mpf(B) / m
    wp2 = mp.mpf(s.density) * q**2 / (mp.mpf(EPS0) * m)
    kpar, kperp = mp.mpf(k_par), mp.mpf(k_perp)
    w = mp.mpc(omega)
    b = kperp / om_c
    lam = b**2 * wperp**2 / 2
    moments_t = [mp.mpf(1), mp.mpf(0), mp.mpf(1) / 2, mp.mpf(0), mp.mpf(3) / 4]
    chi = mp.matrix(3, 3)
    u_poly = [V, wpar]  # u = V + w∥ t
    for n in range(-nmax, nmax + 1):
        In = mp.besseli(n, lam)
        gam = mp.exp(-lam) * In
        dgam = mp.exp(-lam) * ((mp.besseli(n - 1, lam) + mp.besseli(n + 1, lam)) / 2 - In)
        a_xx = n**2 * gam / b**2  # ⟨v⊥²(nJ_n/z)²⟩
        a_xy = (n / b) * (b * wperp**2 / 2) * dgam  # ⟨v⊥²(nJ_n/z)J_n'⟩
        a_yy = wperp**2 / 2 * (n**2 * gam / lam - 2 * lam * dgam)  # ⟨v⊥²J_n'²⟩
        b1 = (n / b) * gam  # ⟨v⊥ (nJ_n/z) J_n / v⊥⟩ · v⊥ → (n/b)Γ_n
        b2 = b * wperp**2 / 2 * dgam  # ⟨v⊥ J_n J_n'⟩
        zeta = (w - kpar * V - n * om_c) / (kpar * wpar)
        Z = 1j * mp.sqrt(mp.pi) * mp.exp(-(zeta**2)) * mp.erfc(-1j * zeta)
        R = [Z]
        for j in range(4):
            R.append(zeta * R[-1] + moments_t[j])

        def par(poly, R=R):  # ∫F∥ g(u)/(ω − k∥u − nΩ) du for g = Σ c_m t^m
            return -sum(c * R[i] for i, c in enumerate(poly)) / (kpar * wpar)

        G = [(w - kpar * V) / wperp**2, -kpar * wpar / wperp**2 + kpar / wpar]
        H = [n * om_c * V / wperp**2, (w - n * om_c) / wpar + n * om_c * wpar / wperp**2]
        iG, iuG = par(G), par(_poly_mul(u_poly, G))
        iH, iuH = par(H), par(_poly_mul(u_poly, H))
        f = -2 / w  # v⊥U = f v⊥² G F, v⊥W = f v⊥ H F, v∥U = f u v⊥ G F, v∥W = f u H F
        chi[0, 0] += f * a_xx * iG
        chi[0, 1] += 1j * f * a_xy * iG
        chi[1, 0] += -1j * f * a_xy * iG
        chi[1, 1] += f * a_yy * iG
        chi[0, 2] += f * b1 * iH
        chi[1, 2] += -1j * f * b2 * iH
        chi[2, 0] += f * b1 * iuG
        chi[2, 1] += 1j * f * b2 * iuG
        chi[2, 2] += f * gam * iuH
    return chi * wp2 / w


def test_perpendicular_bessel_averages_by_quadrature():
    """⟨v⊥J_nJ_n'⟩ = (bw⊥²/2)Γ_n' and ⟨v⊥²J_n'²⟩ = (w⊥²/2)(n²Γ_n/λ − 2λΓ_n') over the
    Maxwellian F⊥ = exp(−v²/w²)/(πw²), by mpmath quadrature (identities used by the
    mpmath tensor below; Watson 1944 §13.31, from memory)."""
    with mp.workdps(25):
        wp, bb = mp.mpf(1), mp.mpf("1.7")
        lam = bb**2 * wp**2 / 2
        def avg(g):
            return mp.quad(lambda v: 2 * v * mp.exp(-(v**2) / wp**2) / wp**2 * g(v), [0, 3, 12])

        for n in (1, 3):
            gam = mp.exp(-lam) * mp.besseli(n, lam)
            dgam = mp.exp(-lam) * ((mp.besseli(n - 1, lam) + mp.besseli(n + 1, lam)) / 2
                                   - mp.besseli(n, lam))
            lhs1 = avg(lambda v, n=n: v * mp.besselj(n, bb * v) * mp.besselj(n, bb * v, 1))
            lhs2 = avg(lambda v, n=n: v**2 * mp.besselj(n, bb * v, 1) ** 2)
            assert abs(lhs1 - bb * wp**2 / 2 * dgam) < mp.mpf("1e-20")
            assert abs(lhs2 - wp**2 / 2 * (n**2 * gam / lam - 2 * lam * dgam)) < mp.mpf("1e-20")


def test_three_species_tensor_against_mpmath():
    """Full tensor (electrons, bi-Maxwellian protons, drifting alphas) against the mpmath
    evaluation of the Stix integral form at 30 digits (every element computed by its own
    integral, so χ_zx = χ_xz and χ_zy = −χ_yz are checked, not assumed)."""
    k_par, k_perp = 300.0, 600.0
    omegas = PROTON.cyclotron_frequency(B0) * np.array([1.4 + 0.1j, 0.6 - 0.15j])
    got = eps_tensor(omegas, THREE, k_par=k_par, k_perp=k_perp, B=B0) - np.eye(3)
    with mp.workdps(30):
        for i, om in enumerate(omegas):
            ref = mp.matrix(3, 3)
            for s in THREE:
                ref += _mp_species_tensor(om, s, k_par, k_perp, B0, nmax=40)
            ref_np = np.array([[complex(ref[r, c]) for c in range(3)] for r in range(3)])
            scale = np.abs(ref_np).max()
            assert np.all(np.abs(got[i] - ref_np) <= 1e-12 * scale)
            big = np.abs(ref_np) > 1e-3 * scale
            assert np.all(np.abs(got[i] - ref_np)[big] <= 1e-11 * np.abs(ref_np)[big])


# ---------------------------------------------------------------------- derivatives
def _cauchy_derivative(fun, omega0, radius, m=48):
    """f'(ω0) by the trapezoidal rule on a circle (Cauchy integral; common practice)."""
    theta = 2 * np.pi * np.arange(m) / m
    pts = omega0 + radius * np.exp(1j * theta)
    vals = fun(pts)
    wts = np.exp(-1j * theta) / (m * radius)
    return np.tensordot(wts, vals, axes=(0, 0))


@pytest.mark.parametrize("k_par,k_perp", [(300.0, 600.0), (-200.0, 900.0), (0.0, 700.0)])
def test_derivative_against_cauchy_integral(k_par, k_perp):
    """dχ/dω (ES and EM, oblique and perpendicular) vs a Cauchy-circle derivative.

    Radius 0.04|ω| keeps the circle's rounding error (ε|χ|/r) below 1e-8 of χ' for the
    electrons (whose χ varies only like ω²/Ω_e² here) and at least a factor 2 away from
    the nearest pole (ω = nΩ_α at k∥ = 0), so the trapezoidal error is < 2^-48."""
    om_c = PROTON.cyclotron_frequency(B0)
    for s in THREE:
        for omega0 in (om_c * (1.37 + 0.21j), om_c * (2.75 - 0.05j)):
            for mod in (em, es):
                def f(x, mod=mod, s=s):
                    return mod.susceptibility(x, s, k_par=k_par, k_perp=k_perp, B=B0).value

                num = _cauchy_derivative(f, omega0, 0.04 * abs(omega0))
                ana = mod.susceptibility(
                    np.array(omega0), s, k_par=k_par, k_perp=k_perp, B=B0
                ).derivative
                assert np.allclose(ana, num, rtol=1e-8, atol=1e-8 * np.abs(num).max())


# ------------------------------------------------------------------- perpendicular k∥ = 0
def test_perpendicular_limit_is_continuous():
    """Exact k∥ = 0 formula vs the general formula at k∥ = 1e-7 k⊥, Im ω > 0, with
    anisotropy and drift (continuity of the analytic function; common practice)."""
    om_c = PROTON.cyclotron_frequency(B0)
    omega = om_c * np.array([0.55 + 0.2j, 1.5 + 0.1j, 3.3 + 0.4j])
    k_perp = 700.0
    for s in THREE:
        for mod in (em, es):
            a = mod.susceptibility(omega, s, k_par=0.0, k_perp=k_perp, B=B0)
            b = mod.susceptibility(omega, s, k_par=1e-7 * k_perp, k_perp=k_perp, B=B0)
            scale = np.abs(a.value).max()
            assert np.allclose(a.value, b.value, rtol=1e-6, atol=1e-6 * scale)


def test_bernstein_perpendicular():
    """k∥ = 0 electrostatic: Bernstein's χ = −(ω_p²/λ) Σ_{n≥1} 2n²Γ_n/(ω² − n²Ω²)
    (I. B. Bernstein 1958; Stix 1992, ch. 11, from memory), Γ_n from scipy.special.iv;
    it must equal χ_xx of the tensor and depend on T⊥ only."""
    om_c = PROTON.cyclotron_frequency(B0)
    omega = om_c * np.array([0.5 + 0.01j, 1.5 + 0.0j, 2.5 - 0.01j, 7.3 + 0.2j])
    k_perp = 900.0
    for s in THREE:
        wperp, oc = s.thermal_speed_perp, s.cyclotron_frequency(B0)
        lam = k_perp**2 * wperp**2 / (2 * oc**2)
        n = np.arange(1, 200)
        gam = np.exp(-lam) * iv(n, lam)
        ref = -(s.plasma_frequency**2 / lam) * np.sum(
            2 * n**2 * gam / (omega[:, None] ** 2 - (n * oc) ** 2), axis=1
        )
        got = es.susceptibility(omega, s, k_par=0.0, k_perp=k_perp, B=B0).value
        assert np.allclose(got, ref, rtol=1e-12)
        xx = em.susceptibility(omega, s, k_par=0.0, k_perp=k_perp, B=B0).value[:, 0, 0]
        assert np.allclose(xx, ref, rtol=1e-12)
        other = Species(s.name, s.charge_number, s.mass, s.density, 3 * s.temperature_par,
                        s.temperature_perp, drift=s.drift + 1e5)
        got2 = es.susceptibility(omega, other, k_par=0.0, k_perp=k_perp, B=B0).value
        assert np.allclose(got2, ref, rtol=1e-12)


def test_perpendicular_ordinary_mode_anisotropic():
    """k∥ = 0: ε_zz = 1 − Σ (ω_p²/ω²)[1 + (T∥/T⊥) Σ_n Γ_n nΩ/(ω − nΩ)] for non-drifting
    bi-Maxwellians (ordinary mode; Stix 1992, ch. 11, from memory), Γ_n from scipy."""
    om_c = PROTON.cyclotron_frequency(B0)
    omega = om_c * np.array([0.5 + 0.01j, 1.7 + 0.3j, 3.2 - 0.02j])
    k_perp = 900.0
    for s in (ELECTRON, PROTON):
        oc = s.cyclotron_frequency(B0)
        lam = k_perp**2 * s.thermal_speed_perp**2 / (2 * oc**2)
        n = np.arange(-150, 151)
        gam = np.exp(-lam) * iv(n, lam)
        ratio = s.temperature_par / s.temperature_perp
        ref = -(s.plasma_frequency**2 / omega**2) * (
            1 + ratio * np.sum(gam * n * oc / (omega[:, None] - n * oc), axis=1)
        )
        got = em.susceptibility(omega, s, k_par=0.0, k_perp=k_perp, B=B0).value[:, 2, 2]
        assert np.allclose(got, ref, rtol=1e-12)


# --------------------------------------------------------------------------- truncation
def test_truncation_grows_with_k_perp_rho_and_converges():
    """N grows with k⊥ρ (N ~ √λ: Γ_n ≈ exp(−n²/2λ)/√(2πλ), Watson 1944, from memory),
    and tol = 1e-14 agrees with a run at much larger N (tol = 1e-40) to 1e-13."""
    om_c = PROTON.cyclotron_frequency(B0)
    omega = om_c * np.array([1.3 + 0.1j, 4.7 - 0.05j])
    rho = PROTON.thermal_speed_perp / abs(om_c)
    ns = []
    for krho in (0.1, 1.0, 5.0, 20.0):
        r = em.susceptibility(omega, PROTON, k_par=0.5 / rho, k_perp=krho / rho, B=B0)
        big = em.susceptibility(omega, PROTON, k_par=0.5 / rho, k_perp=krho / rho, B=B0,
                                tol=1e-40)
        assert big.harmonics >= r.harmonics + 3
        scale = np.abs(big.value).max()
        assert np.all(np.abs(r.value - big.value) <= 1e-13 * scale)
        x = es.susceptibility(omega, PROTON, k_par=0.5 / rho, k_perp=krho / rho, B=B0)
        xb = es.susceptibility(omega, PROTON, k_par=0.5 / rho, k_perp=krho / rho, B=B0,
                               tol=1e-40)
        assert np.allclose(x.value, xb.value, rtol=1e-13)
        ns.append(r.harmonics)
    assert ns == sorted(ns) and ns[-1] > ns[0] + 20


# ------------------------------------------------------------------------ robustness
def test_non_finite_inputs_give_non_finite_output():
    omega = np.array([np.nan + 0j, np.inf + 0j, 1e8 + 1e6j, complex(0, np.inf)])
    for mod in (em, es):
        r = mod.susceptibility(omega, PROTON, k_par=300.0, k_perp=600.0, B=B0)
        v = r.value.reshape(4, -1)
        assert not np.isfinite(v[0]).any() and not np.isfinite(v[1]).any()
        assert np.isfinite(v[2]).all()
        assert not np.isfinite(v[3]).any()
        for kw in ({"k_par": np.nan, "k_perp": 1.0}, {"k_par": 1.0, "k_perp": np.inf}):
            r = mod.susceptibility(omega[2:3], PROTON, B=B0, **kw)
            assert not np.isfinite(r.value).any() and not np.isfinite(r.derivative).any()
        r = mod.susceptibility(omega[2:3], PROTON, k_par=1.0, k_perp=1.0, B=np.nan)
        assert not np.isfinite(r.value).any()
        # ω exactly on a perpendicular cyclotron pole
        pole = np.array([2.0 * PROTON.cyclotron_frequency(B0) + 0j])
        r = mod.susceptibility(pole, PROTON, k_par=0.0, k_perp=600.0, B=B0)
        assert not np.isfinite(r.value).all()
        with pytest.raises(ValueError, match="B != 0"):
            mod.susceptibility(omega, PROTON, k_par=1.0, k_perp=1.0, B=0.0)


def test_too_many_harmonics_gives_nan():
    rho = PROTON.thermal_speed_perp / PROTON.cyclotron_frequency(B0)
    k_perp = 4.0 * _harmonics.MAX_HARMONICS / rho
    r = em.susceptibility(np.array([1e8 + 1e6j]), PROTON, k_par=1.0, k_perp=k_perp, B=B0)
    assert np.isnan(r.value).all()


def test_complex_k_is_analytic():
    """χ is analytic in k (spatial problem): ∂χ/∂k∥ along real and imaginary directions
    agree (Cauchy–Riemann; common practice)."""
    om = np.array([PROTON.cyclotron_frequency(B0) * 1.4 + 0j])
    k0, h = 300.0 + 20.0j, 1e-3
    for kperp_c in (600.0 + 0j, 600.0 + 30j):
        def f(kp, kperp_c=kperp_c):
            return em.susceptibility(om, PROTON, k_par=kp, k_perp=kperp_c, B=B0).value

        d_re = (f(k0 + h) - f(k0 - h)) / (2 * h)
        d_im = (f(k0 + 1j * h) - f(k0 - 1j * h)) / (2j * h)
        assert np.allclose(d_re, d_im, rtol=1e-6, atol=1e-6 * np.abs(d_re).max())


# ------------------------------------------------------------- scaled tensor near ω = 0
def _mp_scaled(omega, species, k_par, k_perp, B, omega_ref):
    """S = diag(w, w, 1) R(I + Σχ_s)Rᵀ diag(w, w, 1) − (kc/ω_ref)² diag(1, 1, 0) at
    mpmath precision from the Stix integral form above (40 digits; R: rows e₁, e₂, k̂)."""
    k = mp.sqrt(mp.mpf(k_par) ** 2 + mp.mpf(k_perp) ** 2)
    c, s = mp.mpf(k_par) / k, mp.mpf(k_perp) / k
    chi = mp.eye(3)
    for sp in species:
        chi += _mp_species_tensor(omega, sp, k_par, k_perp, B, nmax=40)
    rot = mp.matrix([[c, 0, -s], [0, 1, 0], [s, 0, c]])
    lam = rot * chi * rot.T
    w = mp.mpc(omega) / omega_ref
    dg = [w, w, 1]
    out = mp.matrix(3, 3)
    for i in range(3):
        for j in range(3):
            out[i, j] = dg[i] * lam[i, j] * dg[j]
    n2 = (k * mp.mpf(299792458) / omega_ref) ** 2
    out[0, 0] -= n2
    out[1, 1] -= n2
    return out


@pytest.mark.parametrize(("k_par", "k_perp"), [(300.0, 600.0), (60.0, 800.0), (700.0, 40.0)])
def test_scaled_d_near_zero_against_mpmath(k_par, k_perp):
    """The scaled matrix S and D = det S of Dispersion at ω = 1e-3 F and 1e-5 F (F the
    slowest frequency scale) for anisotropic, counter-drifting electrons and protons,
    against the mpmath Stix integral form at 40 digits (Z via erfc, Bessel via besseli;
    Stix 1992 eqs. 10-48, 10-57, from memory): every entry to 1e-13 of itself (or 1e-13
    of the largest entry of its row when it is genuinely tiny), D to 1e-12 of the largest
    term of its expansion.  The former χ-times-ω² evaluation lost ~2e-3 here at 1e-5 F."""
    from itertools import permutations

    from kinroots.physics.dispersion import Dispersion
    from kinroots.physics.plasma import Plasma

    sps = (
        Species("e", -1, M_ELECTRON, 1.1e19, 100.0, 300.0, 2.0e5),
        Species("p", 1, M_PROTON, 0.9e19, 50.0, 120.0, -3.0e5),
    )
    om_ref = PROTON.cyclotron_frequency(B0)
    k = float(np.hypot(k_par, k_perp))
    angle = float(np.degrees(np.arctan2(k_perp, k_par)))
    disp = Dispersion(Plasma(sps, B=B0), k=k, angle_deg=angle, model="em", omega_ref=om_ref)
    for frac in (1e-3, 1e-5):
        om = disp.frequency_scale * frac * (1.0 + 0.3j)
        got, _ = disp._scaled(np.array([om]))
        d = disp.value(np.array([om]))[0]
        with mp.workdps(40):
            ref_mp = _mp_scaled(om, sps, disp.k_par.real, disp.k_perp.real, B0, om_ref)
            d_ref = complex(mp.det(ref_mp))
            ref = np.array([[complex(ref_mp[i, j]) for j in range(3)] for i in range(3)])
        tol = 1e-13 * np.maximum(np.abs(ref), 1e-3 * np.abs(ref).max(axis=1, keepdims=True))
        assert np.all(np.abs(got[0] - ref) <= tol), (frac, np.abs(got[0] - ref) / np.abs(ref))
        terms = max(abs(np.prod([ref[i, p[i]] for i in range(3)])) for p in permutations(range(3)))
        assert abs(d - d_ref) <= 1e-12 * terms, (frac, abs(d - d_ref) / terms)


def test_scaled_is_symmetric_scaling_of_chi():
    """scaled_susceptibility = diag(w, w, 1) R χ Rᵀ diag(w, w, 1) and its ω-derivative
    (definition; R rows e₁, e₂, k̂), at moderate ω where the plain χ is accurate."""
    om_ref = PROTON.cyclotron_frequency(B0)
    om = om_ref * np.array([1.4 + 0.1j, 0.6 - 0.15j, 2.3 + 0.0j])
    for k_par, k_perp in [(300.0, 600.0), (0.0, 600.0), (-200.0, 500.0), (400.0, 0.0)]:
        k = np.hypot(k_par, k_perp)
        c, s = k_par / k, k_perp / k
        rot = np.array([[c, 0, -s], [0, 1, 0], [s, 0, c]])
        for sp in THREE:
            r = em.susceptibility(om, sp, k_par=k_par, k_perp=k_perp, B=B0)
            chi, dchi = rot @ r.value @ rot.T, rot @ r.derivative @ rot.T
            w = om / om_ref
            dg = np.stack([w, w, np.ones_like(w)], axis=1)
            ddg = np.stack([np.ones_like(w), np.ones_like(w), 0 * w], axis=1) / om_ref
            ref = dg[:, :, None] * chi * dg[:, None, :]
            dref = (ddg[:, :, None] * chi * dg[:, None, :] + dg[:, :, None] * chi * ddg[:, None, :]
                    + dg[:, :, None] * dchi * dg[:, None, :])
            got = em.scaled_susceptibility(om, sp, k_par=k_par, k_perp=k_perp, B=B0,
                                           omega_ref=om_ref)
            scale = np.abs(ref).max(axis=(1, 2))[:, None, None]
            dscale = np.abs(dref).max(axis=(1, 2))[:, None, None]
            assert np.all(np.abs(got.value - ref) <= 1e-11 * scale)
            assert np.all(np.abs(got.derivative - dref) <= 1e-9 * dscale)
            zero = em.scaled_susceptibility(np.array([0j]), sp, k_par=k_par, k_perp=k_perp,
                                            B=B0, omega_ref=om_ref)
            assert np.isfinite(zero.value).all() and np.isfinite(zero.derivative).all()
