"""Velocity moments of the Landau resonant denominator, shared by the unmagnetized models.

M_n(ζ) moments of a Maxwellian profile against 1/(x − ζ) (and ∂/∂ζ), continued to the
lower half-plane by Landau's rule, by the Faddeeva function near the origin, a
Taylor table of 1 + ζZ at intermediate |ζ| (:mod:`kinroots.physics.zfunc`) and the
asymptotic series beyond;
:func:`first_moment_scalar` is the single-point path.  Both unmagnetized builders
(:mod:`~kinroots.physics.models.es_unmagnetized`, which re-exports these names, and
:mod:`~kinroots.physics.models.em_unmagnetized`) and the Krook model are written in them;
living here, below all three, they keep the model modules free of import cycles.
Plasma-dispersion function: B. D. Fried and S. D. Conte, *The Plasma Dispersion
Function*, Academic Press (1961).
"""

from __future__ import annotations

import cmath
import functools
import math
from collections.abc import Callable

import numpy as np
from scipy.special import wofz

from kinroots.physics.plasma import EV, Species
from kinroots.physics.zfunc import (
    _exp_term_scalar,
    _f_table_scalar,
    plasma_z_and_prime,
    shift_exponent,
    z_and_f_scalar,
)

__all__ = ["first_moment", "first_moment_scalar", "landau_moments", "thermal_speeds_squared"]

#: |ζ| below which Z comes from the bare Faddeeva function (1 + ζZ loses < 4|ζ|⁴ ulp).
_ZETA_FADDEEVA = 2.0
#: |ζ| from which the moments are summed from their asymptotic series (plus the exact
#: Landau exponential) instead of from Z: there the direct form 1 + ζZ loses ~|ζ|² ulp.
_ZETA_SERIES = 7.0
#: Re ζ² beyond which exp(−ζ²) (times any Landau shift 2^−b, b ≥ 0) underflows to zero.
_EXP_UNDERFLOW = 760.0
#: Terms kept in the asymptotic series; the last one is < 1e-18 of the first at |ζ| = 7
#: and the omitted remainder is of order exp(−|ζ|²) < 1e-21.
_N_TERMS = 27


def _shifted_exp(arg: np.ndarray) -> np.ndarray:
    """exp(arg) times the current Landau shift 2^-s (:func:`kinroots.physics.zfunc.
    landau_shift`; 0 when the terms are dropped)."""
    sh_hi, sh_lo = shift_exponent()
    if not sh_hi:
        return np.exp(arg)
    if math.isinf(sh_hi):
        return arg * 0.0
    return np.exp((arg - sh_hi) - sh_lo)


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
    smallest = float(finite.min())
    u_max = (1.0 / smallest) / smallest  # underflows to 0 (float ** 2 would raise OverflowError)
    terms = _A * u_max ** _N
    below = np.nonzero(terms[2:] < 1e-18)[0]
    count = _N_TERMS if below.size == 0 else int(below[0]) + 3
    return _A[:count], _N[:count]


#: Up to this many points the series of :func:`_series_moments` are summed in Python.
_SERIES_POINTS = 4


@functools.lru_cache(maxsize=64)
def _series_table(count: int, order: int) -> tuple[np.ndarray, tuple[tuple[float, ...], ...]]:
    """The coefficient rows of :func:`_series_moments` for ``count`` terms (array, read-only,
    and the same rows as tuples for the Python-arithmetic sums)."""
    a, n = _A[:count], _N[:count]
    rows = [a, (2 * n + 1) * a, a[1:], 2 * n[1:] * a[1:]]
    if order >= 2:
        rows.append((1 - 2 * n[1:]) * a[1:])
    if order >= 3:
        rows += [a[2:], (2 * n[2:] - 2) * a[2:]]
    table = np.zeros((len(rows), count))
    for r, row in enumerate(rows):
        table[r, : row.size] = row
    table.setflags(write=False)
    return table, tuple(tuple(row) for row in table.tolist())


def _series_moments(z: np.ndarray, order: int) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Moments M_0 … M_order and their ζ-derivatives for |ζ| ≥ _ZETA_SERIES.

    The polynomials in u = 1/ζ² of every moment are summed in one Horner pass over a
    (polynomials × points) array; a shorter polynomial is padded with zero leading
    coefficients, which leaves its Horner sum bit for bit unchanged.
    """
    u = 1.0 / (z * z)
    zi = 1.0 / z
    count = _terms_needed(z)[0].size
    table, rows_list = _series_table(count, order)
    if z.size <= _SERIES_POINTS:  # a few points: the same Horner sums in Python arithmetic
        sums = []
        for uu in u.reshape(-1).tolist():
            for row in rows_list:
                s = complex(row[-1])
                for c in row[-2::-1]:
                    s = s * uu + c
                sums.append(s)
        acc = np.array(sums, dtype=complex).reshape(z.shape + (len(rows_list),))
        acc = np.moveaxis(acc, -1, 0)
    else:
        acc = np.empty((len(rows_list),) + z.shape, dtype=complex)
        acc[...] = table[:, -1].reshape((-1,) + (1,) * z.ndim)
        for j in range(count - 2, -1, -1):
            acc *= u
            acc += table[:, j].reshape((-1,) + (1,) * z.ndim)
    m1 = u * acc[2]
    ms = [acc[0] * zi, m1]
    dms = [-u * acc[1], -zi * u * acc[3]]
    if order >= 2:
        ms.append(z * m1)
        dms.append(u * acc[4])
    if order >= 3:
        ms.append(u * acc[5])
        dms.append(-zi * u * acc[6])
    # Landau (exponential) part of Z: σ i√π exp(−ζ²), σ = 0, 1, 2 above, on, below
    # the real axis.  Evaluated only where σ ≠ 0 so that exp never overflows uselessly.
    sigma = np.where(z.imag > 0, 0.0, np.where(z.imag == 0, 1.0, 2.0))
    zl = np.where(sigma > 0, z, 0.0)
    e = sigma * 1j * np.sqrt(np.pi) * _shifted_exp(-zl * zl)
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
    """_ZETA_FADDEEVA ≤ |ζ| < _ZETA_SERIES: Z and Z′ = −2(1 + ζZ) from kinroots.physics.zfunc."""
    zf, zp = plasma_z_and_prime(z)
    return _moments_from_z(z, np.asarray(zf), 0.5 * np.asarray(zp), order)


#: Largest number of ω that :class:`SpeciesSum` evaluates point by point in Python.
_SCALAR_POINTS = 4
#: |ζ| splitting the series region in two, so that the many points of slow species far
#: above it are summed with the few terms their own smallest |ζ| needs.
_ZETA_SERIES_SPLIT = 20.0


def _series_m1(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """M_1 and dM_1/dζ alone for |ζ| ≥ _ZETA_SERIES (the series of ``_series_moments``)."""
    u = 1.0 / (z * z)
    a, n = _terms_needed(z)
    m1 = u * _horner(u, a[1:])
    dm1 = (-u / z) * _horner(u, 2.0 * n[1:] * a[1:])
    # Landau part, as in _series_moments: M_1 −= ζ e, dM_1 += (2ζ² − 1) e.
    lower = z.imag <= 0.0
    if lower.any():
        zl = z[lower]
        zz = zl * zl
        e = np.where(zl.imag == 0.0, 1.0, 2.0) * (1j * _SQRT_PI) * _shifted_exp(-zz)
        m1[lower] -= zl * e
        dm1[lower] += (2.0 * zz - 1.0) * e
    return m1, dm1


def _small_m1(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """M_1 and dM_1/dζ for |ζ| < _ZETA_FADDEEVA (bare Faddeeva function)."""
    zf = (1j * _SQRT_PI) * wofz(z)
    m1 = -(1.0 + z * zf)
    return m1, -zf - 2.0 * z * m1


def _middle_m1(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """M_1 = Z′/2 and dM_1/dζ = −Z − 2ζM_1 for _ZETA_FADDEEVA ≤ |ζ| < _ZETA_SERIES."""
    zf, zp = plasma_z_and_prime(z)
    m1 = 0.5 * zp
    return m1, -zf - 2.0 * z * m1


def _lean_kernel(r: float) -> Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]:
    """The order-1 kernel for a point of modulus ``r`` (NaN: the Faddeeva one)."""
    if r >= _ZETA_SERIES:
        return _series_m1
    return _middle_m1 if r >= _ZETA_FADDEEVA else _small_m1


#: Series coefficients and their derivative weights 2n·a_n, n = 1 … _N_TERMS − 1, as floats.
_A_LIST = [float(c) for c in _A]
_DA_LIST = [float(2 * n * c) for n, c in enumerate(_A)]


def _series_count(r: float) -> int:
    """Terms of the series kept at |ζ| = r: up to the first n ≥ 2 with a_n / r^{2n} below
    1e-18 (the rule of :func:`_terms_needed`), at most _N_TERMS."""
    ua = 1.0 / (r * r)
    power = ua
    for i in range(2, _N_TERMS):
        power *= ua  # ua**i
        if _A_LIST[i] * power < 1e-18:
            return i + 1
    return _N_TERMS


def _series_rows(count: int) -> tuple[float, float, tuple[tuple[float, float], ...]]:
    """The Horner data of ``count`` terms: a_{count−1}, 2(count−1)a_{count−1}, then the
    pairs (a_n, 2n·a_n) for n = count − 2 … 1."""
    rest = tuple((_A_LIST[n], _DA_LIST[n]) for n in range(count - 2, 0, -1))
    return _A_LIST[count - 1], _DA_LIST[count - 1], rest


#: |ζ| beyond which :data:`_SCALAR_ROWS` holds one last entry (5 terms there).
_COUNT_TABLE_END = 1024
#: Horner data (:func:`_series_rows`) for |ζ| in [n, n + 1), n < _COUNT_TABLE_END, then for
#: |ζ| ≥ _COUNT_TABLE_END: with the count at the cell's smallest |ζ|, which is enough
#: everywhere in the cell (the count never grows with |ζ|), so that a point needs no loop
#: to find its own.
_SCALAR_ROWS = tuple(_series_rows(_series_count(max(float(n), _ZETA_SERIES)))
                     for n in range(_COUNT_TABLE_END + 1))


def first_moment_scalar(zeta: complex) -> tuple[complex, complex]:
    """:func:`first_moment` at one finite point, in Python arithmetic.

    Parameters
    ----------
    zeta : complex
        Normalized frequency ζ, finite.

    Returns
    -------
    m1, dm1 : complex
        M_1(ζ) and dM_1/dζ, by the regions and formulas of :func:`landau_moments`.

    Raises
    ------
    OverflowError
        Where the Landau exponential overflows (the array version gives inf or nan).
    """
    r = abs(zeta)
    if r < _ZETA_SERIES:
        if r < _ZETA_FADDEEVA:
            zf = (1j * _SQRT_PI) * complex(wofz(zeta))
            m1 = -(1.0 + zeta * zf)
        elif zeta.imag >= 0.0:  # F from the Taylor table, as z_and_f_scalar takes it here
            f = _f_table_scalar(zeta)
            zf = (f - 1.0) / zeta
            m1 = -f
        else:
            zf, f = z_and_f_scalar(zeta)
            m1 = -f
        return m1, -zf - 2.0 * zeta * m1
    u = 1.0 / (zeta * zeta)
    # terms kept as in _terms_needed, with the count of the integer part of this |ζ|
    acc: complex
    dacc: complex
    acc, dacc, rest = _SCALAR_ROWS[int(r) if r < _COUNT_TABLE_END else -1]
    for a, da in rest:
        acc = acc * u + a
        dacc = dacc * u + da
    m1 = u * acc
    dm1 = -(u / zeta) * dacc
    if zeta.imag <= 0.0:
        t, dt = landau_term_scalar(zeta)
        m1 += t
        dm1 += dt
    return m1, dm1


def landau_term_scalar(zeta: complex) -> tuple[complex, complex]:
    """The Landau terms of M_1 and dM_1/dζ at one point with Im ζ ≤ 0 in the series
    region: −ζe and (2ζ² − 1)e, e = σ i√π exp(−ζ²) (σ = 1 on the real axis, 2 below;
    times the current :func:`~kinroots.physics.zfunc.landau_shift`), the exponent split
    exactly (relative error of a few ulp however large Im ζ² is); 0 where exp(−ζ²) is
    below the smallest double."""
    zz = zeta * zeta
    if zz.real > _EXP_UNDERFLOW:
        return 0j, 0j
    e = _exp_term_scalar(zeta)
    if zeta.imag == 0.0:
        e *= 0.5
    return -zeta * e, (2.0 * zz - 1.0) * e


def first_moment(zeta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """M_1(ζ) = −(1 + ζZ) and dM_1/dζ = −Z − 2ζM_1 alone (see :func:`landau_moments`).

    Parameters
    ----------
    zeta : ndarray of complex
        Normalized frequency ζ, 1-d.

    Returns
    -------
    m1, dm1 : ndarray of complex
        M_1 and its ζ-derivative, shaped like ``zeta``.

    Notes
    -----
    The same regions and formulas as :func:`landau_moments` with ``order=1``, without the
    moment M_0 and its derivative that the electrostatic susceptibility does not use.
    The series region is split at |ζ| = 20: each part is summed with the terms its
    smallest |ζ| needs. The caller sets ``np.errstate``.
    """
    z = zeta
    if z.size == 1:
        return _lean_kernel(float(abs(z[0])))(z)
    az = np.abs(z)
    series = az >= _ZETA_SERIES
    middle = (az >= _ZETA_FADDEEVA) & ~series
    small = ~(series | middle)  # NaN goes here and stays NaN
    m1 = np.empty_like(z)
    dm1 = np.empty_like(z)
    far = series & (az >= _ZETA_SERIES_SPLIT)
    near = series & ~far
    for kernel, mask in ((_small_m1, small), (_middle_m1, middle), (_series_m1, near),
                         (_series_m1, far)):
        if mask.any():
            a, b = kernel(z[mask])
            m1[mask] = a
            dm1[mask] = b
    return m1, dm1


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
    < 4|ζ|⁴ ulp there); from 2 to 7, Z and Z′ from ``kinroots.physics.zfunc`` (which computes
    1 + ζZ without cancellation, so that M_3 and dM_3, which magnify the error of Z by
    up to |ζ|⁴, stay at ~1e-13); from 7, the asymptotic series above.

    References
    ----------
    B. D. Fried and S. D. Conte, *The Plasma Dispersion Function* (Academic Press,
    1961): definition, Z′ = −2(1 + ζZ), asymptotic expansion (from memory).
    """
    z = np.asarray(zeta, dtype=complex)
    with np.errstate(all="ignore"):
        if z.size == 1:  # one point: its region without masks (NaN: the Faddeeva one)
            r = abs(complex(z.reshape(-1)[0]))
            if r >= _ZETA_SERIES:
                return _series_moments(z, order)
            if r >= _ZETA_FADDEEVA:
                return _middle_moments(z, order)
            return _small_moments(z, order)
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
#: Terms of the series per entry of :data:`_SCALAR_ROWS` (index int(|ζ|), last entry for
#: |ζ| ≥ _COUNT_TABLE_END).
_SCALAR_COUNTS = tuple(len(rest) + 2 for _, _, rest in _SCALAR_ROWS)

#: Horner data of one merged series: highest coefficient of the value and of the
#: derivative polynomial, then the pairs of the lower ones (see :func:`merged_series`).
MergedRow = tuple[complex, complex, tuple[tuple[complex, complex], ...]]


def merged_series(kappas: tuple[float, ...], coefficients: tuple[complex, ...]
                  ) -> tuple[MergedRow, ...] | None:
    """Σ_s c_s M_1(ζ_s) for species of one resonance shift, in one series.

    Parameters
    ----------
    kappas : tuple of float
        κ_s > 0 of each species, largest first (ζ_s = W/κ_s, W = ω − k∥V the shared
        shifted frequency).
    coefficients : tuple of complex
        c_s of each species (the χ_s coefficient −2ω_ps²/κ_s²).

    Returns
    -------
    tuple or None
        Indexed as :data:`_SCALAR_ROWS` (int(|ζ_0|), the last entry for |ζ_0| ≥
        _COUNT_TABLE_END), with the term count n_t of :data:`_SCALAR_COUNTS` there: the
        Horner data (B_{n_t−1}, 2(n_t−1)B_{n_t−1}, ((B_n, 2n·B_n) for n = n_t − 2 … 1))
        of

            Σ_s c_s M_1(ζ_s) = Σ_{n≥1} B_n X^n,
            Σ_s (c_s/κ_s) dM_1/dζ(ζ_s) = −(1/W) Σ_{n≥1} 2n B_n X^n,

        X = (κ_0/W)², B_n = a_n Σ_s c_s (κ_s/κ_0)^{2n}, without the Landau terms (added
        per species by the caller); None if a coefficient is not finite.

    Notes
    -----
    From the series of :func:`first_moment_scalar`, M_1 = Σ_{n≥1} a_n ζ^{−2n},
    dM_1/dζ = −(2/ζ) Σ_{n≥1} n a_n ζ^{−2n} (a_n = (2n − 1)!!/2^n, Fried & Conte 1961):
    ζ_s^{−2} = (κ_s/κ_0)² X and ζ_s κ_s = W. The count where |ζ_0| = |W|/κ_0 ≥ 7 (the
    warmest species) serves every species, since the n-th term of each, relative to
    its first, (a_n/a_1)|ζ_s|^{2−2n}, is at most that of species 0; the first terms
    a_1 c_s/ζ_s² = −ω_ps²/W² share one phase, so the sum does not cancel.
    """
    top = max(_SCALAR_COUNTS)
    b = [0j] * top
    for kappa, c in zip(kappas, coefficients, strict=True):
        ratio = (kappa / kappas[0]) ** 2
        power = 1.0
        for n in range(1, top):
            power *= ratio  # (κ_s/κ_0)^{2n}: 0 (underflow) only where that term is
            b[n] += c * (_A_LIST[n] * power)  # far below the species' first one
    if not all(cmath.isfinite(v) for v in b):
        return None
    rows: dict[int, MergedRow] = {}
    for count in set(_SCALAR_COUNTS):
        last = count - 1
        rows[count] = (b[last], 2 * last * b[last],
                       tuple((b[n], 2 * n * b[n]) for n in range(last - 1, 0, -1)))
    return tuple(rows[count] for count in _SCALAR_COUNTS)
