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

import math
from collections.abc import Callable

import numpy as np

from kinroots.physics.models._harmonics import hdot, landau_sign, prepare_species
from kinroots.physics.models._landau import landau_moments, thermal_speeds_squared
from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species
from kinroots.physics.zfunc import (
    SHIFT_MAX_BITS,
    SHIFT_RETRIES,
    SHIFT_STEP,
    SHIFT_TOP_BITS,
    binary_exponent,
    landau_shift,
    ldexp_complex,
    plasma_z_and_prime,
)

__all__ = [
    "collisional",
    "denominator",
    "magnetized_parts",
    "magnetized_susceptibility",
    "product_sum",
    "ratio",
    "landau_bits",
    "magnetized_landau_bits",
    "scaled_dispersion",
    "split_dispersion",
    "split_parts",
    "susceptibility",
    "unmagnetized_parts",
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
    parts = unmagnetized_parts(omega, species, k_par=k_par, k_perp=k_perp)
    return parts[1], parts[3], parts[5]


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

    def parts(idx: np.ndarray | None) -> tuple[np.ndarray, ...]:
        o, a, b = (om, kpar, kperp) if idx is None else (
            om.ravel()[idx], kpar.ravel()[idx], kperp.ravel()[idx])
        return unmagnetized_parts(o, species, k_par=a, k_perp=b, dk=False)

    return ratio(parts, lambda idx: landau_bits(om.ravel()[idx], species,
                                                k_par=kpar.ravel()[idx],
                                                k_perp=kperp.ravel()[idx]),
                 om.shape, harmonics=0)


def ratio(
    parts: Callable[[np.ndarray | None], tuple[np.ndarray, ...]],
    bits: Callable[[np.ndarray], np.ndarray],
    shape: tuple[int, ...],
    *,
    harmonics: int,
) -> Susceptibility:
    """χ = N/Q and ∂χ/∂ω = (N′Q − NQ′)/Q² from ``parts`` = (N, Q, N′, Q′), overflow-free.

    Parameters
    ----------
    parts : callable
        ``parts(idx)`` gives N, Q, ∂N/∂ω, ∂Q/∂ω at the flat indices ``idx`` of the
        points (all points, shaped ``shape``, for ``idx = None``).
    bits : callable
        ``bits(idx)``: log₂ of the largest Landau term exp(−ζ²) at those points
        (:func:`landau_bits`).
    shape : tuple of int
        Shape of the points.
    harmonics : int
        Passed to the result.

    Notes
    -----
    N and Q are affine in the species' Landau terms 2i√π exp(−ζ²) (the reflection
    Z(ζ) = 2i√π exp(−ζ²) − Z(−ζ), NIST DLMF 7.4.3), so where they overflow the ratio is
    formed from the mantissas of :func:`split_parts` (the common power of two cancels);
    it stays finite since both grow like the same exponential.  Every evaluation is
    done with the terms unshifted (``landau_shift(0)``), whatever the caller's setting:
    χ is then a regular part for the affine split of :meth:`Dispersion.scaled`.
    """
    with landau_shift(0), np.errstate(all="ignore"):
        n, q, dn, dq = (np.asarray(x, dtype=complex) for x in parts(None))
        value = n / q
        derivative = (dn * q - n * dq) / (q * q)
        bad = ~(np.isfinite(value) & np.isfinite(derivative))
        if bad.any():  # overflow (or bad input, which stays NaN)
            idx = np.flatnonzero(bad)
            (nm, qm, dnm, dqm), _ = split_parts(
                lambda i: parts(idx if i is None else idx[i])[:4], lambda i: bits(idx[i]),
                idx.size)
            value = value.ravel().copy()
            derivative = derivative.ravel().copy()
            value[idx] = nm / qm
            derivative[idx] = (dnm * qm - nm * dqm) / (qm * qm)
            value, derivative = value.reshape(shape), derivative.reshape(shape)
    return Susceptibility(value=value, derivative=derivative, harmonics=harmonics)


def split_parts(
    evaluate: Callable[[np.ndarray | None], tuple[np.ndarray, ...]],
    bits: Callable[[np.ndarray], np.ndarray],
    size: int,
) -> tuple[list[np.ndarray], np.ndarray]:
    """Mantissas of (N, Q, derivatives …) of one species with one binary exponent per point.

    Parameters
    ----------
    evaluate : callable
        ``evaluate(idx)`` gives N, Q and any derivatives (arrays of one flat shape) at the
        points ``idx`` (an index array into ``range(size)``, or None for all), under the
        current :func:`~kinroots.physics.zfunc.landau_shift`.
    bits : callable
        ``bits(idx)``: log₂ of the largest Landau term at those points (:func:`landau_bits`).
    size : int
        Number of points.

    Returns
    -------
    mantissas : list of ndarray
        Each part times 2^−p (flat).
    p : ndarray of int
        The exponent: max(|N|, |Q|) < 2^p (0 where both vanish).

    Notes
    -----
    Every part is affine in the species' Landau terms, so where the plain evaluation
    overflows, one evaluation with the terms dropped (regular part R) and one with them
    times 2^−b (b from :func:`landau_bits`) give part = R + 2^b X exactly; the mantissas
    are R·2^−p + X·2^(b−p).  Elsewhere the plain parts are scaled by 2^−p, which is exact.
    A product such as F = Π Q_s + Σ N_s Π_(r≠s) Q_r, linear in each species' pair
    (N_s, Q_s), is then Π 2^(p_s) times the same product of mantissas (the argument of
    row scaling for a determinant; G. H. Golub and C. F. Van Loan, *Matrix
    Computations*, 4th ed., 2013, sec. 3.5.2).  Points beyond 2^(2^20) stay NaN.
    """
    with landau_shift(0), np.errstate(all="ignore"):
        plain = [np.asarray(x, dtype=complex).ravel() for x in evaluate(None)]
    with np.errstate(all="ignore"):
        n, q = plain[0], plain[1]
        big = np.maximum(np.maximum(np.abs(n.real), np.abs(n.imag)),
                         np.maximum(np.abs(q.real), np.abs(q.imag)))
        ok = np.isfinite(big) & (big > 0)
        # |p| ≤ 1000 keeps 2^−p a normal number, so the products below are exact
        p = np.clip(np.where(ok, np.frexp(np.where(ok, big, 1.0))[1], 0), -1000, 1000)
        scale = np.ldexp(1.0, -p)
        out = [x * scale for x in plain]
        bad = ~(ok | (big == 0)) | ~np.isfinite(sum(out[2:], out[0] + out[1]))
        if not bad.any():
            return out, p
        idx = np.flatnonzero(bad)
        want = np.asarray(bits(idx), dtype=float) - SHIFT_TOP_BITS
        with np.errstate(invalid="ignore"):
            groups = np.maximum(SHIFT_STEP, SHIFT_STEP * np.ceil(want / SHIFT_STEP))
        keep = groups <= SHIFT_MAX_BITS  # beyond (or NaN): left NaN
        for x in out:
            x[idx[~keep]] = np.nan
        idx, groups = idx[keep], groups[keep]
        for g in np.unique(groups):
            sel = idx[groups == g]
            with landau_shift(math.inf):
                reg = [np.asarray(x, dtype=complex).ravel() for x in evaluate(sel)]
            b = int(g)
            for _ in range(SHIFT_RETRIES):
                with landau_shift(b):
                    big = [np.asarray(x, dtype=complex).ravel() for x in evaluate(sel)]
                xs = [u - r for u, r in zip(big, reg, strict=True)]
                q = np.maximum(
                    np.maximum(binary_exponent(reg[0]), binary_exponent(xs[0]) + b),
                    np.maximum(binary_exponent(reg[1]), binary_exponent(xs[1]) + b))
                ms = [ldexp_complex(r, -q) + ldexp_complex(x, b - q)
                      for r, x in zip(reg, xs, strict=True)]
                if np.all([np.isfinite(m) for m in ms]):
                    break
                b += 4 * SHIFT_STEP
            for x, m in zip(out, ms, strict=True):
                x[sel] = m
            p[sel] = q
    return out, p


def landau_bits(
    omega: np.ndarray, species: Species, /, *, k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray,
) -> np.ndarray:
    """log₂|exp(−ζ′²)| where Im ζ′ < 0 (else 0): the Landau term of an unmagnetized species.

    ζ′ = (ω − k∥V + iν)/κ as in :func:`susceptibility` (ν = 0 collisionless).
    """
    with np.errstate(all="ignore"):
        kappa = _kappa(species, np.asarray(k_par, dtype=complex),
                       np.asarray(k_perp, dtype=complex))
        z = (np.asarray(omega, dtype=complex) - k_par * species.drift
             + 1j * species.collision_frequency) / kappa
        a = np.where(z.imag < 0.0, (z.imag - z.real) * (z.imag + z.real), 0.0)
    return a / math.log(2.0)


def unmagnetized_parts(
    omega: np.ndarray, species: Species, /, *, k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray, dk: bool = True,
) -> tuple[np.ndarray, ...]:
    """N, Q, ∂N/∂ω, ∂Q/∂ω (and ∂N/∂k, ∂Q/∂k if ``dk``) of :func:`susceptibility`.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s].
    species : Species
        A Maxwellian species, ν ≥ 0 (Q = 1 exactly at ν = 0: the collisionless χ = N).
    k_par, k_perp : complex or array_like
        Wave-vector components [1/m], broadcast against ``omega``; ∂/∂k is taken at fixed
        real direction.
    dk : bool
        Whether to return the k derivatives.

    Notes
    -----
    The formulas of :func:`susceptibility` (N) and :func:`denominator` (Q), one
    :func:`~kinroots.physics.models._landau.landau_moments` call:
    ∂N/∂k = −2N/k − (2ω_p²/κ²) M_1′ ∂ζ′/∂k (κ ∝ k at fixed direction).
    """
    om, kpar, kperp = np.broadcast_arrays(
        np.asarray(omega, dtype=complex),
        np.asarray(k_par, dtype=complex),
        np.asarray(k_perp, dtype=complex),
    )
    nu = float(species.collision_frequency)
    with np.errstate(all="ignore"):
        kappa = _kappa(species, kpar, kperp)
        zeta = (om - kpar * species.drift + 1j * nu) / kappa
        ms, dms = landau_moments(zeta, order=1)
        coef = -2.0 * species.plasma_frequency**2 / (kappa * kappa)
        n = coef * ms[1]
        dn = coef * dms[1] / kappa
        a = 1j * nu / kappa
        if nu == 0.0:
            q, dq = np.ones_like(om), np.zeros_like(om)
        else:
            q = 1.0 - a * ms[0]
            dq = -a * dms[0] / kappa
        if not dk:
            return n, q, dn, dq
        k = np.sqrt(kpar * kpar + kperp * kperp)
        dzeta_dk = -(kpar / k) * species.drift / kappa - zeta / k
        dnk = -2.0 * n / k + coef * dms[1] * dzeta_dk
        dqk = np.zeros_like(om) if nu == 0.0 else a * ms[0] / k - a * dms[0] * dzeta_dk
    return n, q, dn, dq, dnk, dqk


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
    dk: bool = True,
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Entire electrostatic dispersion function F = (Π_s Q_s)(1 + Σ_s χ_s) with collisions.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s].
    species : tuple of Species
        All species (unmagnetized Maxwellians; ν_s ≥ 0 each, Q_s = 1 where ν_s = 0).
    k : complex or array_like
        Wavenumber [1/m] (complex allowed, Re k > 0), broadcast against ``omega``.
    cos_theta, sin_theta : float
        Direction of k relative to z (fixed, real).

    Returns
    -------
    F, dF_domega, dF_dk : ndarray of complex
        dF_dk is None unless ``dk``.

    Notes
    -----
    With χ_s = N_s/Q_s (see :func:`susceptibility`), F = Π Q + Σ_s N_s Π_{r≠s} Q_r has the
    same zeros as D = 1 + Σ χ_s but none of its poles, so it is entire in ω and k
    (Re k > 0); N_s, Q_s and their derivatives from :func:`unmagnetized_parts`.  Needed
    because χ_s is not homogeneous in (ω, k) once ν ≠ 0, so dD/dk cannot come from
    Euler's relation.  Where F exceeds double precision, :func:`split_dispersion`.
    """
    om, kk = np.broadcast_arrays(np.asarray(omega, dtype=complex), np.asarray(k, dtype=complex))
    with np.errstate(all="ignore"):
        parts = [unmagnetized_parts(om, s, k_par=kk * cos_theta, k_perp=kk * sin_theta,
                                    dk=dk) for s in species]
        f, fw = product_sum([x[1] for x in parts], [x[3] for x in parts],
                            [x[0] for x in parts], [x[2] for x in parts], om)
        fk = product_sum([x[1] for x in parts], [x[5] for x in parts],
                         [x[0] for x in parts], [x[4] for x in parts], om)[1] if dk else None
    return f, fw, fk


def split_dispersion(
    omega: np.ndarray,
    species: tuple[Species, ...],
    /,
    *,
    k: complex | np.ndarray,
    cos_theta: float,
    sin_theta: float,
    dk: bool = True,
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None, np.ndarray]:
    """F, ∂F/∂ω, ∂F/∂k of :func:`scaled_dispersion` as mantissas times 2^P, never overflowing.

    Returns
    -------
    F_m, dF_domega_m, dF_dk_m : ndarray of complex
        F = F_m·2^P, and the same P for both derivatives (so ratios such as F′/F are
        those of the mantissas); dF_dk_m is None unless ``dk``.
    P : ndarray of int
        The binary exponent per point, Σ_s p_s.

    Notes
    -----
    Each species' (N_s, Q_s) and derivatives come scaled by 2^−p_s from
    :func:`split_parts` (overflow-free where a Landau term exceeds double precision);
    F is linear in each species' pair, so F = 2^(Σ p_s) times F of the mantissas.
    """
    om, kk = np.broadcast_arrays(np.asarray(omega, dtype=complex), np.asarray(k, dtype=complex))
    shape = om.shape
    ofl, kfl = om.ravel(), kk.ravel()
    qs, dqw, dqk, ns, dnw, dnk = [], [], [], [], [], []
    total = np.zeros(ofl.shape, dtype=np.int64)
    with np.errstate(all="ignore"):
        for s in species:
            def parts(idx: np.ndarray | None, s: Species = s) -> tuple[np.ndarray, ...]:
                o, kv = (ofl, kfl) if idx is None else (ofl[idx], kfl[idx])
                return unmagnetized_parts(o, s, k_par=kv * cos_theta, k_perp=kv * sin_theta,
                                          dk=dk)

            def bits(idx: np.ndarray, s: Species = s) -> np.ndarray:
                return landau_bits(ofl[idx], s, k_par=kfl[idx] * cos_theta,
                                   k_perp=kfl[idx] * sin_theta)

            (n, q, n_w, q_w, *n_q_k), p = split_parts(parts, bits, ofl.size)
            ns.append(n)
            qs.append(q)
            dnw.append(n_w)
            dqw.append(q_w)
            if dk:
                dnk.append(n_q_k[0])
                dqk.append(n_q_k[1])
            total += p
        f, fw = product_sum(qs, dqw, ns, dnw, ofl)
        fk = product_sum(qs, dqk, ns, dnk, ofl)[1].reshape(shape) if dk else None
    return f.reshape(shape), fw.reshape(shape), fk, total.reshape(shape)


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
    om = np.asarray(omega, dtype=complex)
    harm = [0]

    def parts(idx: np.ndarray | None) -> tuple[np.ndarray, ...]:
        n, dn, q, dq, harm[0] = magnetized_parts(om if idx is None else om.ravel()[idx],
                                                 species, k_par=k_par, k_perp=k_perp, B=B,
                                                 tol=tol)
        return n, q, dn, dq

    res = ratio(parts, lambda idx: magnetized_landau_bits(
        om.ravel()[idx], species, k_par=k_par, k_perp=k_perp, B=B, tol=tol),
        om.shape, harmonics=0)
    return Susceptibility(value=res.value, derivative=res.derivative, harmonics=harm[0])


def magnetized_landau_bits(
    omega: np.ndarray, species: Species, /, *, k_par: complex, k_perp: complex, B: float,
    tol: float = 1e-14,
) -> np.ndarray:
    """log₂ of the largest |exp(−ζ_n²)| over the kept harmonics where Im ζ_n < 0 (else 0).

    ζ_n = (ω − k∥V − nΩ + iν)/(s k∥w∥), s = sign Re k∥, |n| ≤ N, as in
    :func:`magnetized_parts` (ν = 0: the collisionless builder's arguments).
    """
    from kinroots.physics.models._harmonics import harmonics_needed

    om = np.asarray(omega, dtype=complex)
    kpar = complex(k_par)
    if kpar == 0 or om.size == 0:
        return np.zeros(om.shape)
    n_max = harmonics_needed(species, k_perp=complex(k_perp), B=B, tol=tol)
    n = np.arange(-n_max, n_max + 1)
    a = landau_sign(kpar) * kpar * species.thermal_speed_par
    with np.errstate(all="ignore"):
        z = (om[..., None] - kpar * species.drift - n * species.cyclotron_frequency(B)
             + 1j * species.collision_frequency) / a
        e = np.where(z.imag < 0.0, (z.imag - z.real) * (z.imag + z.real), 0.0)
    return np.max(e, axis=-1) / math.log(2.0)


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
