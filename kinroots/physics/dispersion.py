"""The dispersion function D(ω; k, plasma) and its derivatives, vectorized over ω.

Conventions: perturbations ∝ exp(i k·x − i ω t); B (or the drift axis) along z;
k = k (sin θ, 0, cos θ), so k_par = k cos θ, k_perp = k sin θ; SI units (ω in rad/s,
k in 1/m).  The susceptibility builders live in :mod:`kinroots.physics.models`; this module
sums them, assembles D, scales it to be entire in ω and supplies dD/dω (and dD/dk for
the spatial problem, complex k at real ω).
"""

from __future__ import annotations

import cmath
import importlib
import math
from collections.abc import Callable
from typing import Any

import numpy as np

from kinroots.physics.models.base import Builder, Susceptibility
from kinroots.physics.models.krook_dispersion import scaled_cauchy_derivative
from kinroots.physics.models.species_models import (
    builder_for_plasma,
    kappa_poles,
    plain_species,
)
from kinroots.physics.plasma import C_LIGHT, EV, Plasma
from kinroots.physics.zfunc import SHIFT_MAX_BITS as _MAX_BITS
from kinroots.physics.zfunc import SHIFT_RETRIES as _BITS_RETRIES
from kinroots.physics.zfunc import SHIFT_STEP as _BITS_STEP
from kinroots.physics.zfunc import SHIFT_TOP_BITS as _TOP_BITS
from kinroots.physics.zfunc import binary_exponent as _exponent
from kinroots.physics.zfunc import landau_shift
from kinroots.physics.zfunc import ldexp_complex as _ldexp_complex

__all__ = [
    "BLOCK_ELEMENTS",
    "Dispersion",
    "MODELS",
    "builder_for",
    "dispersion_in_k",
    "dispersion_in_k_scaled",
    "dispersion_pairs",
    "in_blocks",
    "landau_bits_unmagnetized",
    "scaled_builder_for",
]

#: Canonical model names and the spellings accepted for them.
MODELS: dict[str, str] = {
    "electrostatic": "electrostatic",
    "es": "electrostatic",
    "electromagnetic": "electromagnetic",
    "em": "electromagnetic",
}

#: (model, magnetized) -> module holding the builder ``susceptibility`` (imported lazily).
_REGISTRY: dict[tuple[str, bool], str] = {
    ("electrostatic", False): "kinroots.physics.models.es_unmagnetized",
    ("electromagnetic", False): "kinroots.physics.models.em_unmagnetized",
    ("electrostatic", True): "kinroots.physics.models.es_magnetized",
    ("electromagnetic", True): "kinroots.physics.models.em_magnetized",
}

#: (ω, harmonic) elements per species and block of :meth:`Dispersion.__call__` and
#: (k, ω) pairs per block of :func:`dispersion_pairs` times harmonics: each temporary
#: array of a block then holds at most this many complex numbers (1 MiB).
BLOCK_ELEMENTS = 65536
#: The dtype of the Python-arithmetic path's input (:meth:`Dispersion.__call__`).
_COMPLEX = np.dtype(complex)

#: Points on the Cauchy circles used for dD/dk of magnetized models.
_N_CIRCLE = 32
#: Radius of the Cauchy circle for dD/dk (magnetized models), as a fraction of |k|.
_K_FRACTION = 1e-3


#: NaN in both parts: where D has no value (a real part of NaN alone reads as γ = 0).
_NAN = complex(math.nan, math.nan)

def _canonical_model(model: str) -> str:
    try:
        return MODELS[model.strip().lower()]
    except (KeyError, AttributeError):
        raise ValueError(
            f"unknown model {model!r}: expected one of {sorted(set(MODELS))}"
        ) from None


def builder_for(model: str, magnetized: bool) -> Builder:
    """The susceptibility builder registered for ``(model, magnetized)``.

    Parameters
    ----------
    model : str
        ``"electrostatic"`` / ``"es"`` or ``"electromagnetic"`` / ``"em"``.
    magnetized : bool
        Whether B ≠ 0.

    Returns
    -------
    Builder
        The module's ``susceptibility`` function (imported on first use, so that a
        model module that is absent only matters when it is asked for).
    """
    key = (_canonical_model(model), bool(magnetized))
    module = importlib.import_module(_REGISTRY[key])
    builder: Builder = module.susceptibility
    return builder


def scaled_builder_for(magnetized: bool) -> Callable[..., Susceptibility]:
    """The electromagnetic ``scaled_susceptibility`` for ``magnetized`` (see its module).

    It returns S_s = diag(w, w, 1) χ'_s diag(w, w, 1), w = ω/ω_ref, χ'_s in the wave frame
    (e₁, e₂, k̂) of :class:`Dispersion`, entire in ω and formed without cancellation, and
    takes ``omega_ref`` as an extra keyword.
    """
    module = importlib.import_module(_REGISTRY[("electromagnetic", bool(magnetized))])
    builder: Builder = module.scaled_susceptibility
    return builder


def _cos_sin_deg(angle_deg: float) -> tuple[float, float]:
    """cos θ, sin θ with exact zeros at multiples of 90° (so that k∥ = 0 is exact)."""
    a = float(angle_deg)
    if not math.isfinite(a):
        raise ValueError(f"angle_deg must be finite, got {angle_deg!r}")
    r = a % 360.0
    exact = {0.0: (1.0, 0.0), 90.0: (0.0, 1.0), 180.0: (-1.0, 0.0), 270.0: (0.0, -1.0)}
    if r in exact:
        return exact[r]
    t = math.radians(a)
    return math.cos(t), math.sin(t)


def _det_and_cofactors(m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """det M and the cofactor matrix C (C_ij = ∂ det M / ∂M_ij) of stacked 3×3 M."""
    # C_ij = M[i1, j1] M[i2, j2] − M[i1, j2] M[i2, j1], i1 = i+1, i2 = i+2 (mod 3), for all
    # (i, j) at once by index arrays (the same products as entry by entry)
    a = m[..., _I1, _J1] * m[..., _I2, _J2]
    a -= m[..., _I1, _J2] * m[..., _I2, _J1]
    det = np.sum(m[..., 0, :] * a[..., 0, :], axis=-1)
    return det, a


_ROWS = np.arange(3)[:, None] + np.zeros(3, dtype=int)
_COLS = np.zeros(3, dtype=int)[:, None] + np.arange(3)
_I1, _I2 = (_ROWS + 1) % 3, (_ROWS + 2) % 3
_J1, _J2 = (_COLS + 1) % 3, (_COLS + 2) % 3


def _scaled_det_and_derivative(
    m: np.ndarray, dm: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """det M and Σ C_ij dM_ij, both times 2^(−p), and the integer p, for stacked 3×3 M.

    Row i of M and of dM is multiplied by 2^(−p_i), p_i the binary exponent of the
    largest |M_ij| of that row (:func:`numpy.frexp`), so every scaled entry is at most 1
    in modulus and the determinant of the scaled rows cannot overflow; p = Σ p_i.  By
    multilinearity of det in the rows, det M = 2^p det M_s and, since the cofactors of
    the scaled matrix are those of M times 2^(p_i − p), Σ C_ij dM_ij = 2^p Σ C^s_ij dM^s_ij
    (row scaling of a determinant: e.g. G. H. Golub and C. F. Van Loan, *Matrix
    Computations*, 4th ed., 2013, sec. 3.5.2, equilibration).  Powers of two are exact,
    so where det M fits in double precision, 2^p times the result is det M to the last
    bit unless an intermediate underflows.
    """
    big = np.max(np.maximum(np.abs(m.real), np.abs(m.imag)), axis=-1)
    _, e = np.frexp(np.where(np.isfinite(big) & (big > 0), big, 1.0))
    scale = np.ldexp(1.0, -e)[..., None]
    d, cof = _det_and_cofactors(m * scale)
    return d, np.sum(cof * (dm * scale), axis=(-2, -1)), np.sum(e, axis=-1)


def _cofactors_polar(m: np.ndarray, dm: np.ndarray) -> np.ndarray:
    """The derivative of the cofactor matrix of stacked 3×3 ``m`` in the direction ``dm``
    (the polarization of :func:`_det_and_cofactors`, bilinear, formed directly)."""
    a = m[..., _I1, _J1] * dm[..., _I2, _J2] + dm[..., _I1, _J1] * m[..., _I2, _J2]
    a -= m[..., _I1, _J2] * dm[..., _I2, _J1] + dm[..., _I1, _J2] * m[..., _I2, _J1]
    return a


def _rank_two_det(a: np.ndarray, da: np.ndarray, t: Any
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    r"""det(A + S_E) and its ω-derivative as mantissas times 2^P, S_E = c·L g Rᵀ of rank
    two (a :class:`~kinroots.physics.models.em_magnetized.ResonantTerm` ``t``).

    For 3×3 matrices det(A + X) = det A + tr(adj(A) X) + tr(A adj(X)) + det X (the
    characteristic expansion of a sum; e.g. R. A. Horn and C. R. Johnson, *Matrix
    Analysis*, 2nd ed., 2013, sec. 0.8). With X = c L g Rᵀ of rank two, det X = 0 and
    adj(X) = c² det(g) (R₁ × R₂)(L₁ × L₂)ᵀ (its columns span the kernel of X, its rows
    the left kernel; L_i, R_i the columns of L, R), so::

        D = det A + c tr(adj(A) L g Rᵀ) + c² det(g) (L₁ × L₂)·A(R₁ × R₂).

    Every term is formed from well-conditioned factors and the accurate det g: the
    cubic term that swamps a plain determinant (ε|X|³ in double, although det X = 0)
    is absent and the quadratic one keeps its digits when g is nearly singular. The
    three terms carry 2^0, 2^p, 2^2p (c = mantissa·2^p) and are added at a common P.
    """
    det_a, cof = _det_and_cofactors(a)
    ddet_a = np.sum(cof * da, axis=(-2, -1))
    y = np.einsum("mik,mkl,mjl->mij", t.L, t.g, t.R)
    dy = (np.einsum("mik,mkl,mjl->mij", t.dL, t.g, t.R)
          + np.einsum("mik,mkl,mjl->mij", t.L, t.g, t.dR))
    t1 = np.sum(cof * y, axis=(-2, -1))
    dt1 = np.sum(cof * dy + _cofactors_polar(a, da) * y, axis=(-2, -1))
    L0, L1, R0, R1 = t.L[..., 0], t.L[..., 1], t.R[..., 0], t.R[..., 1]
    lc = np.cross(L0, L1)
    rc = np.cross(R0, R1)
    dlc = np.cross(t.dL[..., 0], L1) + np.cross(L0, t.dL[..., 1])
    drc = np.cross(t.dR[..., 0], R1) + np.cross(R0, t.dR[..., 1])
    ar = np.einsum("mij,mj->mi", a, rc)
    t2 = np.sum(lc * ar, axis=-1)
    dt2 = (np.sum(dlc * ar, axis=-1) + np.einsum("mi,mij,mj->m", lc, da, rc)
           + np.einsum("mi,mij,mj->m", lc, a, drc))
    c, dc, p = t.coef, t.dcoef, t.exponent
    q = c * t.det_g
    values = (det_a, c * t1, c * q * t2)
    derivs = (ddet_a, dc * t1 + c * dt1, q * (2.0 * dc * t2 + c * dt2))
    shifts = (np.zeros_like(p), p, 2 * p)
    top = np.max([_exponent(v) + e for v, e in zip(values + derivs, shifts + shifts,
                                                    strict=True)], axis=0)
    d = sum(_ldexp_complex(v, e - top) for v, e in zip(values, shifts, strict=True))
    dd = sum(_ldexp_complex(v, e - top) for v, e in zip(derivs, shifts, strict=True))
    return np.asarray(d), np.asarray(dd), top




def _combine_scaled(
    reg: np.ndarray, dreg: np.ndarray, x: np.ndarray, dx: np.ndarray, bits: int,
    electromagnetic: bool,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Mantissas and exponent of D = R + 2^bits X (scalar D) or det(R + 2^bits X) (3×3)."""
    if not electromagnetic:
        q = np.maximum(_exponent(reg), _exponent(x) + bits)
        return (_ldexp_complex(reg, -q) + _ldexp_complex(x, bits - q),
                _ldexp_complex(dreg, -q) + _ldexp_complex(dx, bits - q), q)
    q = np.max(np.maximum(_exponent(reg), _exponent(x) + bits), axis=-1)[..., None]
    m = _ldexp_complex(reg, -q) + _ldexp_complex(x, bits - q)
    dm = _ldexp_complex(dreg, -q) + _ldexp_complex(dx, bits - q)
    d, cof = _det_and_cofactors(m)
    return d, np.sum(cof * dm, axis=(-2, -1)), np.sum(q[..., 0], axis=-1)


def _nan_where(bad: np.ndarray, d: np.ndarray, dd: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """D and dD with NaN where ``bad`` (non-finite or invalid inputs)."""
    if np.any(bad):
        d = np.where(bad, _NAN, d)
        dd = np.where(bad, _NAN, dd)
    return d, dd


def _det_and_derivative(m: np.ndarray, dm: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """det M and its derivative Σ_ij C_ij dM_ij (C: cofactors; exact where M is singular)."""
    d, cof = _det_and_cofactors(m)
    return d, np.sum(cof * dm, axis=(-2, -1))


def _scaled_matrix(
    plasma: Plasma,
    builder: Callable[..., Susceptibility],
    omega: np.ndarray,
    *,
    k: Any,
    k_par: Any,
    k_perp: Any,
    omega_ref: float,
    tol: float,
) -> tuple[np.ndarray, np.ndarray, dict[str, int]]:
    """S and dS/dω of :class:`Dispersion` (its Notes), summed over species.

    ``k``, ``k_par``, ``k_perp`` are scalars or arrays broadcast against ``omega``; the
    builders are the models' ``scaled_susceptibility``.  Returns S, dS/dω (shaped
    ``shape + (3, 3)``) and the harmonics kept per species.
    """
    total = dtotal = None
    harmonics: dict[str, int] = {}
    for s in plasma.species:
        res: Susceptibility = builder(
            omega, s, k_par=k_par, k_perp=k_perp, B=plasma.B, tol=tol, omega_ref=omega_ref,
        )
        harmonics[s.name] = int(res.harmonics)
        v, d = np.asarray(res.value), np.asarray(res.derivative)
        total = v if total is None else total + v
        dtotal = d if dtotal is None else dtotal + d
    assert total is not None and dtotal is not None
    shape = np.broadcast_shapes(np.shape(omega), np.shape(k)) + (3, 3)
    total = np.broadcast_to(total, shape).copy()
    dtotal = np.broadcast_to(dtotal, shape).copy()
    _add_vacuum(total, dtotal, omega, k, omega_ref)
    return total, dtotal, harmonics


def _add_vacuum(total: np.ndarray, dtotal: np.ndarray, omega: np.ndarray, k: Any,
                omega_ref: float) -> None:
    """Add the vacuum part of S (class Notes of :class:`Dispersion`) in place:
    w² − (kc/ω_ref)² on the transverse diagonal, 1 on the longitudinal one."""
    w = omega / omega_ref
    n2ref = (k * C_LIGHT / omega_ref) ** 2
    for i in range(2):
        total[..., i, i] += w * w - n2ref
        dtotal[..., i, i] += 2.0 * w / omega_ref
    total[..., 2, 2] += 1.0


def in_blocks(
    func: Callable[..., tuple[np.ndarray, np.ndarray]], *args: np.ndarray, block: int
) -> tuple[np.ndarray, np.ndarray]:
    """``func(*args)`` evaluated on blocks of at most ``block`` elements.

    ``func`` maps arrays of one shape (elementwise, each element independent of the
    others) to two complex arrays of that shape; ``args`` are broadcast together and
    flattened, and the results reshaped. Used so that the memory of one evaluation stays
    bounded (DEVELOPERS.md, "Memory"), whatever the number of points.
    """
    arrays: tuple[np.ndarray, ...]
    if len(args) == 1:
        arrays = args
    else:
        arrays = tuple(np.broadcast_arrays(*args))
    shape = arrays[0].shape
    size = arrays[0].size
    if size <= block:
        return func(*arrays)
    flat = [a.ravel() for a in arrays]
    d = np.empty(size, dtype=complex)
    dd = np.empty(size, dtype=complex)
    for i in range(0, size, block):
        d[i : i + block], dd[i : i + block] = func(*(a[i : i + block] for a in flat))
    return d.reshape(shape), dd.reshape(shape)


class Dispersion:
    """D(ω) and dD/dω at fixed k for one plasma and one model.

    Parameters
    ----------
    plasma : Plasma
        Species and magnetic field B [T] (B = 0 selects the unmagnetized builders).
    k : complex
        Wavenumber |k| [1/m]; non-zero and finite.  A complex k (spatial problem) is
        accepted: the builders continue analytically from Re k > 0.
    angle_deg : float
        Angle θ between k and z [degrees]; multiples of 90° are exact (k∥ = 0 at 90°).
    model : str
        ``"electrostatic"`` (``"es"``) or ``"electromagnetic"`` (``"em"``).
    omega_ref : float
        Frequency [rad/s] that makes the scale factors of D dimensionless (e.g. ω_pe).
    harmonic_tol : float
        Truncation tolerance passed to magnetized builders as ``tol``.

    Attributes
    ----------
    harmonics : dict[str, int]
        Species name → cyclotron harmonics kept at the last evaluation (0 unmagnetized).
    scaling : str
        Plain-text description of the normalization of D.
    electromagnetic : bool
        Model kind.

    Notes
    -----
    Electrostatic: D = ε_L = 1 + Σ_s χ_s (no scaling).  Entire in ω for unmagnetized
    plasmas and for magnetized ones with k∥ ≠ 0; with k∥ = 0 it has poles at the
    cyclotron harmonics n Ω_s, reported by :meth:`singular_points`.

    Electromagnetic: Λ = ε − n²(I − k̂k̂), ε = I + Σ_s χ_s, n² = k²c²/ω².  In the frame
    e₁ = (cos θ, 0, −sin θ), e₂ = ŷ, e₃ = k̂ (R with these rows, det R = 1)::

        M = diag((ω/ω_ref)², (ω/ω_ref)², 1) · R Λ Rᵀ,
        D = det M = (ω/ω_ref)⁴ det Λ.

    Why this is entire.  The poles of χ at ω = 0: (i) χ_ij = (iσ_ij/ε0ω) with the force
    of δB = k×E/ω in σ, so every entry has order ≤ 2 and ω²(Λ_TT) is entire (T: e₁, e₂);
    (ii) a longitudinal E makes no δB, so the column χ_{·L} has order ≤ 1 and the
    entries ω²Λ_{TL} = O(ω); (iii) by charge continuity k̂·χ = iρ/(ε0 k E), whose 1/ω
    pole comes only from the charge moved by the magnetic force on a drifting or
    anisotropic species: Λ_{LT} = O(1/ω), Λ_LL = ε_L entire.  Expanding det M along the
    longitudinal row, Λ_{LT} multiplies cofactors that contain a factor ω²Λ_{TL} = O(ω),
    so D has no pole: the 1/ω of the longitudinal row needs no factor of its own.
    Multiplying that row by ω/ω_ref too (as first planned for drifting or anisotropic
    plasmas) would put a spurious simple zero at ω = 0 in every such case (D(0) ≠ 0
    otherwise; both verified in tests/test_dispersion.py by the argument principle).
    The power 4 is minimal since D(0) ≠ 0 in general.  ω = 0 is still listed by
    :meth:`singular_points` so that the root finder checks it itself.

    Evaluation.  D is computed as det S with the similar matrix
    S = diag(1, 1, w) M diag(1, 1, 1/w) = diag(w, w, 1) R Λ Rᵀ diag(w, w, 1), w = ω/ω_ref
    (same determinant).  Its entries w²Λ_TT, wΛ_TL, wΛ_LT and Λ_LL are each entire, and the
    builders' ``scaled_susceptibility`` forms every species' share of them in closed forms
    without the small-ω cancellations of χ (one power of ω is removed exactly from each
    contraction with k by charge continuity; see the builder modules).  So D and dD/dω
    are evaluated directly at every ω, ω = 0 included, with an accuracy that does not
    degrade as ω → 0 (tested against mpmath at ω = 1e-3 and 1e-5 of the slowest
    frequency scale in tests/test_models_*.py).  With this scaling D(−ω*) = D(ω)* for
    non-drifting plasmas (reality condition).

    dD/dω: electrostatic from the builders' analytic ∂χ/∂ω; electromagnetic from the
    cofactor form dD/dω = Σ_ij C_ij dM_ij/dω (C the cofactor matrix of M), which
    stays exact where M is singular.  Non-finite ω gives NaN.

    References
    ----------
    T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 1 and 10 (wave equation, Λ);
    N. A. Krall and A. W. Trivelpiece, *Principles of Plasma Physics* (1973), ch. 9.
    """

    def __init__(
        self,
        plasma: Plasma,
        *,
        k: complex,
        angle_deg: float,
        model: str,
        omega_ref: float,
        harmonic_tol: float = 1e-14,
    ) -> None:
        kc = complex(k)
        if kc == 0 or not (math.isfinite(kc.real) and math.isfinite(kc.imag)):
            raise ValueError(f"k must be finite and non-zero, got {k!r}")
        if not (math.isfinite(omega_ref) and omega_ref > 0):
            raise ValueError(f"omega_ref must be a finite positive frequency, got {omega_ref!r}")
        if len(plasma.species) == 0:
            raise ValueError("the plasma has no species")
        self.plasma = plasma
        self.k = kc
        self.angle_deg = float(angle_deg)
        self.model = _canonical_model(model)
        self.omega_ref = float(omega_ref)
        self.harmonic_tol = float(harmonic_tol)
        #: Electromagnetic models: D and dD/dω are returned times 2^(−log2_offset), a
        #: constant (so the zeros and dD/dω / D are those of D), chosen by a caller whose
        #: region of ω has |D| beyond double precision (see :meth:`log2_magnitude`).
        self.log2_offset = 0
        self.electromagnetic = self.model == "electromagnetic"
        self.magnetized = plasma.magnetized
        self._builder = builder_for_plasma(
            builder_for(self.model, self.magnetized), plasma.species, model=self.model,
            magnetized=self.magnetized)
        cos, sin = _cos_sin_deg(angle_deg)
        self._cos, self._sin = cos, sin
        self.k_par = kc * cos
        self.k_perp = kc * sin
        self._rot = np.array([[cos, 0.0, -sin], [0.0, 1.0, 0.0], [sin, 0.0, cos]])
        self.harmonics: dict[str, int] = {s.name: 0 for s in plasma.species}
        if self.magnetized:  # N depends on k only: known before any evaluation
            from kinroots.physics.models._harmonics import harmonics_needed

            for s in plasma.species:
                self.harmonics[s.name] = harmonics_needed(
                    s, k_perp=self.k_perp, B=plasma.B, tol=self.harmonic_tol)
        #: ω per block of :meth:`__call__`: about :data:`BLOCK_ELEMENTS` (ω, harmonic)
        #: elements per species, so that memory does not grow with the number of ω.
        self.block = max(64, BLOCK_ELEMENTS // (2 * max(self.harmonics.values()) + 1))
        #: Slowest frequency scale of the susceptibilities [rad/s]: |k| w_k, and |Ω_s|,
        #: |k∥| w∥ when magnetized (D varies on this scale near ω = 0).
        self.frequency_scale = self._slowest_scale()
        self._scaled_builder = (
            builder_for_plasma(scaled_builder_for(self.magnetized), plasma.species,
                               model=self.model, magnetized=self.magnetized, scaled=True)
            if self.electromagnetic else None
        )
        #: Electromagnetic models with plain species (magnetized: k∥ ≠ 0): Σ_s S_s from the
        #: module's ``ScaledSum`` (per-k constants cached, one Z or moment call for every
        #: species and harmonic); None where the builders serve.
        #: Built on first evaluation (:meth:`_sums`): a Dispersion made only for its
        #: resonances, harmonics or singular points (a survey's sampling aids) skips the
        #: per-k tables (about 3 ms for three magnetized species).
        self._sums_ready = False
        self._scaled_sum_: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]] | None = None
        self._species_sum_: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]] | None = None
        self._scalar_path_: Callable[[np.ndarray, float],
                                     tuple[np.ndarray, np.ndarray]] | None = None
        if self.electromagnetic:
            self.scaling = (
                f"D = (omega/omega_ref)^4 det(Lambda), omega_ref = {self.omega_ref!r} rad/s: "
                "the two rows of Lambda transverse to k times (omega/omega_ref)^2; "
                "entire in omega, finite at omega = 0"
            )
        else:
            self.scaling = "D = 1 + sum_s chi_s (longitudinal dielectric), unscaled"

    # ------------------------------------------------------------------ helpers
    def _sums(self) -> None:
        """Build the fixed-k species sums once (models whose module offers them)."""
        if self._sums_ready:
            return
        self._sums_ready = True
        species = self.plasma.species
        if not plain_species(species):
            return
        module = importlib.import_module(_REGISTRY[(self.model, self.magnetized)])
        if self.electromagnetic:
            factory = getattr(module, "ScaledSum", None)
            if factory is not None:
                self._scaled_sum_ = factory.for_species(
                    tuple(species), k_par=self.k_par, k_perp=self.k_perp, B=self.plasma.B,
                    tol=self.harmonic_tol, omega_ref=self.omega_ref)
            return
        #: Electrostatic models whose module offers ``SpeciesSum`` (constants per species
        #: cached here, since k is fixed; every species in one pass): Σχ_s from it.
        factory = getattr(module, "SpeciesSum", None)
        if factory is not None:
            extra = {"B": self.plasma.B, "tol": self.harmonic_tol} if self.magnetized else {}
            self._species_sum_ = factory.for_species(
                tuple(species), k_par=self.k_par, k_perp=self.k_perp, **extra)
            #: ``offset`` + Σχ_s and its ω-derivative at a few ω in Python arithmetic
            #: (:meth:`__call__`), where the species sum offers it.
            self._scalar_path_ = getattr(self._species_sum_, "scalar_sum", None)

    @property
    def _scaled_sum(self) -> Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]] | None:
        """Σ_s S_s from the module's ``ScaledSum`` (electromagnetic, plain species) or None."""
        self._sums()
        return self._scaled_sum_

    @property
    def _species_sum(self) -> Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]] | None:
        """Σ_s χ_s from the module's ``SpeciesSum`` (electrostatic, plain species) or None."""
        self._sums()
        return self._species_sum_

    def _slowest_scale(self) -> float:
        scales = []
        parts = [part for s in self.plasma.species for _, part in s.component_species()]
        for s in parts:
            wpar2 = 2.0 * s.temperature_par * EV / s.mass
            wperp2 = 2.0 * s.temperature_perp * EV / s.mass
            scales.append(abs(self.k_perp**2 * wperp2 + self.k_par**2 * wpar2) ** 0.5)
            if self.magnetized:
                scales.append(abs(s.cyclotron_frequency(self.plasma.B)))
                if self.k_par != 0:
                    scales.append(abs(self.k_par) * math.sqrt(wpar2))
        good = [x for x in scales if math.isfinite(x) and x > 0]
        return min(good) if good else self.omega_ref

    def _chi(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Σ_s χ_s and Σ_s ∂χ_s/∂ω at the given ω (builders' frame)."""
        if self._species_sum is not None:
            return self._species_sum(omega)
        total = dtotal = None
        for s in self.plasma.species:
            res: Susceptibility = self._builder(
                omega,
                s,
                k_par=self.k_par,
                k_perp=self.k_perp,
                B=self.plasma.B,
                tol=self.harmonic_tol,
            )
            self.harmonics[s.name] = int(res.harmonics)
            v, d = np.asarray(res.value), np.asarray(res.derivative)
            total = v if total is None else total + v
            dtotal = d if dtotal is None else dtotal + d
        assert total is not None and dtotal is not None
        return total, dtotal

    def _scaled(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """S and dS/dω (class Notes), summed over species, in the frame (e₁, e₂, k̂)."""
        if self._scaled_sum is not None:
            total, dtotal = self._scaled_sum(omega)
            _add_vacuum(total, dtotal, omega, self.k, self.omega_ref)
            return total, dtotal
        assert self._scaled_builder is not None  # electromagnetic models have one
        total, dtotal, harmonics = _scaled_matrix(
            self.plasma, self._scaled_builder, omega, k=self.k, k_par=self.k_par,
            k_perp=self.k_perp, omega_ref=self.omega_ref, tol=self.harmonic_tol,
        )
        self.harmonics.update(harmonics)
        return total, dtotal

    def _d_em(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """D = det S and dD/dω = Σ C_ij dS_ij/dω (C: cofactors of S), any finite ω."""
        split = self._resonant_split(omega)
        if split is None:
            return _det_and_derivative(*self._scaled(omega))
        d, dd, p = split
        return _ldexp_complex(d, p), _ldexp_complex(dd, p)

    def _resonant_split(self, om: np.ndarray
                        ) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
        """D and dD/dω as mantissas times 2^p where a species-harmonic's Landau
        exponential dominates (None where no ω of the block has one, or the plasma has
        no fixed-k sum).

        Below the real axis near ω = nΩ + k∥V the term exp(−ζ_n²) is huge and its share
        S_E of S has rank two (nearly one at small k⊥ρ): det S formed in double then
        holds rounding noise of order ε|S_E|³ that can exceed D by many decades. There
        S is split as A + S_E (:meth:`~kinroots.physics.models.em_magnetized.ScaledSum.
        resonant_term`) and D formed by :func:`_rank_two_det`; other ω as before.
        """
        ss = self._scaled_sum
        columns = getattr(ss, "resonant_columns", None)
        parts = getattr(ss, "resonant_parts", None)
        if columns is None or parts is None:
            return None
        flat = om.ravel()
        cols = columns(flat)
        hit = cols >= 0
        if not hit.any():
            return None
        d = np.empty(flat.shape, dtype=complex)
        dd = np.empty(flat.shape, dtype=complex)
        p = np.zeros(flat.shape, dtype=np.int64)
        if not hit.all():
            d[~hit], dd[~hit], p[~hit] = _scaled_det_and_derivative(*self._scaled(flat[~hit]))
        sub = flat[hit]
        a, da, term = parts(sub, cols[hit])
        _add_vacuum(a, da, sub, self.k, self.omega_ref)
        d[hit], dd[hit], p[hit] = _rank_two_det(a, da, term)
        return d.reshape(om.shape), dd.reshape(om.shape), p.reshape(om.shape)

    def _landau_bits(self, om: np.ndarray) -> np.ndarray:
        """Per ω, an estimate of the largest log₂|exp(−ζ²)| over the Landau exponentials
        that are evaluated (Maxwellian parts, Im ζ < 0; 0 where there is none).

        ζ = (ω − k∥V)/κ, κ² = k⊥²w⊥² + k∥²w∥² unmagnetized; ζ_n = (ω − k∥V − nΩ)/(k∥w∥)
        for the kept harmonics |n| ≤ N that make it largest when magnetized (the arguments of
        the builders; D. G. Swanson, *Plasma Waves*, 2nd ed., 2003, ch. 4, from memory).
        """
        kpar, kperp = complex(self.k_par), complex(self.k_perp)
        if not self.magnetized:
            return landau_bits_unmagnetized(self.plasma, om, kpar, kperp)
        best = np.zeros(om.shape)
        if kpar == 0:
            return best
        for s in self.plasma.species:
            if s.distribution != "maxwellian" or s.collision_frequency > 0.0:
                continue  # a Krook χ_s is finite and regular (krook.ratio)
            n_max = self.harmonics.get(s.name, 0)
            for _, part in s.component_species():
                wpar2 = 2.0 * part.temperature_par * EV / part.mass
                x = om - kpar * part.drift
                zetas = []
                width = kpar * math.sqrt(wpar2)
                om_c = part.cyclotron_frequency(self.plasma.B)
                if om_c != 0 and n_max > 0:
                    # Re(−ζ_n²) = −Re(c (x − nΩ)²), c = 1/width², is quadratic in n: its
                    # largest value over |n| ≤ N is near n* = Re(c x)/(Ω Re c) (Re c > 0)
                    # or at an end (Re c < 0, complex k∥ beyond 45°)
                    c = 1.0 / (width * width)
                    n0 = np.rint(np.clip((c * x).real / (om_c * c.real) if c.real else 0.0,
                                         -n_max, n_max))
                    for n in (n0 - 1.0, n0, n0 + 1.0, -n_max, n_max):
                        zetas.append((x - np.clip(n, -n_max, n_max) * om_c) / width)
                else:
                    zetas.append(x / width)
                for z in zetas:
                    a = np.where(z.imag < 0.0, (z.imag - z.real) * (z.imag + z.real), 0.0)
                    best = np.fmax(best, a)
        return best / math.log(2.0)

    def _shifted(self, om: np.ndarray, bits: float) -> tuple[np.ndarray, np.ndarray]:
        """D-side quantities (ES: D, dD/dω; EM: S, dS/dω) with every Landau exponential
        times 2^−bits (:func:`kinroots.physics.zfunc.landau_shift`)."""
        with landau_shift(bits):
            if self.electromagnetic:
                return self._scaled(om)
            chi, dchi = self._chi(om)
            return 1.0 + chi, dchi

    def _scaled_block(self, om: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """:meth:`scaled` for one block of ω (complex array, errstate set by the caller)."""
        if self.electromagnetic:
            split = self._resonant_split(om)
            d, dd, p = (_scaled_det_and_derivative(*self._scaled(om)) if split is None
                        else split)
        else:
            chi, dchi = self._chi(om)
            d, dd, p = 1.0 + chi, dchi, np.zeros(om.shape, dtype=int)
        bad = np.isfinite(om) & ~(np.isfinite(d) & np.isfinite(dd))
        if not np.any(bad):
            return d, dd, p
        idx = np.flatnonzero(bad)
        pts = om.ravel()[idx]
        # 2^bits takes the largest exponential term to about 2^_TOP_BITS; grouped by
        # multiples of _BITS_STEP so that a few evaluations serve the whole block
        want = self._landau_bits(pts) - _TOP_BITS
        groups = np.maximum(_BITS_STEP, _BITS_STEP * np.ceil(want / _BITS_STEP))
        keep = groups <= _MAX_BITS  # beyond: |D| > 2^(2^20), left NaN
        idx, groups = idx[keep], groups[keep]
        d_out, dd_out, p_out = d.ravel().copy(), dd.ravel().copy(), p.ravel().copy()
        for g in np.unique(groups):
            sel = idx[groups == g]
            sub = om.ravel()[sel]
            reg, dreg = self._shifted(sub, math.inf)
            bits = float(g)
            for _ in range(_BITS_RETRIES):
                big, dbig = self._shifted(sub, bits)
                x, dx = big - reg, dbig - dreg  # the exponential part, times 2^-bits
                dm, ddm, pm = _combine_scaled(reg, dreg, x, dx, int(bits),
                                              self.electromagnetic)
                if np.all(np.isfinite(dm) & np.isfinite(ddm)):
                    break
                bits += 4 * _BITS_STEP
            d_out[sel], dd_out[sel], p_out[sel] = dm, ddm, pm
        return d_out.reshape(om.shape), dd_out.reshape(om.shape), p_out.reshape(om.shape)

    def scaled(self, omega: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """D and dD/dω as mantissas with a binary exponent per point, never overflowing.

        Parameters
        ----------
        omega : array_like of complex
            Frequencies [rad/s], any shape.

        Returns
        -------
        D_m, dD_m : ndarray of complex
            ``D = D_m·2^p`` and ``dD/dω = dD_m·2^p`` (same p, so ``dD_m/D_m = D'/D``).
        p : ndarray of int
            The binary exponent (0 for electrostatic points where D is finite).

        Notes
        -----
        Where the plain evaluation is finite it is used as is (electromagnetic: the
        row-scaled determinant of :func:`_scaled_det_and_derivative`).  Elsewhere the
        Landau exponentials are carried with a common scale: the reflection
        Z(ζ) = 2i√π exp(−ζ²) − Z(−ζ), Im ζ < 0 (NIST DLMF 7.4.3; Fried & Conte 1961)
        makes every χ_s an affine function of the terms exp(−ζ_{s,n}²) with bounded
        coefficients, so two evaluations, one with every such term times 2^−b
        (:func:`kinroots.physics.zfunc.landau_shift`) and one without them, give the
        regular part R and the exponential part X of each entry with entry = R + 2^b X.
        b is chosen from the largest Re(−ζ²) at the point.
        Electrostatic D = 1 + Σχ_s is such an entry; electromagnetic D = det S is then
        formed from rows of S scaled by exact powers of two (multilinearity of det in
        the rows; G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed., 2013,
        sec. 3.5.2).  A Krook (collisional) χ_s = N_s/Q_s is not affine in its terms, but
        it is finite (its builder forms the ratio from mantissas where N_s and Q_s
        overflow, :func:`kinroots.physics.models.krook.ratio`) and does not shift
        (it evaluates with ``landau_shift(0)``): it is part of R.
        """
        om = np.asarray(omega, dtype=complex) * 1.0
        d = np.empty(om.shape, dtype=complex)
        dd = np.empty(om.shape, dtype=complex)
        p = np.empty(om.shape, dtype=int)
        fd, fdd, fp = d.ravel(), dd.ravel(), p.ravel()
        flat = om.ravel()
        with np.errstate(all="ignore"):
            for i in range(0, flat.size, self.block):
                blk = flat[i : i + self.block]
                a, b, c = self._scaled_block(blk)
                bad = ~np.isfinite(blk)
                fd[i : i + self.block] = np.where(bad, _NAN, a)
                fdd[i : i + self.block] = np.where(bad, _NAN, b)
                fp[i : i + self.block] = np.where(bad, 0, c)
        return d, dd, p

    def log_value(self, omega: Any) -> np.ndarray:
        """log D(ω) = ln|D| + i arg D, overflow-free, every model.

        Parameters
        ----------
        omega : array_like of complex
            Frequencies [rad/s], any shape.

        Returns
        -------
        ndarray of complex
            ln|D| (natural log) plus i times the principal argument of D, shaped like
            ``omega``; finite wherever :meth:`scaled` is (also where |D| exceeds double
            precision), −inf + i·arg at an exact zero, NaN where D is not defined.

        Notes
        -----
        ln D = ln D_m + p ln 2 from :meth:`scaled`.  The argument principle needs only
        Δ arg D along a contour and D'/D (P. Henrici, *Applied and Computational Complex
        Analysis*, vol. 1, 1974, sec. 4.10), both free of the scale 2^p.
        """
        d, _, p = self.scaled(omega)
        with np.errstate(all="ignore"):
            return np.log(d) + p * math.log(2.0)

    def log2_magnitude(self, omega: Any) -> np.ndarray:
        """log₂|D(ω)| without overflow (NaN where D is not defined); from :meth:`scaled`.

        Used by the survey to choose :attr:`log2_offset`.
        """
        d, _, p = self.scaled(omega)
        with np.errstate(all="ignore"):
            out = np.log2(np.abs(d)) + p
        out[~np.isfinite(out)] = np.nan
        return out

    # ------------------------------------------------------------------ public
    def __call__(self, omega: Any) -> tuple[np.ndarray, np.ndarray]:
        """D(ω) and dD/dω.

        Parameters
        ----------
        omega : array_like of complex
            Frequencies [rad/s], any shape.

        Returns
        -------
        D, dD_domega : ndarray of complex
            Shaped like ``omega`` (see the class Notes for the scaling); NaN where ω is
            not finite.

        Notes
        -----
        More than :attr:`block` frequencies are evaluated in blocks of that many (the
        same values, since every ω is evaluated independently), which bounds the memory
        of one call (DEVELOPERS.md, "Memory").
        """
        # (numpy's complex128 dtype is one object; any other dtype goes through asarray)
        om = (omega if type(omega) is np.ndarray and omega.dtype is _COMPLEX
              else np.asarray(omega, dtype=complex))
        if om.size <= 4 and not self.log2_offset:
            # a few finite ω (survey polish, tracer steps): Python arithmetic, no numpy
            # error state or NaN masking needed (the species sum raises where they would be)
            if not self._sums_ready:
                self._sums()
            scalar = self._scalar_path_
            if scalar is not None:
                try:
                    return scalar(om, 1.0)
                except (OverflowError, ZeroDivisionError, ValueError):
                    pass
        return in_blocks(self._evaluate, om, block=self.block)

    def _evaluate(self, om: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """:meth:`__call__` for one block of ω (complex array)."""
        with np.errstate(all="ignore"):
            if self.log2_offset:
                d, dd, p = self._scaled_block(om)
                shift = p - self.log2_offset
                d, dd = _ldexp_complex(d, shift), _ldexp_complex(dd, shift)
            elif self.electromagnetic:
                d, dd = self._d_em(om)
            else:
                chi, dchi = self._chi(om)
                d, dd = 1.0 + chi, dchi
            return _nan_where(~np.isfinite(om), d, dd)

    def value(self, omega: Any) -> np.ndarray:
        """D(ω) alone (same as ``self(omega)[0]``)."""
        return self(omega)[0]

    def tensor(self, omega: Any) -> np.ndarray:
        """The unscaled dielectric object.

        Returns
        -------
        ndarray of complex
            Electromagnetic: Λ = ε − n²(I − k̂k̂) in the (x, y, z) frame, shaped
            ``omega.shape + (3, 3)`` (ω = 0 is a pole: non-finite there).
            Electrostatic: the scalar ε_L = D, shaped like ``omega``.
        """
        om = np.asarray(omega, dtype=complex)
        with np.errstate(all="ignore"):
            chi, _ = self._chi(om)
            if not self.electromagnetic:
                return 1.0 + chi
            khat = np.array([self._sin, 0.0, self._cos])
            proj = np.eye(3) - np.outer(khat, khat)
            n2 = (self.k * C_LIGHT / om) ** 2
            return np.eye(3) + chi - n2[..., None, None] * proj

    def relative_residual(self, omega: Any) -> np.ndarray:
        """|D| divided by the size of the largest term D is built from, at ``omega``.

        Electrostatic: D = 1 + Σ_s χ_s, terms 1 and χ_s.  Electromagnetic: D = det S (class
        Notes) vanishes where S is singular, so the measure is σ_min(S)/σ_max(S), the
        distance of S from singularity relative to its size (the six Leibniz products are
        no scale: where D factorizes, as for a purely growing Weibel mode, they all vanish
        with the root).  Unlike |D|, whose scale depends on the model, this is of order
        the root tolerance or below at a root away from poles (common practice); next to a
        pole of D (a cyclotron harmonic at k∥ = 0) D is steep and an accurate root can
        show more: the root's accuracy is its ``relative_error`` (tables).
        """
        om = np.asarray(omega, dtype=complex)
        with np.errstate(all="ignore"):
            if self.electromagnetic:
                s, _ = self._scaled(om)
                sv = np.full(om.shape + (3,), np.nan)
                ok = np.all(np.isfinite(s), axis=(-2, -1))
                sv[ok] = np.linalg.svd(s[ok], compute_uv=False)
                return sv[..., -1] / sv[..., 0]
            else:
                chis = list(self.susceptibilities(om).values())
                d = 1.0 + sum(chis)
                scale = np.max(np.stack([np.ones(om.shape)] + [np.abs(c) for c in chis]),
                               axis=0)
            return np.abs(d) / scale

    def susceptibilities(self, omega: Any) -> dict[str, np.ndarray]:
        """The susceptibility χ_s of every species, by name.

        Parameters
        ----------
        omega : array_like of complex
            Frequencies [rad/s], any shape.

        Returns
        -------
        dict of str to ndarray of complex
            Electrostatic models: the scalar longitudinal χ_s, shaped like ``omega``, so
            that D = 1 + Σ_s χ_s.  Electromagnetic models: the tensor χ_s in the (x, y, z)
            frame (B along z, k in the x-z plane), shaped ``omega.shape + (3, 3)``, so that
            ε = I + Σ_s χ_s (ω = 0 is a pole there: non-finite).  Each from the species'
            builder (:mod:`kinroots.physics.models`), which cites its formula.
        """
        om = np.asarray(omega, dtype=complex)
        out: dict[str, np.ndarray] = {}
        with np.errstate(all="ignore"):
            for s in self.plasma.species:
                res: Susceptibility = self._builder(
                    om, s, k_par=self.k_par, k_perp=self.k_perp, B=self.plasma.B,
                    tol=self.harmonic_tol,
                )
                value = np.asarray(res.value)
                out[s.name] = value if self.electromagnetic else value.reshape(om.shape)
        return out

    def resonances(self, re_min: float, re_max: float) -> list[tuple[complex, float]]:
        """Centres and widths [rad/s] of the narrow features of D near a real range.

        Each species part (a Maxwellian or kappa species, or one component) resonates
        where its Landau or cyclotron argument ζ = (ω − k∥V − nΩ)/(k w) is small: about
        the real centre k∥V + nΩ (n = 0 unmagnetized, |n| ≤ the harmonics kept when
        magnetized), over the width |k∥| w∥ (magnetized) or |k|w (unmagnetized,
        w² = sin²θ w⊥² + cos²θ w∥²), widened to ν for a Krook species.  Within a few
        widths of such a centre D can change by a large factor between samples that are
        far apart on the scale of the window, so a root finder places samples there
        first (:func:`kinroots.roots.find_roots`, ``features``).  The plasma-dispersion
        function's argument is textbook (D. G. Swanson, *Plasma Waves*, 2nd ed., IOP
        2003, ch. 4, from memory); the list is a sampling aid, not a physics result.

        Centres within one window width ``re_max − re_min`` outside the range are
        included (their features reach into a box's side edges); k∥ = 0 magnetized
        harmonics are poles and listed by :meth:`singular_points` instead.  Sorted by
        centre; one entry per centre (the narrowest width).
        """
        span = re_max - re_min
        lo, hi = re_min - span, re_max + span
        widths: dict[complex, float] = {}
        kpar, kperp = complex(self.k_par), complex(self.k_perp)
        for s in self.plasma.species:
            for _, part in s.component_species():
                wpar = math.sqrt(2.0 * part.temperature_par * EV / part.mass)
                wperp = math.sqrt(2.0 * part.temperature_perp * EV / part.mass)
                base = (kpar * part.drift).real
                if self.magnetized:
                    if kpar == 0:
                        continue
                    width = abs(kpar) * wpar
                    om_c = abs(part.cyclotron_frequency(self.plasma.B))
                    n_max = self.harmonics.get(s.name, 0)
                    if om_c > 0 and n_max > 0:
                        n_lo = max(-n_max, math.ceil((lo - base) / om_c))
                        n_hi = min(n_max, math.floor((hi - base) / om_c))
                        centres = [base + n * om_c for n in range(n_lo, n_hi + 1)]
                    else:
                        centres = [base] if lo <= base <= hi else []
                else:
                    width = abs(cmath.sqrt(kperp * kperp * wperp * wperp
                                           + kpar * kpar * wpar * wpar))
                    centres = [base] if lo <= base <= hi else []
                width = max(width, float(s.collision_frequency))
                if not (math.isfinite(width) and width > 0):
                    continue
                for c in centres:
                    key = complex(c, 0.0)
                    widths[key] = min(width, widths.get(key, math.inf))
        return sorted(widths.items(), key=lambda item: item[0].real)

    def singular_points(
        self, re_min: float, re_max: float, im_min: float, im_max: float, *,
        rtol: float = 1e-10,
    ) -> list[complex]:
        """Points [rad/s] inside the closed box that the root finder must exclude.

        ω = 0 for electromagnetic models (a zero that the scaling may introduce); for
        magnetized plasmas with k∥ = 0 exactly, the cyclotron harmonics n Ω_s (n ≠ 0) that
        are poles of D above the survey's resolution; the poles of the continued kappa
        functions of integer-κ species
        (:func:`~kinroots.physics.models.species_models.kappa_poles`).  Sorted by real
        part, without repeats.

        Parameters
        ----------
        re_min, re_max, im_min, im_max : float
            The box [rad/s].
        rtol : float
            The survey's relative root tolerance.  A harmonic is listed only where the
            bound R_n on the residue of its pole (Bessel weight, density, species
            constants) exceeds ``rtol`` · |nΩ_s| times the unit term of D
            (:mod:`kinroots.physics.harmonic_poles`, where the rule is derived); the
            others change D by less than the resolution except within ``rtol`` · |nΩ_s|
            of the harmonic, and are regular points for the survey.  Heavy ions in an
            electron-frequency window have none.  Cost and memory: one bisection per
            species and one entry per listed harmonic, whatever the ion mass.
        """
        from kinroots.physics.harmonic_poles import relevant_harmonics

        pts: set[complex] = set()
        on_axis = im_min <= 0.0 <= im_max
        if self.electromagnetic and on_axis and re_min <= 0.0 <= re_max:
            pts.add(0j)
        if self.magnetized and self.k_par == 0 and on_axis:
            kperp = complex(self.k_perp)
            for s in self.plasma.species:
                if kperp.imag == 0.0:
                    found = relevant_harmonics(s, re_min, re_max, k_perp=abs(kperp.real),
                                               B=self.plasma.B, rtol=rtol)
                else:  # complex k⊥: no bound on |Γ_n(λ)| used; every harmonic kept
                    om_c = abs(s.cyclotron_frequency(self.plasma.B))
                    n_max = self.harmonics.get(s.name, 0)
                    found = [n * om_c for n in range(max(-n_max, math.ceil(re_min / om_c)),
                                                     min(n_max, math.floor(re_max / om_c)) + 1)
                             if n != 0] if om_c > 0 else []
                pts.update(complex(x, 0.0) for x in found)
        for pole in kappa_poles(self.plasma, k_par=self.k_par, k_perp=self.k_perp,
                                electromagnetic=self.electromagnetic):
            if re_min <= pole.real <= re_max and im_min <= pole.imag <= im_max:
                pts.add(pole)
        return sorted(pts, key=lambda z: (z.real, z.imag))


def dispersion_pairs(
    plasma: Plasma,
    *,
    k: Any,
    omega: Any,
    angle_deg: float,
    model: str,
    omega_ref: float,
    harmonic_tol: float = 1e-14,
) -> tuple[np.ndarray, np.ndarray]:
    """D and dD/dω at the pairs (k_j, ω_j), element by element, in one vectorized call.

    The same function as ``Dispersion(plasma, k=k_j, ...)(ω_j)``, for tracing several
    wavenumbers at once (:class:`kinroots.roots.Tracer` with ``pairs``).

    Parameters
    ----------
    plasma : Plasma
        Species and B.
    k : array_like of complex
        Wavenumbers [1/m], broadcast against ``omega``.
    omega : array_like of complex
        Frequencies [rad/s].
    angle_deg, model, omega_ref, harmonic_tol
        As for :class:`Dispersion`.

    Returns
    -------
    D, dD_domega : ndarray of complex
        Shaped like the broadcast of ``k`` and ``omega``; NaN where k is zero or either
        is not finite.

    Notes
    -----
    The builders take array wave-vector components directly (the magnetized ones sum
    every element to the largest harmonic any element needs, so values agree with the
    one-k evaluation to the truncation tolerance).  Collisional (Krook) species are
    evaluated one distinct k at a time through :class:`Dispersion`.
    """
    kk, om = np.broadcast_arrays(np.asarray(k, dtype=complex), np.asarray(omega, dtype=complex))
    if len(plasma.species) == 0:
        raise ValueError("the plasma has no species")
    return in_blocks(
        lambda kb, ob: _pairs_block(plasma, kb, ob, angle_deg, model, omega_ref, harmonic_tol),
        kk, om, block=_pairs_block_size(plasma, kk, angle_deg, harmonic_tol),
    )


def _pairs_block_size(plasma: Plasma, k: np.ndarray, angle_deg: float, tol: float) -> int:
    """Pairs per block of :func:`dispersion_pairs`: :data:`BLOCK_ELEMENTS` over the number
    of harmonics at the largest |k⊥| (an estimate: it sizes memory, not the results)."""
    if not plasma.magnetized or k.size == 0:
        return BLOCK_ELEMENTS // 8
    from kinroots.physics.models._harmonics import harmonics_needed

    finite = np.abs(k[np.isfinite(k)])
    kperp = abs(_cos_sin_deg(angle_deg)[1]) * (float(finite.max()) if finite.size else 0.0)
    nmax = max(harmonics_needed(s, k_perp=kperp, B=plasma.B, tol=tol) for s in plasma.species)
    return max(16, BLOCK_ELEMENTS // (2 * nmax + 1))


def _pairs_block(
    plasma: Plasma, kk: np.ndarray, om: np.ndarray, angle_deg: float, model: str,
    omega_ref: float, harmonic_tol: float,
) -> tuple[np.ndarray, np.ndarray]:
    """:func:`dispersion_pairs` on one block of broadcast pairs."""
    bad = ~(np.isfinite(kk) & np.isfinite(om)) | (kk == 0)
    kk = np.where(bad, 1.0, kk)
    om = np.where(bad, 1.0, om)
    canonical = _canonical_model(model)
    if any(s.collision_frequency > 0.0 for s in plasma.species):
        d, dd = _pairs_by_k(plasma, kk, om, angle_deg, canonical, omega_ref, harmonic_tol)
    else:
        cos, sin = _cos_sin_deg(angle_deg)
        kpar, kperp = kk * cos, kk * sin
        with np.errstate(all="ignore"):
            if canonical == "electromagnetic":
                scaled = builder_for_plasma(scaled_builder_for(plasma.magnetized),
                                            plasma.species, model=canonical,
                                            magnetized=plasma.magnetized, scaled=True)
                d, dd = _det_and_derivative(*_scaled_matrix(
                    plasma, scaled, om, k=kk, k_par=kpar,
                    k_perp=kperp, omega_ref=omega_ref, tol=harmonic_tol,
                )[:2])
            elif not plasma.magnetized and plain_species(plasma.species):
                chi, dd = importlib.import_module(_REGISTRY[(canonical, False)]).species_sum(
                    om, tuple(plasma.species), k_par=kpar, k_perp=kperp)
                d = 1.0 + chi
            else:
                builder = builder_for_plasma(builder_for(canonical, plasma.magnetized),
                                             plasma.species, model=canonical,
                                             magnetized=plasma.magnetized)
                d = np.ones(om.shape, dtype=complex)
                dd = np.zeros(om.shape, dtype=complex)
                for s in plasma.species:
                    res = builder(om, s, k_par=kpar, k_perp=kperp, B=plasma.B,
                                  tol=harmonic_tol)
                    d = d + res.value
                    dd = dd + res.derivative
    return _nan_where(bad, d, dd)


def _pairs_by_k(
    plasma: Plasma,
    k: np.ndarray,
    omega: np.ndarray,
    angle_deg: float,
    model: str,
    omega_ref: float,
    harmonic_tol: float,
) -> tuple[np.ndarray, np.ndarray]:
    """:func:`dispersion_pairs` one distinct k at a time (models without array k)."""
    d = np.empty(k.shape, dtype=complex)
    dd = np.empty(k.shape, dtype=complex)
    for kj in np.unique(k):
        sel = k == kj
        disp = Dispersion(plasma, k=complex(kj), angle_deg=angle_deg, model=model,
                          omega_ref=omega_ref, harmonic_tol=harmonic_tol)
        d[sel], dd[sel] = disp(omega[sel])
    return d, dd


def dispersion_in_k(
    plasma: Plasma,
    *,
    omega: float,
    k: Any,
    angle_deg: float,
    model: str,
    omega_ref: float,
    harmonic_tol: float = 1e-14,
) -> tuple[np.ndarray, np.ndarray]:
    """D and dD/dk at one real frequency, vectorized over complex k (spatial problem).

    Parameters
    ----------
    plasma : Plasma
        Species and B.
    omega : float
        Real frequency [rad/s], finite and non-zero.
    k : array_like of complex
        Wavenumbers [1/m], any shape; the builders continue analytically from Re k > 0
        (at Re k ≤ 0 the value is that of the principal branch, not the continuation).
    angle_deg, model, omega_ref, harmonic_tol
        As for :class:`Dispersion`; D is the same function as ``Dispersion(...)(omega)``.

    Returns
    -------
    D, dD_dk : ndarray of complex
        Shaped like ``k``; NaN where k is zero or not finite.

    Notes
    -----
    Unmagnetized models: every χ_s depends on (ω, k) through ζ = (ω − k∥V)/κ, which is
    homogeneous of degree 0, times ω⁻² (electromagnetic) or k⁻² (electrostatic), so
    χ_s is homogeneous of degree −2 and Euler's relation gives, exactly,
    ∂χ_s/∂k = −(2χ_s + ω ∂χ_s/∂ω)/k.  With ∂n²/∂k = 2n²/k the derivative of M (class
    Notes) follows, and dD/dk = Σ C_ij ∂M_ij/∂k.  All k are evaluated in one call.

    Magnetized models (no such homogeneity: Ω_s is fixed):
    dD/dk = (1/m) Σ_j D(k + r e^{iφ_j}) e^{−iφ_j} / r, φ_j = 2π(j + 1/2)/m, m = 32,
    r = 1e-3 |k| (Cauchy's formula for the derivative, trapezoid rule on the circle: error
    of order (r/R)^m for D analytic within R of k; any numerical-analysis text, from
    memory); every k and every circle point in one :func:`dispersion_pairs` call.  NaN
    where |arg k∥| > 45°: at real ω a Landau term of harmonic n grows like
    exp(−n²Ω² Re(1/(k∥w∥)²)), faster than the Bessel weights fall, so the harmonic sum
    diverges and D has no value there (a truncated sum would give one that depends on
    the truncation).
    """
    kk = np.asarray(k, dtype=complex)
    om = float(omega)
    if not math.isfinite(om) or om == 0.0:
        raise ValueError(f"omega must be finite and non-zero, got {omega!r}")
    cos, sin = _cos_sin_deg(angle_deg)
    canonical = _canonical_model(model)
    bad = ~np.isfinite(kk) | (kk == 0)
    if plasma.magnetized:  # |arg k∥| > 45°: the harmonic sum diverges (Notes)
        with np.errstate(invalid="ignore"):
            bad |= ((kk * cos) ** 2).real < 0.0
    ksafe = np.where(bad, 1.0, kk)
    if plasma.magnetized:
        d, dd = _dispersion_in_k_cauchy(
            plasma, om, ksafe, angle_deg, canonical, omega_ref, harmonic_tol
        )
    else:
        d, dd = _dispersion_in_k_unmagnetized(
            plasma, om, ksafe, cos, sin, canonical, omega_ref
        )
    return _nan_where(bad, d, dd)


def _dispersion_in_k_unmagnetized(
    plasma: Plasma,
    omega: float,
    k: np.ndarray,
    cos: float,
    sin: float,
    model: str,
    omega_ref: float,
) -> tuple[np.ndarray, np.ndarray]:
    m, dm = _in_k_entries(plasma, omega, k, cos, sin, model, omega_ref)
    if model == "electrostatic":
        return m, dm
    with np.errstate(all="ignore"):
        return _det_and_derivative(m, dm)


def _in_k_entries(
    plasma: Plasma,
    omega: float,
    k: np.ndarray,
    cos: float,
    sin: float,
    model: str,
    omega_ref: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Electrostatic D and dD/dk, or electromagnetic M and dM/dk (:class:`Dispersion`
    Notes), unmagnetized, at real ω and complex k; every entry is affine in the Landau
    terms of the species (under the current :func:`~kinroots.physics.zfunc.landau_shift`)."""
    builder = builder_for_plasma(builder_for(model, False), plasma.species, model=model,
                                 magnetized=False)
    om = np.full(k.shape, omega, dtype=complex)
    with np.errstate(all="ignore"):
        chi = dchi_dk = None
        for s in plasma.species:
            res = builder(om, s, k_par=k * cos, k_perp=k * sin, B=0.0)
            v, dw = np.asarray(res.value), np.asarray(res.derivative)
            kb = k.reshape(k.shape + (1,) * (v.ndim - k.ndim))
            dk = -(2.0 * v + omega * dw) / kb
            chi = v if chi is None else chi + v
            dchi_dk = dk if dchi_dk is None else dchi_dk + dk
        assert chi is not None and dchi_dk is not None
        if model == "electrostatic":
            return 1.0 + chi, dchi_dk
        rot = np.array([[cos, 0.0, -sin], [0.0, 1.0, 0.0], [sin, 0.0, cos]])
        eps = rot @ chi @ rot.T
        deps = rot @ dchi_dk @ rot.T
        idx = np.arange(3)
        eps[..., idx, idx] += 1.0
        w = omega / omega_ref
        m = np.empty_like(eps)
        dm = np.empty_like(eps)
        m[..., :2, :] = w**2 * eps[..., :2, :]
        dm[..., :2, :] = w**2 * deps[..., :2, :]
        m[..., 0, 0] -= (k * C_LIGHT / omega_ref) ** 2
        m[..., 1, 1] -= (k * C_LIGHT / omega_ref) ** 2
        dm[..., 0, 0] -= 2.0 * k * (C_LIGHT / omega_ref) ** 2
        dm[..., 1, 1] -= 2.0 * k * (C_LIGHT / omega_ref) ** 2
        m[..., 2, :] = eps[..., 2, :]
        dm[..., 2, :] = deps[..., 2, :]
        return m, dm


def landau_bits_unmagnetized(
    plasma: Plasma, omega: np.ndarray, k_par: Any, k_perp: Any,
) -> np.ndarray:
    """log₂ of the largest Landau term |exp(−ζ²)| (Im ζ < 0; else 0) per point, unmagnetized.

    ζ = (ω − k∥V)/κ, κ² = k⊥²w⊥² + k∥²w∥², for every collisionless Maxwellian part
    (component species part by part); ``omega``, ``k_par`` and ``k_perp`` broadcast.  A
    Krook species is skipped: its χ is finite and regular
    (:func:`kinroots.physics.models.krook.ratio`).
    """
    om = np.asarray(omega, dtype=complex)
    kpar, kperp = np.asarray(k_par, dtype=complex), np.asarray(k_perp, dtype=complex)
    best = np.zeros(np.broadcast_shapes(om.shape, kpar.shape, kperp.shape))
    with np.errstate(all="ignore"):
        for s in plasma.species:
            if s.distribution != "maxwellian" or s.collision_frequency > 0.0:
                continue
            for _, part in s.component_species():
                wpar2 = 2.0 * part.temperature_par * EV / part.mass
                wperp2 = 2.0 * part.temperature_perp * EV / part.mass
                z = (om - kpar * part.drift) / np.sqrt(kperp * kperp * wperp2
                                                       + kpar * kpar * wpar2)
                a = np.where(z.imag < 0.0, (z.imag - z.real) * (z.imag + z.real), 0.0)
                best = np.fmax(best, a)
    return best / math.log(2.0)


def dispersion_in_k_scaled(
    plasma: Plasma,
    *,
    omega: float,
    k: Any,
    angle_deg: float,
    model: str,
    omega_ref: float,
    harmonic_tol: float = 1e-14,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """D and dD/dk of :func:`dispersion_in_k` as mantissas times 2^p, never overflowing.

    Parameters
    ----------
    plasma, omega, k, angle_deg, model, omega_ref, harmonic_tol
        As for :func:`dispersion_in_k`.

    Returns
    -------
    D_m, dD_dk_m : ndarray of complex
        D = D_m·2^p and dD/dk = dD_dk_m·2^p (same p), shaped like ``k``; NaN where k is
        zero or not finite.
    p : ndarray of int
        Binary exponent per point (0 where the plain values are finite).

    Notes
    -----
    Where :func:`dispersion_in_k` is finite (below 2^880) its values are returned with
    p = 0.
    Elsewhere, unmagnetized: the entries (ES: D and dD/dk; EM: M and dM/dk, whose
    dχ_s/dk = −(2χ_s + ω ∂χ_s/∂ω)/k is affine in the Landau terms like χ_s) are split as
    R + 2^b X as in :meth:`Dispersion.scaled` (DLMF 7.4.3 reflection; row scaling of the
    determinant, Golub & Van Loan 2013, sec. 3.5.2).  Magnetized: D at k and on the
    Cauchy circle of :func:`dispersion_in_k` from :meth:`Dispersion.scaled` at each
    point, the circle's mantissas brought to the centre's exponent, its radius reduced
    where |D| changes by more than a factor e around it.  Magnetized, at real ω, a Landau
    term exp(−ζ_n²), ζ_n = (ω − k∥V − nΩ)/(k∥w∥), grows with n like
    exp(−n²Ω² Re(1/(k∥w∥)²)): where |arg k∥| > 45° this outgrows the Bessel weights
    Γ_n ~ (λ/2)^|n|/|n|! and the harmonic sum diverges, so D has no value there: NaN
    (the survey then names the cause).  Without drift that is the only place where D
    overflows at real ω, since Re(−ζ_n²) = −(ω − nΩ)² Re(1/(k∥w∥)²).
    """
    kk = np.asarray(k, dtype=complex)
    om = float(omega)
    canonical = _canonical_model(model)
    d, dd = dispersion_in_k(plasma, omega=om, k=kk, angle_deg=angle_deg, model=canonical,
                            omega_ref=omega_ref, harmonic_tol=harmonic_tol)
    p = np.zeros(kk.shape, dtype=np.int64)
    ok_k = np.isfinite(kk) & (kk != 0)
    # finite but near the top of the range counts as overflow too: the caller converts
    # dD/dk to its units (a factor of up to 2^(1024 − _TOP_BITS))
    with np.errstate(invalid="ignore"):
        near = (np.abs(d) > 2.0**_TOP_BITS) | (np.abs(dd) > 2.0**_TOP_BITS)
    bad = ok_k & (~(np.isfinite(d) & np.isfinite(dd)) | near)
    if not bad.any():
        return d, dd, p
    d, dd = d.copy(), dd.copy()
    idx = np.flatnonzero(bad)
    ks = kk.ravel()[idx]
    if plasma.magnetized:
        dm, ddm, pm = _in_k_cauchy_scaled(plasma, om, ks, angle_deg, canonical, omega_ref,
                                          harmonic_tol)
    else:
        dm, ddm, pm = _in_k_unmagnetized_scaled(plasma, om, ks, angle_deg, canonical,
                                                omega_ref)
    d.ravel()[idx], dd.ravel()[idx], p.ravel()[idx] = dm, ddm, pm
    return d, dd, p


def _in_k_unmagnetized_scaled(
    plasma: Plasma, omega: float, k: np.ndarray, angle_deg: float, model: str,
    omega_ref: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`dispersion_in_k_scaled` at unmagnetized points where the plain D overflows."""
    cos, sin = _cos_sin_deg(angle_deg)
    em = model == "electromagnetic"
    d = np.full(k.shape, _NAN)
    dd = np.full(k.shape, _NAN)
    p = np.zeros(k.shape, dtype=np.int64)
    want = landau_bits_unmagnetized(plasma, np.full(k.shape, omega), k * cos, k * sin)
    with np.errstate(all="ignore"):
        groups = np.maximum(_BITS_STEP, _BITS_STEP * np.ceil((want - _TOP_BITS) / _BITS_STEP))
        for g in np.unique(groups[groups <= _MAX_BITS]):
            sel = np.flatnonzero(groups == g)
            sub = k[sel]
            with landau_shift(math.inf):
                reg, dreg = _in_k_entries(plasma, omega, sub, cos, sin, model, omega_ref)
            bits = float(g)
            for _ in range(_BITS_RETRIES):
                with landau_shift(bits):
                    big, dbig = _in_k_entries(plasma, omega, sub, cos, sin, model, omega_ref)
                dm, ddm, pm = _combine_scaled(reg, dreg, big - reg, dbig - dreg, int(bits), em)
                if np.all(np.isfinite(dm) & np.isfinite(ddm)):
                    break
                bits += 4 * _BITS_STEP
            d[sel], dd[sel], p[sel] = dm, ddm, pm
    return d, dd, p


def _in_k_cauchy_scaled(
    plasma: Plasma, omega: float, k: np.ndarray, angle_deg: float, model: str,
    omega_ref: float, harmonic_tol: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`dispersion_in_k_scaled` at magnetized points where the plain D overflows:
    each k and its Cauchy circle (:func:`~kinroots.physics.models.krook_dispersion.
    scaled_cauchy_derivative`) through :meth:`Dispersion.scaled`, one k at a time."""
    d = np.full(k.shape, _NAN)
    dd = np.full(k.shape, _NAN)
    p = np.zeros(k.shape, dtype=np.int64)
    om = np.array([complex(omega)])
    cos, _ = _cos_sin_deg(angle_deg)
    with np.errstate(all="ignore"):
        for j, k0 in enumerate(k.tolist()):
            if ((k0 * cos) ** 2).real < 0.0:
                continue  # |arg k∥| > 45°: the harmonic sum diverges (NaN, see Notes)

            def at(kj: complex) -> tuple[complex, int]:
                m, _, e = Dispersion(plasma, k=kj, angle_deg=angle_deg, model=model,
                                     omega_ref=omega_ref, harmonic_tol=harmonic_tol).scaled(om)
                return complex(m[0]), int(e[0])

            d[j], dd[j], p[j] = scaled_cauchy_derivative(at, k0, _N_CIRCLE, _K_FRACTION)
    return d, dd, p


def _dispersion_in_k_cauchy(
    plasma: Plasma,
    omega: float,
    k: np.ndarray,
    angle_deg: float,
    model: str,
    omega_ref: float,
    harmonic_tol: float,
) -> tuple[np.ndarray, np.ndarray]:
    """D at k and dD/dk from the Cauchy circle around each k: every point of every circle
    in one :func:`dispersion_pairs` call."""
    phase = np.exp(2j * np.pi * (np.arange(_N_CIRCLE) + 0.5) / _N_CIRCLE)
    r = _K_FRACTION * np.abs(k)[..., None]
    ks = np.concatenate([k[..., None], k[..., None] + r * phase], axis=-1)
    d_all, _ = dispersion_pairs(plasma, k=ks, omega=omega, angle_deg=angle_deg, model=model,
                                omega_ref=omega_ref, harmonic_tol=harmonic_tol)
    d = d_all[..., 0]
    dd = np.mean(d_all[..., 1:] * phase.conj(), axis=-1) / r[..., 0]
    return d, dd
