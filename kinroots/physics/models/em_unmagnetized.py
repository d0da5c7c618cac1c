"""Electromagnetic susceptibility tensor of an unmagnetized drifting bi-Maxwellian.

Non-relativistic, any angle between k and the drift/anisotropy axis z; contains the
Weibel (temperature anisotropy) and filamentation/two-stream/oblique-beam (drift)
physics.  Frame: k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t), SI units.
"""

from __future__ import annotations

import numpy as np

from kinroots.physics.models._landau import landau_moments, thermal_speeds_squared
from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species

__all__ = ["ScaledSum", "scaled_susceptibility", "susceptibility"]


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
    """χ_s in the wave frame, scaled so that it is entire in ω and free of cancellation.

    Parameters
    ----------
    omega : array_like of complex
        Angular frequency ω [rad/s], any shape; ω = 0 is allowed (the result is finite).
    species : Species
        As for :func:`susceptibility`.
    k_par, k_perp : complex or array_like of complex
        Wave-vector components [1/m], broadcast against ``omega``.
    B, tol : float
        Ignored (common signature).
    omega_ref : float
        Reference frequency [rad/s] of the scaling w = ω/ω_ref.

    Returns
    -------
    Susceptibility
        ``value`` = S_s = diag(w, w, 1) χ'_s diag(w, w, 1) and ``derivative`` = dS_s/dω,
        shaped ``shape + (3, 3)``, where χ'_s is χ_s in the orthonormal frame
        e₁ = (k∥, 0, −k⊥)/k, e₂ = ŷ, e₃ = k̂ = (k⊥, 0, k∥)/k, k = √(k∥² + k⊥²).

    Notes
    -----
    From the symmetric form χ_ij = (ω_p²/ω²)[−δ_ij + ∫ v_i v_j (k·∂f0/∂v)/(ω − k·v) d³v]
    (Krall & Trivelpiece 1973, ch. 9, from memory), writing k·v = ω − (ω − k·v) and using
    ∫ v_j k·∂f0/∂v d³v = −k_j removes one power of 1/ω exactly from each contraction
    with k (this module's own derivation)::

        k_i χ_ij = (ω_p²/ω) I_j,      I_j = ∫ v_j (k·∂f0/∂v)/(ω − k·v) d³v,
        k_i χ_ij k_j = ω_p² ∫ (k·∂f0/∂v)/(ω − k·v) d³v  (the electrostatic χ k²).

    In the notation of :func:`susceptibility` (q = k²/κ², β, g, C, M_n)::

        I_j = −2 [ q (V_j M_1 + β_j M_2) + g_j M_0/κ ],
        S_ab = (ω_p²/ω_ref²) B_ab  (a, b = 1, 2),   S_a3 = S_3a = ω_p²/(ω_ref k) I_a,
        S_33 = −2 ω_p² M_1/κ².

    The frame components are formed analytically, with Δ = w⊥² − w∥² (exact when the
    species is isotropic): β₁ = k⊥k∥Δ/(kκ), V₁ = −Vk⊥/k, g₁ = −Δk⊥k∥k/(2κ²), C₁₁ =
    w⊥²w∥²k²/(2κ²), C₂₂ = w⊥²/2; β₂ = V₂ = g₂ = 0 and B₁₂ = 0.  The −δ_ab of the bracket
    is combined with the C term, −1 − cM_1 = (c − 1) − cζM_0 (M_1 = −1 − ζZ, M_0 = −Z),
    with c₁ − 1 = −Δ(k⊥⁴w⊥² − k∥⁴w∥²)/κ⁴ and c₂ − 1 = k∥²Δ/κ², so that the isotropic
    transverse bracket is the product ζZ, not the difference −1 + (1 + ζZ).  No entry
    has a pole or a cancellation that grows as ω → 0.  det(S + diag(w², w², 1) −
    (kc/ω_ref)² diag(1, 1, 0)) = (ω/ω_ref)⁴ det Λ (a similarity by diag(1, 1, w)).

    References
    ----------
    N. A. Krall and A. W. Trivelpiece, *Principles of Plasma Physics* (1973), ch. 9
    (from memory); B. D. Fried and S. D. Conte (1961) for Z and the moments.
    """
    om, kpar, kperp = np.broadcast_arrays(
        np.asarray(omega, dtype=complex),
        np.asarray(k_par, dtype=complex),
        np.asarray(k_perp, dtype=complex),
    )
    wpar2, wperp2 = thermal_speeds_squared(species)
    delta = wperp2 - wpar2
    wp2 = species.plasma_frequency**2
    v = float(species.drift)
    with np.errstate(all="ignore"):
        kappa2 = kperp * kperp * wperp2 + kpar * kpar * wpar2
        kappa = np.sqrt(kappa2)
        k = np.sqrt(kperp * kperp + kpar * kpar)
        q = (k * k) / kappa2
        beta1 = kperp * kpar * delta / (k * kappa)
        v1 = -v * kperp / k
        g1 = -delta * kperp * kpar * k / (2.0 * kappa2)
        c1 = (k * k) ** 2 * wperp2 * wpar2 / (kappa2 * kappa2)
        c1m = -delta * (kperp**4 * wperp2 - kpar**4 * wpar2) / (kappa2 * kappa2)
        c2 = k * k * wperp2 / kappa2
        c2m = kpar * kpar * delta / kappa2
        zeta = (om - kpar * v) / kappa
        (m0, m1, m2, m3), (d0, d1, d2, d3) = landau_moments(zeta, order=3)
        zm0, dzm0 = zeta * m0, m0 + zeta * d0

        def bracket11(zm: np.ndarray, a0: np.ndarray, a1: np.ndarray, a2: np.ndarray,
                      a3: np.ndarray, const: complex | np.ndarray) -> np.ndarray:
            return (
                const
                - c1 * zm
                - 2.0 * q * (beta1 * beta1 * a3 + 2.0 * beta1 * v1 * a2 + v1 * v1 * a1)
                - 4.0 * g1 * (beta1 * a1 + v1 * a0) / kappa
            )

        b11 = bracket11(zm0, m0, m1, m2, m3, c1m)
        db11 = bracket11(dzm0, d0, d1, d2, d3, 0.0)
        b22 = c2m - c2 * zm0
        db22 = -c2 * dzm0
        i1 = -2.0 * (q * (v1 * m1 + beta1 * m2) + g1 * m0 / kappa)
        di1 = -2.0 * (q * (v1 * d1 + beta1 * d2) + g1 * d0 / kappa)
        s_t = wp2 / omega_ref**2
        s_l = wp2 / (omega_ref * k)
        value = np.zeros(om.shape + (3, 3), dtype=complex)
        deriv = np.zeros_like(value)
        value[..., 0, 0] = s_t * b11
        value[..., 1, 1] = s_t * b22
        value[..., 0, 2] = value[..., 2, 0] = s_l * i1
        value[..., 2, 2] = -2.0 * wp2 * m1 / kappa2
        dz = 1.0 / kappa
        deriv[..., 0, 0] = s_t * db11 * dz
        deriv[..., 1, 1] = s_t * db22 * dz
        deriv[..., 0, 2] = deriv[..., 2, 0] = s_l * di1 * dz
        deriv[..., 2, 2] = -2.0 * wp2 * d1 / (kappa2 * kappa)
    return Susceptibility(value=value, derivative=deriv, harmonics=0)


#: Moments per species handed to the linear maps of :class:`ScaledSum`: M_0 … M_3 and
#: their ζ-derivatives.
_MOMENTS = 8


class ScaledSum:
    r"""Σ_s S_s and Σ_s dS_s/dω of :func:`scaled_susceptibility` at one fixed k, all species
    at once (plain collisionless drifting bi-Maxwellians).

    Parameters
    ----------
    species : tuple of Species
        The species (see :meth:`for_species`).
    k_par, k_perp : complex
        Wave-vector components [1/m] (scalars).
    omega_ref : float
        As for :func:`scaled_susceptibility`.
    B, tol : float
        Ignored (common signature).

    Notes
    -----
    The formulas of :func:`scaled_susceptibility`, organized for fixed k: a call forms
    ζ_s = (ω − k∥V_s)/κ_s of every species in one array and evaluates the Landau moments
    there in one call; every entry of S and dS/dω is then a constant (the c − 1 terms)
    plus a combination of M_0 … M_3, dM_0 … dM_3 with coefficients α + ωβ (ω enters
    only through ζ in ζM_0 and M_0 + ζ dM_0). So the species sum is one fixed vector and
    two fixed matrices per k, computed here by running the assembly on unit vectors
    (:meth:`_assemble`), the ω-free part and the coefficient of ω separately. For a
    species without drift ζM_0 stays the product ω·(M_0/κ), as in the builder.
    """

    def __init__(self, species: tuple[Species, ...], *, k_par: complex, k_perp: complex,
                 omega_ref: float, B: float = 0.0, tol: float = 1e-14) -> None:
        kpar, kperp = complex(k_par), complex(k_perp)
        rows = []
        for s in species:
            wpar2, wperp2 = thermal_speeds_squared(s)
            delta = wperp2 - wpar2
            v = float(s.drift)
            kappa2 = kperp * kperp * wperp2 + kpar * kpar * wpar2
            kappa = np.sqrt(kappa2)
            k = np.sqrt(kperp * kperp + kpar * kpar)
            rows.append((
                kpar * v, kappa, kappa2, k * k / kappa2,  # shift, κ, κ², q
                kperp * kpar * delta / (k * kappa), -v * kperp / k,  # β₁, V₁
                -delta * kperp * kpar * k / (2.0 * kappa2),  # g₁
                (k * k) ** 2 * wperp2 * wpar2 / (kappa2 * kappa2),  # c₁
                -delta * (kperp**4 * wperp2 - kpar**4 * wpar2) / (kappa2 * kappa2),  # c₁ − 1
                k * k * wperp2 / kappa2, kpar * kpar * delta / kappa2,  # c₂, c₂ − 1
                s.plasma_frequency**2, s.plasma_frequency**2 / (omega_ref * k),  # ω_p², s_l
            ))
        self._c = tuple(np.array(col, dtype=complex) for col in zip(*rows, strict=True))
        self._s_t = 1.0 / omega_ref**2
        n_in = _MOMENTS * len(species)
        basis = np.eye(n_in, dtype=complex).reshape(n_in, len(species), _MOMENTS)
        zero = np.zeros((1, len(species), _MOMENTS), dtype=complex)
        const = np.concatenate(self._assemble(zero, "const"), axis=1).reshape(1, 18)
        fixed = np.concatenate(self._assemble(basis, "fixed"), axis=1).reshape(n_in, 18)
        slope = np.concatenate(self._assemble(basis, "slope"), axis=1).reshape(n_in, 18)
        self._const = const[0]
        self._fixed = np.ascontiguousarray(fixed.T.conj())  # for np.vecdot
        self._slope = np.ascontiguousarray(slope.T.conj())
        self._shift = self._c[0]
        self._kappa = self._c[1]

    @classmethod
    def for_species(cls, species: tuple[Species, ...], *, k_par: complex, k_perp: complex,
                    omega_ref: float, B: float = 0.0, tol: float = 1e-14) -> ScaledSum | None:
        """The sum, or None where the builder must serve: no species, a species that is
        not one plain collisionless bi-Maxwellian, or a constant that is not finite
        (κ_s = 0 or k = 0 included)."""
        if not species or not all(getattr(s, "is_plain_maxwellian", True)
                                  and s.collision_frequency == 0.0 for s in species):
            return None
        try:
            with np.errstate(all="ignore"):
                out = cls(tuple(species), k_par=k_par, k_perp=k_perp, omega_ref=omega_ref)
        except (ValueError, ZeroDivisionError, OverflowError):
            return None
        arrays = (*out._c, out._const, out._fixed, out._slope)
        if not all(np.all(np.isfinite(x)) for x in arrays) or np.any(out._kappa == 0):
            return None
        return out

    def __call__(self, omega: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Σ_s S_s and Σ_s dS_s/dω, shaped ``omega.shape + (3, 3)`` (call under
        ``np.errstate(all="ignore")``)."""
        om = np.asarray(omega, dtype=complex)
        w = om.reshape(-1, 1)
        zeta = (w - self._shift) / self._kappa  # (ω, species)
        moments, derivatives = landau_moments(zeta, order=3)
        x = np.stack([*moments, *derivatives], axis=-1)  # (ω, species, 8)
        x = x.reshape(w.shape[0], 1, self._shift.size * _MOMENTS)
        out = self._const + np.vecdot(self._fixed, x) + w * np.vecdot(self._slope, x)
        shape = om.shape + (3, 3)
        return out[:, :9].reshape(shape), out[:, 9:].reshape(shape)

    def _assemble(self, x: np.ndarray, part: str) -> tuple[np.ndarray, np.ndarray]:
        """S and dS/dω (m, 3, 3), summed over species, from the moments ``x`` (m, species,
        8): ``part`` "const" the terms free of moments, "fixed" the moment terms at ω = 0,
        "slope" their coefficient of ω (formulas of :func:`scaled_susceptibility`)."""
        (shift, kappa, kappa2, q, beta1, v1, g1, c1, c1m, c2, c2m, wp2, s_l) = self._c
        m0, m1, m2, m3, d0, d1, d2, d3 = (x[..., i] for i in range(_MOMENTS))
        zeta0 = -shift / kappa
        if part == "slope":  # ζM_0 = (ω/κ)M_0 + ζ₀M_0, M_0 + ζ dM_0 = (ω/κ)dM_0 + …
            zm0, dzm0, other, const = m0 / kappa, d0 / kappa, 0.0, 0.0
        else:
            zm0, dzm0 = zeta0 * m0, m0 + zeta0 * d0
            other, const = (0.0, 1.0) if part == "const" else (1.0, 0.0)
        b11 = const * c1m - c1 * zm0 - other * (
            2.0 * q * (beta1 * beta1 * m3 + 2.0 * beta1 * v1 * m2 + v1 * v1 * m1)
            + 4.0 * g1 * (beta1 * m1 + v1 * m0) / kappa)
        db11 = -c1 * dzm0 - other * (
            2.0 * q * (beta1 * beta1 * d3 + 2.0 * beta1 * v1 * d2 + v1 * v1 * d1)
            + 4.0 * g1 * (beta1 * d1 + v1 * d0) / kappa)
        b22 = const * c2m - c2 * zm0
        db22 = -c2 * dzm0
        i1 = other * -2.0 * (q * (v1 * m1 + beta1 * m2) + g1 * m0 / kappa)
        di1 = other * -2.0 * (q * (v1 * d1 + beta1 * d2) + g1 * d0 / kappa)
        s_t = self._s_t * wp2
        value = np.zeros(x.shape[:1] + (3, 3), dtype=complex)
        deriv = np.zeros_like(value)
        value[:, 0, 0] = (s_t * b11).sum(axis=-1)
        value[:, 1, 1] = (s_t * b22).sum(axis=-1)
        value[:, 0, 2] = value[:, 2, 0] = (s_l * i1).sum(axis=-1)
        value[:, 2, 2] = (other * -2.0 * wp2 * m1 / kappa2).sum(axis=-1)
        deriv[:, 0, 0] = (s_t * db11 / kappa).sum(axis=-1)
        deriv[:, 1, 1] = (s_t * db22 / kappa).sum(axis=-1)
        deriv[:, 0, 2] = deriv[:, 2, 0] = (s_l * di1 / kappa).sum(axis=-1)
        deriv[:, 2, 2] = (other * -2.0 * wp2 * d1 / (kappa2 * kappa)).sum(axis=-1)
        return value, deriv
