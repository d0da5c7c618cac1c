"""Number-conserving Krook (BGK) collisions: electrostatic susceptibilities.

Unmagnetized (:func:`susceptibility`) and magnetized (:func:`magnetized_susceptibility`,
isotropic species drifting along B).  Frame and conventions as in
`es_unmagnetized` and `es_magnetized`: drift axis (B) along z, k = (k_perp, 0, k_par),
perturbations ∝ exp(i k·x − i ω t), SI units.

The collision operator is C[f] = −ν_s (f − (n_s1/n_s0) f_s0): it relaxes the perturbed
distribution towards the unperturbed shape carrying the *perturbed* density, so that
particle number is conserved (a plain Krook term −ν f does not conserve it).
"""

from __future__ import annotations

import numpy as np

from kinroots.physics.models._harmonics import hdot, landau_sign, prepare_species
from kinroots.physics.models._landau import landau_moments, thermal_speeds_squared
from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species
from kinroots.physics.zfunc import plasma_z_and_prime

__all__ = [
    "collisional",
    "denominator",
    "magnetized_parts",
    "magnetized_susceptibility",
    "product_sum",
    "scaled_dispersion",
    "susceptibility",
]


def _kappa(species: Species, k_par: np.ndarray, k_perp: np.ndarray) -> np.ndarray:
    """κ = sqrt(k⊥²w⊥² + k∥²w∥²) (principal root), the thermal spread along k times k."""
    wpar2, wperp2 = thermal_speeds_squared(species)
    return np.sqrt(k_perp * k_perp * wperp2 + k_par * k_par * wpar2)


def denominator(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The Krook denominator Q_s = 1 + (iν/κ) Z(ζ′) and its derivatives.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s].
    species : Species
        Species with ``collision_frequency`` ν ≥ 0.
    k_par, k_perp : complex or array_like
        Wave-vector components [1/m] (broadcast against ``omega``); the direction
        k̂ = (k_perp, 0, k_par)/k is taken as fixed (real angle) when differentiating in k.

    Returns
    -------
    Q, dQ_domega, dQ_dk : ndarray of complex
        Q_s, ∂Q_s/∂ω and ∂Q_s/∂k at fixed direction (k = |k| along a real k̂).

    Notes
    -----
    ζ′ = (ω − k∥V + iν)/κ, κ = k w_k.  With M_0 = −Z (see
    :func:`~kinroots.physics.models.es_unmagnetized.landau_moments`)::

        Q = 1 − (iν/κ) M_0(ζ′),
        ∂Q/∂ω = −(iν/κ²) M_0′(ζ′),
        ∂Q/∂k = (iν/(κk)) M_0(ζ′) − (iν/κ) M_0′(ζ′) ∂ζ′/∂k,
        ∂ζ′/∂k = −(k∥V/k)/κ − ζ′/k.

    Q is entire in ω (Z is), equals 1 at ν = 0, and its zeros are the poles of the
    Krook χ_s (e.g. the diffusive pole ω ≈ −i k²T/(mν) for ν ≫ k w).
    """
    om, kpar, kperp = np.broadcast_arrays(
        np.asarray(omega, dtype=complex),
        np.asarray(k_par, dtype=complex),
        np.asarray(k_perp, dtype=complex),
    )
    nu = float(species.collision_frequency)
    with np.errstate(all="ignore"):
        kappa = _kappa(species, kpar, kperp)
        k = np.sqrt(kpar * kpar + kperp * kperp)
        zeta = (om - kpar * species.drift + 1j * nu) / kappa
        ms, dms = landau_moments(zeta, order=0)
        a = 1j * nu / kappa
        q = 1.0 - a * ms[0]
        dq_dw = -a * dms[0] / kappa
        dzeta_dk = -(kpar / k) * species.drift / kappa - zeta / k
        dq_dk = a * ms[0] / k - a * dms[0] * dzeta_dk
    return q, dq_dw, dq_dk


def susceptibility(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray,
    B: float = 0.0,
    tol: float = 1e-14,
) -> Susceptibility:
    """Electrostatic χ_s of an unmagnetized drifting bi-Maxwellian with Krook collisions.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s], any shape.
    species : Species
        The species; ``collision_frequency`` ν_s [1/s] ≥ 0.
    k_par, k_perp : complex or array_like of complex
        Wave-vector components along and across z [1/m]; may be complex.
    B, tol : float
        Ignored (unmagnetized model); present for the common builder signature.

    Returns
    -------
    Susceptibility
        ``value`` = χ_s, ``derivative`` = ∂χ_s/∂ω (analytic), ``harmonics`` = 0.

    Notes
    -----
    Linearizing ∂f/∂t + v·∇f + (q/m)E·∂f/∂v = −ν(f − (n_1/n_0) f_0) with E = −ikφ and
    integrating over velocity gives
    n_1 [1 + (iν/κ)Z(ζ′)] = −(q n_0 φ/T_k)[1 + ζ′Z(ζ′)], hence (Poisson)::

        χ_s = (1/(k²λ_k²)) [1 + ζ′ Z(ζ′)] / [1 + (iν/κ) Z(ζ′)],
        ζ′ = (ω − k∥V + iν)/κ,  κ = k w_k,  λ_k² = ε0 T_k/(n q²),

    T_k = T∥cos²θ + T⊥sin²θ (the temperature of the velocity projection along k).  Coded
    as N/Q with N = −(2ω_p²/κ²) M_1(ζ′), M_1 = −(1 + ζ′Z), Q from :func:`denominator`;
    ∂χ/∂ω = (N′Q − N Q′)/Q² with N′ = −(2ω_p²/κ³) M_1′.  Checks: ν = 0 gives the
    collisionless χ exactly (Q = 1, ζ′ = ζ); at ω = k∥V (rest frame of the species)
    ζ′ = iν/κ, numerator and denominator agree and χ_s = 1/(k²λ_k²) for every ν: the
    static Debye response survives collisions because number is conserved.

    χ_s has poles where Q = 0 (lower half ω plane only: for Im ω > 0, |νZ/κ| < 1).
    The scan layer multiplies D by Π_s Q_s so that the function handed to the root
    finder stays entire (see :mod:`kinroots.study.problem`).

    References
    ----------
    P. L. Bhatnagar, E. P. Gross and M. Krook, Phys. Rev. 94, 511 (1954): the model
    operator.  J. Sheffield, D. Froula, S. H. Glenzer and N. C. Luhmann, *Plasma
    Scattering of Electromagnetic Radiation*, 2nd ed. (Academic Press, 2011), the
    number-conserving collisional susceptibility (from memory; re-derived above).
    """
    om, kpar, kperp = np.broadcast_arrays(
        np.asarray(omega, dtype=complex),
        np.asarray(k_par, dtype=complex),
        np.asarray(k_perp, dtype=complex),
    )
    nu = float(species.collision_frequency)
    wp2 = species.plasma_frequency**2
    with np.errstate(all="ignore"):
        kappa = _kappa(species, kpar, kperp)
        kappa2 = kappa * kappa
        zeta = (om - kpar * species.drift + 1j * nu) / kappa
        ms, dms = landau_moments(zeta, order=1)
        coef = -2.0 * wp2 / kappa2
        n = coef * ms[1]
        dn = coef * dms[1] / kappa
        if nu == 0.0:
            return Susceptibility(value=n, derivative=dn, harmonics=0)
        a = 1j * nu / kappa
        q = 1.0 - a * ms[0]
        dq = -a * dms[0] / kappa
        value = n / q
        derivative = (dn * q - n * dq) / (q * q)
    return Susceptibility(value=value, derivative=derivative, harmonics=0)


def collisional(species: object) -> bool:
    """True when any species of a plasma (or the one species given) has ν > 0."""
    group = getattr(species, "species", (species,))
    return any(getattr(s, "collision_frequency", 0.0) > 0.0 for s in group)


def scaled_dispersion(
    omega: np.ndarray,
    species: tuple[Species, ...],
    /,
    *,
    k: complex | np.ndarray,
    cos_theta: float,
    sin_theta: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Entire electrostatic dispersion function F = (Π_s Q_s)(1 + Σ_s χ_s) with collisions.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s].
    species : tuple of Species
        All species (unmagnetized; ν_s ≥ 0 each, Q_s = 1 where ν_s = 0).
    k : complex or array_like
        Wavenumber [1/m] (complex allowed, Re k > 0), broadcast against ``omega``.
    cos_theta, sin_theta : float
        Direction of k relative to z (fixed, real).

    Returns
    -------
    F, dF_domega, dF_dk : ndarray of complex

    Notes
    -----
    With χ_s = N_s/Q_s (see :func:`susceptibility`), F = Π Q + Σ_s N_s Π_{r≠s} Q_r has the
    same zeros as D = 1 + Σ χ_s but none of its poles, so it is entire in ω and k
    (Re k > 0).  N_s = −(2ω_ps²/κ_s²) M_1(ζ′_s): ∂N/∂ω = −(2ω_p²/κ³) M_1′ and
    ∂N/∂k = −2N/k − (2ω_p²/κ²) M_1′ ∂ζ′/∂k (κ ∝ k at fixed direction).  Needed because χ_s
    is not homogeneous in (ω, k) once ν ≠ 0, so dD/dk cannot come from Euler's relation.
    """
    om, kk = np.broadcast_arrays(np.asarray(omega, dtype=complex), np.asarray(k, dtype=complex))
    kpar, kperp = kk * cos_theta, kk * sin_theta
    qs, dqw, dqk, ns, dnw, dnk = [], [], [], [], [], []
    with np.errstate(all="ignore"):
        for s in species:
            q, q_w, q_k = denominator(om, s, k_par=kpar, k_perp=kperp)
            kappa = _kappa(s, kpar, kperp)
            zeta = (om - kpar * s.drift + 1j * s.collision_frequency) / kappa
            ms, dms = landau_moments(zeta, order=1)
            coef = -2.0 * s.plasma_frequency**2 / (kappa * kappa)
            n = coef * ms[1]
            dzeta_dk = -cos_theta * s.drift / kappa - zeta / kk
            qs.append(q)
            dqw.append(q_w)
            dqk.append(q_k)
            ns.append(n)
            dnw.append(coef * dms[1] / kappa)
            dnk.append(-2.0 * n / kk + coef * dms[1] * dzeta_dk)
        f = np.ones_like(om)
        fw = np.zeros_like(om)
        fk = np.zeros_like(om)
        # F = Π_r Q_r + Σ_s N_s Π_{r≠s} Q_r, differentiated term by term
        m = len(species)
        for j in range(-1, m):
            prod = np.ones_like(om) if j < 0 else ns[j]
            d_w = np.zeros_like(om) if j < 0 else dnw[j]
            d_k = np.zeros_like(om) if j < 0 else dnk[j]
            for r in range(m):
                if r == j:
                    continue
                d_w = d_w * qs[r] + prod * dqw[r]
                d_k = d_k * qs[r] + prod * dqk[r]
                prod = prod * qs[r]
            if j < 0:
                f = prod
            else:
                f = f + prod
            fw = fw + d_w
            fk = fk + d_k
    return f, fw, fk


# ------------------------------------------------------------------ magnetized (B ≠ 0)


def magnetized_parts(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex,
    k_perp: complex,
    B: float,
    tol: float = 1e-14,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, int]:
    r"""Numerator and Krook denominator of the magnetized χ_s = N_s/Q_s, with ∂/∂ω.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s], any shape.
    species : Species
        Maxwellian with T∥ = T⊥ (drift V along B allowed) and ν = collision_frequency ≥ 0.
    k_par, k_perp : complex
        Scalar wave-vector components along and across B [1/m]; may be complex.
    B : float
        Magnetic field [T], non-zero.
    tol : float
        Truncation tolerance of the harmonic sum (as in
        :func:`kinroots.physics.models._harmonics.bessel_weights`).

    Returns
    -------
    N, dN_domega, Q, dQ_domega : ndarray of complex
        Shaped like ``omega``; NaN for bad input or a non-converged harmonic sum.
    harmonics : int
        Largest |n| kept.

    Raises
    ------
    ValueError
        If ν > 0 and T∥ ≠ T⊥ (the relaxation target n_1 f_0/n_0 is only a number-conserving
        BGK model of an isotropic species here), or B = 0.

    Notes
    -----
    With w = sqrt(2T/m), a = k∥w, λ = k⊥²w²/(2Ω²), Γ_n = e^{−λ}I_n(λ),
    ζ_n = (ω − k∥V − nΩ + iν)/a, ζ_0 = (ω − k∥V + iν)/a and S = Σ_n Γ_n Z(ζ_n)::

        χ_s = (1/(k²λ_D²)) [1 + ζ_0 S] / [1 + (iν/a) S] = N/Q,
        N = (2ω_p²/(k²w²)) Σ_n Γ_n [1 + ζ_n Z(ζ_n) + (nΩ/a) Z(ζ_n)],
        Q = 1 + (iν/a) Σ_n Γ_n Z(ζ_n) = Σ_n Γ_n [1 + ζ_n Z(ζ_n) − ((ω − k∥V − nΩ)/a) Z(ζ_n)],
        ∂N/∂ω = (2ω_p²/(k²w²a)) Σ_n Γ_n [Z + ζ_n Z′ + (nΩ/a) Z′](ζ_n),
        ∂Q/∂ω = (iν/a²) Σ_n Γ_n Z′(ζ_n),

    N written with ζ_0 − ζ_n = nΩ/a and Σ Γ_n = 1, so that at ν = 0 (Q = 1) it is the
    collisionless magnetized Maxwellian χ term for term; the second form of Q (coded) uses
    the same pieces, so N = Q/(k²λ_D²) at ω = k∥V to rounding.  Derivation (re-done here): with
    E = −ikφ, ψ = qφ/T and L = −i(ω + iν) + ik·v + Ω(v×ẑ)·∂/∂v, the linearized equation is
    L f_1 = −iψ k·(v − Vẑ) f_0 + ν(n_1/n_0) f_0.  Since L f_0 = i(k·v − ω − iν) f_0 (f_0
    isotropic about its drift V ẑ), f_1 = −ψ f_0 + [−iψ(ω + iν − k∥V) + ν n_1/n_0] L⁻¹f_0, and
    the orbit integral ∫L⁻¹f_0 d³v = −i n_0 S/a gives n_1 Q = −ψ n_0 (1 + ζ_0 S), hence
    χ_s above (Poisson).  Checks: ν = 0 is the
    collisionless χ; at ω = k∥V, ζ_0 = iν/a so N = Q/(k²λ_D²) and χ_s = 1/(k²λ_D²) for all ν
    (number conservation); B → 0 gives the unmagnetized Krook χ (Σ_n Γ_n Z(ζ_n) → Z of the
    projected Maxwellian).  For Re k∥ < 0, Z → sZ(sζ), s = −1
    (:func:`kinroots.physics.models._harmonics.landau_sign`).

    Exact k∥ = 0 with ν > 0: ζ_n → ∞ at fixed ν, Z(ζ) → −1/ζ, 1 + ζZ → 0 (exact at k∥ = 0,
    where nothing resonates)::

        N = −(ω_p²/Ω) Σ_n g_n/(ω − nΩ + iν),   g_n = nΓ_n/λ,
        Q = 1 − iν Σ_n Γ_n/(ω − nΩ + iν) = Σ_n Γ_n (ω − nΩ)/(ω − nΩ + iν),

    the second form of Q coded (no cancellation for ν ≫ Ω near ω = 0; N = Q/(k²λ_D²) at
    ω = 0 to rounding); rational in ω (N and Q share the poles ω = nΩ − iν, so F = Π Q·D
    is not entire there; the case file rejects ν > 0 at k∥ = 0).

    References
    ----------
    P. L. Bhatnagar, E. P. Gross and M. Krook, Phys. Rev. 94, 511 (1954): the operator.
    J. Sheffield, D. Froula, S. H. Glenzer and N. C. Luhmann, *Plasma Scattering of
    Electromagnetic Radiation*, 2nd ed. (Academic Press, 2011): the magnetized
    number-conserving BGK susceptibility (from memory; re-derived as above).
    """
    om = np.asarray(omega, dtype=complex)
    nu = float(species.collision_frequency)
    if nu > 0.0 and species.temperature_par != species.temperature_perp:
        raise ValueError(
            f"Krook collisions in a magnetized plasma need T_par == T_perp; species "
            f"{species.name!r} has {species.temperature_par!r} and {species.temperature_perp!r}"
        )
    setup = prepare_species(om.shape, species, k_par=k_par, k_perp=k_perp, B=B, tol=tol,
                            model="krook (magnetized)")
    if isinstance(setup, Susceptibility):
        return setup.value, setup.derivative, setup.value.copy(), setup.value.copy(), 0
    kpar, kperp, w = setup.k_par, setup.k_perp, setup.w_par
    omega_c, wt = setup.omega_c, setup.weights
    wp2 = species.plasma_frequency**2
    n_om = wt.n * omega_c
    n: np.ndarray
    dn: np.ndarray
    with np.errstate(all="ignore"):
        if kpar == 0:
            r = 1.0 / (om[..., None] - n_om + 1j * nu)
            n = -(wp2 / omega_c) * hdot(r, wt.g)
            dn = (wp2 / omega_c) * hdot(r * r, wt.g)
            q = hdot((om[..., None] - n_om) * r, wt.gamma)  # Σ Γ_n (ω − nΩ)/(ω − nΩ + iν)
            dq = 1j * nu * hdot(r * r, wt.gamma)
        else:
            s = landau_sign(kpar)
            a = kpar * w
            zt = (om[..., None] - kpar * species.drift - n_om + 1j * nu) / (s * a)
            zf, zp = plasma_z_and_prime(zt)
            zf = s * zf  # Z_eff = sZ(sζ); Z_eff' = Z'(sζ); 1 + ζZ_eff = −Z'(sζ)/2
            f = -0.5 * zp
            fp = zf + (s * zt) * zp
            c = 2.0 * wp2 / ((kperp * kperp + kpar * kpar) * w * w)
            n = c * hdot(f + (1.0 / a) * (n_om * zf), wt.gamma)
            dn = c * hdot(fp / a + (1.0 / (a * a)) * (n_om * zp), wt.gamma)
            if nu == 0.0:
                q = np.ones_like(om)
                dq = np.zeros_like(om)
            else:
                # Q = Σ Γ_n [1 + ζ_n Z − ((ω − k∥V − nΩ)/a) Z] (Σ Γ_n = 1): the same pieces
                # as N, so that N = Q/(k²λ_D²) holds to rounding at ω = k∥V for any ν
                shift = (om[..., None] - kpar * species.drift - n_om) / a
                q = hdot(f - shift * zf, wt.gamma)
                dq = (1j * nu / (a * a)) * hdot(zp, wt.gamma)
        bad = ~np.isfinite(om)
        if bad.any():
            n, dn, q, dq = (np.where(bad, np.nan + 0j, x) for x in (n, dn, q, dq))
    return (np.asarray(n, dtype=complex), np.asarray(dn, dtype=complex),
            np.asarray(q, dtype=complex), np.asarray(dq, dtype=complex), wt.harmonics)


def magnetized_susceptibility(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex,
    k_perp: complex,
    B: float,
    tol: float = 1e-14,
) -> Susceptibility:
    """Electrostatic χ_s of a magnetized drifting Maxwellian with number-conserving Krook.

    Parameters and formula as in :func:`magnetized_parts`: χ_s = N/Q and
    ∂χ_s/∂ω = (N′Q − NQ′)/Q² (analytic).  At ν = 0 it equals
    :func:`kinroots.physics.models.es_magnetized.susceptibility` for T∥ = T⊥.

    Returns
    -------
    Susceptibility
        ``value`` = χ_s, ``derivative`` = ∂χ_s/∂ω, ``harmonics`` = N.
    """
    n, dn, q, dq, harm = magnetized_parts(omega, species, k_par=k_par, k_perp=k_perp,
                                          B=B, tol=tol)
    if species.collision_frequency == 0.0:
        return Susceptibility(value=n, derivative=dn, harmonics=harm)
    with np.errstate(all="ignore"):
        value = n / q
        derivative = (dn * q - n * dq) / (q * q)
    return Susceptibility(value=value, derivative=derivative, harmonics=harm)


def product_sum(
    qs: list[np.ndarray], dqs: list[np.ndarray], ns: list[np.ndarray], dns: list[np.ndarray],
    like: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """F = Π_r Q_r + Σ_s N_s Π_{r≠s} Q_r and its derivative (term by term, product rule)."""
    m = len(qs)
    f = np.zeros_like(like)
    df = np.zeros_like(like)
    for s in range(-1, m):
        prod = np.ones_like(like) if s < 0 else ns[s]
        d = np.zeros_like(like) if s < 0 else dns[s]
        for r in range(m):
            if r == s:
                continue
            d = d * qs[r] + prod * dqs[r]
            prod = prod * qs[r]
        f = f + prod
        df = df + d
    return f, df
