r"""Dispersion functions of kappa (power-law) velocity profiles, any real κ > 3/2.

Profile (normalized to ∫ g dx = 1, width set by κ; p > 1/2)::

    g_p(x) = A_p (1 + x²/κ)^(−p),   A_p = Γ(p) / (√(πκ) Γ(p − 1/2)).

The one-dimensional reduced distribution of a three-dimensional kappa species
f ∝ (1 + v²/(κθ²))^(−(κ+1)) along any direction is g_κ(v/θ)/θ; its derivative brings in
g_{κ+1}.  The functions computed here, continued analytically from Im ζ > 0 (Landau
prescription)::

    Y_p(ζ) = ∫ g_p(x) / (x − ζ) dx,          F_p(ζ) = ∫ x g_p(x) / (x − ζ) dx = 1 + ζ Y_p(ζ),

with their ζ-derivatives.  The modified plasma dispersion function of Summers & Thorne
(1991), eq. (8) as we recall it (from memory)::

    Z*_κ(ζ) = Γ(κ+1) / (√π κ^{3/2} Γ(κ−1/2)) ∫ dx / ((x − ζ)(1 + x²/κ)^(κ+1))
            = (1 − 1/(2κ)) Y_{κ+1}(ζ)

(the identity follows from A_{κ+1}), so that the electrostatic susceptibility of an
isotropic kappa species is (2ω_p²/(k²θ²)) [1 − 1/(2κ) + ζ Z*_κ(ζ)]
= (2ω_p²/(k²θ²)) (1 − 1/(2κ)) F_{κ+1}(ζ).  As κ → ∞ at fixed p − κ, g_p → exp(−x²)/√π
and Y_p → Z, the plasma dispersion function of Fried & Conte (1961).

Method (this module's own): with x = √κ sinh u the integrand becomes
A_p √κ cosh(u)^(1−2p) / (√κ sinh u − ζ), analytic in the strip |Im u| < π/2 and decaying
like exp(−(2p−1)|u|).  The trapezoidal rule on u = n h (or (n + ½) h) with the pole
correction of the rule for a simple pole u₀ = asinh(ζ/√κ) in the strip,

    ∫ φ(x)/(x − ζ) dx = h Σ_n φ(x_n) x'(u_n)/(x_n − ζ) + 2πi φ(ζ) / (1 − σ exp(−2πi u₀/h)),

σ = +1 (−1 for the half-integer grid), is exact up to the aliasing error of order
exp(−π²/h) from the branch points at u = ±iπ/2 (the same construction as
:mod:`kinroots.physics.zfunc` uses for F = 1 + ζZ).  The formula is meromorphic in ζ with
removable singularities at the nodes, so it *is* the analytic continuation: for
Im u₀ < 0 the correction tends to the residue 2πi φ(ζ), the Landau term.  The pairs of
nodes ±x_n are folded, 1/(x − ζ) ± 1/(−x − ζ), so that every sum has terms of one sign
at large |ζ| (no cancellation in F as |ζ| → ∞, unlike 1 + ζY).  Of the two grids the one
whose nearest node is farther from u₀ is used (no cancellation of node and correction).

Where the continuation holds
----------------------------
For non-integer p the continued profile (1 + ζ²/κ)^(−p) has branch points at
ζ = ±i√κ; it is taken on the principal branch, with cuts on the imaginary axis from
±i√κ outwards.  The continuation from the real axis straight down is therefore exact
everywhere except on the cut Re ζ = 0, Im ζ ≤ −√κ.  A root below the branch point,
Im ζ < −√κ, lies on that principal sheet but is damped faster than the branch-point
response (which decays like exp(−√κ k θ t) times a power of t) and depends on the
choice of the cut: such roots are flagged by :func:`beyond_branch_point`.  About the
cut (and the branch point) the functions are not evaluated (NaN, see
:func:`kappa_transforms`), so that a root-finding contour that reaches the cut meets
non-finite values, which the survey reports, instead of a jump.  For integer p
the profile is rational (poles of order p at ±i√κ) and the continuation is valid in
the whole plane except at the pole ζ = −i√κ.  Near ζ = ±i√κ the aliasing error grows
(u₀ approaches the strip edge): relative errors stay below 1e-9 beyond |ζ ∓ i√κ| > 0.05√κ
(tests/test_zfunc_kappa.py).

References
----------
D. Summers and R. M. Thorne, "The modified plasma dispersion function",
Phys. Fluids B 3, 1835 (1991) (definition of Z*_κ, from memory).
R. L. Mace and M. A. Hellberg, "A dispersion function for plasmas containing
superthermal particles", Phys. Plasmas 2, 2098 (1995) (non-integer κ, from memory).
L. N. Trefethen and J. A. C. Weideman, "The exponentially convergent trapezoidal rule",
SIAM Review 56, 385 (2014) (aliasing error of the rule in a strip).
"""

from __future__ import annotations

import cmath
import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy.special import gammaln

__all__ = [
    "beyond_branch_point",
    "kappa_transforms",
    "kappa_z",
    "profile_norm",
    "second_moment",
]

#: Relative size of the omitted tail of the node weights.
_TAIL = 1e-17
#: Largest trapezoidal step (aliasing error ~ exp(−π²/h) = exp(−49) times the strength
#: of the branch points at u = ±iπ/2, which grows like (2π/h)^(2p−2)/Γ(2p − 1)).
_H_MAX = 0.2
#: Step in units of the width 1/√(2p − 1) of cosh(u)^(1−2p) near u = 0 (large p).
_H_WIDTH = 0.6
#: Half-width of the region about the cut (and the branch point) left unevaluated for
#: non-integer p: |Re ζ| < 0.05 (√κ + depth below −i√κ), from 0.05√κ above the branch point.
_CUT_WIDTH = 0.05


def profile_norm(kappa: float, power: float) -> float:
    """log A_p = log Γ(p) − ½ log(πκ) − log Γ(p − ½), the normalization of g_p."""
    return float(gammaln(power) - 0.5 * math.log(math.pi * kappa) - gammaln(power - 0.5))


def second_moment(kappa: float, power: float) -> float:
    """⟨x²⟩ = κ / (2p − 3) of the profile g_p (finite for p > 3/2)."""
    return kappa / (2.0 * power - 3.0)


@dataclass(frozen=True)
class _Grid:
    h: float
    sigma: float          # +1 integer grid, −1 half-integer grid
    x2: np.ndarray        # x_n², n ≥ 0
    w: np.ndarray         # h x'(u_n) g_p(x_n), the u = 0 node halved (pairs folded)
    wx2: np.ndarray       # w x_n²
    a_star: float         # Im u above which the pole correction is left out (Im ζ > 0)
    nodes: tuple[tuple[float, float, float], ...]  # (x², w, w x²) as floats (one-point path)


@functools.lru_cache(maxsize=64)
def _grids(kappa: float, power: float) -> tuple[_Grid, _Grid, float]:
    """The two trapezoidal grids for (κ, p) and log A_p (cached: few (κ, p) per run)."""
    s = 2.0 * power - 1.0
    h = min(_H_MAX, _H_WIDTH / math.sqrt(s))
    u_max = -math.log(_TAIL) / s + math.log(2.0)
    if s > 20.0:  # nearly Gaussian: cosh(u)^(−s) ≈ exp(−s u²/2)
        u_max = min(u_max, 1.2 * math.sqrt(-2.0 * math.log(_TAIL) / s))
    n = int(math.ceil(u_max / h)) + 1
    log_a = profile_norm(kappa, power)
    root = math.sqrt(kappa)
    grids = []
    for offset, sigma in ((0.0, 1.0), (0.5, -1.0)):
        u = (np.arange(n) + offset) * h
        x = root * np.sinh(u)
        w = h * root * np.exp(log_a - s * np.log(np.cosh(u)))
        if offset == 0.0:
            w[0] *= 0.5
        x2 = x * x
        for arr in (x2, w):
            arr.setflags(write=False)
        wx2 = w * x2
        wx2.setflags(write=False)
        grids.append(_Grid(h, sigma, x2, w, wx2, math.atan(2.0 * math.pi / (h * s)),
                           tuple(zip(x2.tolist(), w.tolist(), wx2.tolist(), strict=True))))
    return grids[0], grids[1], log_a


def _on_grid(
    z: np.ndarray, grid: _Grid, kappa: float, power: float, log_a: float, need_y: bool
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Y, dY, F, dF at the 1-d points ``z`` with one grid (see the module notes); with
    ``need_y`` false, Y and dY are NaN (F and dF are what the electrostatic χ needs)."""
    zz = z * z
    inv = 1.0 / (grid.x2[:, None] - zz[None, :])
    inv2 = inv * inv
    # Weighted column sums by broadcasting: a BLAS product here can be 100 times slower
    # when its threads compete with other work on the machine (measured).
    w, wx2 = grid.w[:, None], grid.wx2[:, None]
    s_wx2 = (inv * wx2).sum(axis=0)    # Σ w x²/(x² − ζ²)
    d_wx2 = (inv2 * wx2).sum(axis=0)   # Σ w x²/(x² − ζ²)²
    f = 2.0 * s_wx2
    df = 4.0 * z * d_wx2
    if need_y:
        s_w = (inv * w).sum(axis=0)    # Σ w/(x² − ζ²)
        d_w = (inv2 * w).sum(axis=0)   # Σ w/(x² − ζ²)²
        y = 2.0 * z * s_w
        dy = 2.0 * (d_wx2 + zz * d_w)
    else:
        y = dy = np.full_like(z, np.nan)
    # pole correction 2πi φ(ζ) fac(ζ) and its derivative
    root = math.sqrt(kappa)
    u0 = np.arcsinh(z / root)
    du0 = 1.0 / np.sqrt(kappa + zz)
    g = np.exp(log_a - power * np.log1p(zz / kappa))
    dg = -2.0 * power * z / (kappa + zz) * g
    sig = grid.sigma
    c = 2j * math.pi / grid.h
    upper = u0.imag >= 0.0
    fac = np.zeros_like(z)
    dfac = np.zeros_like(z)
    # Above the real axis the correction is exponentially small; beyond the line
    # Im u = a* that minimizes cosh(u)^(1−2p) exp(−2π Im u/h) (tan a* = 2π/(h(2p−1)))
    # the remainder of the plain rule is the smaller one, so it is left out there.
    near_axis = upper & (u0.imag < grid.a_star)
    if near_axis.any():
        q = np.exp(c * u0[near_axis])        # |q| ≤ 1
        den = q - sig
        fac[near_axis] = q / den
        dfac[near_axis] = -sig * c * du0[near_axis] * q / (den * den)
    lower = ~upper
    if lower.any():
        e = np.exp(-c * u0[lower])           # |e| < 1
        den = 1.0 - sig * e
        fac[lower] = 1.0 / den
        dfac[lower] = -sig * c * du0[lower] * e / (den * den)
    two_pi_i = 2j * math.pi
    corr = two_pi_i * g * fac
    dcorr = two_pi_i * (dg * fac + g * dfac)
    return y + corr, dy + dcorr, f + z * corr, df + corr + z * dcorr


def _one_point(
    z: complex, grid: _Grid, kappa: float, power: float, log_a: float, need_y: bool
) -> tuple[complex, complex, complex, complex]:
    """:func:`_on_grid` at one finite point in Python arithmetic (no per-call numpy cost)."""
    zz = z * z
    s_w = s_wx2 = d_w = d_wx2 = 0j
    for x2, w, wx2 in grid.nodes:
        inv = 1.0 / (x2 - zz)
        inv2 = inv * inv
        s_wx2 += wx2 * inv
        d_wx2 += wx2 * inv2
        if need_y:
            s_w += w * inv
            d_w += w * inv2
    nan = complex(math.nan, math.nan)
    f, df = 2.0 * s_wx2, 4.0 * z * d_wx2
    y, dy = (2.0 * z * s_w, 2.0 * (d_wx2 + zz * d_w)) if need_y else (nan, nan)
    u0 = cmath.asinh(z / math.sqrt(kappa))
    c = 2j * math.pi / grid.h
    sig = grid.sigma
    if u0.imag >= grid.a_star:
        return y, dy, f, df
    du0 = 1.0 / cmath.sqrt(kappa + zz)
    g = cmath.exp(log_a - power * cmath.log(1.0 + zz / kappa))
    dg = -2.0 * power * z / (kappa + zz) * g
    if u0.imag >= 0.0:
        q = cmath.exp(c * u0)
        den = q - sig
        fac, dfac = q / den, -sig * c * du0 * q / (den * den)
    else:
        e = cmath.exp(-c * u0)
        den = 1.0 - sig * e
        fac, dfac = 1.0 / den, -sig * c * du0 * e / (den * den)
    corr = 2j * math.pi * g * fac
    dcorr = 2j * math.pi * (dg * fac + g * dfac)
    return y + corr, dy + dcorr, f + z * corr, df + corr + z * dcorr


def kappa_transforms(
    zeta: np.ndarray, kappa: float, power: float, *, need_y: bool = True
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Y_p(ζ), dY_p/dζ, F_p(ζ) = 1 + ζY_p and dF_p/dζ of the profile g_p (module notes).

    Parameters
    ----------
    zeta : array_like of complex
        Normalized frequency ζ, any shape.
    kappa : float
        Width parameter κ > 0 of (1 + x²/κ).
    power : float
        Exponent p > 1/2 of the profile.
    need_y : bool
        False: only F and dF/dζ are computed (Y and dY/dζ are returned as NaN).

    Returns
    -------
    y, dy, f, df : ndarray of complex
        Shaped like ``zeta``; NaN where ζ is not finite, and, for non-integer p, about
        the cut: Im ζ < −0.95√κ and |Re ζ| < 0.05(√κ + max(0, −Im ζ − √κ)).

    Notes
    -----
    dY/dζ = ∫ g/(x − ζ)² dx and dF/dζ = Y + ζ dY/dζ are summed from the same folded
    nodes (Σ w (x² + ζ²)/(x² − ζ²)², Σ w x² ζ/(x² − ζ²)²), so dF, like F, has no
    cancellation at large |ζ|.  Cost: weighted sums over about 15 (large κ) to 90
    (κ → 3/2) nodes per point.
    """
    z = np.asarray(zeta, dtype=complex)
    shape = z.shape
    flat = z.reshape(-1)
    out = [np.full(flat.shape, np.nan + 0j) for _ in range(4)]
    good = np.isfinite(flat)
    grid_a, grid_b, log_a = _grids(float(kappa), float(power))
    if not float(power).is_integer():
        # about the cut (and the branch point): not evaluated, so that a contour that
        # reaches the cut meets non-finite values instead of a silent jump
        root = math.sqrt(kappa)
        depth = -flat.imag - root
        good &= ~((depth > -_CUT_WIDTH * root)
                  & (np.abs(flat.real) < _CUT_WIDTH * (root + np.maximum(depth, 0.0))))
    if not good.any():
        return _shaped(out, shape)
    if flat.size == 1 and good[0]:
        z0 = complex(flat[0])
        u0 = cmath.asinh(z0 / math.sqrt(kappa))
        frac = abs(u0.real) / grid_a.h
        near = abs(frac - round(frac)) < 0.25 and abs(u0.imag) < grid_a.h
        try:
            one = _one_point(z0, grid_b if near else grid_a, float(kappa), float(power),
                             log_a, need_y)
            return _shaped([np.array([v]) for v in one], shape)
        except (ZeroDivisionError, OverflowError, ValueError):
            pass  # at a branch point or overflow: the array path gives inf/nan
    with np.errstate(all="ignore"):
        zg = flat[good]
        u0 = np.arcsinh(zg / math.sqrt(kappa))
        frac = np.abs(u0.real) / grid_a.h
        near = (np.abs(frac - np.round(frac)) < 0.25) & (np.abs(u0.imag) < grid_a.h)
        idx = np.nonzero(good)[0]
        for grid, mask in ((grid_a, ~near), (grid_b, near)):
            if mask.any():
                vals = _on_grid(zg[mask], grid, float(kappa), float(power), log_a, need_y)
                for o, v in zip(out, vals, strict=True):
                    o[idx[mask]] = v
    return _shaped(out, shape)


def _shaped(arrs: list[np.ndarray], shape: tuple[int, ...]
            ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The four 1-d arrays Y, dY, F, dF reshaped to ``shape``."""
    y, dy, f, df = (a.reshape(shape) for a in arrs)
    return y, dy, f, df


def kappa_z(zeta: np.ndarray, kappa: float) -> tuple[np.ndarray, np.ndarray]:
    """Z*_κ(ζ) of Summers & Thorne (1991) and its derivative, = (1 − 1/(2κ)) Y_{κ+1}.

    Parameters
    ----------
    zeta : array_like of complex
        ζ, any shape.
    kappa : float
        κ > 1/2.

    Returns
    -------
    z, dz : ndarray of complex
        Z*_κ(ζ) and dZ*_κ/dζ, continued analytically (module notes).
    """
    y, dy, _, _ = kappa_transforms(zeta, kappa, kappa + 1.0)
    c = 1.0 - 0.5 / kappa
    return c * y, c * dy


def beyond_branch_point(zeta: np.ndarray, kappa: float) -> np.ndarray:
    """True where Im ζ < −√κ for a non-integer κ (module notes, "Where the continuation
    holds"): a root there is not the dominant response and depends on the cut."""
    z = np.asarray(zeta, dtype=complex)
    if float(kappa).is_integer():
        return np.zeros(z.shape, dtype=bool)
    return z.imag < -math.sqrt(kappa)
