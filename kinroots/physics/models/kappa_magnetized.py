"""Susceptibilities of a magnetized drifting bi-kappa species, parallel propagation.

k ∥ B only (k_perp = 0): the electrostatic and the electromagnetic response.  Oblique
propagation with a kappa species is refused (``ValueError`` here; the case file reports
it as an input error), never approximated.  Distribution and θ as in
:mod:`kinroots.physics.models.kappa_unmagnetized`; B along z, Ω = qB/m signed,
perturbations ∝ exp(i k·x − i ω t), SI.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from kinroots.physics.models import kappa_unmagnetized
from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species
from kinroots.physics.zfunc_kappa import kappa_transforms

__all__ = ["parallel_parts", "scaled_susceptibility", "susceptibility", "tensor_susceptibility"]

#: (ζ) -> (Y, dY/dζ, F, dF/dζ) of the reduced parallel profile.
Transforms = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]]


def _require_parallel(species: Species, k_perp: complex | np.ndarray) -> None:
    if np.any(np.asarray(k_perp) != 0):
        raise ValueError(
            f"species {species.name!r}: a kappa species in a magnetized plasma is modelled "
            "for parallel propagation only (k_perp = 0, wave.angle 0 or 180 degrees)"
        )


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
    """Electrostatic χ_s of a magnetized bi-kappa species for k ∥ B.

    Parameters
    ----------
    omega, species, k_par, k_perp, B, tol
        As for :func:`kinroots.physics.models.kappa_unmagnetized.susceptibility`;
        ``k_perp`` must be 0 (``ValueError`` otherwise).

    Returns
    -------
    Susceptibility
        χ_s and ∂χ_s/∂ω; ``harmonics`` = 0.

    Notes
    -----
    For k ∥ B the electrostatic response of a gyrotropic species involves only the
    reduced parallel distribution (only the n = 0 harmonic survives at k⊥ = 0, where
    Γ_0 = 1), so it is the unmagnetized result with k⊥ = 0 (Stix 1992, ch. 10, from
    memory).
    """
    _require_parallel(species, k_perp)
    return kappa_unmagnetized.susceptibility(omega, species, k_par=k_par, k_perp=k_perp)


def _kappa_profile(kappa: float) -> Transforms:
    def transforms(zeta: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        return kappa_transforms(zeta, kappa, kappa)

    return transforms


def parallel_parts(
    omega: np.ndarray,
    k_par: np.ndarray,
    *,
    drift: float,
    omega_c: float,
    width_par: float,
    anisotropy: float,
    transforms: Transforms,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """T_n = ζ₀ Y(ζ_n) + (A − 1) F(ζ_n) and dT_n/dω for n = +1 and n = −1.

    Parameters
    ----------
    omega, k_par : ndarray
        Broadcast arrays of ω [rad/s] and k∥ [1/m].
    drift, omega_c : float
        V [m/s] and the signed Ω [rad/s].
    width_par : float
        θ∥ [m/s] of the reduced profile g(x), x = (v∥ − V)/θ∥.
    anisotropy : float
        A = T⊥/T∥.
    transforms : callable
        ζ → (Y, Y′, F, F′) of g (for a Maxwellian g = exp(−x²)/√π these are Z, Z′,
        1 + ζZ and its derivative, which the tests use to compare with the bi-Maxwellian
        builder).

    Returns
    -------
    t_plus, dt_plus, t_minus, dt_minus : ndarray
        χ_± = (ω_p²/ω²) T_±, with ζ_± = (ω − k∥V ∓ Ω)/Θ, ζ₀ = (ω − k∥V)/Θ, Θ = √(k∥²θ∥²).
    """
    with np.errstate(all="ignore"):
        theta = np.sqrt(k_par * k_par * width_par**2)
        zeta0 = (omega - k_par * drift) / theta
        out = []
        for n in (1.0, -1.0):
            zn = zeta0 - n * omega_c / theta
            y, dy, f, df = transforms(zn)
            out.append(zeta0 * y + (anisotropy - 1.0) * f)
            out.append((y + zeta0 * dy + (anisotropy - 1.0) * df) / theta)
    return out[0], out[1], out[2], out[3]


def _parallel_setup(
    omega: np.ndarray, species: Species, k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray, B: float,
) -> tuple[np.ndarray, np.ndarray, tuple[np.ndarray, ...]]:
    _require_parallel(species, k_perp)
    if B == 0.0:
        raise ValueError("B = 0: use the unmagnetized model")
    om, kpar = np.broadcast_arrays(np.asarray(omega, dtype=complex),
                                   np.asarray(k_par, dtype=complex))
    tpar2, _ = kappa_unmagnetized.kappa_widths_squared(species)
    assert species.kappa is not None  # the kappa builders are given kappa species only
    kappa = float(species.kappa)
    parts = parallel_parts(
        om, kpar, drift=species.drift, omega_c=species.cyclotron_frequency(B),
        width_par=float(np.sqrt(tpar2)),
        anisotropy=species.temperature_perp / species.temperature_par,
        transforms=_kappa_profile(kappa),
    )
    return om, kpar, parts


def tensor_susceptibility(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray,
    B: float,
    tol: float = 1e-14,
) -> Susceptibility:
    """Electromagnetic χ_s tensor of a magnetized drifting bi-kappa species for k ∥ B.

    Parameters
    ----------
    omega, species, k_par, k_perp, B, tol
        As for :func:`susceptibility`; ``B`` ≠ 0.

    Returns
    -------
    Susceptibility
        χ_s and dχ_s/dω, ``shape + (3, 3)`` in (x, y, z); ``harmonics`` = 1.

    Notes
    -----
    For k ∥ B the gyrotropic susceptibility reduces to the n = ±1 and n = 0 terms
    (Stix 1992, ch. 10, from memory)::

        χ_± = (ω_p²/ω) ∫ d³v (v⊥/2) [(ω − k∥v∥) ∂f/∂v⊥ + k∥v⊥ ∂f/∂v∥] / (ω (ω − k∥v∥ ∓ Ω)),

    χ_xx = χ_yy = (χ_+ + χ_−)/2, χ_xy = −χ_yx = (i/2)(χ_+ − χ_−), χ_zz the electrostatic
    χ_s, χ_xz = χ_yz = 0.  Integrating over v⊥ by parts, ∫(v⊥/2)∂f/∂v⊥ d²v⊥ = −F∥(v∥)
    and ∫(v⊥²/2)∂f/∂v∥ d²v⊥ = H′(v∥), H = ∫(v⊥²/2) f d²v⊥.  For the bi-kappa,
    F∥ = g_κ(x)/θ∥ and, since ∫ v⊥³ (a + v⊥²/(κθ⊥²))^−(κ+1) dv⊥ ∝ a^−(κ−1),
    H = (T⊥/m) g_{κ−1}(x)/θ∥, whence H′ = −(T⊥/T∥) x g_κ(x) (this module's own
    reduction).  Then::

        χ_± = (ω_p²/ω²) [ζ₀ Y_κ(ζ_±) + (T⊥/T∥ − 1) F_κ(ζ_±)],

    the form of the bi-Maxwellian result (Stix 1992, ch. 11, from memory) with Z → Y_κ,
    1 + ζZ → F_κ (:func:`parallel_parts`).  Summers & Thorne (1991) give the isotropic
    case in terms of Z*_κ (from memory).
    """
    om, kpar, (tp, dtp, tm, dtm) = _parallel_setup(omega, species, k_par, k_perp, B)
    es = kappa_unmagnetized.susceptibility(om, species, k_par=kpar, k_perp=0.0)
    wp2 = species.plasma_frequency**2
    with np.errstate(all="ignore"):
        p = wp2 / (om * om)
        value = np.zeros(om.shape + (3, 3), dtype=complex)
        deriv = np.zeros_like(value)
        chi_p, chi_m = p * tp, p * tm
        dchi_p = p * dtp - 2.0 * chi_p / om
        dchi_m = p * dtm - 2.0 * chi_m / om
        value[..., 0, 0] = value[..., 1, 1] = 0.5 * (chi_p + chi_m)
        value[..., 0, 1] = 0.5j * (chi_p - chi_m)
        value[..., 1, 0] = -value[..., 0, 1]
        value[..., 2, 2] = es.value
        deriv[..., 0, 0] = deriv[..., 1, 1] = 0.5 * (dchi_p + dchi_m)
        deriv[..., 0, 1] = 0.5j * (dchi_p - dchi_m)
        deriv[..., 1, 0] = -deriv[..., 0, 1]
        deriv[..., 2, 2] = es.derivative
    return Susceptibility(value=value, derivative=deriv, harmonics=1)


def scaled_susceptibility(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray,
    B: float,
    tol: float = 1e-14,
    omega_ref: float = 1.0,
) -> Susceptibility:
    """S_s = diag(w, w, 1) χ′_s diag(w, w, 1) (w = ω/ω_ref) for k ∥ B, entire in ω.

    Parameters
    ----------
    omega, species, k_par, k_perp, B, tol
        As for :func:`tensor_susceptibility`.
    omega_ref : float
        Reference frequency [rad/s].

    Returns
    -------
    Susceptibility
        ``shape + (3, 3)`` in the wave frame e₁ = (k∥, 0, 0)/k, e₂ = ŷ, e₃ = k̂
        (k = √(k∥²), so e₁ = ±x̂ and e₃ = ±ẑ); ``harmonics`` = 1.

    Notes
    -----
    S_11 = S_22 = (ω_p²/ω_ref²)(T_+ + T_−)/2, S_12 = −S_21 = ±(ω_p²/ω_ref²)(i/2)(T_+ − T_−)
    (sign of e₁·x̂), S_33 = χ_zz (electrostatic), S_a3 = S_3a = 0: no factor 1/ω is left,
    and an isotropic non-drifting T_± = ζ₀Y(ζ_±) is a product, O(ω) without cancellation.
    """
    om, kpar, (tp, dtp, tm, dtm) = _parallel_setup(omega, species, k_par, k_perp, B)
    es = kappa_unmagnetized.susceptibility(om, species, k_par=kpar, k_perp=0.0)
    s_t = species.plasma_frequency**2 / omega_ref**2
    with np.errstate(all="ignore"):
        cth = kpar / np.sqrt(kpar * kpar)
        value = np.zeros(om.shape + (3, 3), dtype=complex)
        deriv = np.zeros_like(value)
        value[..., 0, 0] = value[..., 1, 1] = 0.5 * s_t * (tp + tm)
        value[..., 0, 1] = 0.5j * s_t * cth * (tp - tm)
        value[..., 1, 0] = -value[..., 0, 1]
        value[..., 2, 2] = es.value
        deriv[..., 0, 0] = deriv[..., 1, 1] = 0.5 * s_t * (dtp + dtm)
        deriv[..., 0, 1] = 0.5j * s_t * cth * (dtp - dtm)
        deriv[..., 1, 0] = -deriv[..., 0, 1]
        deriv[..., 2, 2] = es.derivative
    return Susceptibility(value=value, derivative=deriv, harmonics=1)
