"""Susceptibilities of an unmagnetized drifting (bi-)kappa species.

Distribution (per unit density), drift V along z::

    f(v) = c (1 + u∥²/(κθ∥²) + u⊥²/(κθ⊥²))^−(κ+1),   u = v − V ẑ,
    θ² = (2κ − 3)/κ · T/m per direction (T the kinetic temperature, m⟨u_i²⟩ = T).

Frame: drift axis z, k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t), SI.
The functions Y_p, F_p of :mod:`kinroots.physics.zfunc_kappa` carry the velocity
integrals.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import EV, Species
from kinroots.physics.zfunc_kappa import kappa_transforms

__all__ = [
    "em_scaled",
    "em_tensor",
    "kappa_moments",
    "kappa_widths_squared",
    "scaled_susceptibility",
    "susceptibility",
    "tensor_susceptibility",
]


def kappa_widths_squared(species: Species) -> tuple[float, float]:
    """(θ∥², θ⊥²) = (2κ − 3)/κ · (T∥/m, T⊥/m) [m²/s²]."""
    kappa = _kappa_of(species)
    factor = (2.0 * kappa - 3.0) / kappa * EV / species.mass
    return factor * species.temperature_par, factor * species.temperature_perp


def _kappa_of(species: Species) -> float:
    if species.distribution != "kappa" or species.kappa is None or not species.kappa > 1.5:
        raise ValueError(f"species {species.name!r} is not a kappa species with kappa > 3/2")
    return float(species.kappa)


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
    """Electrostatic susceptibility χ_s(ω, k) of an unmagnetized drifting bi-kappa species.

    Parameters
    ----------
    omega : array_like of complex
        Angular frequency ω [rad/s], any shape.
    species : Species
        A kappa species (``distribution = "kappa"``, κ > 3/2).
    k_par, k_perp : complex or array_like of complex
        Wave-vector components along and across z [1/m]; broadcast against ``omega``.
    B, tol : float
        Ignored (common builder signature).

    Returns
    -------
    Susceptibility
        ``value`` = χ_s, ``derivative`` = ∂χ_s/∂ω; ``harmonics`` = 0.

    Notes
    -----
    With s = k·u, χ_s = ω_ps² ∫ G′(s)/(ω − k∥V − s) ds where G is the distribution of s
    (integrate k·∂f/∂v by parts along k).  For the bi-kappa, u = L y with
    L = diag(θ⊥, θ⊥, θ∥) maps f to an isotropic kappa in y, so s = (Lk)·y and G is the
    one-dimensional kappa profile g_κ(s/Θ)/Θ, Θ² = k⊥²θ⊥² + k∥²θ∥² (the projection of an
    isotropic kappa on a unit vector is g_κ).  With g_κ′(x) = −(2κ − 1)/κ · x g_{κ+1}(x)
    and ζ = (ω − k∥V)/Θ::

        χ_s = (ω_ps²/Θ²) (2κ − 1)/κ · F_{κ+1}(ζ),
        ∂χ_s/∂ω = (ω_ps²/Θ³) (2κ − 1)/κ · F′_{κ+1}(ζ).

    For an isotropic species this is (2ω_ps²/(k²θ²)) [1 − 1/(2κ) + ζ Z*_κ(ζ)] of Summers
    & Thorne (1991) (from memory); its static limit is
    (κ − 1/2)/(κ − 3/2) / (kλ_D)² and as κ → ∞ it becomes −(ω_ps²/(k²w²)) Z′(ζ).
    Θ is the principal square root, as for the Maxwellian builder.

    References
    ----------
    D. Summers and R. M. Thorne, Phys. Fluids B 3, 1835 (1991) (from memory);
    the elliptical reduction is this module's own derivation.
    """
    kappa = _kappa_of(species)
    om, kpar, kperp = np.broadcast_arrays(
        np.asarray(omega, dtype=complex),
        np.asarray(k_par, dtype=complex),
        np.asarray(k_perp, dtype=complex),
    )
    tpar2, tperp2 = kappa_widths_squared(species)
    wp2 = species.plasma_frequency**2
    with np.errstate(all="ignore"):
        theta2 = kperp * kperp * tperp2 + kpar * kpar * tpar2
        theta = np.sqrt(theta2)
        zeta = (om - kpar * species.drift) / theta
        _, _, f, df = kappa_transforms(zeta, kappa, kappa + 1.0, need_y=False)
        coef = wp2 * (2.0 * kappa - 1.0) / kappa / theta2
        value = coef * f
        derivative = coef * df / theta
    return Susceptibility(value=value, derivative=derivative, harmonics=0)


#: ζ -> the moments of one species used by the electromagnetic tensor (see _em_moments).
Moments = dict[str, np.ndarray]


def kappa_moments(zeta: np.ndarray, kappa: float) -> Moments:
    """Y, F of g_κ, F⁺ = F_{κ+1} and their ζ-derivatives, and c = (2κ − 1)/κ.

    In the notation of :func:`tensor_susceptibility`: N_0 = −Y, N_1 = −F, N′_0 = cF⁺,
    N′_1 = cζF⁺, N′_2 = cζ²F⁺ + 1.  (For a Maxwellian profile exp(−s²)/√π the same
    relations hold with Y = Z, F = F⁺ = 1 + ζZ and c = 2; the tests use that to compare
    with the bi-Maxwellian builder.)
    """
    y, dy, f, df = kappa_transforms(zeta, kappa, kappa)
    _, _, fp, dfp = kappa_transforms(zeta, kappa, kappa + 1.0, need_y=False)
    c = np.full(np.shape(zeta), (2.0 * kappa - 1.0) / kappa)
    return {"y": y, "dy": dy, "f": f, "df": df, "fp": fp, "dfp": dfp, "c": c}


def _em_geometry(kpar: np.ndarray, kperp: np.ndarray, tpar2: float, tperp2: float
                 ) -> dict[str, np.ndarray]:
    """Θ, β = k²/Θ, â, b_t (xyz components) and the wave-frame scalars of the tensor."""
    theta2 = kperp * kperp * tperp2 + kpar * kpar * tpar2
    theta = np.sqrt(theta2)
    k2 = kperp * kperp + kpar * kpar
    k = np.sqrt(k2)
    beta = k2 / theta
    a_hat = np.stack([kperp * np.sqrt(tperp2), 0.0 * kpar, kpar * np.sqrt(tpar2)],
                     axis=-1) / theta[..., None]
    b = np.stack([kperp / np.sqrt(tperp2), 0.0 * kpar, kpar / np.sqrt(tpar2)], axis=-1)
    b_t = b - beta[..., None] * a_hat
    return {
        "theta": theta, "theta2": theta2, "beta": beta, "a_hat": a_hat, "b_t": b_t, "k": k,
        # wave frame (e1 = (k∥, 0, −k⊥)/k): e1·Lâ, |Le1|² k², the c's
        "alpha1": kperp * kpar * (tperp2 - tpar2) / (k * theta),
        "c1m": (tperp2 - tpar2) * (kpar * kpar - kperp * kperp) / theta2,
        "c1": (tperp2 * kpar * kpar + tpar2 * kperp * kperp) / theta2,
        "c2m": kpar * kpar * (tperp2 - tpar2) / theta2,
        "c2": tperp2 * k2 / theta2,
    }


def _n_moments(m: Moments, zeta: np.ndarray, derivative: bool) -> dict[str, np.ndarray]:
    """N_0, N_1, N′_0, N′_1, N′_2 and ζY (or their ζ-derivatives)."""
    c = m["c"]
    if not derivative:
        return {"n0": -m["y"], "n1": -m["f"], "p0": c * m["fp"], "p1": c * zeta * m["fp"],
                "p2": c * zeta * zeta * m["fp"] + 1.0, "zy": zeta * m["y"]}
    return {"n0": -m["dy"], "n1": -m["df"], "p0": c * m["dfp"],
            "p1": c * (m["fp"] + zeta * m["dfp"]),
            "p2": c * zeta * (2.0 * m["fp"] + zeta * m["dfp"]), "zy": m["df"]}


def em_tensor(
    omega: np.ndarray, k_par: np.ndarray, k_perp: np.ndarray, *, wp2: float, drift: float,
    widths2: tuple[float, float], moments: Callable[[np.ndarray], Moments],
) -> tuple[np.ndarray, np.ndarray]:
    """χ and dχ/dω (xyz, ``shape + (3, 3)``) from the moments (:func:`tensor_susceptibility`)."""
    tpar2, tperp2 = widths2
    with np.errstate(all="ignore"):
        g = _em_geometry(k_par, k_perp, tpar2, tperp2)
        theta = g["theta"]
        zeta = (omega - k_par * drift) / theta
        m = moments(zeta)
        lvec = np.array([np.sqrt(tperp2), np.sqrt(tperp2), np.sqrt(tpar2)])
        vvec = np.array([0.0, 0.0, drift])
        eye = np.eye(3)
        a, bt = g["a_hat"], g["b_t"]
        aa = a[..., :, None] * a[..., None, :]
        ab = a[..., :, None] * bt[..., None, :]
        out = []
        for derivative in (False, True):
            n = _n_moments(m, zeta, derivative)
            beta = g["beta"][..., None, None]
            j0 = (g["beta"] * n["p0"] / theta)[..., None, None]
            j1 = (g["beta"][..., None] * n["p1"][..., None] * a
                  - n["n0"][..., None] * bt) / theta[..., None]
            j2 = (beta * n["p2"][..., None, None] * aa
                  - n["n1"][..., None, None] * (ab + np.swapaxes(ab, -1, -2))
                  - beta * n["n1"][..., None, None] * (eye - aa)) / theta[..., None, None]
            lj1 = lvec * j1
            mat = (vvec[:, None] * vvec[None, :] * j0
                   + vvec[:, None] * lj1[..., None, :] + lj1[..., :, None] * vvec[None, :]
                   + lvec[:, None] * j2 * lvec[None, :])
            out.append(mat / theta[..., None, None] if derivative else mat)
        p = (wp2 / (omega * omega))[..., None, None]
        value = p * (out[0] - eye)
        deriv = p * out[1] - 2.0 * value / omega[..., None, None]
    return value, deriv


def em_scaled(
    omega: np.ndarray, k_par: np.ndarray, k_perp: np.ndarray, *, wp2: float, drift: float,
    widths2: tuple[float, float], moments: Callable[[np.ndarray], Moments], omega_ref: float,
) -> tuple[np.ndarray, np.ndarray]:
    """S and dS/dω in the wave frame (:func:`scaled_susceptibility`)."""
    tpar2, tperp2 = widths2
    with np.errstate(all="ignore"):
        g = _em_geometry(k_par, k_perp, tpar2, tperp2)
        theta, k, alpha1 = g["theta"], g["k"], g["alpha1"]
        zeta = (omega - k_par * drift) / theta
        m = moments(zeta)
        v1 = -drift * k_perp / k
        bt = g["beta"] / theta
        s_t = wp2 / omega_ref**2
        s_l = wp2 / (omega_ref * k)
        value = np.zeros(np.shape(omega) + (3, 3), dtype=complex)
        deriv = np.zeros_like(value)
        for target, derivative in ((value, False), (deriv, True)):
            n = _n_moments(m, zeta, derivative)
            const = 0.0 if derivative else 1.0
            scale = 1.0 / theta if derivative else 1.0
            b11 = (const * g["c1m"] + g["c1"] * n["zy"]
                   + bt * (v1 * v1 * n["p0"] + 2.0 * v1 * alpha1 * (n["p1"] + n["n0"])
                           + alpha1 * alpha1 * (n["p2"] + 3.0 * n["n1"])))
            b22 = const * g["c2m"] + g["c2"] * n["zy"]
            i1 = bt * (v1 * n["p0"] + alpha1 * (n["p1"] + n["n0"]))
            target[..., 0, 0] = s_t * b11 * scale
            target[..., 1, 1] = s_t * b22 * scale
            target[..., 0, 2] = target[..., 2, 0] = s_l * i1 * scale
            target[..., 2, 2] = wp2 / g["theta2"] * n["p0"] * scale
    return value, deriv


def _em_inputs(omega: Any, species: Species, k_par: Any, k_perp: Any
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray, dict[str, Any]]:
    kappa = _kappa_of(species)
    om, kpar, kperp = np.broadcast_arrays(
        np.asarray(omega, dtype=complex), np.asarray(k_par, dtype=complex),
        np.asarray(k_perp, dtype=complex))
    kw = {"wp2": species.plasma_frequency**2, "drift": float(species.drift),
          "widths2": kappa_widths_squared(species),
          "moments": lambda z: kappa_moments(z, kappa)}
    return om, kpar, kperp, kw


def tensor_susceptibility(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray,
    B: float = 0.0,
    tol: float = 1e-14,
) -> Susceptibility:
    """Electromagnetic χ_s tensor of an unmagnetized drifting bi-kappa species, any angle.

    Parameters
    ----------
    omega, species, k_par, k_perp, B, tol
        As for :func:`susceptibility`.

    Returns
    -------
    Susceptibility
        χ_s and ∂χ_s/∂ω, ``shape + (3, 3)`` in (x, y, z); ``harmonics`` = 0.

    Notes
    -----
    χ_ij = (ω_p²/ω²)[−δ_ij + I_ij], I_ij = ∫ v_i v_j (k·∂f/∂v)/(ω − k·v) d³v (Krall &
    Trivelpiece 1973, ch. 9, from memory).  With u = v − Vẑ = L y, L = diag(θ⊥, θ⊥, θ∥),
    the distribution is an isotropic kappa φ(|y|²) in y; k·v = k∥V + Θ s with
    s = â·y, â = Lk/Θ, and k·∂f/∂v = b·∇_y φ, b = L⁻¹k, β = b·â = k²/Θ,
    b_t = b − βâ.  Integrating over the plane ⊥ â (this module's own reduction):
    ∫2φ′ d²y_t = G′(s)/s and ∫ y_t y_tᵀ 2φ′ d²y_t = −G(s)(I − ââᵀ), G = g_κ the
    marginal, so with N_n = ∫ sⁿG/(ζ − s) ds, N′_n = ∫ sⁿG′/(ζ − s) ds, ζ = (ω − k∥V)/Θ::

        J0 = (β/Θ) N′_0,   J1 = (β N′_1 â − N_0 b_t)/Θ,
        J2 = (β N′_2 ââᵀ − N_1(â b_tᵀ + b_t âᵀ) − β N_1 (I − ââᵀ))/Θ,
        I = VVᵀ J0 + V(LJ1)ᵀ + (LJ1)Vᵀ + L J2 L.

    The kappa profile gives N_0 = −Y_κ, N_1 = −F_κ and, from
    g_κ′ = −(2κ − 1)/κ · s g_{κ+1}, N′_0 = cF⁺, N′_1 = cζF⁺, N′_2 = cζ²F⁺ + 1 with
    c = (2κ − 1)/κ and F⁺ = F_{κ+1} (:func:`kappa_moments`).  For a Maxwellian profile
    these are the moments of the bi-Maxwellian builder, which the tests compare.
    """
    om, kpar, kperp, kw = _em_inputs(omega, species, k_par, k_perp)
    value, deriv = em_tensor(om, kpar, kperp, **kw)
    return Susceptibility(value=value, derivative=deriv, harmonics=0)


def scaled_susceptibility(
    omega: np.ndarray,
    species: Species,
    /,
    *,
    k_par: complex | np.ndarray,
    k_perp: complex | np.ndarray,
    B: float = 0.0,
    tol: float = 1e-14,
    omega_ref: float = 1.0,
) -> Susceptibility:
    """S_s = diag(w, w, 1) χ′_s diag(w, w, 1), w = ω/ω_ref, of a bi-kappa species.

    Parameters
    ----------
    omega, species, k_par, k_perp, B, tol
        As for :func:`tensor_susceptibility`.
    omega_ref : float
        Reference frequency [rad/s].

    Returns
    -------
    Susceptibility
        ``shape + (3, 3)`` in the frame e₁ = (k∥, 0, −k⊥)/k, e₂ = ŷ, e₃ = k̂.

    Notes
    -----
    In the notation of :func:`tensor_susceptibility`, with v₁ = −Vk⊥/k,
    α₁ = e₁·Lâ = k⊥k∥(θ⊥² − θ∥²)/(kΘ) and e₁·Lb_t = −βα₁ (since Lb = k ⊥ e₁)::

        S_11 = (ω_p²/ω_ref²)[(c₁ − 1) + c₁ζY + (β/Θ)(v₁²N′_0 + 2v₁α₁(N′_1 + N_0)
                                                  + α₁²(N′_2 + 3N_1))],
        S_22 = (ω_p²/ω_ref²)[(c₂ − 1) + c₂ζY],
        S_13 = S_31 = (ω_p²/(ω_ref k)) (β/Θ)(v₁N′_0 + α₁(N′_1 + N_0)),
        S_33 = (ω_p²/Θ²) N′_0 (the electrostatic χ),

    c₁ = (θ⊥²k∥² + θ∥²k⊥²)/Θ², c₁ − 1 = (θ⊥² − θ∥²)(k∥² − k⊥²)/Θ², c₂ = θ⊥²k²/Θ²,
    c₂ − 1 = k∥²(θ⊥² − θ∥²)/Θ² (exact zeros for an isotropic species), using
    −1 − c N_1 = (c − 1) + cζY, and S_13 from k_iχ_ij = (ω_p²/ω) ∫v_j(k·∂f/∂v)/(ω − k·v)
    (charge continuity), so that no entry carries 1/ω.  N′_2 + 3N_1 loses about |ζ|²ε
    relative at |ζ| ≫ 1 (its leading 1/ζ² terms cancel); it multiplies α₁², present only
    for an anisotropic species at an oblique angle.
    """
    om, kpar, kperp, kw = _em_inputs(omega, species, k_par, k_perp)
    value, deriv = em_scaled(om, kpar, kperp, omega_ref=omega_ref, **kw)
    return Susceptibility(value=value, derivative=deriv, harmonics=0)
