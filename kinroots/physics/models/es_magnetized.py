r"""Electrostatic susceptibility of a magnetized drifting bi-Maxwellian species.

Frame: B along z, k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t).
SI throughout (ω in rad/s, k in 1/m, B in T, temperatures of
:class:`~kinroots.physics.plasma.Species` in eV). Ω_s = q_s B/m_s is signed.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from kinroots.physics.models._harmonics import (
    SERIES_MIN_LAMBDA,
    SERIES_MIN_ZETA,
    SERIES_TERMS,
    SpeciesSetup,
    evaluate,
    fixed_k_sum,
    harmonic_sums,
    is_array_k,
    landau_sign,
    reciprocal_off_poles,
    scaled_moments,
    species_setup,
    with_series,
)
from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species
from kinroots.physics.zfunc import plasma_z_and_prime

__all__ = ["SERIES_MIN_LAMBDA", "SERIES_MIN_ZETA", "SERIES_TERMS", "SpeciesSum",
           "perpendicular_series", "susceptibility"]


def susceptibility(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray,
    B: float,
    tol: float = 1e-14,
) -> Susceptibility:
    r"""Electrostatic susceptibility χ_s(ω, k) of a magnetized drifting bi-Maxwellian.

    Parameters
    ----------
    omega : array_like of complex
        Angular frequency ω [rad/s], any shape.
    species : Species
        Drifting bi-Maxwellian (drift V along B, T∥, T⊥ > 0 in eV).
    k_par, k_perp : complex or array_like of complex
        Wave-vector components along and across B [1/m]; may be complex.  Scalars (the
        fast path) or arrays broadcast against ``omega``: every (k∥, k⊥, ω) element is
        then evaluated as by a scalar-k call, with one harmonic count N for all (the
        largest any element needs; the extra harmonics are below ``tol``).
    B : float
        Magnetic field [T], non-zero; its sign enters through the signed Ω = qB/m.
    tol : float
        Relative truncation tolerance of the cyclotron-harmonic sum (see
        :func:`kinroots.physics.models._harmonics.bessel_weights` for the rule).

    Returns
    -------
    Susceptibility
        ``value`` = χ_s, ``derivative`` = dχ_s/dω (shape of ``omega``, or of the broadcast
        of ``omega``, ``k_par`` and ``k_perp``), ``harmonics`` = N.

    Raises
    ------
    ValueError
        If ``B == 0`` (use the unmagnetized model), or for array k with a collisional
        species (call once per k).

    Notes
    -----
    With w∥,⊥ = sqrt(2T∥,⊥/m), λ = k⊥²w⊥²/(2Ω²), Γ_n = e^{−λ}I_n(λ),
    ζ_n = (ω − k∥V − nΩ)/(k∥w∥) and k² = k⊥² + k∥² (not |k|²: analytic in k)::

        χ_s = 2ω_p²/(k²w∥²) Σ_n Γ_n [1 + ζ_n Z(ζ_n) + (T∥/T⊥)(nΩ/(k∥w∥)) Z(ζ_n)]
            = 2ω_p²/(k²w∥²) [1 + Σ_n Γ_n (ω − k∥V − nΩ(1 − T∥/T⊥))/(k∥w∥) Z(ζ_n)],

    derived from χ = (ω_p²/k²) Σ_n ∫d³v J_n²(k⊥v⊥/Ω)[(nΩ/v⊥)∂f/∂v⊥ + k∥∂f/∂v∥]
    /(ω − k∥v∥ − nΩ) (Stix 1992, ch. 11, for the electrostatic limit, from memory;
    Gary 1993, ch. 2, for the drifting bi-Maxwellian, from memory; equation numbers not
    recalled). The first form is
    the one coded (1 + ζZ = −Z'/2 comes accurate from :mod:`kinroots.physics.zfunc`);
    dχ/dω uses d(1 + ζZ)/dζ = Z + ζZ' and dZ/dζ = Z'.

    For Re k∥ < 0, Z is replaced by ``s Z(s ζ)`` with s = −1 (Landau continuation for
    either sign of k∥; see :func:`kinroots.physics.models._harmonics.landau_sign`).

    Exact k∥ = 0 (perpendicular, Bernstein) uses the ζ → ∞ limit taken analytically,
    ``(nΩ/(k∥w∥)) Z(ζ_n) → −nΩ/(ω − nΩ)`` and ``1 + ζZ → 0``::

        χ_s = −(ω_p²/Ω) Σ_n g_n/(ω − nΩ),   g_n = nΓ_n/λ,
            = −(ω_p²/λ) Σ_{n≥1} 2n²Γ_n/(ω² − n²Ω²)   (Bernstein),

    rational in ω with poles at ω = nΩ; it depends on T⊥ only. At k = 0 exactly this is
    the perpendicular k → 0 limit −ω_p²/(ω² − Ω²).  For λ ≥ :data:`SERIES_MIN_LAMBDA`
    and |ω| ≥ :data:`SERIES_MIN_ZETA`·k⊥w⊥ the same χ_s comes from
    :func:`perpendicular_series` (a fixed 14 terms instead of about 10√λ harmonics; the
    only form at all beyond λ ≈ 4e6).  Exactly at ω = nΩ the term of a harmonic of
    negligible residue is dropped
    (:func:`~kinroots.physics.models._harmonics.reciprocal_off_poles`).

    Non-finite ω, k or B and non-positive temperatures give NaN; overflow gives inf/NaN.
    The relative accuracy of dχ/dω degrades like ε|ζ_n|² for |ζ_n| ≫ 1 (cancellation
    in Z + ζZ').

    References
    ----------
    T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 11 (electrostatic limit, Bernstein
    waves), from memory.
    S. P. Gary, *Theory of Space Plasma Microinstabilities* (Cambridge, 1993), ch. 2, 7
    (drifting bi-Maxwellian), from memory.
    I. B. Bernstein, Phys. Rev. 109, 10 (1958).

    A species with ``collision_frequency`` > 0 (T∥ = T⊥ required) is handed to the
    number-conserving Krook model, :func:`kinroots.physics.models.krook.magnetized_susceptibility`.
    """
    if species.collision_frequency > 0.0:
        from kinroots.physics.models import krook

        if is_array_k(k_par, k_perp):
            raise ValueError("array k is not supported for collisional species")
        return krook.magnetized_susceptibility(omega, species, k_par=complex(k_par),
                                               k_perp=complex(k_perp), B=B, tol=tol)

    def rest(om: np.ndarray, kpar: Any, kperp: Any) -> Susceptibility:
        return evaluate(om, species, k_par=kpar, k_perp=kperp, B=B, tol=tol,
                        model="es_magnetized", tail=(),
                        parts=lambda o, setup, perp: _parts(o, setup, perp, species))

    def series(om: np.ndarray, kperp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        res = perpendicular_series(om, species, k_perp=kperp, B=B)
        return res.value, res.derivative

    out = with_series(omega, species, k_par=k_par, k_perp=k_perp, B=B, tail=(),
                      series=series, rest=rest)
    return rest(omega, k_par, k_perp) if out is None else out


def perpendicular_series(
    omega: np.ndarray, species: Species, *, k_perp: complex | np.ndarray, B: float,
) -> Susceptibility:
    r"""χ_s at k∥ = 0 for |ω| ≥ :data:`SERIES_MIN_ZETA`·|k⊥|w⊥, from the moments of Γ_n.

    Parameters
    ----------
    omega : array_like of complex
        ω [rad/s].
    species : Species
        A collisionless bi-Maxwellian (only T⊥ enters at k∥ = 0).
    k_perp : complex or array_like of complex
        k⊥ [1/m], broadcast against ``omega``.
    B : float
        Magnetic field [T], non-zero.

    Returns
    -------
    Susceptibility
        χ_s and dχ_s/dω (broadcast shape); NaN where |ω| < SERIES_MIN_ZETA·|k⊥|w⊥ or an
        input is not finite; ``harmonics`` = 0 (no harmonic sum).

    Notes
    -----
    Used by :func:`susceptibility` at k∥ = 0 for λ ≥ :data:`SERIES_MIN_LAMBDA` wherever it
    applies: there the harmonic sum (the Bernstein form of :func:`susceptibility`) is
    long, and beyond λ ≈ 4e6 (heavy ions at electron scales) it needs more than
    ``_harmonics.MAX_HARMONICS`` terms and has no value at all.  Expanding
    ``1/(ω² − n²Ω²) = Σ_j n^{2j}Ω^{2j}/ω^{2j+2}`` in
    ``χ_s = −(ω_p²/λ) Σ_{n≥1} 2n²Γ_n/(ω² − n²Ω²)``::

        χ_s = −(ω_p²/(λΩ²)) Σ_{m≥1} ν_{2m},   ν_{2m} = μ_{2m} y^m,  y = Ω²/ω²,

    μ_{2m} = Σ_n n^{2m}Γ_n(λ) the moments of the weights Γ_n (Skellam cumulants,
    :func:`~kinroots.physics.models._harmonics.scaled_moments`).  ν_2 = λy gives the
    cold term −ω_p²/ω², ν_4 =
    (λ + 3λ²)y² its thermal correction 3k⊥²T⊥/(mω²) (the unmagnetized large-ζ limit, up to
    the magnetization term λy²).  dν_{2m}/dω = −2m ν_{2m}/ω.  The series is asymptotic:
    its terms fall like (2m − 1)/(2ζ²), ζ = ω/(k⊥w⊥), and the harmonics it cannot
    represent (poles of weight ≈ e^{−ζ²}, :mod:`kinroots.physics.harmonic_poles`) are
    below double precision at |ζ| ≥ 16; :data:`SERIES_TERMS` terms reach 1e-19 there.
    Checked against the harmonic sum where both converge (tests/test_harmonic_poles.py).
    """
    om = np.asarray(omega, dtype=complex)
    kp = np.asarray(k_perp, dtype=complex)
    with np.errstate(all="ignore"):
        omega_c = species.cyclotron_frequency(B)
        wperp = species.thermal_speed_perp if species.temperature_perp > 0 else np.nan
        om, kp = np.broadcast_arrays(om, kp)
        lam = kp * kp * wperp * wperp / (2.0 * omega_c * omega_c)
        y = (omega_c * omega_c) / (om * om)
        nu, _ = scaled_moments(lam, y)
        total = nu[1].copy()
        weighted = nu[1].copy()
        for m in range(2, SERIES_TERMS + 1):
            total += nu[m]
            weighted += m * nu[m]
        c = species.plasma_frequency**2 / (lam * omega_c * omega_c)
        value = -c * total
        derivative = 2.0 * c * weighted / om
        bad = ~(np.isfinite(value) & np.isfinite(derivative)
                & (np.abs(om) >= SERIES_MIN_ZETA * np.abs(kp) * wperp))
        value = np.where(bad, np.nan + 0j, value)
        derivative = np.where(bad, np.nan + 0j, derivative)
    return Susceptibility(value=value, derivative=derivative, harmonics=0)


def _parts(
    om: np.ndarray, setup: SpeciesSetup, perpendicular: bool, species: Species
) -> tuple[np.ndarray, np.ndarray]:
    """χ_s and dχ_s/dω from the formulas of :func:`susceptibility` (errors not checked).

    ``om`` has the result shape: any shape with scalar k, an (E, 1) column with array k
    (``setup`` then holds (E, 1) columns and per-element weights); ``perpendicular``
    selects the exact k∥ = 0 limit.
    """
    kpar, kperp, wpar = setup.k_par, setup.k_perp, setup.w_par
    omega_c, w = setup.omega_c, setup.weights
    sums = harmonic_sums(om, w)
    wp2 = species.plasma_frequency**2
    n_om = w.n * omega_c
    if perpendicular:
        # exact residue of χ_s at nΩ: (ω_p²/|Ω|)|g_n|
        r = reciprocal_off_poles(sums.omega - n_om, (wp2 / abs(omega_c)) * np.abs(w.g),
                                 np.abs(n_om))
        value = -(wp2 / omega_c) * sums.dot(r, w.g)
        derivative = (wp2 / omega_c) * sums.dot(r * r, w.g)
        return value, derivative
    s = landau_sign(kpar)
    a = kpar * wpar
    zt = (sums.omega - kpar * species.drift - n_om) / (s * a)
    zf, zp = plasma_z_and_prime(zt)
    # effective functions: Z_eff = sZ(sζ), F = 1 + ζ Z_eff = −Z'(sζ)/2 (s elementwise for
    # array k)
    zf = s * zf
    f = -0.5 * zp
    q = zf + (s * zt) * zp  # dF/dζ = Z + ζZ'
    ratio = species.temperature_par / species.temperature_perp
    c = 2.0 * wp2 / ((kperp * kperp + kpar * kpar) * wpar * wpar)
    term = f + (ratio / a) * (n_om * zf)
    dterm = q / a + (ratio / (a * a)) * (n_om * zp)
    return c * sums.dot(term, w.gamma), c * sums.dot(dterm, w.gamma)


class SpeciesSum:
    r"""Σ_s χ_s and Σ_s ∂χ_s/∂ω of :func:`susceptibility` at one fixed k, all species at once
    (plain collisionless drifting bi-Maxwellians, k∥ ≠ 0).

    Parameters
    ----------
    species : tuple of Species
        The species (see :meth:`for_species` for when this class applies).
    k_par, k_perp : complex
        Wave-vector components [1/m] (scalars, k∥ ≠ 0).
    B, tol : float
        As for :func:`susceptibility`.

    Notes
    -----
    The first form of :func:`susceptibility`, χ_s = c_s Σ_n Γ_n [F_n + (T∥/T⊥)(nΩ/a) Z_n]
    with c_s = 2ω_p²/(k²w∥²), a = k∥w∥, written as two dot products over the harmonics of
    every species at once: Σ_{s,n} (c_sΓ_n) F_n + Σ_{s,n} (c_s (T∥/T⊥) nΩ_sΓ_n/a_s) Z_n,
    and likewise for the derivative (dF/dζ = Z + ζZ', dZ/dζ = Z', d/dω = (1/a) d/dζ).
    The weights are formed once here (k is fixed); a call forms ζ_n of every species in
    one array and evaluates Z and Z' there in one call. The sums are those of the builder
    in another order (equal to rounding; tests/test_models_species_sums.py).
    """

    def __init__(self, species: tuple[Species, ...], *, k_par: complex, k_perp: complex,
                 B: float, tol: float) -> None:
        kpar, kperp = complex(k_par), complex(k_perp)
        sign = landau_sign(kpar)
        shift, nw, inv_sa, w_f, w_z, w_q, w_zp = ([] for _ in range(7))
        for s in species:
            setup = species_setup(s, k_par=kpar, k_perp=kperp, B=B, tol=tol,
                                  model="es_magnetized")
            w = setup.weights
            a = kpar * setup.w_par
            n_om = w.n * setup.omega_c
            ratio = s.temperature_par / s.temperature_perp
            c = 2.0 * s.plasma_frequency**2 / ((kperp * kperp + kpar * kpar) * setup.w_par**2)
            size = w.n.size
            shift.append(np.full(size, kpar * setup.drift))
            nw.append(n_om)
            inv_sa.append(np.full(size, 1.0 / (sign * a)))
            w_f.append(c * w.gamma)
            w_z.append(c * (ratio / a) * (n_om * w.gamma))
            w_q.append((c / a) * w.gamma)
            w_zp.append(c * (ratio / (a * a)) * (n_om * w.gamma))
        self._sign = sign
        self._shift = np.concatenate(shift)
        self._nw = np.concatenate(nw)
        self._inv_sa = np.concatenate(inv_sa)
        # rows (F, Z_eff) for χ and (dF/dζ, Z') for ∂χ/∂ω, conjugated for np.vecdot
        self._wv = np.array([np.concatenate(w_f), np.concatenate(w_z)]).conj()
        self._wd = np.array([np.concatenate(w_q), np.concatenate(w_zp)]).conj()

    @classmethod
    def for_species(cls, species: tuple[Species, ...], *, k_par: complex, k_perp: complex,
                    B: float, tol: float) -> SpeciesSum | None:
        """The sum, or None where the builder must serve
        (:func:`kinroots.physics.models._harmonics.fixed_k_sum`)."""
        out: SpeciesSum | None = fixed_k_sum(cls, species, k_par=k_par, k_perp=k_perp, B=B,
                                             tol=tol)
        return out

    def constant_arrays(self) -> tuple[np.ndarray, ...]:
        """The per-k arrays (checked finite by ``fixed_k_sum``)."""
        return (self._nw, self._inv_sa, self._wv, self._wd)

    def __call__(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Σ_s χ_s(ω) and Σ_s ∂χ_s/∂ω, shaped like ``omega`` (call under
        ``np.errstate(all="ignore")``)."""
        om = np.asarray(omega, dtype=complex)
        w = om.reshape(-1, 1)
        zt = (w - self._shift - self._nw) * self._inv_sa
        zf, zp = plasma_z_and_prime(zt)
        rows = np.empty((w.shape[0], 2, zt.shape[1]), dtype=complex)
        np.multiply(zp, -0.5, out=rows[:, 0])  # F = −Z'(sζ)/2
        if self._sign < 0:
            np.negative(zf, out=rows[:, 1])
        else:
            rows[:, 1] = zf
        value = np.vecdot(self._wv, rows).sum(axis=-1)
        rows[:, 0] = rows[:, 1] + (self._sign * zt) * zp  # dF/dζ = Z_eff + ζ Z_eff'
        rows[:, 1] = zp
        derivative = np.vecdot(self._wd, rows).sum(axis=-1)
        return value.reshape(om.shape), derivative.reshape(om.shape)
