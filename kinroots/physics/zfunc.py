r"""The plasma dispersion function Z(ζ) and its derivative Z'(ζ).

Definition (Fried & Conte 1961, eq. 1 and the analytic continuation that follows it)::

    Z(ζ) = π^{-1/2} ∫ exp(-t²) / (t - ζ) dt,   Im ζ > 0,

continued analytically to the whole plane (Landau prescription). Equivalently
``Z(ζ) = i √π w(ζ)`` with the Faddeeva function ``w(z) = exp(-z²) erfc(-iz)``
(NIST DLMF 7.2.3), and ``Z'(ζ) = -2 (1 + ζ Z(ζ))`` (Fried & Conte 1961).

Everything is computed in the closed upper half-plane ``s = ζ`` or ``s = -ζ`` (``Im s ≥ 0``),
in one of three regions chosen by a visible test on ``|s|``:

* ``|s| < 2``: ``Z`` from :func:`scipy.special.wofz`, ``F = 1 + sZ`` directly (no cancellation
  worth the name there: the relative loss is at most ``2|s|² ε``);
* ``2 ≤ |s| < 8``: ``F = 1 + sZ`` from a table of Taylor expansions about the centres of
  cells of side 0.5 (Horner's rule in ``s - c``, 14–23 terms), then ``Z = (F - 1)/s``. The
  table is built on first use from ``F = π^{-1/2} ∫ t exp(-t²)/(t - s) dt`` by the
  trapezoidal rule with the pole correction (derived in :func:`_f_trapezoid`), sampled on a
  circle about each centre: the Taylor coefficients are Cauchy's integral formula by the
  trapezoidal rule on the circle (Lyness & Moler 1967). Relative error of F (= −Z′/2)
  below 3e-15 there (measured against mpmath at 30 digits: 1.3e-15 worst, the same as the
  trapezoidal rule itself; the naive ``1 + sZ`` from ``wofz`` reaches 1.2e-12 at ``|s| = 8``),
  at a fraction of the trapezoidal rule's cost;
* ``|s| ≥ 8``: the asymptotic series (DLMF 7.12.1) for ``F``, then ``Z = (F - 1)/s``.

:func:`plasma_z` alone skips F and takes Z from ``wofz`` at every ``|s|`` (relative error
below 3e-14 in the upper half-plane, measured against mpmath); it agrees with the Z of
:func:`plasma_z_and_prime` to that level, not bit for bit.

The lower half-plane follows from the reflection ``Z(ζ) = 2i√π exp(-ζ²) - Z(-ζ)``
(DLMF 7.4.3 written for w: ``w(z) = 2 exp(-z²) - w(-z)``), which is the Fried–Conte σ = 2
term; ``exp(-ζ²)`` is evaluated with an exactly split exponent and phase so that its
relative error stays at a few ulp even where ``|Re ζ Im ζ|`` is large.

Overflow-free evaluation.  Inside ``with landau_shift(s):`` every Landau exponential
term of this module and of :mod:`kinroots.physics.models._landau` is returned times
``2^-s`` (``s = inf``: the term is dropped), and nothing else changes.  A susceptibility
is affine in these terms, so a caller that evaluates once with ``s`` and once with
``inf`` holds its regular part R and its exponential part X with χ = R + 2^s X, both
finite where χ itself exceeds double precision
(:meth:`kinroots.physics.dispersion.Dispersion.scaled`).
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from numbers import Number
from typing import Any, Literal, TypeVar, overload

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import wofz

__all__ = ["landau_shift", "plasma_z", "plasma_z_and_prime", "plasma_z_prime"]

#: ln 2 split so that s·_LN2_HI is exact for integer |s| < 2^20 (Cody–Waite reduction,
#: W. J. Cody and W. Waite, *Software Manual for the Elementary Functions*, 1980).
_LN2_HI = 0.693145751953125
_LN2_LO = 1.4286068203094173e-06
#: Current shift (binary orders) of the Landau exponential terms; see :func:`landau_shift`.
_SHIFT: ContextVar[float] = ContextVar("landau_shift", default=0.0)


@contextmanager
def landau_shift(bits: float) -> Iterator[None]:
    """Scale every Landau exponential term by ``2^-bits`` inside the block.

    Parameters
    ----------
    bits : float
        A non-negative integer (exact: ``2^-bits`` is applied to the exponent, split as
        ``bits·ln 2`` by Cody–Waite so that no rounding enters), or ``inf`` to drop the
        terms (the regular part alone).

    Notes
    -----
    The exponential terms are the ``2i√π exp(-ζ²)`` of the reflection
    ``Z(ζ) = 2i√π exp(-ζ²) - Z(-ζ)`` for ``Im ζ < 0`` (Faddeeva identity
    ``w(z) = 2 exp(-z²) - w(-z)``, NIST DLMF 7.4.3; B. D. Fried and S. D. Conte, *The
    Plasma Dispersion Function*, 1961, the σ term).  Paths that take ``Z`` near the
    origin straight from ``wofz`` keep their exponential (it cannot overflow there:
    ``|ζ| < 12``), so they count as regular.  The setting is a context variable (per
    thread).
    """
    b = float(bits)
    if not (b >= 0.0 and (math.isinf(b) or b == int(b))):
        raise ValueError(f"bits must be a non-negative integer or inf, got {bits!r}")
    token = _SHIFT.set(b)
    try:
        yield
    finally:
        _SHIFT.reset(token)


def shift_exponent() -> tuple[float, float]:
    """The current shift as ``(hi, lo)`` in natural-log units (``hi + lo = bits·ln 2``);
    ``(inf, 0)`` when the terms are dropped, ``(0, 0)`` normally."""
    b = _SHIFT.get()
    if b == 0.0:
        return 0.0, 0.0
    if math.isinf(b):
        return math.inf, 0.0
    return b * _LN2_HI, b * _LN2_LO

_SQRT_PI = math.sqrt(math.pi)

#: Overflow-free evaluation (:meth:`kinroots.physics.dispersion.Dispersion.scaled`,
#: :func:`kinroots.physics.models.krook.split_parts`): the largest Landau term is brought
#: to about 2^SHIFT_TOP_BITS (room below 2^1024 for coefficients and sums), shifts are
#: multiples of SHIFT_STEP, a group whose result still overflows is retried SHIFT_RETRIES
#: times, 4 steps up, and no shift beyond SHIFT_MAX_BITS is tried (|D| up to about
#: 2^(2^20) = 10^315000).
SHIFT_TOP_BITS = 880
SHIFT_STEP = 64
SHIFT_RETRIES = 4
SHIFT_MAX_BITS = 2**20


def binary_exponent(z: np.ndarray) -> np.ndarray:
    """Binary exponent e with max(|Re z|, |Im z|) < 2^e, per element (int64).

    Parameters
    ----------
    z : ndarray of complex
        Values, any shape.

    Returns
    -------
    ndarray of int64
        ``e`` from :func:`numpy.frexp` of the larger part; −1100 for zeros and for
        non-finite values (below every finite exponent: such elements never set a scale).
    """
    big = np.maximum(np.abs(z.real), np.abs(z.imag))
    _, e = np.frexp(np.where(np.isfinite(big) & (big > 0), big, 0.0))
    return np.where(np.isfinite(big) & (big > 0), e.astype(np.int64), -1100)


def ldexp_complex(z: np.ndarray, p: np.ndarray | int) -> np.ndarray:
    """``z · 2^p`` for complex ``z`` and integer ``p`` (broadcast), exact unless the result
    over- or underflows (:func:`numpy.ldexp` on both parts)."""
    zz = np.asarray(z, dtype=complex)
    pp = np.asarray(p)
    if zz.ndim and pp.shape in ((), zz.shape):  # one ldexp on the (re, im) pairs
        pairs = np.ascontiguousarray(zz).view(np.float64).reshape(zz.shape + (2,))
        out: np.ndarray = np.ldexp(pairs, pp[..., None] if pp.ndim else pp)
        return out.view(complex).reshape(zz.shape)
    out = np.empty(np.broadcast_shapes(zz.shape, pp.shape), dtype=complex)
    out.real = np.ldexp(zz.real, pp)
    out.imag = np.ldexp(zz.imag, pp)
    return out


#: Below this |s| Z comes from scipy's Faddeeva function and F = 1 + sZ directly.
_R_INNER = 2.0
#: At and above this |s| the asymptotic series is used for F.
_R_SERIES = 8.0
#: Number of terms of the asymptotic series of F: the 21st term at |s| = 8 is below
#: 1e-17 of the first (measured in tests/test_zfunc.py).
_N_SERIES = 20
#: (2n-1)!! for n = 1 .. _N_SERIES.
_SERIES_COEF = tuple(float(math.prod(range(1, 2 * n, 2))) for n in range(1, _N_SERIES + 1))

#: Trapezoidal step: the aliasing error is of order exp(-π²/h²) = exp(-61.7).
_H = 0.4
#: Largest node: the node weights 2h t² exp(-t²)/√π are below 3e-18 beyond it (the
#: omitted tail is below 1e-15 of |F| ≥ 1/(2·8²) where the rule is used).
_T_MAX = 6.6
_EXP_LOG_MAX = math.log(np.finfo(np.float64).max)


def _nodes(offset: float) -> tuple[tuple[float, float], ...]:
    """Trapezoidal nodes ``(t_k², weight_k)`` on t = (k + offset) h > 0, pairs ±t folded."""
    out = []
    k = 0
    while (t := (k + offset) * _H) <= _T_MAX:
        if t > 0.0:
            out.append((t * t, 2.0 * _H * t * t * math.exp(-t * t) / _SQRT_PI))
        k += 1
    return tuple(out)


_NODES_INT = _nodes(0.0)
_NODES_HALF = _nodes(0.5)


def _node_arrays(nodes: tuple[tuple[float, float], ...]) -> tuple[np.ndarray, np.ndarray]:
    """t_k² and the weights of one grid as arrays."""
    return np.array([t2 for t2, _ in nodes]), np.array([w for _, w in nodes])


#: t_k² and weights of the integer grid (t = kh) and of the half-integer grid.
_T2_INT, _W_INT = _node_arrays(_NODES_INT)
_T2_HALF, _W_HALF = _node_arrays(_NODES_HALF)


def _grid_sum(mr: np.ndarray, mi: np.ndarray, t2: np.ndarray, w: np.ndarray) -> np.ndarray:
    """T = Σ_k w_k / (t_k² − s²) for s² = mr + i·mi (1-d), one grid for all points."""
    d = t2 - mr[:, None]
    g = w / (d * d + (mi * mi)[:, None])
    return np.vecdot(g, d) + 1j * (g.sum(axis=1) * mi)


def _as_complex(zeta: Any) -> NDArray[np.complex128]:
    """Convert the input to a complex128 array, refusing non-numeric input."""
    arr = np.asarray(zeta)
    if arr.dtype.kind == "O":
        flat = arr.ravel()
        bad = [v for v in flat if not isinstance(v, Number) or isinstance(v, bool)]
        if bad:
            raise TypeError(
                "the plasma dispersion function needs numbers; got "
                f"{type(bad[0]).__name__} {bad[0]!r}"
            )
        return arr.astype(np.complex128)
    if arr.dtype.kind not in "iufc":
        raise TypeError(
            "the plasma dispersion function needs real or complex numbers; "
            f"got an array of dtype {arr.dtype} (from {type(zeta).__name__})"
        )
    return arr.astype(np.complex128, copy=False)


def _f_series(s: NDArray[np.complex128]) -> NDArray[np.complex128]:
    r"""F(s) = 1 + sZ(s) from the asymptotic series, for ``Im s ≥ 0`` and ``|s| ≥ 8``.

    Notes
    -----
    From ``erfc u ~ exp(-u²)/(u√π) Σ (-1)^m (1/2)_m / u^{2m}`` (DLMF 7.12.1, |ph u| < 3π/4)
    with ``u = -is``: ``sZ(s) ~ -Σ_{n≥0} (2n-1)!! / (2s²)^n`` (Fried & Conte 1961, the
    large-argument expansion), hence ``F ~ -Σ_{n=1}^{N} (2n-1)!! u^n`` with ``u = 1/(2s²)``.
    The missing exponential term is of order ``√π |s| exp(-Re s²)`` near the real axis,
    below ``1e-25`` of F for ``|s| ≥ 8``.
    """
    inv = 1.0 / s
    u = 0.5 * inv * inv
    # terms kept: up to the last one above 1e-17 of the first at the smallest |s| of the
    # array (all 20 at |s| = 8, 8 at |s| = 30)
    count = _series_terms(float(np.max(np.abs(u))) if u.size else 0.0)
    acc = np.full_like(s, _SERIES_COEF[count - 1])
    for c in _SERIES_COEF[count - 2 :: -1]:
        acc *= u
        acc += c
    return -u * acc


def _series_terms(u_max: float) -> int:
    """Terms of the asymptotic series needed where |u| = |1/(2s²)| ≤ ``u_max``: up to the
    last with (2n−1)!! u_max^{n−1} ≥ 1e-17 (ratio to the first term), at most all."""
    if not u_max <= 1.0 / (2.0 * _R_SERIES**2):  # NaN or beyond the series region
        return _N_SERIES
    power = 1.0
    for n, c in enumerate(_SERIES_COEF, start=1):
        if c * power < 1e-17:
            return max(n - 1, 1)
        power *= u_max
    return _N_SERIES


def _series_row(count: int) -> tuple[float, tuple[float, ...]]:
    """Horner data of the first ``count`` terms of the series of :func:`_f_series`: the
    highest coefficient, then the others down to (2·1 − 1)!! = 1."""
    return _SERIES_COEF[count - 1], _SERIES_COEF[count - 2 :: -1]


#: |s| from which :data:`_SERIES_ROWS` holds one last entry (4 terms there).
_SERIES_ROWS_END = 1024
#: Horner data (:func:`_series_row`) of the one-point series for |s| in [n, n + 1),
#: n < _SERIES_ROWS_END (rows below _R_SERIES unused), then for |s| ≥ _SERIES_ROWS_END:
#: the count :func:`_series_terms` gives at the smallest |s| of the interval, which is
#: enough in all of it (the count never grows with |s|): 20 terms at |s| = 8, 8 at 30,
#: 5 at 200.
_SERIES_ROWS = tuple(
    _series_row(_series_terms(0.5 / max(float(n), _R_SERIES) ** 2))
    for n in range(_SERIES_ROWS_END + 1))


def _f_trapezoid(s: NDArray[np.complex128]) -> NDArray[np.complex128]:
    r"""F(s) = 1 + sZ(s) by the trapezoidal rule with pole correction, ``Im s ≥ 0``.

    Notes
    -----
    ``F(s) = π^{-1/2} ∫ t exp(-t²)/(t - s) dt`` (from the definition of Z, since
    ``1 + s/(t - s) = t/(t - s)``). Folding the nodes ±t_k gives the sum
    ``T = Σ_k (2h/√π) t_k² exp(-t_k²) / (t_k² - s²)``. Writing the trapezoidal sum as a
    contour integral with ``(π/h) cot(πt/h)`` (nodes t = kh) or ``-(π/h) tan(πt/h)``
    (nodes t = (k+½)h) and moving the contour across the pole at t = s gives (derived here,
    the same argument as for the error function in the trapezoidal-rule literature;
    common practice)::

        F = T - 2i√π s exp(-s²) q / (1 ∓ q),   q = exp(2πi s / h),

    the upper sign for integer nodes, the lower for half-integer nodes, with an error of
    order ``exp(-π²/h²)``. For each point the grid whose nearest node is farther from
    ``Re s`` is used, so that no node sits near the pole; all points and nodes are summed
    in one (points × nodes) array pass per grid.
    """
    frac = np.mod(s.real * (1.0 / _H), 1.0)
    half = (frac < 0.25) | (frac > 0.75)  # nearest integer node within h/4: half grid
    m = s * s
    mr = m.real
    mi = m.imag
    # each grid on its own points (the node arrays broadcast; no per-point node tables)
    acc = np.empty_like(s)
    other = ~half
    acc[half] = _grid_sum(mr[half], mi[half], _T2_HALF, _W_HALF)
    acc[other] = _grid_sum(mr[other], mi[other], _T2_INT, _W_INT)
    q_arg = (2.0j * np.pi / _H) * s
    sign = np.where(half, 1.0, -1.0)
    corr = (2.0j * _SQRT_PI) * s * np.exp(q_arg - m) * sign
    corr /= 1.0 + sign * np.exp(q_arg)
    return acc + corr


#: Side of the square cells of the Taylor table of F (first quadrant, 2 ≤ |s| < 8).
_CELL = 0.5
_INV_CELL = 1.0 / _CELL
#: Cells per axis: the table spans 0 ≤ Re s, Im s < _CELLS·_CELL = _R_SERIES.
_CELLS = 16
#: Points on each Cauchy circle (radius = the cell's diagonal, twice the largest distance
#: from its centre to a point of the cell).
_CIRCLE = 32
#: A Taylor term is dropped where its largest size in its cell is below this fraction of
#: the smallest |F| there (the sum of the dropped terms is then below 2e-18 |F|).
_TAYLOR_CUT = 1e-18


class _TaylorTable:
    """Taylor expansions of F = 1 + sZ about the centres of the table's cells.

    Attributes
    ----------
    centres : ndarray of complex
        Cell centres, cell ``i·_CELLS + j`` covering ``[i, i + 1) × [j, j + 1)`` times
        ``_CELL``.
    columns : tuple of ndarray of complex
        Coefficient of ``(s - c)^n`` for every cell, n = 0, 1, …, zero-padded to the longest
        row (array path).
    rows : tuple
        Per cell: centre, highest kept coefficient, the others from the next order down to
        order 0, as Python complex numbers with the cell's own length (one-point path).

    Cells that do not meet the region ``2 ≤ |s| < 8`` hold NaN (never used).
    """

    def __init__(self) -> None:
        cells = _CELLS * _CELLS
        lo_x = (np.arange(cells) // _CELLS) * _CELL  # lower-left corners
        lo_y = (np.arange(cells) % _CELLS) * _CELL
        used = ((np.hypot(lo_x, lo_y) < _R_SERIES)
                & (np.hypot(lo_x + _CELL, lo_y + _CELL) >= _R_INNER))
        centres = (lo_x + 0.5 * _CELL) + 1j * (lo_y + 0.5 * _CELL)
        radius = _CELL * math.sqrt(2.0)  # twice the largest distance to the centre
        circle = radius * np.exp((2j * np.pi / _CIRCLE) * np.arange(_CIRCLE))
        samples = (centres[used][:, None] + circle).ravel()
        # F on the circles by the trapezoidal rule (Im ≥ 0) and the reflection (Im < 0),
        # with no Landau shift (the table is of F itself); the Taylor coefficients by
        # Cauchy's integral formula, evaluated by the trapezoidal rule on the circle
        # (J. N. Lyness and C. B. Moler, "Numerical differentiation of analytic functions",
        # SIAM J. Numer. Anal. 4, 202 (1967)).
        token = _SHIFT.set(0.0)
        try:
            with np.errstate(all="ignore"):
                values = _z_and_f_block(samples, reference=True)[1]
        finally:
            _SHIFT.reset(token)
        assert values is not None  # F was asked for
        scaled = np.fft.fft(values.reshape(-1, _CIRCLE), axis=1) / _CIRCLE  # c_n radius^n
        # term sizes at the farthest point of the cell (half the radius) against |F(c)|
        size = np.abs(scaled) * 0.5 ** np.arange(_CIRCLE)
        keep = size >= _TAYLOR_CUT * np.abs(scaled[:, :1])
        lengths = np.ones(cells, dtype=int)
        lengths[used] = _CIRCLE - np.argmax(keep[:, ::-1], axis=1)
        table = np.full((cells, int(lengths.max())), np.nan + 0j)
        table[used] = 0.0
        for row, coef in zip(np.nonzero(used)[0], scaled, strict=True):
            n = lengths[row]
            table[row, :n] = coef[:n] * radius ** -np.arange(n, dtype=float)
        self.centres = centres
        self.columns = tuple(np.ascontiguousarray(col) for col in table.T)
        self.rows = tuple(
            (complex(c), complex(row[n - 1]), tuple(complex(v) for v in row[: n - 1][::-1]))
            for c, row, n in zip(centres, table, lengths.tolist(), strict=True))


_TABLE: _TaylorTable | None = None


def _taylor_table() -> _TaylorTable:
    """The table, built on first use (about 6,600 evaluations of F, some milliseconds)."""
    global _TABLE
    if _TABLE is None:
        _TABLE = _TaylorTable()
    return _TABLE


def _f_table(s: NDArray[np.complex128]) -> NDArray[np.complex128]:
    r"""F(s) = 1 + sZ(s) for ``Im s ≥ 0``, ``2 ≤ |s| < 8`` from the Taylor table (1-d).

    Notes
    -----
    ``F(-s̄) = conj F(s)`` (from ``Z(-ζ̄) = -conj Z(ζ)``, Fried & Conte 1961) folds the
    point into the first quadrant; its cell (side 0.5) gives the centre c and the Taylor
    coefficients of F about c (:class:`_TaylorTable`), summed by Horner's rule in
    ``d = s - c``, ``|d| ≤ 0.354``. Relative error below 3e-15 (tests/test_zfunc.py,
    against mpmath at 30 digits). NaN gives NaN.
    """
    t = _taylor_table()
    x = s.real
    y = s.imag
    ax = np.abs(x)
    # a NaN point gets some cell (clipped) and d = NaN
    i = np.clip((ax * _INV_CELL).astype(np.intp), 0, _CELLS - 1)
    j = np.clip((y * _INV_CELL).astype(np.intp), 0, _CELLS - 1)
    cell = i * _CELLS + j
    d = (ax + 1j * y) - t.centres[cell]
    cols = t.columns
    acc = cols[-1][cell]
    for col in cols[-2::-1]:
        acc *= d
        acc += col[cell]
    np.conjugate(acc, where=x < 0.0, out=acc)
    return acc


def _f_table_scalar(s: complex) -> complex:
    """:func:`_f_table` at one point, in Python arithmetic (the cell's own row length)."""
    x = s.real
    y = s.imag
    rows = (_TABLE if _TABLE is not None else _taylor_table()).rows
    if x < 0.0:
        centre, acc, rest = rows[int(-x * _INV_CELL) * _CELLS + int(y * _INV_CELL)]
        d = complex(-x, y) - centre
    else:
        centre, acc, rest = rows[int(x * _INV_CELL) * _CELLS + int(y * _INV_CELL)]
        d = s - centre
    for c in rest:
        acc = acc * d + c
    return acc.conjugate() if x < 0.0 else acc


def _upper(s: NDArray[np.complex128], reference: bool = False
           ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
    """Z(s) and F(s) = 1 + sZ(s) for a 1-d array with ``Im s ≥ 0`` (or NaN); F for
    ``2 ≤ |s| < 8`` from the Taylor table, or from the trapezoidal rule if ``reference``
    (the table's own construction)."""
    f_mid = _f_trapezoid if reference else _f_table
    r = np.abs(s)
    if r.size == 1:  # one point: its region, without masks
        r0 = float(r[0])
        if r0 < _R_INNER:
            z = (1j * _SQRT_PI) * wofz(s)
            return z, 1.0 + s * z
        f = _f_series(s) if r0 >= _R_SERIES else f_mid(s)
        return (f - 1.0) / s, f
    inner = r < _R_INNER
    outer = r >= _R_SERIES
    if inner.all():
        z = (1j * _SQRT_PI) * wofz(s)
        return z, 1.0 + s * z
    z = np.empty_like(s)
    f = np.empty_like(s)
    if inner.any():
        si = s[inner]
        zi = (1j * _SQRT_PI) * wofz(si)
        z[inner] = zi
        f[inner] = 1.0 + si * zi
    if outer.any():
        so = s[outer]
        fo = _f_series(so)
        f[outer] = fo
        z[outer] = (fo - 1.0) / so
    mid = ~(inner | outer)  # also NaN
    if mid.any():
        sm = s[mid]
        fm = f_mid(sm)
        f[mid] = fm
        z[mid] = (fm - 1.0) / sm
    return z, f


_Real = TypeVar("_Real", float, NDArray[np.float64])


def _two_prod(a: _Real, b: _Real) -> tuple[_Real, _Real]:
    """Exact product a·b = p + e (Dekker 1971 splitting; common practice)."""
    p = a * b
    c = 134217729.0 * a
    ah = c - (c - a)
    al = a - ah
    c = 134217729.0 * b
    bh = c - (c - b)
    bl = b - bh
    e = ((ah * bh - p) + ah * bl + al * bh) + al * bl
    return p, e


def _exp_term(zeta: NDArray[np.complex128]) -> NDArray[np.complex128]:
    r"""``2i√π exp(-ζ²)`` with the exponent and phase split exactly.

    Notes
    -----
    ``-ζ² = (y² - x²) - 2ixy``. Both parts are formed as double-double sums with exact
    products (Dekker 1971), so ``exp(a_hi) exp(-i p_hi) exp(a_lo - i p_lo)`` keeps a
    relative error of a few ulp however large ``xy`` is (numpy's cos/sin reduce large
    arguments exactly). Overflow gives ``inf``/``nan``, never a finite wrong value.
    """
    x = zeta.real
    y = zeta.imag
    # the three exact products x·x, y·y, 2x·y in one pass
    prod, err = _two_prod(np.stack([x, y, 2.0 * x]), np.stack([x, y, y]))
    xx, yy, p_hi = prod
    xx_e, yy_e, p_lo = err
    a_hi = yy - xx
    bv = a_hi - yy
    a_lo = ((yy - (a_hi - bv)) + (-xx - bv)) + (yy_e - xx_e)  # two-sum error + low parts
    t = a_hi + a_lo
    a_lo = a_lo - (t - a_hi)
    a_hi = t
    sh_hi, sh_lo = shift_exponent()
    if sh_hi:
        if math.isinf(sh_hi):
            return zeta * 0.0  # dropped (NaN stays NaN)
        t = a_hi - sh_hi  # exact subtraction error folded into the low part (two-sum)
        bv = t - a_hi
        a_lo = a_lo + (((a_hi - (t - bv)) + (-sh_hi - bv)) - sh_lo)
        a_hi = t
    mag = (2.0 * _SQRT_PI) * np.exp(a_hi)
    rot = np.cos(p_hi) - 1j * np.sin(p_hi)
    fine = np.exp(a_lo - 1j * p_lo)
    return 1j * (mag * (rot * fine))


def _exp_term_scalar(zeta: complex) -> complex:
    """:func:`_exp_term` at one point, in Python arithmetic (raises OverflowError where
    the array version gives inf)."""
    x = zeta.real
    y = zeta.imag
    xx, xx_e = _two_prod(x, x)
    yy, yy_e = _two_prod(y, y)
    a_hi = yy - xx
    bv = a_hi - yy
    a_lo = ((yy - (a_hi - bv)) + (-xx - bv)) + (yy_e - xx_e)
    t = a_hi + a_lo
    a_lo = a_lo - (t - a_hi)
    a_hi = t
    sh_hi, sh_lo = shift_exponent()
    if sh_hi:
        if math.isinf(sh_hi):
            return 0j
        t = a_hi - sh_hi
        bv = t - a_hi
        a_lo = a_lo + (((a_hi - (t - bv)) + (-sh_hi - bv)) - sh_lo)
        a_hi = t
    p_hi, p_lo = _two_prod(2.0 * x, y)
    mag = (2.0 * _SQRT_PI) * math.exp(a_hi)
    rot = complex(math.cos(p_hi), -math.sin(p_hi))
    fine = cmath.exp(complex(a_lo, -p_lo))
    return 1j * (mag * (rot * fine))


def z_and_f_scalar(zeta: complex) -> tuple[complex, complex]:
    """Z(ζ) and F = 1 + ζZ(ζ) at one finite point, in Python arithmetic.

    Parameters
    ----------
    zeta : complex
        Argument ζ, finite.

    Returns
    -------
    z, f : complex
        The values of :func:`plasma_z_and_prime`'s Z and of −Z′/2, by the same regions and
        formulas (so equal to them to rounding), without numpy's per-call overhead.

    Raises
    ------
    OverflowError
        Where the exponential term overflows (the array functions give inf or nan there).
    """
    lower = zeta.imag < 0.0
    s = -zeta if lower else zeta
    r = abs(s)
    if r < _R_INNER:
        z = (1j * _SQRT_PI) * complex(wofz(s))
        f = 1.0 + s * z
    else:
        if r >= _R_SERIES:
            inv = 1.0 / s
            u = 0.5 * inv * inv
            acc: complex
            acc, rest = _SERIES_ROWS[int(r) if r < _SERIES_ROWS_END else -1]
            for c in rest:
                acc = acc * u + c
            f = -u * acc
        else:
            f = _f_table_scalar(s)
        z = (f - 1.0) / s
    if not lower:
        return z, f
    z = -z
    x = zeta.real
    y = zeta.imag
    if (y - x) * (y + x) > -45.0 - 3.0 * math.log1p(r):
        e = _exp_term_scalar(zeta)
        z += e
        f += zeta * e
    return z, f


#: Below this |ζ|, :func:`plasma_z` takes lower half-plane values straight from ``wofz``.
_R_DIRECT = 12.0

#: Block length: large arrays are processed in blocks that stay in cache (measured about
#: twice as fast as whole-array passes at 10^6 points).
_BLOCK = 8192


def _z_and_f_block(
    flat: NDArray[np.complex128], want_f: bool = True, reference: bool = False
) -> tuple[NDArray, NDArray | None]:
    """Z and F = 1 + ζZ for a 1-d complex128 array (errstate set by the caller).

    With ``want_f`` false only Z is computed, from ``wofz`` in the upper half-plane variable
    (relative error below 3e-14 there, measured against mpmath), and F is None. With
    ``reference``, F for 2 ≤ |s| < 8 comes from the trapezoidal rule (see :func:`_upper`).
    """
    lower = flat.imag < 0.0
    if not want_f:
        # Z alone: scipy's wofz is accurate to a few ulp·|ζ|² in the lower half-plane, which
        # is below ~1.3e-14 for |ζ| < _R_DIRECT (measured against mpmath: 1.26e-14 worst on
        # 6 ≤ |ζ| ≤ 12); only beyond that is the exact reflection used.
        lower &= np.abs(flat) >= _R_DIRECT
    if not lower.any():
        if not want_f:
            return (1j * _SQRT_PI) * wofz(flat), None
        return _upper(flat, reference)
    s = np.negative(flat, where=lower, out=flat.copy())
    if want_f:
        z, f = _upper(s, reference)
    else:
        z, f = (1j * _SQRT_PI) * wofz(s), None
    np.negative(z, where=lower, out=z)
    # The exponential term matters only where y² - x² > -(45 + 3 ln(1 + |ζ|)):
    # below that 2√π|ζ| exp(y² - x²) < 1e-17 |F| (and likewise for Z).
    x = flat.real
    y = flat.imag
    a = (y - x) * (y + x)
    need = lower & (a > -45.0 - 3.0 * np.log1p(np.abs(flat)))
    if need.any():
        zn = flat[need]
        e = _exp_term(zn)
        z[need] += e
        if f is not None:
            f[need] += zn * e
    return z, f


#: Up to this many points, Z and F are computed point by point in Python arithmetic
#: (:func:`z_and_f_scalar`): below it that is cheaper than the array path's fixed cost of
#: some hundred numpy calls (measured: 3 points 23 against 190 µs, 30 points 177 against
#: 264 µs, 64 points 338 against 276 µs, on a loaded machine).
_SCALAR_MAX = 32


def _z_and_f_short(flat: NDArray[np.complex128]) -> tuple[NDArray, NDArray] | None:
    """Z and F at a few finite points by :func:`z_and_f_scalar`; None (use the array
    path) if a point is not finite or its exponential term overflows."""
    values = flat.tolist()
    if not all(cmath.isfinite(v) for v in values):
        return None
    try:
        pairs = [z_and_f_scalar(v) for v in values]
    except OverflowError:
        return None
    z = np.array([p[0] for p in pairs], dtype=complex)
    f = np.array([p[1] for p in pairs], dtype=complex)
    return z, f


@overload
def _z_and_f(zeta: NDArray[np.complex128], want_f: Literal[True] = ...
             ) -> tuple[NDArray, NDArray]: ...
@overload
def _z_and_f(zeta: NDArray[np.complex128], want_f: Literal[False]) -> tuple[NDArray, None]: ...
def _z_and_f(zeta: NDArray[np.complex128], want_f: bool = True
             ) -> tuple[NDArray, NDArray | None]:
    """Z and F = 1 + ζZ (F only if ``want_f``, else None) for a complex128 array of any
    shape."""
    flat = zeta.ravel()
    if want_f and 1 < flat.size <= _SCALAR_MAX:
        short = _z_and_f_short(flat)
        if short is not None:
            return short[0].reshape(zeta.shape), short[1].reshape(zeta.shape)
    f: NDArray | None
    with np.errstate(over="ignore", invalid="ignore", under="ignore", divide="ignore"):
        if flat.size <= _BLOCK:
            z, f = _z_and_f_block(flat, want_f)
        else:
            z = np.empty_like(flat)
            f = np.empty_like(flat)
            for i in range(0, flat.size, _BLOCK):
                zb, fb = _z_and_f_block(flat[i : i + _BLOCK], want_f)
                z[i : i + _BLOCK] = zb
                if fb is not None:
                    f[i : i + _BLOCK] = fb
    return z.reshape(zeta.shape), (f.reshape(zeta.shape) if want_f and f is not None else None)


def _finish(out: NDArray[Any], scalar: bool) -> Any:
    return out[()] if scalar else out


def plasma_z(zeta: ArrayLike) -> Any:
    r"""Plasma dispersion function Z(ζ), analytically continued to the whole plane.

    Parameters
    ----------
    zeta : array_like of real or complex numbers
        Argument ζ (dimensionless, ζ = ω/(k w) for a Maxwellian). Any shape; lists accepted.

    Returns
    -------
    numpy.ndarray or numpy.complex128
        Z(ζ), complex128, same shape as ``zeta``. A scalar (0-d) input gives a
        ``numpy.complex128`` scalar, as numpy ufuncs do.

    Raises
    ------
    TypeError
        If ``zeta`` is not numeric (strings, arbitrary objects, booleans).

    Notes
    -----
    ``Z(ζ) = i√π w(ζ)``, ``w(z) = exp(-z²) erfc(-iz)`` (Fried & Conte 1961; DLMF 7.2.3).
    See the module docstring for the regions. For ``Im ζ < 0``,
    ``Z(ζ) = 2i√π exp(-ζ²) - Z(-ζ)``. With ``x = Re ζ``, ``y = Im ζ < 0`` the term
    ``exp(y² - x²)`` overflows double precision: the result is finite and accurate for
    ``y² - x² < ln(DBL_MAX/(4√π)) ≈ 707.824`` and always non-finite (inf or nan) for
    ``y² - x² > ln(DBL_MAX/(2√π)) ≈ 708.517``; in between it is one or the other depending
    on the phase ``2xy``, never a finite wrong number. Where the exponential term is not
    negligible and ``|ζ| ≳ 1e154`` (its exponent cannot be formed) the result is NaN.
    NaN input gives NaN output without warnings.

    References
    ----------
    B. D. Fried and S. D. Conte, *The Plasma Dispersion Function* (Academic Press, 1961).
    NIST DLMF §7.2 (Faddeeva function w), §7.4 (symmetry), §7.12 (asymptotic expansion).
    S. G. Johnson, Faddeeva package, as shipped in ``scipy.special.wofz`` (for |ζ| < 2).
    T. J. Dekker, "A floating-point technique for extending the available precision",
    Numer. Math. 18, 224 (1971) (exact products).

    Examples
    --------
    >>> plasma_z(0.0)
    np.complex128(1.7724538509055159j)
    """
    arr = _as_complex(zeta)
    return _finish(_z_and_f(arr, want_f=False)[0], arr.ndim == 0)


def plasma_z_prime(zeta: ArrayLike) -> Any:
    r"""Derivative Z'(ζ) = -2 (1 + ζ Z(ζ)) of the plasma dispersion function.

    Parameters
    ----------
    zeta : array_like of real or complex numbers
        Argument ζ. Any shape; lists accepted.

    Returns
    -------
    numpy.ndarray or numpy.complex128
        Z'(ζ), complex128, same shape as ``zeta`` (a ``numpy.complex128`` for 0-d input).

    Raises
    ------
    TypeError
        If ``zeta`` is not numeric.

    Notes
    -----
    ``Z' = -2(1 + ζZ)`` (Fried & Conte 1961). ``1 + ζZ`` cancels like ``2|ζ|²`` for large
    ``|ζ|``; it is therefore never formed by subtraction for ``|ζ| ≥ 2`` but computed from
    ``π^{-1/2}∫ t e^{-t²}/(t - ζ) dt`` (a table of Taylor expansions built from the
    trapezoidal rule with pole correction; relative error below 3e-15) for
    ``2 ≤ |ζ| < 8`` and from the asymptotic series ``-Σ_{n≥1} (2n-1)!!/(2ζ²)^n``
    (DLMF 7.12.1) for ``|ζ| ≥ 8``, in the upper half-plane variable. For ``Im ζ < 0``,
    ``1 + ζZ(ζ) = [1 + (-ζ)Z(-ζ)] + 2i√π ζ exp(-ζ²)``: the Fried–Conte σ = 2 term is
    always included where it is not negligible. Overflow of that term (``Im ζ < 0``,
    ``y² - x² ≳ 707.8 - ln(2|ζ|)``) gives inf or nan, never a finite wrong number.

    References
    ----------
    B. D. Fried and S. D. Conte, *The Plasma Dispersion Function* (1961).
    NIST DLMF §7.2, §7.12.
    J. N. Lyness and C. B. Moler, "Numerical differentiation of analytic functions",
    SIAM J. Numer. Anal. 4, 202 (1967) (Taylor coefficients from a circle).
    """
    arr = _as_complex(zeta)
    f = _z_and_f(arr)[1]
    with np.errstate(over="ignore", invalid="ignore"):
        zp = -2.0 * f  # may overflow to inf near the overflow boundary: non-finite, not wrong
    return _finish(zp, arr.ndim == 0)


def plasma_z_and_prime(zeta: ArrayLike) -> tuple[Any, Any]:
    r"""Z(ζ) and Z'(ζ) together, from one evaluation.

    Parameters
    ----------
    zeta : array_like of real or complex numbers
        Argument ζ. Any shape; lists accepted.

    Returns
    -------
    tuple of (numpy.ndarray, numpy.ndarray)
        ``(Z(ζ), Z'(ζ))``, complex128, each shaped like ``zeta`` (``numpy.complex128``
        scalars for 0-d input). Identical to :func:`plasma_z` and :func:`plasma_z_prime`.

    Raises
    ------
    TypeError
        If ``zeta`` is not numeric.

    Notes
    -----
    At most one Faddeeva-function call per point (only for ``|ζ| < 2``); see
    :func:`plasma_z` and :func:`plasma_z_prime` for the formulas and the overflow region.

    References
    ----------
    B. D. Fried and S. D. Conte, *The Plasma Dispersion Function* (1961).
    """
    arr = _as_complex(zeta)
    z, f = _z_and_f(arr)
    scalar = arr.ndim == 0
    with np.errstate(over="ignore", invalid="ignore"):
        zp = -2.0 * f  # may overflow to inf near the overflow boundary: non-finite, not wrong
    return _finish(z, scalar), _finish(zp, scalar)
