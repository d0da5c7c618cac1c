r"""Shared private helpers of the magnetized builders: Bessel weights and truncation.

Both magnetized models (``es_magnetized``, ``em_magnetized``) sum over cyclotron
harmonics n with the weights

* ``Γ_n(λ) = e^{-λ} I_n(λ)``,
* ``Γ_n'(λ) = dΓ_n/dλ = (Γ_{n-1} + Γ_{n+1})/2 − Γ_n``,
* ``g_n(λ) = n Γ_n(λ)/λ = (Γ_{n-1} − Γ_{n+1})/2``,

all formed from one table of ``Γ_n`` (no finite differences, no division by λ, so λ = 0
is exact). The recurrences are ``I_n' = (I_{n-1} + I_{n+1})/2`` and
``2n I_n/λ = I_{n-1} − I_{n+1}`` (Abramowitz & Stegun 1964, eq. 9.6.26).

References
----------
M. Abramowitz and I. A. Stegun, *Handbook of Mathematical Functions* (1964), §9.6.
T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 10–11 (the weights of the hot tensor).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import ive

from kinroots.models.base import Susceptibility
from kinroots.plasma import Species

#: Largest |n| the adaptive truncation may reach; beyond it the builders return NaN.
MAX_HARMONICS = 20000


@dataclass(frozen=True)
class BesselWeights:
    """Harmonic weights for n = −N … N (arrays of length 2N + 1, n ascending).

    Attributes
    ----------
    n : ndarray of float
        Harmonic numbers −N … N.
    gamma, dgamma, g : ndarray of complex
        Γ_n(λ), Γ_n'(λ) and g_n = nΓ_n/λ.
    harmonics : int
        N, the largest |n| kept.
    converged : bool
        False when N would exceed :data:`MAX_HARMONICS` or λ is not finite (the weights
        are then NaN).
    """

    n: np.ndarray
    gamma: np.ndarray
    dgamma: np.ndarray
    g: np.ndarray
    harmonics: int
    converged: bool


def gamma_table(lam: complex, nmax: int) -> np.ndarray:
    """Γ_n(λ) = e^{−λ} I_n(λ) for n = 0 … nmax (complex λ allowed).

    Notes
    -----
    ``scipy.special.ive(n, λ) = I_n(λ) exp(−|Re λ|)``, hence
    ``Γ_n = ive(n, λ) · exp(|Re λ| − λ)``; the extra factor has modulus
    ``exp(|Re λ| − Re λ)`` (1 for Re λ ≥ 0), so nothing overflows for Re λ ≥ 0.
    """
    n = np.arange(nmax + 1, dtype=float)
    lam_c = complex(lam)
    with np.errstate(all="ignore"):
        if lam_c.imag == 0.0 and lam_c.real >= 0.0:
            return ive(n, lam_c.real).astype(complex)
        return ive(n, lam_c) * np.exp(abs(lam_c.real) - lam_c)


def _nan_weights(nmax: int) -> BesselWeights:
    nh = np.arange(-nmax, nmax + 1, dtype=float)
    nan = np.full(nh.shape, np.nan + 0j)
    return BesselWeights(nh, nan, nan.copy(), nan.copy(), nmax, False)


def bessel_weights(lam: complex, tol: float) -> BesselWeights:
    r"""Weights Γ_n, Γ_n', g_n for n = −N … N with N chosen adaptively.

    Parameters
    ----------
    lam : complex
        λ = k⊥² w⊥² / (2 Ω²) (complex for complex k⊥).
    tol : float
        Relative tolerance of the truncation.

    Returns
    -------
    BesselWeights

    Notes
    -----
    Truncation rule. Every weight used by the builders is bounded by
    ``m_n = max(|Γ_n|, |g_n|, |n g_n|, |n Γ_n'|, |2λ Γ_n'|)``, and the ω-dependent factor
    multiplying it grows at most like ``1 + |n|`` (Z(ζ_n), 1 + ζ_n Z(ζ_n) and the rational
    perpendicular limits are bounded for |n| beyond the central harmonics, and
    ``Im ζ_n`` does not depend on n). N is the smallest N ≥ 1 with::

        2 Σ_{n>N} (1 + n) m_n  ≤  tol · Σ_{|n|≤N} m_n.

    The table is extended (doubling) until the terms beyond it are below ``tol·1e-3``
    of the kept sum, so the tail is measured, not extrapolated. Γ_{−n} = Γ_n.
    """
    lam_c = complex(lam)
    if not (np.isfinite(lam_c.real) and np.isfinite(lam_c.imag)):
        return _nan_weights(1)
    tol = max(float(tol), 1e-300)
    a = abs(lam_c)
    guess = 24.0 + 10.0 * np.sqrt(a) + (abs(lam_c.imag) if abs(lam_c.imag) > a / 4 else 0.0)
    nmax = int(min(guess, MAX_HARMONICS))
    while True:
        gam = gamma_table(lam_c, nmax + 1)  # n = 0 … nmax+1
        gm1 = np.concatenate(([gam[1]], gam[:-2]))  # Γ_{n−1}, n = 0 … nmax
        gp1 = gam[1:]  # Γ_{n+1}
        g0 = gam[:-1]
        n = np.arange(nmax + 1, dtype=float)
        dg = 0.5 * (gm1 + gp1) - g0
        gn = 0.5 * (gm1 - gp1)
        m = np.max(
            np.abs(np.stack([g0, gn, n * gn, n * dg, 2.0 * lam_c * dg])), axis=0
        )
        if not np.all(np.isfinite(m)):
            return _nan_weights(1)
        kept = m[0] + 2.0 * np.cumsum(m) - 2.0 * m[0]  # Σ_{|n|≤N} m_n for N = 0 … nmax
        bound = (1.0 + n) * m
        tail = 2.0 * (np.cumsum(bound[::-1])[::-1] - bound)  # 2 Σ_{n>N} (1+n) m_n
        ok = (tail <= tol * kept) & (n >= 1)
        edge_small = bound[-1] <= 1e-3 * tol * kept[-1]
        if ok.any() and edge_small:
            N = int(np.argmax(ok))
            if N > MAX_HARMONICS - 2:
                return _nan_weights(MAX_HARMONICS)
            break
        if nmax >= MAX_HARMONICS:
            return _nan_weights(MAX_HARMONICS)
        nmax = min(2 * nmax, MAX_HARMONICS)
    nh = np.arange(-N, N + 1, dtype=float)
    idx = np.abs(nh).astype(int)
    sign = np.sign(nh)
    return BesselWeights(
        n=nh,
        gamma=g0[idx],
        dgamma=dg[idx],
        g=sign * gn[idx],
        harmonics=N,
        converged=True,
    )


def landau_sign(k_par: complex) -> float:
    """s = −1 when Re k∥ < 0, else +1: ζ is formed with s·k∥ so that Re(s k∥) ≥ 0.

    Notes
    -----
    For Re k∥ < 0 the resonant integral ``∫ F(u) du / (ω − k∥u − nΩ)`` with Im ω > 0 equals
    ``−Z(−ζ)/(k∥ w∥)``, i.e. the effective function is ``Z_eff(ζ) = s Z(s ζ)``, with
    ``Z_eff'(ζ) = Z'(sζ)`` and ``1 + ζ Z_eff(ζ) = 1 + (sζ) Z(sζ)``; its analytic continuation
    to Im ω ≤ 0 is the Landau prescription for either sign of k∥ (Stix 1992, §8-3, from
    memory).
    """
    return -1.0 if complex(k_par).real < 0.0 else 1.0


def nan_susceptibility(shape: tuple[int, ...], harmonics: int) -> Susceptibility:
    """A result that is non-finite everywhere (bad input or harmonic overflow)."""
    nan = np.full(shape, np.nan + 0j)
    return Susceptibility(value=nan, derivative=nan.copy(), harmonics=harmonics)


@dataclass(frozen=True)
class SpeciesSetup:
    """Per-call constants shared by the magnetized builders (SI units).

    ``lam`` = k⊥² w⊥² / (2 Ω²) and ``weights`` the truncated Bessel weights at it.
    """

    k_par: complex
    k_perp: complex
    w_par: float
    w_perp: float
    drift: float
    omega_c: float
    lam: complex
    weights: BesselWeights


def prepare_species(
    shape: tuple[int, ...], species: Species, *, k_par: complex, k_perp: complex, B: float,
    tol: float, model: str,
) -> SpeciesSetup | Susceptibility:
    """Validate the inputs of a magnetized builder and compute its per-call constants.

    Returns a non-finite :class:`Susceptibility` (to be returned as is) when an input is
    not finite, a temperature is not positive, or the harmonic sum does not converge.
    ``B == 0`` raises ValueError (the unmagnetized models apply).
    """
    if B == 0:
        raise ValueError(f"{model} needs B != 0; use the unmagnetized model for B = 0")
    kpar = complex(k_par)
    kperp = complex(k_perp)
    wpar = species.thermal_speed_par if species.temperature_par > 0 else np.nan
    wperp = species.thermal_speed_perp if species.temperature_perp > 0 else np.nan
    drift = float(species.drift)
    with np.errstate(all="ignore"):
        omega_c = species.cyclotron_frequency(B)
        lam = kperp * kperp * wperp * wperp / (2.0 * omega_c * omega_c)
    if not all(np.isfinite(x) for x in (kpar, kperp, B, wpar, wperp, omega_c, drift)):
        return nan_susceptibility(shape, 0)
    w = bessel_weights(lam, tol)
    if not w.converged:
        return nan_susceptibility(shape, w.harmonics)
    return SpeciesSetup(kpar, kperp, wpar, wperp, drift, omega_c, lam, w)
