"""Electromagnetic susceptibility tensor of an unmagnetized drifting bi-Maxwellian.

Non-relativistic, any angle between k and the drift/anisotropy axis z; contains the
Weibel (temperature anisotropy) and filamentation/two-stream/oblique-beam (drift)
physics.  Frame: k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t), SI units.
"""

from __future__ import annotations

import numpy as np

from kinroots.models.base import Susceptibility
from kinroots.models.es_unmagnetized import landau_moments, thermal_speeds_squared
from kinroots.plasma import Species

__all__ = ["susceptibility"]


def _bracket_linear(
    ms: list[np.ndarray],
    geometry: dict[str, np.ndarray],
    drift: float,
) -> np.ndarray:
    """The part of the bracket B_ij linear in the moments (see ``susceptibility``)."""
    m0, m1, m2, m3 = ms
    q, kap = geometry["q"], geometry["kappa"]
    bx, bz = geometry["beta_x"], geometry["beta_z"]
    gx, gz = geometry["g_x"], geometry["g_z"]
    cxx, czz, cxz, cyy = geometry["c_xx"], geometry["c_zz"], geometry["c_xz"], geometry["c_yy"]
    v = drift
    xx = q * (bx * bx * m3 + cxx * m1) + 2.0 * gx * bx * m1 / kap
    yy = q * cyy * m1
    zz = q * (bz * bz * m3 + 2.0 * bz * v * m2 + v * v * m1 + czz * m1) + (
        2.0 * gz * (bz * m1 + v * m0) / kap
    )
    xz = q * (bx * bz * m3 + bx * v * m2 + cxz * m1) + (
        gz * bx * m1 + gx * (bz * m1 + v * m0)
    ) / kap
    out = np.zeros(m1.shape + (3, 3), dtype=complex)
    out[..., 0, 0] = xx
    out[..., 1, 1] = yy
    out[..., 2, 2] = zz
    out[..., 0, 2] = xz
    out[..., 2, 0] = xz
    return -2.0 * out


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
    """Susceptibility tensor χ_s(ω, k) of an unmagnetized drifting bi-Maxwellian.

    Parameters
    ----------
    omega : array_like of complex
        Angular frequency ω [rad/s], any shape; ω = 0 is a pole (non-finite result).
    species : Species
        Drift V along z; T∥ along z, T⊥ across (both > 0).
    k_par, k_perp : complex or array_like of complex
        Wave-vector components [1/m], broadcast against ``omega``; may be complex.
    B : float
        Ignored (unmagnetized model).
    tol : float
        Ignored (no series to truncate).

    Returns
    -------
    Susceptibility
        ``value`` = χ_s and ``derivative`` = ∂χ_s/∂ω, shaped ``shape + (3, 3)`` with the
        index order (x, y, z); ``harmonics`` = 0.

    Notes
    -----
    The linearized Vlasov equation with the Lorentz force of E and δB = k×E/ω gives::

        χ_ij = (ω_ps²/ω²) [ −δ_ij + ∫ v_i v_j (k·∂f0/∂v) / (ω − k·v) d³v ].

    f0 is a Gaussian in v with mean V ẑ and covariance Σ = diag(w⊥², w⊥², w∥²)/2, so
    k·∂f0/∂v = −2 (Ak)·(v − V ẑ) f0 with A = (2Σ)⁻¹.  Write u = v − V ẑ and s = k·u
    (Gaussian, variance κ²/2, κ² = k⊥²w⊥² + k∥²w∥²); given s, u = b s + r with
    b = Σk/(κ²/2) and r Gaussian, independent of s, of covariance C = Σ − (κ²/2) b bᵀ.
    With s = κx, ζ = (ω − k∥V)/κ and M_n = ⟨xⁿ/(ζ − x)⟩ (M_0 = −Z, M_1 = Z′/2,
    M_2 = ζM_1, M_3 = −1/2 + ζ²M_1; see ``landau_moments``), β = κb and
    g = (k − k²b)/2 = (w∥² − w⊥²) k⊥k∥ (k∥, 0, −k⊥)/(2κ²)::

        χ_ij = (ω_ps²/ω²) B_ij,
        B_ij = −δ_ij − 2 [ (k²/κ²)(β_iβ_j M_3 + (β_iV_j + V_iβ_j) M_2 + V_iV_j M_1
                                  + C_ij M_1)
                          + (g_j(β_i M_1 + V_i M_0) + g_i(β_j M_1 + V_j M_0))/κ ],
        C = w⊥²w∥²/(2κ²) (k∥, 0, −k⊥)(k∥, 0, −k⊥)ᵀ + (w⊥²/2) ŷŷ,
        ∂χ_ij/∂ω = −2χ_ij/ω + (ω_ps²/ω²) (∂B_ij/∂ζ)/κ.

    Checks: for an isotropic, non-drifting species this is χ_L = −(ω_ps²/κ²)Z′ along k
    and χ_T = (ω_ps²/ω²) ζZ across it; for k ∥ z, χ_yy = (ω_ps²/ω²)[−1 + (T⊥/T∥)
    (1 + ζZ)] (Weibel).  κ is the principal square root, as in the electrostatic
    builder (Landau continuation; analytic in Re k > 0 at a fixed real angle).

    References
    ----------
    N. A. Krall and A. W. Trivelpiece, *Principles of Plasma Physics* (1973), ch. 9,
    dielectric tensor of an unmagnetized plasma (from memory);
    E. S. Weibel, Phys. Rev. Lett. 2, 83 (1959);
    the conditional-Gaussian reduction is this module's own derivation.
    """
    om, kpar, kperp = np.broadcast_arrays(
        np.asarray(omega, dtype=complex),
        np.asarray(k_par, dtype=complex),
        np.asarray(k_perp, dtype=complex),
    )
    wpar2, wperp2 = thermal_speeds_squared(species)
    wp2 = species.plasma_frequency**2
    with np.errstate(all="ignore"):
        kappa2 = kperp * kperp * wperp2 + kpar * kpar * wpar2
        kappa = np.sqrt(kappa2)
        k2 = kperp * kperp + kpar * kpar
        gam = wperp2 * wpar2 / (2.0 * kappa2)
        aniso = (wpar2 - wperp2) * kperp * kpar / (2.0 * kappa2)
        geometry = {
            "q": k2 / kappa2,
            "kappa": kappa,
            "beta_x": kperp * wperp2 / kappa,
            "beta_z": kpar * wpar2 / kappa,
            "g_x": aniso * kpar,
            "g_z": -aniso * kperp,
            "c_xx": gam * kpar * kpar,
            "c_zz": gam * kperp * kperp,
            "c_xz": -gam * kperp * kpar,
            "c_yy": np.full_like(kappa, 0.5 * wperp2),
        }
        zeta = (om - kpar * species.drift) / kappa
        ms, dms = landau_moments(zeta, order=3)
        bracket = _bracket_linear(ms, geometry, species.drift)
        idx = np.arange(3)
        bracket[..., idx, idx] -= 1.0
        dbracket = _bracket_linear(dms, geometry, species.drift)
        pref = (wp2 / (om * om))[..., None, None]
        value = pref * bracket
        derivative = pref * dbracket / kappa[..., None, None] - 2.0 * value / om[..., None, None]
    return Susceptibility(value=value, derivative=derivative, harmonics=0)
