"""Number-conserving Krook (BGK) collisions: unmagnetized electrostatic susceptibility.

Frame and conventions as in :mod:`kinroots.models.es_unmagnetized`: drift axis z,
k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t), SI units.

The collision operator is C[f] = −ν_s (f − (n_s1/n_s0) f_s0): it relaxes the perturbed
distribution towards the unperturbed shape carrying the *perturbed* density, so that
particle number is conserved (a plain Krook term −ν f does not conserve it).
"""

from __future__ import annotations

import numpy as np

from kinroots.models.base import Susceptibility
from kinroots.models.es_unmagnetized import landau_moments, thermal_speeds_squared
from kinroots.plasma import Species

__all__ = ["collisional", "denominator", "scaled_dispersion", "susceptibility"]


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
    :func:`~kinroots.models.es_unmagnetized.landau_moments`)::

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
    finder stays entire (see :mod:`kinroots.scan`).

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
        for s in range(-1, m):
            prod = np.ones_like(om) if s < 0 else ns[s]
            d_w = np.zeros_like(om) if s < 0 else dnw[s]
            d_k = np.zeros_like(om) if s < 0 else dnk[s]
            for r in range(m):
                if r == s:
                    continue
                d_w = d_w * qs[r] + prod * dqw[r]
                d_k = d_k * qs[r] + prod * dqk[r]
                prod = prod * qs[r]
            if s < 0:
                f = prod
            else:
                f = f + prod
            fw = fw + d_w
            fk = fk + d_k
    return f, fw, fk
