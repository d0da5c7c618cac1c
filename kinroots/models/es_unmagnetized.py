"""Electrostatic susceptibility of an unmagnetized drifting bi-Maxwellian species.

Also home of :func:`landau_moments`, the velocity moments of the Landau resonant
denominator that both unmagnetized builders are written in.

Frame: drift axis z, k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t).
SI throughout (ω in rad/s, k in 1/m, temperatures of :class:`~kinroots.plasma.Species`
in eV).
"""

from __future__ import annotations

import numpy as np
from scipy.special import wofz

from kinroots.models.base import Susceptibility
from kinroots.plasma import EV, Species
from kinroots.zfunc import plasma_z_and_prime

__all__ = ["landau_moments", "susceptibility"]

#: |ζ| below which Z comes from the bare Faddeeva function (1 + ζZ loses < 4|ζ|⁴ ulp).
_ZETA_FADDEEVA = 2.0
#: |ζ| from which the moments are summed from their asymptotic series (plus the exact
#: Landau exponential) instead of from Z: there the direct form 1 + ζZ loses ~|ζ|² ulp.
_ZETA_SERIES = 7.0
#: Terms kept in the asymptotic series; the last one is < 1e-18 of the first at |ζ| = 7
#: and the omitted remainder is of order exp(−|ζ|²) < 1e-21.
_N_TERMS = 27


def _series_coefficients(n_terms: int) -> np.ndarray:
    """a_n = (2n − 1)!! / 2**n, n = 0 … n_terms − 1 (a_0 = 1)."""
    a = np.ones(n_terms)
    for n in range(1, n_terms):
        a[n] = a[n - 1] * (2 * n - 1) / 2.0
    return a


_A = _series_coefficients(_N_TERMS)
_N = np.arange(_N_TERMS, dtype=float)
_SQRT_PI = float(np.sqrt(np.pi))


def _horner(u: np.ndarray, coefficients: np.ndarray) -> np.ndarray:
    """Σ_j c_j u**j by Horner's rule (c_0 first)."""
    out = np.full_like(u, coefficients[-1])
    for c in coefficients[-2::-1]:
        out = out * u + c
    return out


def _terms_needed(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Coefficients a_n and indices n of the series, truncated where the last kept term
    is below 1e-18 at the smallest |ζ| of ``z`` (fewer terms for the large |ζ| of cold
    or slow species)."""
    finite = np.abs(z[np.isfinite(z)])
    if finite.size == 0:
        return _A[:4], _N[:4]
    u_max = 1.0 / float(finite.min()) ** 2
    terms = _A * u_max ** _N
    below = np.nonzero(terms[2:] < 1e-18)[0]
    count = _N_TERMS if below.size == 0 else int(below[0]) + 3
    return _A[:count], _N[:count]


def _series_moments(z: np.ndarray, order: int) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Moments M_0 … M_order and their ζ-derivatives for |ζ| ≥ _ZETA_SERIES."""
    u = 1.0 / (z * z)
    zi = 1.0 / z
    a, n = _terms_needed(z)
    m0 = _horner(u, a) * zi
    dm0 = -u * _horner(u, (2 * n + 1) * a)
    m1 = u * _horner(u, a[1:])
    dm1 = -zi * u * _horner(u, 2 * n[1:] * a[1:])
    ms, dms = [m0, m1], [dm0, dm1]
    if order >= 2:
        ms.append(z * m1)
        dms.append(u * _horner(u, (1 - 2 * n[1:]) * a[1:]))
    if order >= 3:
        ms.append(u * _horner(u, a[2:]))
        dms.append(-zi * u * _horner(u, (2 * n[2:] - 2) * a[2:]))
    # Landau (exponential) part of Z: σ i√π exp(−ζ²), σ = 0, 1, 2 above, on, below
    # the real axis.  Evaluated only where σ ≠ 0 so that exp never overflows uselessly.
    sigma = np.where(z.imag > 0, 0.0, np.where(z.imag == 0, 1.0, 2.0))
    zl = np.where(sigma > 0, z, 0.0)
    e = sigma * 1j * np.sqrt(np.pi) * np.exp(-zl * zl)
    for k in range(order + 1):
        zk = z**k
        ms[k] = ms[k] - zk * e
        dms[k] = dms[k] + (2 * z * zk - (k * z ** (k - 1) if k else 0.0)) * e
    return ms, dms


def _moments_from_z(
    z: np.ndarray, zf: np.ndarray, m1: np.ndarray, order: int
) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Moments and derivatives from Z and M_1 = −(1 + ζZ) (see ``landau_moments``)."""
    m0 = -zf
    dm1 = m0 - 2.0 * z * m1
    ms = [m0, m1]
    dms = [-2.0 * m1, dm1]
    if order >= 2:
        ms.append(z * m1)
        dms.append(m1 + z * dm1)
    if order >= 3:
        ms.append(-0.5 + z * z * m1)
        dms.append(2.0 * z * m1 + z * z * dm1)
    return ms, dms


def _small_moments(z: np.ndarray, order: int) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """|ζ| < _ZETA_FADDEEVA: Z = i√π w(ζ) from the bare Faddeeva function."""
    zf = 1j * _SQRT_PI * wofz(z)
    return _moments_from_z(z, zf, -(1.0 + z * zf), order)


def _middle_moments(z: np.ndarray, order: int) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """_ZETA_FADDEEVA ≤ |ζ| < _ZETA_SERIES: Z and Z′ = −2(1 + ζZ) from kinroots.zfunc."""
    zf, zp = plasma_z_and_prime(z)
    return _moments_from_z(z, np.asarray(zf), 0.5 * np.asarray(zp), order)


def landau_moments(
    zeta: np.ndarray, order: int = 3
) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Moments M_n(ζ) = ⟨xⁿ / (ζ − x)⟩ of the Landau denominator and dM_n/dζ.

    Parameters
    ----------
    zeta : array_like of complex
        Normalized frequency ζ, any shape.
    order : int
        Highest moment n (0 … 3).

    Returns
    -------
    moments, derivatives : list of ndarray
        ``moments[n]`` = M_n(ζ), ``derivatives[n]`` = dM_n/dζ, each shaped like ``zeta``.

    Notes
    -----
    ⟨·⟩ is the average over the weight exp(−x²)/√π, continued from Im ζ > 0 to the
    whole ζ plane (Landau prescription).  With Z the plasma dispersion function,
    M_0 = −Z, M_1 = −(1 + ζZ) = Z′/2, M_2 = ζM_1, M_3 = −1/2 + ζ²M_1, and
    dM_0 = −2M_1, dM_1 = M_0 − 2ζM_1, dM_2 = M_1 + ζ dM_1, dM_3 = 2ζM_1 + ζ² dM_1
    (from Z′ = −2(1 + ζZ)).  For |ζ| ≥ 7 the cancellations in 1 + ζZ are avoided by the
    asymptotic expansion Z ~ −Σ a_n ζ^(−2n−1) + σ i√π exp(−ζ²), a_n = (2n−1)!!/2ⁿ,
    σ = 0, 1, 2 for Im ζ >, =, < 0, term by term in each moment; the exponential part
    of M_n is −ζⁿ σ i√π exp(−ζ²) and is kept exactly, so Im M_n on the real axis is the
    exact Landau term however small.

    Regions, chosen by |ζ|: below 2, Z = i√π w(ζ) from ``scipy.special.wofz`` (the bare
    Faddeeva function, several times cheaper than the general Z; the loss in 1 + ζZ is
    < 4|ζ|⁴ ulp there); from 2 to 7, Z and Z′ from ``kinroots.zfunc`` (which computes
    1 + ζZ without cancellation, so that M_3 and dM_3, which magnify the error of Z by
    up to |ζ|⁴, stay at ~1e-13); from 7, the asymptotic series above.

    References
    ----------
    B. D. Fried and S. D. Conte, *The Plasma Dispersion Function* (Academic Press,
    1961): definition, Z′ = −2(1 + ζZ), asymptotic expansion (from memory).
    """
    z = np.asarray(zeta, dtype=complex)
    with np.errstate(all="ignore"):
        az = np.abs(z)
        regions = (
            (_small_moments, ~(az >= _ZETA_FADDEEVA)),  # NaN goes here and stays NaN
            (_middle_moments, (az >= _ZETA_FADDEEVA) & (az < _ZETA_SERIES)),
            (_series_moments, az >= _ZETA_SERIES),
        )
        for kernel, mask in regions:
            if mask.all():
                return kernel(z, order)
        ms = [np.empty_like(z) for _ in range(order + 1)]
        dms = [np.empty_like(z) for _ in range(order + 1)]
        for kernel, mask in regions:
            if mask.any():
                sm, sdm = kernel(z[mask], order)
                for n in range(order + 1):
                    ms[n][mask] = sm[n]
                    dms[n][mask] = sdm[n]
    return ms, dms


def thermal_speeds_squared(species: Species) -> tuple[float, float]:
    """(w∥², w⊥²) = (2T∥/m, 2T⊥/m) [m²/s²]."""
    return (
        2.0 * species.temperature_par * EV / species.mass,
        2.0 * species.temperature_perp * EV / species.mass,
    )


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
    """Electrostatic susceptibility χ_s(ω, k) of an unmagnetized drifting bi-Maxwellian.

    Parameters
    ----------
    omega : array_like of complex
        Angular frequency ω [rad/s], any shape.
    species : Species
        The species (drift along z, T∥ along z, T⊥ across); temperatures must be > 0.
    k_par, k_perp : complex or array_like of complex
        Wave-vector components along and across z [1/m]; broadcast against ``omega``.
        May be complex (spatial problem).
    B : float
        Ignored (unmagnetized model); present for the common builder signature.
    tol : float
        Ignored (no series to truncate).

    Returns
    -------
    Susceptibility
        ``value`` = χ_s, ``derivative`` = ∂χ_s/∂ω, shaped like the broadcast of the
        inputs; ``harmonics`` = 0.

    Notes
    -----
    With κ² = k⊥²w⊥² + k∥²w∥² (= k² w_k², w_k² = 2T_k/m, T_k = T∥cos²θ + T⊥sin²θ) and
    ζ = (ω − k∥V)/κ::

        χ_s = −(ω_ps²/κ²) Z′(ζ) = −Z′(ζ) / (2 k² λ_k²),   λ_k² = ε0 T_k/(n q²),
        ∂χ_s/∂ω = −(ω_ps²/κ³) Z″(ζ),   Z″ = −2(Z + ζZ′).

    κ is the principal square root (Re κ > 0).  For real k this puts the resonance
    along k and gives the Landau continuation for any sign of k∥ (θ > 90° needs no
    special case: k∥V changes sign, κ does not).  For complex k at a fixed real angle,
    κ = k w_k on Re k > 0, so χ_s is the continuation analytic in the half-plane
    Re k > 0.  k = 0 gives a non-finite value.

    References
    ----------
    N. A. Krall and A. W. Trivelpiece, *Principles of Plasma Physics* (McGraw-Hill,
    1973), ch. 8, electrostatic dielectric of a Maxwellian (from memory);
    B. D. Fried and S. D. Conte (1961) for Z.

    A species with ``collision_frequency`` > 0 is handed to the number-conserving Krook
    model, :func:`kinroots.models.krook.susceptibility`.
    """
    if species.collision_frequency > 0.0:
        from kinroots.models import krook

        return krook.susceptibility(omega, species, k_par=k_par, k_perp=k_perp)
    om, kpar, kperp = np.broadcast_arrays(
        np.asarray(omega, dtype=complex),
        np.asarray(k_par, dtype=complex),
        np.asarray(k_perp, dtype=complex),
    )
    wpar2, wperp2 = thermal_speeds_squared(species)
    wp2 = species.plasma_frequency**2
    with np.errstate(all="ignore"):
        kappa2 = kperp * kperp * wperp2 + kpar * kpar * wpar2
        kappa = np.sqrt(kappa2)
        zeta = (om - kpar * species.drift) / kappa
        ms, dms = landau_moments(zeta, order=1)
        coef = -2.0 * wp2 / kappa2
        value = coef * ms[1]
        derivative = coef * dms[1] / kappa
    return Susceptibility(value=value, derivative=derivative, harmonics=0)
