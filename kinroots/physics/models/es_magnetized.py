r"""Electrostatic susceptibility of a magnetized drifting bi-Maxwellian species.

Frame: B along z, k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t).
SI throughout (ω in rad/s, k in 1/m, B in T, temperatures of
:class:`~kinroots.physics.plasma.Species` in eV). Ω_s = q_s B/m_s is signed.
"""

from __future__ import annotations

import numpy as np

from kinroots.physics.models._harmonics import (
    SpeciesSetup,
    evaluate,
    harmonic_sums,
    is_array_k,
    landau_sign,
)
from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species
from kinroots.physics.zfunc import plasma_z_and_prime

__all__ = ["susceptibility"]


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
    the perpendicular k → 0 limit −ω_p²/(ω² − Ω²).

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
        return krook.magnetized_susceptibility(omega, species, k_par=k_par, k_perp=k_perp,
                                               B=B, tol=tol)
    return evaluate(
        omega, species, k_par=k_par, k_perp=k_perp, B=B, tol=tol, model="es_magnetized",
        tail=(), parts=lambda om, setup, perp: _parts(om, setup, perp, species),
    )


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
        r = 1.0 / (sums.omega - n_om)
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
