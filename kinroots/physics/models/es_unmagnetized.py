"""Electrostatic susceptibility of an unmagnetized drifting bi-Maxwellian species.

The velocity moments of the Landau resonant denominator that both unmagnetized builders
are written in (:func:`landau_moments`) live in :mod:`kinroots.physics.models._landau` and
are re-exported here.

Frame: drift axis z, k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t).
SI throughout (ω in rad/s, k in 1/m, temperatures of :class:`~kinroots.physics.plasma.Species`
in eV).
"""

from __future__ import annotations

import cmath
import math
from typing import Any

import numpy as np

from kinroots.physics.models._landau import (  # re-exported: the moments' old home
    _COUNT_TABLE_END,
    _SCALAR_POINTS,
    _ZETA_SERIES,
    MergedRow,
    first_moment,
    first_moment_scalar,
    landau_moments,
    landau_term_scalar,
    merged_series,
    thermal_speeds_squared,
)
from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species

__all__ = ["SpeciesSum", "first_moment", "landau_moments", "susceptibility"]

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
    model, :func:`kinroots.physics.models.krook.susceptibility`.
    """
    if species.collision_frequency > 0.0:
        from kinroots.physics.models import krook

        return krook.susceptibility(omega, species, k_par=k_par, k_perp=k_perp)
    with np.errstate(all="ignore"):
        zeta, coef, kappa = _zeta_and_coefficient(omega, species, k_par, k_perp)
        m1, dm1 = first_moment(zeta.ravel())
        value = coef * m1.reshape(zeta.shape)
        derivative = (coef / kappa) * dm1.reshape(zeta.shape)
    return Susceptibility(value=value, derivative=derivative, harmonics=0)


def _zeta_and_coefficient(
    omega: Any, species: Species, k_par: Any, k_perp: Any
) -> tuple[np.ndarray, complex | np.ndarray, complex | np.ndarray]:
    """ζ = (ω − k∥V)/κ, −2ω_p²/κ² and κ of :func:`susceptibility` (k broadcast against ω;
    the last two are numpy scalars for scalar k)."""
    om = np.asarray(omega, dtype=complex)
    wpar2, wperp2 = thermal_speeds_squared(species)
    kpar: complex | np.ndarray
    kperp: complex | np.ndarray
    kappa2: complex | np.ndarray
    if np.ndim(k_par) == 0 and np.ndim(k_perp) == 0:  # scalar k: no broadcast copies
        kpar = complex(k_par)
        kperp = complex(k_perp)
        kappa2 = np.complex128(kperp * kperp * wperp2 + kpar * kpar * wpar2)
    else:
        om, kpar, kperp = np.broadcast_arrays(
            om, np.asarray(k_par, dtype=complex), np.asarray(k_perp, dtype=complex)
        )
        kappa2 = kperp * kperp * wperp2 + kpar * kpar * wpar2
    kappa = np.sqrt(kappa2)
    zeta = np.asarray((om - kpar * species.drift) / kappa)
    return zeta, -2.0 * species.plasma_frequency**2 / kappa2, kappa


def species_sum(
    omega: Any, species: tuple[Species, ...], /, *, k_par: Any, k_perp: Any
) -> tuple[np.ndarray, np.ndarray]:
    """Σ_s χ_s and Σ_s ∂χ_s/∂ω of collisionless species, k broadcast against ω.

    The χ_s of :func:`susceptibility`, every species in one :func:`first_moment` pass
    (the batched tracer's evaluation at arrays of (k, ω) pairs).
    """
    if any(s.collision_frequency > 0.0 for s in species):
        raise ValueError("species_sum takes collisionless species only")
    with np.errstate(all="ignore"):
        parts = [_zeta_and_coefficient(omega, s, k_par, k_perp) for s in species]
        shape = np.broadcast_shapes(*(p[0].shape for p in parts))
        zeta = np.stack([np.broadcast_to(p[0], shape) for p in parts])
        m1, dm1 = first_moment(zeta.ravel())
        m1, dm1 = m1.reshape(zeta.shape), dm1.reshape(zeta.shape)
        value = sum(p[1] * m1[i] for i, p in enumerate(parts))
        derivative = sum((p[1] / p[2]) * dm1[i] for i, p in enumerate(parts))
    return np.asarray(value, dtype=complex), np.asarray(derivative, dtype=complex)


class SpeciesSum:
    """Σ_s χ_s and Σ_s ∂χ_s/∂ω of collisionless species at one fixed k, all species at once.

    Parameters
    ----------
    species : sequence of Species
        The species (none with ``collision_frequency`` > 0: see :meth:`for_species`).
    k_par, k_perp : complex
        Wave-vector components along and across z [1/m] (scalars).

    Notes
    -----
    The same χ_s as :func:`susceptibility`, with the per-species constants that depend
    on k only (κ_s, k∥V_s, −2ω_ps²/κ_s², and that over κ_s) formed once, here; a call
    forms ζ for every species in one array, evaluates M_1 and dM_1/dζ on it in one
    :func:`first_moment` pass and contracts with the constants.
    """

    def __init__(self, species: tuple[Species, ...], *, k_par: complex, k_perp: complex) -> None:
        kpar = complex(k_par)
        kperp = complex(k_perp)
        constants = []
        for s in species:
            wpar2, wperp2 = thermal_speeds_squared(s)
            kappa2 = kperp * kperp * wperp2 + kpar * kpar * wpar2
            kappa = cmath.sqrt(kappa2)  # principal root, as np.sqrt in susceptibility()
            coef = -2.0 * s.plasma_frequency**2 / kappa2  # ZeroDivisionError if κ = 0
            constants.append((kpar * s.drift, kappa, coef, coef / kappa))
        self._scalar_constants = tuple(constants)
        self._arrays: tuple[np.ndarray, ...] | None = None  # built on the first array call
        self._groups = _shift_groups(self._scalar_constants)

    @classmethod
    def for_species(
        cls, species: tuple[Species, ...], *, k_par: complex, k_perp: complex
    ) -> SpeciesSum | None:
        """The sum for ``species``, or None if one of them is collisional (Krook model)."""
        if any(s.collision_frequency > 0.0 for s in species) or not species:
            return None
        try:
            return cls(tuple(species), k_par=k_par, k_perp=k_perp)
        except (ZeroDivisionError, OverflowError, ValueError):  # κ = 0 or non-finite
            return None

    def __call__(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Σ_s χ_s(ω) and Σ_s ∂χ_s/∂ω, shaped like ``omega`` (complex, rad/s).

        A few finite ω (the root tracer's calls) are evaluated point by point in Python
        arithmetic (:func:`first_moment_scalar`), free of numpy's per-call overhead; any
        other input, or an overflow there, takes the array path.
        """
        om = np.asarray(omega, dtype=complex)
        if om.size <= _SCALAR_POINTS:
            try:
                return self.scalar_sum(om)
            except (OverflowError, ZeroDivisionError, ValueError):
                pass  # non-finite ω or exp overflow: the array path gives inf/nan
        if self._arrays is None:
            shift, kappa, coef, dcoef = (np.array(c, dtype=complex)
                                         for c in zip(*self._scalar_constants, strict=True))
            self._arrays = (shift[:, None], kappa[:, None], coef, dcoef)
        shift, kappa, coef, dcoef = self._arrays
        with np.errstate(all="ignore"):
            zeta = (om.reshape(1, -1) - shift) / kappa
            m1, dm1 = first_moment(zeta.ravel())
            n = zeta.shape[1]
            # Σ_s by numpy's own sum over the species axis (no BLAS threads; a strided
            # np.vecdot along that axis is several times slower)
            value = (coef[:, None] * m1.reshape(-1, n)).sum(axis=0)
            derivative = (dcoef[:, None] * dm1.reshape(-1, n)).sum(axis=0)
        return value.reshape(om.shape), derivative.reshape(om.shape)

    def scalar_sum(self, om: np.ndarray, offset: float = 0.0
                   ) -> tuple[np.ndarray, np.ndarray]:
        """``offset`` + Σ_s χ_s and Σ_s ∂χ_s/∂ω at each of a few finite ω, in Python
        arithmetic (raises ValueError for a non-finite ω and OverflowError where an
        exponential overflows; no numpy error state is needed, and the results are finite
        where no exception is raised). ``offset = 1`` gives the dielectric function."""
        point = self._point
        if om.shape == (1,):  # the tracer's and the polish's calls: two bare arrays
            v, d = point(om.item())
            value = _empty(1, complex)
            value[0] = offset + v
            derivative = _empty(1, complex)
            derivative[0] = d
            return value, derivative
        pairs = [point(w) for w in om.ravel().tolist()]
        return (
            np.array([offset + v for v, _ in pairs], dtype=complex).reshape(om.shape),
            np.array([d for _, d in pairs], dtype=complex).reshape(om.shape),
        )

    def _point(self, w: complex) -> tuple[complex, complex]:
        """Σ_s χ_s and Σ_s ∂χ_s/∂ω at one ω (:meth:`scalar_sum`): species by species
        (:func:`first_moment_scalar`), except that in each shift group the species
        whose ζ is in the series region are summed as one series."""
        if not _isfinite(w):
            raise ValueError("non-finite frequency")
        moment = first_moment_scalar
        v = d = 0j
        for shift, members, merged in self._groups:
            big = w - shift
            r = abs(big)
            for j, (threshold, kappa, coef, dcoef, g) in enumerate(members):
                if r >= threshold and (rows := merged[j]) is not None:
                    # this species and the colder ones after it: one series
                    x = g / big
                    x *= x
                    rz = r / g
                    acc, dacc, rest = rows[int(rz) if rz < _COUNT_TABLE_END else -1]
                    for b, nb in rest:
                        acc = acc * x + b
                        dacc = dacc * x + nb
                    v += x * acc
                    d -= x / big * dacc
                    if big.imag <= 0.0:  # Landau terms, as in first_moment_scalar
                        v, d = _landau_terms(big, members[j:], v, d)
                    break
                m1, dm1 = moment(big / kappa)
                v += coef * m1
                d += dcoef * dm1
        return v, d


_empty = np.empty
_isfinite = cmath.isfinite

#: One species of a shift group: 7κ (|ω − k∥V| from which its ζ is in the series region;
#: inf for complex κ), κ, −2ω_ps²/κ², that over κ, and Re κ.
_Member = tuple[float, complex, complex, complex, float]
#: Species of one resonance shift k∥V: the shift, the members (warmest first), and per
#: member the merged series of it and the colder ones after it (or None).
_Group = tuple[complex, tuple[_Member, ...], tuple[tuple[MergedRow, ...] | None, ...]]


def _shift_groups(constants: tuple[tuple[complex, complex, complex, complex], ...]
                  ) -> tuple[_Group, ...]:
    """The species of :class:`SpeciesSum` grouped by their shift k∥V (equal drifts),
    warmest first in each, with the merged series (:func:`merged_series`) of every tail
    of real-κ members: where |ω − k∥V| ≥ 7κ_j, member j and all after it are summed as
    one series in (κ_j/(ω − k∥V))² (the cold ion species of an electron-scale wave)."""
    by_shift: dict[complex, list[tuple[complex, complex, complex]]] = {}
    for shift, kappa, coef, dcoef in constants:
        by_shift.setdefault(shift, []).append((kappa, coef, dcoef))
    groups = []
    for shift, parts in by_shift.items():
        members = sorted(
            ((_ZETA_SERIES * kappa.real if kappa.imag == 0.0 and kappa.real > 0.0 else math.inf,
              kappa, coef, dcoef, kappa.real) for kappa, coef, dcoef in parts),
            key=lambda m: -m[0])
        merged = tuple(
            merged_series(tuple(m[4] for m in members[j:]),
                          tuple(m[2] for m in members[j:]))
            if math.isfinite(members[j][0]) else None
            for j in range(len(members)))
        groups.append((shift, tuple(members), merged))
    return tuple(groups)


def _landau_terms(big: complex, members: tuple[_Member, ...], v: complex, d: complex
                  ) -> tuple[complex, complex]:
    """``v`` and ``d`` plus the Landau terms (:func:`landau_term_scalar`) of the series
    species ``members`` at ω − k∥V = ``big`` (Im ≤ 0), weighted as
    :meth:`SpeciesSum._point` weights M_1 and dM_1/dζ."""
    for _, kappa, coef, dcoef, _ in members:
        t, dt = landau_term_scalar(big / kappa)
        v += coef * t
        d += dcoef * dt
    return v, d
