"""Entire dispersion functions of magnetized plasmas with Krook (BGK) species.

F = Π_s Q_s + Σ_s N_s Π_{r≠s} Q_r (the zeros of D = 1 + Σ_s χ_s without the poles of the
collisional χ_s = N_s/Q_s, :func:`kinroots.physics.models.krook.magnetized_parts`), with the
collisionless species from :mod:`~kinroots.physics.models.es_magnetized`.  Kept apart from
:mod:`~kinroots.physics.models.krook` so that the model modules import one way only (the
collisionless builders route collisional species to ``krook``).  Krook (BGK) operator:
P. L. Bhatnagar, E. P. Gross and M. Krook, Phys. Rev. 94, 511 (1954).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from kinroots.physics.models import es_magnetized, krook
from kinroots.physics.plasma import Species

__all__ = [
    "magnetized_scaled_dispersion",
    "magnetized_scaled_dispersion_in_k",
    "magnetized_split_dispersion",
    "magnetized_split_dispersion_in_k",
    "scaled_cauchy_derivative",
]


def _species_parts(
    om: np.ndarray, s: Species, k_par: complex, k_perp: complex, B: float, tol: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """N_s, Q_s, ∂N_s/∂ω, ∂Q_s/∂ω of one species (Q = 1 for a collisionless species)."""
    if s.collision_frequency > 0.0:
        n, dn, q, dq, _ = krook.magnetized_parts(om, s, k_par=k_par, k_perp=k_perp, B=B,
                                                 tol=tol)
        return n, q, dn, dq
    res = es_magnetized.susceptibility(om, s, k_par=k_par, k_perp=k_perp, B=B, tol=tol)
    return (np.asarray(res.value), np.ones_like(om), np.asarray(res.derivative),
            np.zeros_like(om))


def magnetized_split_dispersion(
    omega: np.ndarray,
    species: tuple[Species, ...],
    /,
    *,
    k_par: complex,
    k_perp: complex,
    B: float,
    tol: float = 1e-14,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """F and ∂F/∂ω of :func:`magnetized_scaled_dispersion` as mantissas times 2^P.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s].
    species, k_par, k_perp, B, tol
        As for :func:`magnetized_scaled_dispersion`.

    Returns
    -------
    F_m, dF_domega_m : ndarray of complex
        F = F_m·2^P and ∂F/∂ω = dF_m·2^P.
    P : ndarray of int
        Binary exponent per point, never overflowing.

    Notes
    -----
    Each species' (N_s, Q_s) is affine in its Landau terms exp(−ζ_n²) (the harmonic sums
    of :func:`~kinroots.physics.models.krook.magnetized_parts` and of the collisionless
    builder), so :func:`~kinroots.physics.models.krook.split_parts` gives them scaled by
    2^−p_s without overflow; F is linear in each pair, F = 2^(Σ p_s) F(mantissas).
    """
    om = np.asarray(omega, dtype=complex).ravel()
    qs, dqs, ns, dns = [], [], [], []
    total = np.zeros(om.shape, dtype=np.int64)
    with np.errstate(all="ignore"):
        for s in species:
            def parts(idx: np.ndarray | None, s: Species = s) -> tuple[np.ndarray, ...]:
                return _species_parts(om if idx is None else om[idx], s, k_par, k_perp, B,
                                      tol)

            def bits(idx: np.ndarray, s: Species = s) -> np.ndarray:
                return krook.magnetized_landau_bits(om[idx], s, k_par=k_par, k_perp=k_perp,
                                                    B=B, tol=tol)

            (n, q, dn, dq), p = krook.split_parts(parts, bits, om.size)
            ns.append(n)
            qs.append(q)
            dns.append(dn)
            dqs.append(dq)
            total += p
        f, df = krook.product_sum(qs, dqs, ns, dns, om)
    shape = np.shape(omega)
    return f.reshape(shape), df.reshape(shape), total.reshape(shape)


def magnetized_scaled_dispersion(
    omega: np.ndarray,
    species: tuple[Species, ...],
    /,
    *,
    k_par: complex,
    k_perp: complex,
    B: float,
    tol: float = 1e-14,
) -> tuple[np.ndarray, np.ndarray]:
    r"""Entire F = (Π_s Q_s)(1 + Σ_s χ_s) of a magnetized electrostatic plasma, and ∂F/∂ω.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s].
    species : tuple of Species
        All species; those with ν = 0 use the collisionless magnetized χ (any T∥, T⊥)
        and Q = 1, those with ν > 0 need T∥ = T⊥
        (:func:`~kinroots.physics.models.krook.magnetized_parts`).
    k_par, k_perp, B, tol
        As for :func:`~kinroots.physics.models.krook.magnetized_parts`.

    Returns
    -------
    F, dF_domega : ndarray of complex

    Notes
    -----
    F = Π Q + Σ_s N_s Π_{r≠s} Q_r: the zeros of D without the poles Q_s = 0 of χ_s.  Entire
    in ω for k∥ ≠ 0 (Z is entire); at k∥ = 0 with ν > 0, N_s and Q_s have poles at
    ω = nΩ_s − iν_s (see :func:`~kinroots.physics.models.krook.magnetized_parts`).
    """
    om = np.asarray(omega, dtype=complex)
    parts = [_species_parts(om, s, k_par, k_perp, B, tol) for s in species]
    with np.errstate(all="ignore"):
        return krook.product_sum([x[1] for x in parts], [x[3] for x in parts],
                                 [x[0] for x in parts], [x[2] for x in parts], om)


#: Points and relative radius of the Cauchy circle for ∂F/∂k (magnetized, collisional).
_CAUCHY_POINTS = 16
_CAUCHY_RADIUS = 1e-3


def magnetized_scaled_dispersion_in_k(
    omega: float,
    species: tuple[Species, ...],
    /,
    *,
    k: np.ndarray,
    cos_theta: float,
    sin_theta: float,
    B: float,
    tol: float = 1e-14,
) -> tuple[np.ndarray, np.ndarray]:
    r"""F of :func:`magnetized_scaled_dispersion` and ∂F/∂k at one ω, vectorized over k.

    Parameters
    ----------
    omega : float
        Real frequency [rad/s].
    species, B, tol
        As for :func:`magnetized_scaled_dispersion`.
    k : array_like of complex
        Wavenumbers [1/m] (Re k > 0), any shape.
    cos_theta, sin_theta : float
        Fixed real direction of k relative to B.

    Returns
    -------
    F, dF_dk : ndarray of complex
        NaN where k is zero or not finite.

    Notes
    -----
    Cauchy's formula on a circle (Ω_s fixed: no homogeneity in (ω, k)),
    ∂F/∂k = (1/(m r)) Σ_j F(k + r e^{iφ_j}) e^{−iφ_j}, φ_j = 2π(j + 1/2)/m, m = 16,
    r = 1e-3|k| (error of order (r/R)^16, R the distance to the nearest singularity).
    NaN where |arg k∥| > 45°, where the harmonic sum diverges at real ω
    (:func:`kinroots.physics.dispersion.dispersion_in_k`).
    """
    kk = np.asarray(k, dtype=complex)
    f = np.full(kk.shape, np.nan + 0j)
    fk = np.full(kk.shape, np.nan + 0j)
    om = np.array([complex(omega)])
    phis = 2.0 * np.pi * (np.arange(_CAUCHY_POINTS) + 0.5) / _CAUCHY_POINTS
    ring = np.exp(1j * phis)
    for idx in np.ndindex(kk.shape):
        k0 = complex(kk[idx])
        if not (np.isfinite(k0.real) and np.isfinite(k0.imag)) or k0 == 0:
            continue
        if ((k0 * cos_theta) ** 2).real < 0.0:
            continue  # |arg k∥| > 45°: the harmonic sum diverges (NaN)
        f[idx] = magnetized_scaled_dispersion(om, species, k_par=k0 * cos_theta,
                                              k_perp=k0 * sin_theta, B=B, tol=tol)[0][0]
        r = _CAUCHY_RADIUS * abs(k0)
        acc = 0j
        for e in ring:
            kj = k0 + r * e
            acc += magnetized_scaled_dispersion(om, species, k_par=kj * cos_theta,
                                                k_perp=kj * sin_theta, B=B, tol=tol)[0][0] / e
        fk[idx] = acc / (_CAUCHY_POINTS * r)
    return f, fk


def magnetized_split_dispersion_in_k(
    omega: float,
    species: tuple[Species, ...],
    /,
    *,
    k: np.ndarray,
    cos_theta: float,
    sin_theta: float,
    B: float,
    tol: float = 1e-14,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    r"""F and ∂F/∂k of :func:`magnetized_scaled_dispersion_in_k` as mantissas times 2^P.

    Parameters
    ----------
    omega, species, k, cos_theta, sin_theta, B, tol
        As for :func:`magnetized_scaled_dispersion_in_k`.

    Returns
    -------
    F_m, dF_dk_m : ndarray of complex
        F = F_m·2^P and ∂F/∂k = dF_dk_m·2^P; NaN where k is zero or not finite.
    P : ndarray of int
        Binary exponent per point.

    Notes
    -----
    F from :func:`magnetized_split_dispersion` at k and on a Cauchy circle
    (:func:`scaled_cauchy_derivative`: radius 1e-3 |k|, smaller where |F| changes fast).
    NaN where |arg k∥| > 45°: at real ω the harmonic sum diverges there (see
    :func:`kinroots.physics.dispersion.dispersion_in_k_scaled`).
    """
    kk = np.asarray(k, dtype=complex)
    f = np.full(kk.shape, np.nan + 0j)
    fk = np.full(kk.shape, np.nan + 0j)
    pp = np.zeros(kk.shape, dtype=np.int64)
    om = np.array([complex(omega)])
    for idx in np.ndindex(kk.shape):
        k0 = complex(kk[idx])
        if not (np.isfinite(k0.real) and np.isfinite(k0.imag)) or k0 == 0:
            continue
        if ((k0 * cos_theta) ** 2).real < 0.0:
            continue  # |arg k∥| > 45°: the harmonic sum diverges (NaN)

        def at(kj: complex) -> tuple[complex, int]:
            m, _, p = magnetized_split_dispersion(om, species, k_par=kj * cos_theta,
                                                  k_perp=kj * sin_theta, B=B, tol=tol)
            return complex(m[0]), int(p[0])

        f[idx], fk[idx], pp[idx] = scaled_cauchy_derivative(at, k0, _CAUCHY_POINTS,
                                                            _CAUCHY_RADIUS)
    return f, fk, pp


def scaled_cauchy_derivative(
    evaluate: Callable[[complex], tuple[complex, int]], k0: complex, points: int,
    radius: float,
) -> tuple[complex, complex, int]:
    """f(k0) and f′(k0) as mantissas times 2^p, from a function given as mantissa and exponent.

    Parameters
    ----------
    evaluate : callable
        ``evaluate(k) -> (m, p)`` with f(k) = m·2^p.
    k0 : complex
        The point.
    points : int
        Points on the circle.
    radius : float
        First radius, relative to |k0|.

    Returns
    -------
    f_m, df_m : complex
        f(k0) = f_m·2^p and f′(k0) = df_m·2^p.
    p : int

    Notes
    -----
    Cauchy's formula on a circle of radius r, trapezoid rule:
    f′(k0) ≈ (1/(m r)) Σ_j f(k0 + r e^{iφ_j}) e^{−iφ_j}, φ_j = 2π(j + 1/2)/m.  Its error is
    set by the Taylor coefficients of f beyond order m, which are small only while f
    changes by a moderate factor around the circle; where ln|f| varies by more than 1
    across it (a large Landau term grows like exp(−ζ²)), r is reduced in proportion and
    the sum repeated (up to 8 times).  The circle's mantissas are brought to the centre's
    exponent (exact powers of two).
    """
    m0, p0 = evaluate(k0)
    ring = np.exp(2j * np.pi * (np.arange(points) + 0.5) / points)
    r = radius * abs(k0)
    acc = complex("nan")
    for _ in range(8):
        vals = [evaluate(k0 + r * e) for e in ring.tolist()]
        lg = np.array([math.log(abs(m)) + (p - p0) * math.log(2.0) if m else -math.inf
                       for m, p in vals]) - math.log(abs(m0)) if m0 else np.zeros(points)
        acc = sum(math.ldexp(1.0, p - p0) * m / e
                  for (m, p), e in zip(vals, ring.tolist(), strict=True)) / (points * r)
        spread = float(np.max(np.abs(lg))) if np.all(np.isfinite(lg)) else math.inf
        if spread <= 1.0:
            break
        r *= 0.5 / spread if math.isfinite(spread) else 0.1
    return complex(m0), complex(acc), int(p0)
