r"""Shared private helpers of the magnetized builders: Bessel weights and truncation.

Both magnetized models (``es_magnetized``, ``em_magnetized``) sum over cyclotron
harmonics n with the weights

* ``Γ_n(λ) = e^{-λ} I_n(λ)``,
* ``Γ_n'(λ) = dΓ_n/dλ = (Γ_{n-1} + Γ_{n+1})/2 − Γ_n``,
* ``g_n(λ) = n Γ_n(λ)/λ = (Γ_{n-1} − Γ_{n+1})/2``,

all formed from one table of ``Γ_n`` (no finite differences, no division by λ, so λ = 0
is exact). The recurrences are ``I_n' = (I_{n-1} + I_{n+1})/2`` and
``2n I_n/λ = I_{n-1} − I_{n+1}`` (Abramowitz & Stegun 1964, eq. 9.6.26).

Two forms of every call: scalar k (weights of shape (2N+1,), shared by every ω; the root
finder's hot path) and array k (:func:`bessel_weights_array`: weights of shape
(rows, 2N+1), one row per k, with one N for all rows; :func:`evaluate_array` runs a
builder's formulas on the (k, ω) elements with them).

References
----------
M. Abramowitz and I. A. Stegun, *Handbook of Mathematical Functions* (1964), §9.6.
T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 10–11 (the weights of the hot tensor).
"""

from __future__ import annotations

import cmath
import functools
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, NamedTuple, overload

import numpy as np
from scipy.special import ive

from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species

#: Largest |n| the adaptive truncation may reach; beyond it the builders return NaN.
MAX_HARMONICS = 20000


@dataclass(frozen=True)
class BesselWeights:
    """Harmonic weights for n = −N … N (last axis of length 2N + 1, n ascending).

    Attributes
    ----------
    n : ndarray of float
        Harmonic numbers −N … N, shape (2N+1,).
    gamma, dgamma, g : ndarray of complex
        Γ_n(λ), Γ_n'(λ) and g_n = nΓ_n/λ: shape (2N+1,) for one λ
        (:func:`bessel_weights`), ``lam.shape + (2N+1,)`` for an array of λ
        (:func:`bessel_weights_array`; each row its element's own weights, zeros beyond
        them up to the common N).
    harmonics : int
        N, the largest |n| kept (for an array: the largest any element needs).
    converged : bool or ndarray of bool
        False when N would exceed :data:`MAX_HARMONICS` or λ is not finite (the weights
        are then NaN); elementwise (shape of ``lam``) for an array of λ.
    """

    n: np.ndarray
    gamma: np.ndarray
    dgamma: np.ndarray
    g: np.ndarray
    harmonics: int
    converged: bool | np.ndarray


def gamma_table(lam: complex | np.ndarray, nmax: int) -> np.ndarray:
    """Γ_n(λ) = e^{−λ} I_n(λ) for n = 0 … nmax (complex λ allowed).

    Parameters
    ----------
    lam : complex or ndarray of complex
        One λ (result of shape (nmax+1,)) or a 1-D array of them (result of shape
        (nmax+1, lam.size): n down the first axis, one ``ive`` evaluation on the whole
        grid per kind of λ).
    nmax : int
        Largest n.

    Returns
    -------
    ndarray of complex

    Notes
    -----
    ``scipy.special.ive(n, λ) = I_n(λ) exp(−|Re λ|)``, hence
    ``Γ_n = ive(n, λ) · exp(|Re λ| − λ)``; the extra factor has modulus
    ``exp(|Re λ| − Re λ)`` (1 for Re λ ≥ 0), so nothing overflows for Re λ ≥ 0.
    Real λ ≥ 0 uses the real-argument ``ive`` (so an element of an array agrees bit for
    bit with the scalar call at it).
    """
    n = np.arange(nmax + 1, dtype=float)
    with np.errstate(all="ignore"):
        if not isinstance(lam, np.ndarray):
            lam_c = complex(lam)
            if lam_c.imag == 0.0 and lam_c.real >= 0.0:
                return _gamma_real(n, lam_c.real)
            return _gamma_complex(n, lam_c)
        lam_row = lam.ravel()
        n = n[:, None]
        real = (lam_row.imag == 0.0) & (lam_row.real >= 0.0)
        if real.all():
            return _gamma_real(n, lam_row.real)
        out = np.empty((n.size, lam_row.size), dtype=complex)
        out[:, real] = _gamma_real(n, lam_row[real].real)
        out[:, ~real] = _gamma_complex(n, lam_row[~real])
        return out


def _gamma_real(n: np.ndarray, x: float | np.ndarray) -> np.ndarray:
    """Γ_n(x) for real x ≥ 0: ive(n, x) is e^{−x} I_n(x) itself."""
    return ive(n, x).astype(complex)


def _gamma_complex(n: np.ndarray, lam: complex | np.ndarray) -> np.ndarray:
    """Γ_n(λ) for any complex λ (see :func:`gamma_table`)."""
    return ive(n, lam) * np.exp(np.abs(np.real(lam)) - lam)


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

    The last :data:`WEIGHT_CACHE` results are kept (keyed by λ and tol): a survey or a
    Newton polish evaluates D many times at one k. Their arrays are read-only.
    """
    return _bessel_weights_cached(complex(lam), max(float(tol), 1e-300))


#: Number of (λ, tol) whose weights :func:`bessel_weights` keeps.
WEIGHT_CACHE = 256


@functools.lru_cache(maxsize=WEIGHT_CACHE)
def _bessel_weights_cached(lam_c: complex, tol: float) -> BesselWeights:
    w = _bessel_weights(lam_c, tol)
    for a in (w.n, w.gamma, w.dgamma, w.g):
        a.setflags(write=False)
    return w


def _bessel_weights(lam_c: complex, tol: float) -> BesselWeights:
    """:func:`bessel_weights` without the cache."""
    if not cmath.isfinite(lam_c):
        return _nan_weights(1)
    a = abs(lam_c)
    guess = 24.0 + 10.0 * np.sqrt(a) + (abs(lam_c.imag) if abs(lam_c.imag) > a / 4 else 0.0)
    nmax = int(min(guess, MAX_HARMONICS))
    while True:
        n, g0, dg, gn, m = _weight_table(gamma_table(lam_c, nmax + 1), lam_c)
        if not np.all(np.isfinite(m)):
            return _nan_weights(1)
        ok, edge_small = _truncation(n, m, tol)
        if ok.any() and edge_small:
            N = int(np.argmax(ok))
            if N > MAX_HARMONICS - 2:
                return _nan_weights(MAX_HARMONICS)
            break
        if nmax >= MAX_HARMONICS:
            return _nan_weights(MAX_HARMONICS)
        nmax = min(2 * nmax, MAX_HARMONICS)
    return _assemble(g0, dg, gn, N, True)


def bessel_weights_array(lam: np.ndarray, tol: float) -> BesselWeights:
    r"""The weights of :func:`bessel_weights` for many λ at once, with one common N.

    Parameters
    ----------
    lam : array_like of complex
        λ for each element, any shape.
    tol : float
        Relative tolerance of the truncation.

    Returns
    -------
    BesselWeights
        ``gamma``, ``dgamma``, ``g`` shaped ``lam.shape + (2N+1,)``, N = ``harmonics`` the
        largest N that any converged element needs; ``converged`` elementwise. Elements
        with a non-finite λ or a harmonic sum that does not converge have NaN rows.

    Notes
    -----
    Each element's N follows the rule of :func:`bessel_weights`, measured on one table
    for all elements (one ``ive`` evaluation on the (elements × harmonics) grid), started
    at the largest of the elements' initial guesses and doubled while some element's
    tail is not yet measured. Each row holds its element's weights up to its own N (the
    truncation a one-k call makes) and zeros beyond, up to the common N.

    The rows of the last :data:`ROW_CACHE` distinct λ are kept (keyed by λ and tol):
    tracing and the zero counts of ``solve`` evaluate D at the same few k many times,
    in calls that each cost more in fixed work than in points.  Calls with more
    than :data:`ROW_CACHE_CALL` distinct λ bypass it.
    """
    lam = np.asarray(lam, dtype=complex)
    flat = lam.ravel()
    tol = max(float(tol), 1e-300)
    keys, inverse = np.unique(flat, return_inverse=True)
    if keys.size > ROW_CACHE_CALL:
        rows = _weight_rows(keys, tol)
    else:
        found = [_ROWS.get((x, tol)) for x in keys.tolist()]
        todo = [j for j, r in enumerate(found) if r is None]
        if todo:
            for j, r in zip(todo, _weight_rows(keys[todo], tol), strict=True):
                found[j] = r
                if np.isfinite(keys[j]):
                    _ROWS[(complex(keys[j]), tol)] = r
            while len(_ROWS) > ROW_CACHE:
                del _ROWS[next(iter(_ROWS))]
        rows = [r for r in found if r is not None]
    need = np.array([r[0] for r in rows], dtype=int)
    converged = need[inverse.ravel()] >= 0
    if not converged.any():
        big = any(r[0] == -2 for r in rows)
        nan = _nan_weights(MAX_HARMONICS if big else 1)
        table = np.broadcast_to(nan.gamma, lam.shape + nan.gamma.shape)
        return BesselWeights(nan.n, table.copy(), table.copy(), table.copy(), nan.harmonics,
                             converged.reshape(lam.shape))
    N = int(need.max())
    width = 2 * N + 1
    # gather every row from one concatenated table per field: column c holds n = c − N,
    # i.e. entry |n| of its element's table if |n| ≤ its N, else 0 (NaN rows: no sum)
    n = np.arange(-N, N + 1)
    size = np.maximum(need, -1) + 1
    start = np.concatenate(([1], 1 + np.cumsum(size)[:-1]))  # entry 0: the zero
    inside = np.abs(n)[None, :] <= need[:, None]
    src = np.where(inside, start[:, None] + np.abs(n)[None, :], 0)
    fields = []
    for f in range(1, 4):
        table = np.concatenate([np.zeros(1, complex), *(r[f] for r in rows)])
        out = table[src]
        if f == 3:
            out = np.where(n < 0, -out, out)  # g_{−n} = −g_n
        out[need < 0] = np.nan
        fields.append(out)
    gamma, dgamma, g = (f[inverse.ravel()].reshape(lam.shape + (width,)) for f in fields)
    return BesselWeights(np.arange(-N, N + 1, dtype=float), gamma, dgamma, g, harmonics=N,
                         converged=converged.reshape(lam.shape))


#: Distinct (λ, tol) whose weight rows :func:`bessel_weights_array` keeps.
ROW_CACHE = 4096
#: Calls of :func:`bessel_weights_array` with more distinct λ than this bypass the cache.
ROW_CACHE_CALL = 512
#: λ, tol -> (N, Γ_n, Γ_n', g_n for n = 0 … N); N = −1 not converged, −2 beyond
#: MAX_HARMONICS. Insertion order is age (oldest dropped first); arrays read-only.
_ROWS: dict[tuple[complex, float], tuple[int, np.ndarray, np.ndarray, np.ndarray]] = {}


def _weight_rows(lam: np.ndarray, tol: float
                 ) -> list[tuple[int, np.ndarray, np.ndarray, np.ndarray]]:
    """(N, Γ_n, Γ_n', g_n for n = 0 … N) of each element of the 1-D ``lam``, by the rule
    of :func:`bessel_weights` measured on one table for all elements."""
    empty = np.zeros(0, dtype=complex)
    live = np.flatnonzero(np.isfinite(lam))
    need = np.full(lam.shape, -1)  # each element's N; −1: no converged sum, −2: too many
    g0 = dg = gn = np.zeros((0, 0), dtype=complex)
    if live.size:
        a = np.abs(lam[live])
        im = np.abs(lam[live].imag)
        guess = 24.0 + 10.0 * np.sqrt(a) + np.where(im > a / 4, im, 0.0)
        nmax = int(min(guess.max(), MAX_HARMONICS))
    while live.size:
        lam_live = lam[live]
        # tables with n down the first axis and one column per element
        n, g0, dg, gn, m = _weight_table(gamma_table(lam_live, nmax + 1), lam_live)
        ok, edge_small = _truncation(n, m, tol)
        finite = np.all(np.isfinite(m), axis=0)
        done = finite & ok.any(axis=0) & edge_small
        if np.all(done | ~finite) or nmax >= MAX_HARMONICS:
            first = np.argmax(ok, axis=0)
            fits = done & (first <= MAX_HARMONICS - 2)
            need[live[finite & ~fits]] = -2
            need[live[fits]] = first[fits]
            break
        live = live[finite]
        nmax = min(2 * nmax, MAX_HARMONICS)
    column = {int(e): c for c, e in enumerate(live)}
    out = []
    for e, n_e in enumerate(need.tolist()):
        if n_e < 0:
            out.append((n_e, empty, empty, empty))
            continue
        c = column[e]
        tabs = [t[:n_e + 1, c].copy() for t in (g0, dg, gn)]
        for t in tabs:
            t.setflags(write=False)
        out.append((n_e, *tabs))
    return out


def _weight_table(
    gam: np.ndarray, lam: complex | np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """n, Γ_n, Γ_n', g_n and the bound m_n for n = 0 … nmax from Γ_n, n = 0 … nmax+1.

    n runs down the first axis; a second axis, if any, runs over the elements of the
    1-D ``lam`` (else ``lam`` is a scalar). Γ_{−1} = Γ_1.
    """
    gm1 = np.concatenate(([gam[1]], gam[:-2]))  # Γ_{n−1}, n = 0 … nmax
    gp1 = gam[1:]  # Γ_{n+1}
    g0 = gam[:-1]
    n = np.arange(len(g0), dtype=float)
    if gam.ndim == 2:
        n = n[:, None]
    dg = 0.5 * (gm1 + gp1) - g0
    gn = 0.5 * (gm1 - gp1)
    m = np.max(np.abs(np.stack([g0, gn, n * gn, n * dg, 2.0 * lam * dg])), axis=0)
    return n, g0, dg, gn, m


def _truncation(n: np.ndarray, m: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """The rule of :func:`bessel_weights` down the first axis of the bounds ``m``.

    Returns ``ok`` (N = index satisfies the tail bound) and ``edge_small`` (the table's
    last term is negligible, so the measured tails are complete).
    """
    kept = m[0] + 2.0 * np.cumsum(m, axis=0) - 2.0 * m[0]  # Σ_{|n|≤N} m_n, N = 0 … nmax
    bound = (1.0 + n) * m
    tail = 2.0 * (np.cumsum(bound[::-1], axis=0)[::-1] - bound)  # 2 Σ_{n>N} (1+n) m_n
    ok = (tail <= tol * kept) & (n >= 1)
    edge_small = bound[-1] <= 1e-3 * tol * kept[-1]
    return ok, edge_small


def _assemble(g0: np.ndarray, dg: np.ndarray, gn: np.ndarray, N: int,
              converged: bool) -> BesselWeights:
    """Weights for n = −N … N from the tables for n ≥ 0 (Γ_{−n} = Γ_n, g_{−n} = −g_n).

    n down the first axis of the tables and of the result (columns: elements, if any).
    """
    nh = np.arange(-N, N + 1, dtype=float)
    idx = np.abs(nh).astype(int)
    sign = np.sign(nh)
    if gn.ndim == 2:
        sign = sign[:, None]
    return BesselWeights(
        n=nh,
        gamma=g0[idx],
        dgamma=dg[idx],
        g=sign * gn[idx],
        harmonics=N,
        converged=converged,
    )


def landau_sign(k_par: complex | np.ndarray) -> float | np.ndarray:
    """s = −1 when Re k∥ < 0, else +1: ζ is formed with s·k∥ so that Re(s k∥) ≥ 0.

    Parameters
    ----------
    k_par : complex or ndarray of complex
        k∥; for an array, s is returned elementwise (an array of ±1.0).

    Returns
    -------
    float or ndarray of float

    Notes
    -----
    For Re k∥ < 0 the resonant integral ``∫ F(u) du / (ω − k∥u − nΩ)`` with Im ω > 0 equals
    ``−Z(−ζ)/(k∥ w∥)``, i.e. the effective function is ``Z_eff(ζ) = s Z(s ζ)``, with
    ``Z_eff'(ζ) = Z'(sζ)`` and ``1 + ζ Z_eff(ζ) = 1 + (sζ) Z(sζ)``; its analytic continuation
    to Im ω ≤ 0 is the Landau prescription for either sign of k∥ (Stix 1992, §8-3, from
    memory).
    """
    if isinstance(k_par, np.ndarray):
        return np.where(k_par.real < 0.0, -1.0, 1.0)
    return -1.0 if complex(k_par).real < 0.0 else 1.0


def landau_z(
    zt: np.ndarray, zf: np.ndarray, zp: np.ndarray, s: float | np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Z_eff(ζ) = sZ(sζ) and dF/dζ = Z_eff + ζZ_eff' from Z, Z' at ``zt`` = sζ.

    Parameters
    ----------
    zt, zf, zp : ndarray of complex
        sζ, Z(sζ) and Z'(sζ).
    s : float or ndarray of float
        :func:`landau_sign` (scalar, or broadcast against ``zt`` elementwise).

    Returns
    -------
    z_eff, dfdz : ndarray of complex
        ``sZ(sζ)`` and ``s[Z(sζ) + sζ Z'(sζ)]`` (F = 1 + ζZ_eff = −Z'(sζ)/2 needs no sign).
    """
    if isinstance(s, np.ndarray):
        zf = s * zf
        return zf, zf + (s * zt) * zp
    if s < 0:
        zf = -zf
        return zf, zf - zt * zp
    return zf, zf + zt * zp


class HarmonicSums(NamedTuple):
    """How a builder's per-harmonic factors meet the weights (scalar or array k).

    Attributes
    ----------
    omega : ndarray of complex
        ω shaped so that the per-harmonic factors (harmonics on the last axis) broadcast
        against it: ``omega.shape + (1,)`` for scalar k, the (elements, 1) column itself
        for array k.
    dot : callable
        ``dot(x, w)`` = Σ_n x_n w_n over the last axis of ``x``, for a weight vector or a
        matrix (harmonics × columns); a result shaped like a builder's result (+ columns).
    total : callable
        ``total(w)`` = Σ_n w_n of a weight vector or matrix, shaped like a ``dot`` result.
    """

    omega: np.ndarray
    dot: Callable[[np.ndarray, np.ndarray], np.ndarray]
    total: Callable[[np.ndarray], np.ndarray]


def harmonic_sums(om: np.ndarray, weights: BesselWeights) -> HarmonicSums:
    """The :class:`HarmonicSums` for ω (result shape) and shared or per-element weights.

    The sums are ``np.vecdot`` contractions (one dot product per result element, which
    BLAS never splits across threads), not matrix products: the operands are small
    ((ω, 2N+1) against (2N+1, a few)), and a multithreaded BLAS matrix-vector product on
    such shapes costs more in thread hand-offs than it saves, the more so on a loaded
    machine (issue 14). ``np.einsum`` would avoid BLAS too, but is 5-15 times slower on
    complex operands (measured).
    """
    if weights.gamma.ndim == 1:
        return HarmonicSums(om[..., None], hdot, _total_shared)
    return HarmonicSums(om, _dot_rows, _total_rows)


def hdot(x: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Σ_n x_n w_n over the last axis of ``x`` and the first of ``w`` (shared weights).

    ``x`` (..., H) with ``w`` (H,) gives (...); with ``w`` (H, c) it gives (..., c).
    ``np.vecdot`` conjugates its first argument, hence ``w`` is conjugated first.
    """
    if w.ndim == 1:
        return np.vecdot(w.conj(), x)
    return np.vecdot(w.T.conj(), x[..., None, :])


def _total_shared(w: np.ndarray) -> np.ndarray:
    """Σ_n w_n of shared weights: (H,) → scalar, (H, c) → (c,)."""
    return w.sum(axis=0)


def _total_rows(w: np.ndarray) -> np.ndarray:
    """Σ_n w_n of per-element weights: (E, H) → (E, 1), (E, H, c) → (E, 1, c)."""
    return w.sum(axis=1, keepdims=True)


def _dot_rows(x: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Σ_n over rows: x (..., E, H) with w (E, H) → (..., E, 1), w (E, H, c) → (..., E, 1, c)."""
    if w.ndim == 2:
        return np.vecdot(w.conj(), x)[..., None]
    return np.vecdot(np.swapaxes(w, -1, -2).conj(), x[..., None, :])[..., None, :]


#: Largest residue, relative to the harmonic's frequency |nΩ|, of a k∥ = 0 pole whose term
#: is dropped at ω = nΩ exactly (:func:`reciprocal_off_poles`): the largest
#: ``solver.tolerance`` a case accepts (``kinroots.io.limits``), so every pole the survey
#: treats as a regular point (residue bound below its tolerance,
#: :mod:`kinroots.physics.harmonic_poles`) is one.
DROP_RESIDUE = 1e-4


def reciprocal_off_poles(diff: np.ndarray, residue: np.ndarray, scale: np.ndarray
                         ) -> np.ndarray:
    """1/diff, with 0 where diff is exactly 0 and the pole is negligible (call under
    ``np.errstate(all="ignore")``).

    Parameters
    ----------
    diff : ndarray
        ω − nΩ (or ω² − n²Ω²), harmonics on the last axis.
    residue : ndarray
        A bound on the modulus of each harmonic's residue [rad/s] (broadcast against
        ``diff``).
    scale : ndarray
        |nΩ| of each harmonic (broadcast likewise).

    Returns
    -------
    ndarray

    Notes
    -----
    Used for the k∥ = 0 terms 1/(ω − nΩ) (and 1/(ω² − n²Ω²)): at ω = nΩ exactly the term
    of a harmonic with residue ≤ :data:`DROP_RESIDUE`·|nΩ| is dropped, so D there is the
    sum of the other terms instead of inf or inf·0 = NaN.  Electrostatic: that is the
    finite part of the Laurent series at the pole (the pole's coefficient does not depend
    on ω).  Electromagnetic: the slope of the coefficient is left out too, at most
    2|R|/|nΩ| (R the residue).  The survey samples such a point only where it treats the
    harmonic as a regular point (R below rtol·|nΩ|, :mod:`kinroots.physics.harmonic_poles`),
    so D there is right to its resolution.  A pole with a larger residue stays a pole
    (inf or NaN exactly on it); the survey excludes those and never samples them.
    """
    r = 1.0 / diff
    hit = diff == 0
    if hit.any():
        r = np.where(hit & (residue <= DROP_RESIDUE * scale), 0.0, r)
    return r


#: |ω| / (|k⊥| w⊥) from which the k∥ = 0 moment series apply (|ζ| ≥ 16: their truncation
#: and the harmonics they leave out are below e^{−ζ²} ≈ 1e-111).
SERIES_MIN_ZETA = 16.0
#: Terms ν_2 … ν_2M of the moment series (relative tail below 1e-19 at |ζ| = 16).
SERIES_TERMS = 14
#: λ from which the k∥ = 0 builders take χ from the moment series wherever they apply:
#: the harmonic sum then has about 10√λ ≥ 100 terms per ω, the series a fixed 14, and
#: they agree to the sum's rounding (tests/test_harmonic_poles.py).
SERIES_MIN_LAMBDA = 100.0


def _moment_polynomials(terms: int) -> list[list[int]]:
    """Integer coefficients c[m][a] of μ_2m(λ) = Σ_a c[m][a] λ^a, m = 0 … ``terms`` (the
    cumulant recurrence of :func:`scaled_moments` on polynomials; c[m][m] = (2m − 1)!!)."""
    polys: list[list[int]] = [[1]]
    for m in range(1, terms + 1):
        acc = [0] * (m + 1)
        for i in range(1, m + 1):
            for a, c in enumerate(polys[m - i]):
                acc[a + 1] += math.comb(2 * m - 1, 2 * i - 1) * c
        polys.append(acc)
    return polys


_MOMENT_POLYNOMIALS = _moment_polynomials(SERIES_TERMS)


@functools.lru_cache(maxsize=WEIGHT_CACHE)
def _moment_coefficients(lam: complex) -> tuple[tuple[complex, ...], tuple[complex, ...]]:
    """q_m = Σ_a c_ma λ^(a−m) and r_m = Σ_a a c_ma λ^(a−m−1), m = 0 … SERIES_TERMS, so that
    ν_2m = q_m (λy)^m and ∂ν_2m/∂λ = r_m (λy)^m (cached per λ: one k, many ω)."""
    inv = 1.0 / lam
    q, r = [1.0 + 0j], [0j]
    for m in range(1, SERIES_TERMS + 1):
        poly = _MOMENT_POLYNOMIALS[m]
        q.append(sum(poly[a] * inv ** (m - a) for a in range(1, m + 1)))
        r.append(inv * sum(a * poly[a] * inv ** (m - a) for a in range(1, m + 1)))
    return tuple(q), tuple(r)


def scaled_moments(lam: np.ndarray, y: np.ndarray, terms: int = SERIES_TERMS
                   ) -> tuple[list[np.ndarray], list[np.ndarray]]:
    r"""ν_{2m} = μ_{2m} y^m and ∂ν_{2m}/∂λ for m = 0 … ``terms``, μ_{2m} = Σ_n n^{2m}Γ_n(λ).

    Parameters
    ----------
    lam, y : ndarray of complex
        λ and y = Ω²/ω², same shape.
    terms : int
        Largest m.

    Returns
    -------
    nu, dnu : list of ndarray
        ν_0 … ν_2M and their λ-derivatives at fixed y.

    Notes
    -----
    Γ_n is the distribution of the difference of two Poisson(λ/2) numbers (Skellam,
    J. R. Stat. Soc. 109, 296, 1946): ln Σ_n Γ_n eˢⁿ = λ(cosh s − 1) by A&S 9.6.33, so
    every even cumulant is λ and every odd one 0, and the moments follow from the
    cumulant recurrence μ_r = Σ_{i=1}^{r} C(r−1, i−1) κ_i μ_{r−i} (common practice),
    here for ν directly (κ_{2i} y^i = λ y^i: no overflow at any λ), and differentiated
    term by term for ∂ν/∂λ.  ν_2 = λy, ν_4 = (λ + 3λ²)y².
    """
    nu = [np.ones(lam.shape, dtype=complex)]
    dnu = [np.zeros(lam.shape, dtype=complex)]
    lam0 = complex(lam.flat[0]) if lam.size else 0j
    if lam0 != 0 and terms <= SERIES_TERMS and np.all(lam == lam0):
        # one λ (one k): ν_2m = u^m Σ_a c_ma λ^(a−m), u = λy, from the integer moment
        # polynomials μ_2m = Σ_a c_ma λ^a (same recurrence), coefficients formed once
        q, r = _moment_coefficients(lam0)
        u = lam0 * y
        p = np.ones(y.shape, dtype=complex)
        for m in range(1, terms + 1):
            p = p * u
            nu.append(q[m] * p)
            dnu.append(r[m] * p)
        return nu, dnu
    yi = [y**i for i in range(1, terms + 1)]
    for m in range(1, terms + 1):
        acc = np.zeros(lam.shape, dtype=complex)
        dacc = np.zeros(lam.shape, dtype=complex)
        for i in range(1, m + 1):
            c = math.comb(2 * m - 1, 2 * i - 1)
            acc += c * lam * yi[i - 1] * nu[m - i]
            dacc += c * yi[i - 1] * (nu[m - i] + lam * dnu[m - i])
        nu.append(acc)
        dnu.append(dacc)
    return nu, dnu


def gamma0_slope(lam: np.ndarray) -> np.ndarray:
    r"""Γ_0'(λ) = Γ_1(λ) − Γ_0(λ) without the cancellation of the difference at large λ.

    Below |λ| = 1e3 from :func:`gamma_table`; above, from the asymptotic expansion
    e^{−λ}I_ν(λ) ~ (2πλ)^{−1/2} Σ_k (−1)^k a_k(ν) λ^{−k}, a_k(ν) = Π_{i=1}^{k}(4ν² −
    (2i − 1)²)/(k! 8^k) (A&S 9.7.1), differenced term by term (a_0 cancels exactly).
    """
    lam = np.asarray(lam, dtype=complex)
    out = np.empty(lam.shape, dtype=complex)
    big = np.abs(lam) >= 1e3
    small = ~big
    if small.any():
        tab = gamma_table(lam[small], 1)
        out[small] = tab[1] - tab[0]
    if big.any():
        x = lam[big]
        acc = np.zeros(x.shape, dtype=complex)
        a0 = a1 = 1.0
        for k in range(1, 12):
            a0 *= (0.0 - (2 * k - 1) ** 2) / (8.0 * k)
            a1 *= (4.0 - (2 * k - 1) ** 2) / (8.0 * k)
            acc += (-1) ** k * (a1 - a0) / x**k
        out[big] = acc / np.sqrt(2.0 * np.pi * x)
    return out


def with_series(
    omega: np.ndarray, species: Species, *, k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray, B: float, tail: tuple[int, ...],
    series: Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]],
    rest: Callable[[np.ndarray, Any, Any], Susceptibility],
) -> Susceptibility | None:
    """A k∥ = 0 builder's result with the moment series where it applies, else None.

    Parameters
    ----------
    omega, species, k_par, k_perp, B
        As for the builder.
    tail : tuple of int
        Trailing shape of one element's result.
    series : callable
        ``series(om, kperp)`` → value, derivative at 1-D arrays of elements (shape
        ``(E,) + tail``), NaN where the series does not apply.
    rest : callable
        ``rest(om, k_par, k_perp)`` → the builder's harmonic sum at the other elements
        (scalar k passed through, or 1-D arrays).

    Returns
    -------
    Susceptibility or None
        None unless k∥ = 0 everywhere, the species is collisionless and some element has
        λ ≥ :data:`SERIES_MIN_LAMBDA` and |ω| ≥ :data:`SERIES_MIN_ZETA`·|k⊥|w⊥ (the
        harmonic sum then serves alone).  ``harmonics`` is that of the harmonic sum at
        the other elements, 0 if there are none.
    """
    kpar = np.asarray(k_par, dtype=complex)
    if species.collision_frequency > 0.0 or B == 0 or np.any(kpar != 0):
        return None
    kperp = np.asarray(k_perp, dtype=complex)
    om = np.asarray(omega, dtype=complex)
    with np.errstate(all="ignore"):
        omega_c = species.cyclotron_frequency(B)
        wperp = species.thermal_speed_perp if species.temperature_perp > 0 else np.nan
        lam = np.abs(kperp) ** 2 * wperp**2 / (2.0 * omega_c * omega_c)
        if not np.any(lam >= SERIES_MIN_LAMBDA):
            return None
        shape = np.broadcast_shapes(om.shape, kpar.shape, kperp.shape)
        om_b = np.broadcast_to(om, shape)
        kperp_b = np.broadcast_to(kperp, shape)
        cand = (np.broadcast_to(lam, shape) >= SERIES_MIN_LAMBDA) & np.isfinite(om_b) & (
            np.abs(om_b) >= SERIES_MIN_ZETA * np.abs(kperp_b) * wperp)
        if not cand.any():
            return None
        value = np.full(shape + tail, np.nan + 0j)
        derivative = value.copy()
        v, d = series(om_b[cand], kperp_b[cand])
        value[cand] = v
        derivative[cand] = d
    axes = tuple(range(len(shape), len(shape) + len(tail)))
    use = cand & np.all(np.isfinite(value), axis=axes) & np.all(np.isfinite(derivative),
                                                                 axis=axes)
    others = ~use
    harmonics = 0
    if others.any():
        scalar = not is_array_k(k_par, k_perp)
        sub = rest(om_b[others], k_par if scalar else np.broadcast_to(kpar, shape)[others],
                   k_perp if scalar else kperp_b[others])
        value[others] = np.asarray(sub.value).reshape((-1,) + tail)
        derivative[others] = np.asarray(sub.derivative).reshape((-1,) + tail)
        harmonics = sub.harmonics
    return Susceptibility(value=value, derivative=derivative, harmonics=harmonics)


def nan_susceptibility(shape: tuple[int, ...], harmonics: int) -> Susceptibility:
    """A result that is non-finite everywhere (bad input or harmonic overflow)."""
    nan = np.full(shape, np.nan + 0j)
    return Susceptibility(value=nan, derivative=nan.copy(), harmonics=harmonics)


@dataclass(frozen=True)
class SpeciesSetup:
    """Per-call constants shared by the magnetized builders (SI units).

    ``lam`` = k⊥² w⊥² / (2 Ω²) and ``weights`` the truncated Bessel weights at it.  For
    array k (:meth:`ArraySetup.subset`), ``k_par``, ``k_perp`` and ``lam`` are (E, 1)
    columns and the weights have one row per element.
    """

    k_par: complex | np.ndarray
    k_perp: complex | np.ndarray
    w_par: float
    w_perp: float
    drift: float
    omega_c: float
    lam: complex | np.ndarray
    weights: BesselWeights


def _species_constants(species: Species, B: float, model: str) -> tuple[float, ...]:
    """w∥, w⊥ (NaN for a non-positive temperature), V and the signed Ω = qB/m.

    Call under ``np.errstate(all="ignore")`` (a non-finite B gives a non-finite Ω).
    """
    if B == 0:
        raise ValueError(f"{model} needs B != 0; use the unmagnetized model for B = 0")
    wpar = species.thermal_speed_par if species.temperature_par > 0 else np.nan
    wperp = species.thermal_speed_perp if species.temperature_perp > 0 else np.nan
    return wpar, wperp, float(species.drift), species.cyclotron_frequency(B)


@overload
def _lam(kperp: complex, wperp: float, omega_c: float) -> complex: ...
@overload
def _lam(kperp: np.ndarray, wperp: float, omega_c: float) -> np.ndarray: ...
def _lam(kperp: complex | np.ndarray, wperp: float, omega_c: float) -> complex | np.ndarray:
    """λ = k⊥² w⊥² / (2 Ω²)."""
    return kperp * kperp * wperp * wperp / (2.0 * omega_c * omega_c)


def prepare_species(
    shape: tuple[int, ...], species: Species, *, k_par: complex, k_perp: complex, B: float,
    tol: float, model: str,
) -> SpeciesSetup | Susceptibility:
    """Validate the inputs of a magnetized builder and compute its per-call constants.

    Returns a non-finite :class:`Susceptibility` (to be returned as is) when an input is
    not finite, a temperature is not positive, or the harmonic sum does not converge.
    ``B == 0`` raises ValueError (the unmagnetized models apply).
    """
    kpar = complex(k_par)
    kperp = complex(k_perp)
    with np.errstate(all="ignore"):
        wpar, wperp, drift, omega_c = _species_constants(species, B, model)
        lam = _lam(kperp, wperp, omega_c)
    if not (cmath.isfinite(kpar) and cmath.isfinite(kperp)
            and all(math.isfinite(x) for x in (B, wpar, wperp, omega_c, drift))):
        return nan_susceptibility(shape, 0)
    w = bessel_weights(lam, tol)
    if not w.converged:
        return nan_susceptibility(shape, w.harmonics)
    return SpeciesSetup(kpar, kperp, wpar, wperp, drift, omega_c, lam, w)


def harmonics_needed(species: Species, *, k_perp: complex, B: float, tol: float) -> int:
    """N, the largest |n| a magnetized builder keeps for ``species`` at k⊥ (any ω).

    The truncation depends on λ = k⊥²w⊥²/(2Ω²) and ``tol`` only (rule of
    :func:`bessel_weights`, whose cached table is the one the builders then use); 0 when
    an input is not finite or a temperature is not positive (the builders give NaN).
    """
    needed = 0
    for _, part in species.component_species():  # a species made of Maxwellian parts
        with np.errstate(all="ignore"):
            wperp = part.thermal_speed_perp if part.temperature_perp > 0 else np.nan
            omega_c = part.cyclotron_frequency(B)
            lam = _lam(complex(k_perp), wperp, omega_c)
        if B != 0 and cmath.isfinite(lam):
            needed = max(needed, int(bessel_weights(lam, tol).harmonics))
    return needed


def fixed_k_sum(cls: Callable[..., Any], species: tuple[Species, ...], *, k_par: complex,
                B: float, **kwargs: Any) -> Any:
    """``cls(species, k_par=…, B=…, **kwargs)``, a species sum at fixed k, or None where
    the builders must serve instead: k∥ = 0, no species, B = 0, a species that is not one
    plain collisionless bi-Maxwellian, a non-finite constant (``cls`` raises ValueError
    or an arithmetic error, or one of its ``constant_arrays()`` is not finite) or a
    harmonic sum that does not converge (:func:`species_setup` raises)."""
    if complex(k_par) == 0 or not species or B == 0:
        return None
    if not all(getattr(s, "is_plain_maxwellian", True) and s.collision_frequency == 0.0
               for s in species):
        return None
    try:
        with np.errstate(all="ignore"):
            out = cls(tuple(species), k_par=k_par, B=B, **kwargs)
    except (ValueError, ZeroDivisionError, OverflowError):
        return None
    if not all(np.all(np.isfinite(x)) for x in out.constant_arrays()):
        return None
    return out


def species_setup(species: Species, *, k_par: complex, k_perp: complex, B: float, tol: float,
                  model: str) -> SpeciesSetup:
    """:func:`prepare_species` for one species of a fixed-k sum; ValueError where the
    builder would return NaN (non-finite constants, no converged harmonic sum)."""
    setup = prepare_species((), species, k_par=k_par, k_perp=k_perp, B=B, tol=tol, model=model)
    if isinstance(setup, Susceptibility):
        raise ValueError("non-finite species constants or no converged harmonic sum")
    return setup


#: Number of ω at one k from which an array-k call evaluates that k with shared weights
#: (measured on one core: below about this many ω per k the per-element batch is cheaper,
#: the scalar-k call having a fixed cost of some 20 batched elements).
SHARED_ROW_MIN = 128

_SCALAR_TYPES = (complex, float, int, np.complex128, np.float64)


def is_array_k(k_par: complex | np.ndarray, k_perp: complex | np.ndarray) -> bool:
    """True when k∥ or k⊥ has at least one dimension (the builders' array-k path)."""
    if type(k_par) in _SCALAR_TYPES and type(k_perp) in _SCALAR_TYPES:
        return False
    return np.ndim(k_par) > 0 or np.ndim(k_perp) > 0


@dataclass(frozen=True)
class ArraySetup:
    """An array-k call of a magnetized builder, flattened to its (k, ω) elements.

    Attributes
    ----------
    shape : tuple of int
        Broadcast shape of ω, k∥ and k⊥ (the result's leading shape).
    omega, k_par, k_perp : ndarray of complex
        The E elements, flattened (C order).
    row : ndarray of int
        For each element, its row of ``lam`` and ``weights`` (one row per distinct
        (k∥, k⊥), so that many ω at one k share one row).
    lam : ndarray of complex
        λ per row.
    weights : BesselWeights
        Weights with one row per row of ``lam`` and one N for all.
    good : ndarray of bool
        Elements with finite ω, k and a converged harmonic sum (the others are NaN).
    w_par, w_perp, drift, omega_c : float
        As in :class:`SpeciesSetup`.
    """

    shape: tuple[int, ...]
    omega: np.ndarray
    k_par: np.ndarray
    k_perp: np.ndarray
    row: np.ndarray
    lam: np.ndarray
    weights: BesselWeights
    good: np.ndarray
    w_par: float
    w_perp: float
    drift: float
    omega_c: float

    def subset(self, mask: np.ndarray) -> tuple[np.ndarray, SpeciesSetup]:
        """ω and the :class:`SpeciesSetup` of the elements in ``mask``, as (E, 1) columns."""
        row = self.row[mask]
        w = self.weights
        weights = BesselWeights(w.n, w.gamma[row], w.dgamma[row], w.g[row], w.harmonics, True)
        setup = SpeciesSetup(
            self.k_par[mask][:, None], self.k_perp[mask][:, None], self.w_par, self.w_perp,
            self.drift, self.omega_c, self.lam[row][:, None], weights,
        )
        return self.omega[mask][:, None], setup

    def row_setup(self, element: int) -> SpeciesSetup:
        """The scalar-k :class:`SpeciesSetup` of the k of ``element`` (its row of the
        weights used as shared weights)."""
        r = self.row[element]
        w = self.weights
        weights = BesselWeights(w.n, w.gamma[r], w.dgamma[r], w.g[r], w.harmonics, True)
        return SpeciesSetup(
            complex(self.k_par[element]), complex(self.k_perp[element]), self.w_par,
            self.w_perp, self.drift, self.omega_c, complex(self.lam[r]), weights,
        )


def _distinct_rows(rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct rows of a 2-D complex array (equal bit for bit) and, for each row, the
    index of its distinct row: ``np.unique(rows, axis=0, return_inverse=True)`` up to the
    order of the distinct rows, by a sort on the rows' 64-bit words (``np.unique`` with
    ``axis`` sorts a structured view, about 10× slower on thousands of rows)."""
    bits = np.ascontiguousarray(rows).view(np.int64)
    order = np.lexsort(bits.T[::-1])
    ranked = bits[order]
    new = np.ones(len(rows), dtype=bool)
    np.any(ranked[1:] != ranked[:-1], axis=1, out=new[1:])
    inverse = np.empty(len(rows), dtype=np.intp)
    inverse[order] = np.cumsum(new) - 1
    return rows[order[new]], inverse


def prepare_species_array(
    omega: np.ndarray, species: Species, *, k_par: np.ndarray, k_perp: np.ndarray, B: float,
    tol: float, model: str, tail: tuple[int, ...],
) -> ArraySetup | Susceptibility:
    """:func:`prepare_species` for array k: the elements and their weights.

    ω, k∥ and k⊥ are broadcast together; λ and the weights are computed once per
    distinct (k∥, k⊥) (:func:`bessel_weights_array`). Returns a non-finite
    :class:`Susceptibility` shaped ``shape + tail`` when a species constant or B is not
    finite; bad elements are marked in ``good``.
    """
    with np.errstate(all="ignore"):
        wpar, wperp, drift, omega_c = _species_constants(species, B, model)
    kpar, kperp = np.broadcast_arrays(np.asarray(k_par, dtype=complex),
                                      np.asarray(k_perp, dtype=complex))
    om = np.asarray(omega, dtype=complex)
    shape = np.broadcast_shapes(om.shape, kpar.shape)
    if not all(math.isfinite(x) for x in (B, wpar, wperp, omega_c, drift)):
        return nan_susceptibility(shape + tail, 0)
    # one row per distinct wavevector (a batch of pairs holds a few k, each with many
    # ω): the Bessel weights are computed once per k, and elements of one row share k∥
    # and k⊥ (evaluate_array's shared-row path relies on it)
    kp = kperp.ravel()
    both = np.stack((kpar.ravel(), kp), axis=1)
    rows_k = np.arange(kp.size).reshape(kpar.shape)
    if kp.size > 1 and np.all(np.isfinite(both)):
        distinct, inverse = _distinct_rows(both)
        if len(distinct) < kp.size:
            kp, rows_k = distinct[:, 1], inverse.reshape(kpar.shape)
    with np.errstate(all="ignore"):
        lam = _lam(kp, wperp, omega_c)
    weights = bessel_weights_array(lam, tol)
    row = np.broadcast_to(rows_k, shape).ravel()
    om_e = np.broadcast_to(om, shape).ravel()
    kpar_e = np.broadcast_to(kpar, shape).ravel()
    kperp_e = np.broadcast_to(kperp, shape).ravel()
    good = (np.isfinite(om_e) & np.isfinite(kpar_e) & np.isfinite(kperp_e)
            & np.asarray(weights.converged)[row])
    return ArraySetup(shape, om_e, kpar_e, kperp_e, row, lam, weights, good, wpar, wperp, drift,
                      omega_c)


Parts = Callable[[np.ndarray, SpeciesSetup, bool], tuple[np.ndarray, np.ndarray]]


def evaluate(
    omega: np.ndarray, species: Species, *, k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray, B: float, tol: float, model: str, tail: tuple[int, ...],
    parts: Parts,
) -> Susceptibility:
    """A magnetized builder's result: scalar k (one shared set of weights), or array k.

    Parameters
    ----------
    omega, species, k_par, k_perp, B, tol
        As for the builder.
    model : str
        Name used in the B = 0 error.
    tail : tuple of int
        Trailing shape of one element's result: () for χ_s, (3, 3) for a tensor.
    parts : callable
        ``parts(omega, setup, perpendicular)`` → (value, derivative) of the builder's
        formulas, shaped ``omega.shape + tail``: at any ω with a scalar-k ``setup``, or at
        (E, 1) columns ω, k with per-element weights (:func:`evaluate_array`);
        ``perpendicular`` selects the exact k∥ = 0 limit. Called under
        ``np.errstate(all="ignore")``.

    Returns
    -------
    Susceptibility
        Non-finite ω gives NaN at that ω; a non-finite k, B or species constant, or a
        non-converged harmonic sum, gives NaN everywhere (scalar k) or at that element.
    """
    if is_array_k(k_par, k_perp):
        return evaluate_array(omega, species, k_par=np.asarray(k_par), k_perp=np.asarray(k_perp),
                              B=B, tol=tol, model=model, tail=tail, parts=parts)
    om = np.asarray(omega, dtype=complex)
    setup = prepare_species(om.shape + tail, species, k_par=complex(k_par),
                            k_perp=complex(k_perp), B=B, tol=tol, model=model)
    if isinstance(setup, Susceptibility):
        return setup
    with np.errstate(all="ignore"):
        value, derivative = parts(om, setup, setup.k_par == 0)
        bad = ~np.isfinite(om)
        if bad.any():
            bad = bad.reshape(bad.shape + (1,) * len(tail))
            value = np.where(bad, np.nan + 0j, value)
            derivative = np.where(bad, np.nan + 0j, derivative)
    return Susceptibility(
        value=np.asarray(value, dtype=complex),
        derivative=np.asarray(derivative, dtype=complex),
        harmonics=setup.weights.harmonics,
    )


def evaluate_array(
    omega: np.ndarray, species: Species, *, k_par: np.ndarray, k_perp: np.ndarray, B: float,
    tol: float, model: str, tail: tuple[int, ...], parts: Parts,
) -> Susceptibility:
    """A magnetized builder's result for array k, every (k, ω) element as if by a scalar-k call.

    Parameters
    ----------
    omega, species, k_par, k_perp, B, tol
        As for the builder (k∥, k⊥ arrays broadcast against ω).
    model : str
        Name used in the B = 0 error.
    tail : tuple of int
        Trailing shape of one element's result: () for χ_s, (3, 3) for a tensor.
    parts : callable
        As for :func:`evaluate`.

    Returns
    -------
    Susceptibility
        Shaped ``shape + tail`` (``shape`` the broadcast of ω, k∥, k⊥); ``harmonics`` = the
        largest N any element needs. Elements with non-finite ω or k, or a non-converged
        harmonic sum, are NaN.

    Notes
    -----
    A k (element of the broadcast of k∥ and k⊥) that carries at least
    :data:`SHARED_ROW_MIN` finite ω is evaluated as a scalar-k call on those ω, with its
    row of the common weights (cheaper per ω, and memory does not grow with the
    per-element weight tables). The remaining elements are evaluated in two batches with
    per-element weights, the k∥ = 0 ones (rational limit) and the others (oblique
    formulas), and scattered back.
    """
    setup = prepare_species_array(omega, species, k_par=k_par, k_perp=k_perp, B=B, tol=tol,
                                  model=model, tail=tail)
    if isinstance(setup, Susceptibility):
        return setup
    size = setup.omega.size
    value = np.full((size,) + tail, np.nan + 0j)
    derivative = value.copy()
    good = np.flatnonzero(setup.good)
    counts = np.bincount(setup.row[good], minlength=setup.lam.size)
    many = counts[setup.row[good]] >= SHARED_ROW_MIN
    # rows (k values) with many ω: one evaluation each with the row's weights shared
    shared = good[many]
    shared = shared[np.argsort(setup.row[shared], kind="stable")]
    groups = np.split(shared, np.flatnonzero(np.diff(setup.row[shared])) + 1)
    with np.errstate(all="ignore"):
        for elements in groups if shared.size else ():
            row = setup.row_setup(int(elements[0]))
            v, d = parts(setup.omega[elements], row, row.k_par == 0)
            value[elements] = v
            derivative[elements] = d
        # the other elements: per-element weights, k∥ = 0 and k∥ ≠ 0 as two batches
        rest = np.zeros(size, dtype=bool)
        rest[good[~many]] = True
        perpendicular = rest & (setup.k_par == 0)
        for mask, perp in ((perpendicular, True), (rest & ~perpendicular, False)):
            if mask.any():
                om, sub = setup.subset(mask)
                v, d = parts(om, sub, perp)
                value[mask] = v.reshape((-1,) + tail)
                derivative[mask] = d.reshape((-1,) + tail)
    return Susceptibility(
        value=value.reshape(setup.shape + tail),
        derivative=derivative.reshape(setup.shape + tail),
        harmonics=setup.weights.harmonics,
    )
