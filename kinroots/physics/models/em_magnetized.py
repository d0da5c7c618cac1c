r"""Hot-plasma susceptibility tensor of a magnetized drifting bi-Maxwellian species.

Frame: B along z, k = (k_perp, 0, k_par), perturbations ∝ exp(i k·x − i ω t), tensor
index order x, y, z. SI throughout (ω in rad/s, k in 1/m, B in T, temperatures of
:class:`~kinroots.physics.plasma.Species` in eV). Ω_s = q_s B/m_s is signed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from kinroots.physics.models._harmonics import (
    SERIES_TERMS,
    BesselWeights,
    SpeciesSetup,
    evaluate,
    fixed_k_sum,
    gamma0_slope,
    gamma_table,
    harmonic_sums,
    landau_sign,
    landau_z,
    reciprocal_off_poles,
    scaled_moments,
    species_setup,
    with_series,
)
from kinroots.physics.models.base import Susceptibility
from kinroots.physics.plasma import Species
from kinroots.physics.zfunc import plasma_z_and_prime

__all__ = ["scaled_susceptibility", "susceptibility"]


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
    r"""Susceptibility tensor χ_s(ω, k) of a magnetized drifting bi-Maxwellian, any angle.

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
        Relative truncation tolerance of the cyclotron-harmonic sums (rule in
        :func:`kinroots.physics.models._harmonics.bessel_weights`).

    Returns
    -------
    Susceptibility
        ``value`` = χ_s and ``derivative`` = dχ_s/dω, each ``shape + (3, 3)`` with
        ``shape`` = ``omega.shape`` (scalar k) or the broadcast of ``omega``, ``k_par``
        and ``k_perp``; ``harmonics`` = N (harmonics −N … N kept).

    Raises
    ------
    ValueError
        If ``B == 0`` (use the unmagnetized model).

    Notes
    -----
    Symbols: w∥,⊥ = sqrt(2T∥,⊥/m), τ = T⊥/T∥, P = ω_p²/ω², a = k∥w∥, c_n = ω − nΩ,
    ζ_n = (ω − k∥V − nΩ)/a, Z_n = Z(ζ_n), F_n = 1 + ζ_nZ_n = −Z'(ζ_n)/2,
    λ = k⊥²w⊥²/(2Ω²), Γ_n = e^{−λ}I_n(λ), Γ_n' = dΓ_n/dλ, g_n = nΓ_n/λ, κ = k⊥/(k∥Ω).
    Coded (sums over n = −N … N)::

        Φ_n = 1 − (nΩ/a) Z_n − τ F_n                      (= −[(ω−k∥V)/a Z_n + (τ−1) F_n])
        Y_n = (τ c_n + nΩ) F_n + nΩ (V/w∥) Z_n
        M_n = c_n (c_n + nΩ/τ) F_n + (nΩ k∥V/τ)(F_n + (V/w∥) Z_n)

        χ_xx = −P Σ n g_n Φ_n           χ_xy = −iP Σ nΓ_n' Φ_n = −χ_yx
        χ_yy = −P Σ (n g_n − 2λΓ_n') Φ_n
        χ_xz = χ_zx = P κ Σ g_n Y_n      χ_yz = −iP κ Σ Γ_n' Y_n = −χ_zy
        χ_zz = (2P/a²) Σ Γ_n M_n

    Derived here from the general gyrotropic form (Stix 1992, eqs. 10-48 and 10-57, from
    memory: χ_s = (ω_p²/ω) Σ_n ∫d³v S_n/(ω − k∥v∥ − nΩ), with U and W operators on f)
    for f = F⊥(v⊥)F∥(v∥ − V), using ⟨J_n²⟩ = Γ_n, ⟨v⊥J_nJ_n'⟩ = (k⊥w⊥²/2Ω)Γ_n',
    ⟨v⊥²J_n'²⟩ = (w⊥²/2)(n²Γ_n/λ − 2λΓ_n') over F⊥ and the parallel moments
    ⟨1, t, t²⟩/(t − ζ) → Z, F, ζF. It agrees with the drifting bi-Maxwellian tensor of
    Gary (1993, ch. 7, from memory) and reduces to Stix (1992, ch. 10–11, from memory)
    for V = 0; the form Φ_n above shows the textbook bracket ξZ_n + A(1 + ζ_nZ_n), A = T⊥/T∥ − 1.
    χ_zx = χ_xz and χ_zy = −χ_yz hold term by term up to Σ_nΓ_n' = 0 (exact identity),
    even with drift. dχ/dω follows by differentiating each factor (dZ/dζ = Z',
    dF/dζ = Z + ζZ', dP/dω = −2P/ω).

    Landau continuation for Re k∥ < 0: Z is replaced by ``sZ(sζ)`` with s = −1 (see
    :func:`kinroots.physics.models._harmonics.landau_sign`), so that χ(k∥, V) =
    M χ(−k∥, −V) M with M = diag(1, 1, −1).

    Exact k∥ = 0: the ζ_n → ∞ limits are taken analytically (Z → −1/ζ, F → −1/(2ζ²)),
    giving rational terms with poles at ω = nΩ::

        Φ_n → ω/(ω − nΩ),   κ Y_n → −(k⊥/Ω) nΩV/(ω − nΩ),
        χ_zz → −P Σ Γ_n [1 + nΩ (w∥² + 2V²)/(w⊥² (ω − nΩ))].

    The anisotropy enters only χ_zz there, as T∥/T⊥ (Stix 1992, ch. 11, the ordinary
    mode of a bi-Maxwellian, from memory); the drift enters as the parallel energy 2V².

    k⊥ = 0 (parallel) needs no special case: g_{±1} = ±1/2, Γ'_{±1} = 1/2 at λ = 0.

    Non-finite ω, k or B and non-positive temperatures give NaN; overflow gives inf/NaN.
    The relative accuracy of dχ/dω degrades like ε|ζ_n|² for |ζ_n| ≫ 1 (cancellation in
    Z + ζZ'); χ itself does not (1 + ζZ is formed without cancellation by zfunc).

    References
    ----------
    T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 10–11, from memory.
    S. P. Gary, *Theory of Space Plasma Microinstabilities* (Cambridge, 1993), ch. 7,
    from memory.
    D. G. Swanson, *Plasma Waves*, 2nd ed. (IOP, 2003), ch. 4, from memory.
    """
    def rest(om: np.ndarray, kpar: Any, kperp: Any) -> Susceptibility:
        return evaluate(
            om, species, k_par=kpar, k_perp=kperp, B=B, tol=tol, model="em_magnetized",
            tail=(3, 3), parts=lambda o, setup, perp: _tensor_parts(o, setup, perp, species),
        )

    def series(om: np.ndarray, kperp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        t, dt, *_ = _series_parts(om, kperp, species, B)
        p = (species.plasma_frequency**2 / (om * om))[:, None, None]
        return p * t, p * dt - (2.0 * p / om[:, None, None]) * t

    out = with_series(omega, species, k_par=k_par, k_perp=k_perp, B=B, tail=(3, 3),
                      series=series, rest=rest)
    return rest(omega, k_par, k_perp) if out is None else out


def _tensor_parts(
    om: np.ndarray, setup: SpeciesSetup, perpendicular: bool, species: Species
) -> tuple[np.ndarray, np.ndarray]:
    """χ_s and dχ_s/dω from the formulas of :func:`susceptibility` (errors not checked).

    ``om`` has the result shape: any shape with scalar k, an (E, 1) column with array k
    (``setup`` then holds (E, 1) columns and per-element weights); ``perpendicular``
    selects the exact k∥ = 0 limit.  Returns arrays shaped ``om.shape + (3, 3)``.
    """
    kpar, kperp, wpar, wperp = setup.k_par, setup.k_perp, setup.w_par, setup.w_perp
    V, omega_c, lam, w = setup.drift, setup.omega_c, setup.lam, setup.weights
    sums = harmonic_sums(om, w)
    n_om = w.n * omega_c
    tau = species.temperature_perp / species.temperature_par
    # Weight matrices: columns (xx, xy, yy) for Φ, (xz, yz) for Y, (zz) for M.
    w_phi = np.stack([w.n * w.g, w.n * w.dgamma, w.n * w.g - 2.0 * lam * w.dgamma], axis=-1)
    w_y = np.stack([w.g, w.dgamma], axis=-1)
    w_all = np.concatenate([w_phi, w_y, w.gamma[..., None]], axis=-1)  # (…, 2N+1, 6)
    om1 = sums.omega
    # real (k∥ = 0) or complex (Landau) arrays, by branch
    s_phi: np.ndarray
    s_z: np.ndarray
    kappa: complex | np.ndarray
    zfac: complex | np.ndarray
    if perpendicular:
        r = reciprocal_off_poles(om1 - n_om, _residue_bound(w, lam, kperp, omega_c, V, wpar,
                                                          wperp, species), np.abs(n_om))
        r2 = r * r
        nr = sums.dot(r, w.n[:, None] * w_all)  # Σ n w_n/(ω − nΩ)
        nr2 = sums.dot(r2, w.n[:, None] * w_all)
        # Φ = ω r = 1 + nΩ r;  Y = −nΩV r;  M = 1 + β nΩ r
        beta = (wpar * wpar + 2.0 * V * V) / (wperp * wperp)
        s_phi = sums.total(w_phi) + omega_c * nr[..., 0:3]
        ds_phi = -omega_c * nr2[..., 0:3]
        s_y = -(omega_c * V) * nr[..., 3:5]
        ds_y = (omega_c * V) * nr2[..., 3:5]
        s_z = sums.total(w.gamma) + (beta * omega_c) * nr[..., 5]
        ds_z = -(beta * omega_c) * nr2[..., 5]
        kappa = kperp / omega_c
        zfac = -1.0
    else:
        s = landau_sign(kpar)
        a = kpar * wpar
        cn = om1 - n_om
        zt = (cn - kpar * V) * (1.0 / (s * a))
        zf, zp = plasma_z_and_prime(zt)
        # Z_eff(ζ_n) = sZ(sζ_n); q = dF/dζ = Z_eff + ζ Z_eff', F = 1 + ζZ_eff = −Z'(sζ)/2
        zf, q = landau_z(zt, zf, zp, s)
        # Every element is linear in Z, Z', F = −Z'/2, F' = q with coefficients
        # polynomial in c_n = ω − nΩ and n: contract the few full arrays once.
        wn = w.n[:, None] * w_all
        wb = np.concatenate([w_all, wn], axis=-1)  # columns: w_all (6), n·w_all (6)

        # one product for all seven arrays: Z, Z', F', c Z', c F', c² Z', c² F'
        buf = np.empty((7,) + zt.shape, dtype=complex)
        buf[0] = zf
        buf[1] = zp
        buf[2] = q
        np.multiply(cn, zp, out=buf[3])
        np.multiply(cn, q, out=buf[4])
        np.multiply(cn, buf[3], out=buf[5])
        np.multiply(cn, buf[4], out=buf[6])
        red = np.moveaxis(sums.dot(buf.reshape(7, -1, zt.shape[-1]), wb), 0, -2)
        red = red.reshape(om.shape + (7, wb.shape[-1]))
        a_zf, a_zp, a_q, a_czp, a_cq, a_c2zp, a_c2q = (red[..., i, :] for i in range(7))
        vw = V / wpar
        # a against the column blocks below: (E, 1, 1) for array k
        ab = a[..., None] if isinstance(a, np.ndarray) else a
        om_a = omega_c / ab
        # column blocks of wb: [0:3] Φ weights, [3:5] Y weights, [5] Γ; +6 for n·(…)
        s_phi = (
            sums.total(w_phi) - om_a * a_zf[..., 6:9] + (0.5 * tau) * a_zp[..., 0:3]
        )
        ds_phi = -(om_a / ab) * a_zp[..., 6:9] - (tau / ab) * a_q[..., 0:3]
        s_y = (
            -(0.5 * tau) * a_czp[..., 3:5]
            - (0.5 * omega_c) * a_zp[..., 9:11]
            + (omega_c * vw) * a_zf[..., 9:11]
        )
        ds_y = (
            -(0.5 * tau) * a_zp[..., 3:5]
            + (tau / ab) * a_cq[..., 3:5]
            + om_a * a_q[..., 9:11]
            + (om_a * vw) * a_zp[..., 9:11]
        )
        u = omega_c * kpar * V / tau
        s_z = (
            -0.5 * a_c2zp[..., 5]
            - (0.5 * omega_c / tau) * a_czp[..., 11]
            + u * (-0.5 * a_zp[..., 11] + vw * a_zf[..., 11])
        )
        ds_z = (
            -a_czp[..., 5]
            - (0.5 * omega_c / tau) * a_zp[..., 11]
            + a_c2q[..., 5] / a
            + (omega_c / (tau * a)) * a_cq[..., 11]
            + (u / a) * (a_q[..., 11] + vw * a_zp[..., 11])
        )
        kappa = kperp / (kpar * omega_c)
        zfac = 2.0 / (a * a)
    p = species.plasma_frequency**2 / (om * om)
    dp = -2.0 * p / om

    core = _tensor(s_phi, s_y, s_z, kappa, zfac)
    dcore = _tensor(ds_phi, ds_y, ds_z, kappa, zfac)
    value = p[..., None, None] * core
    derivative = dp[..., None, None] * core + p[..., None, None] * dcore
    return value, derivative


def _frame(
    kpar: complex | np.ndarray, kperp: complex | np.ndarray
) -> tuple[complex | np.ndarray, complex | np.ndarray, complex | np.ndarray]:
    """k = √(k∥² + k⊥²) and the frame cosines k∥/k, k⊥/k (e₁ = (c, 0, −s), k̂ = (s, 0, c)).

    Scalars for scalar k∥, k⊥; elementwise arrays for arrays.
    """
    k = np.sqrt(kpar * kpar + kperp * kperp)
    if not isinstance(k, np.ndarray):
        k = complex(k)
    return k, kpar / k, kperp / k


def _project(core: np.ndarray, h_row: np.ndarray, c: complex | np.ndarray,
             s: complex | np.ndarray) -> np.ndarray:
    """Wave-frame tensor from the xyz ``core`` (TT block) and the row k·core/ω (L row/col).

    ``c``, ``s`` are scalars or arrays shaped like ``core.shape[:-2]`` (array k).
    """
    out = np.empty(core.shape, dtype=complex)
    xx, xy, xz = core[..., 0, 0], core[..., 0, 1], core[..., 0, 2]
    yx, yy, yz = core[..., 1, 0], core[..., 1, 1], core[..., 1, 2]
    zx, zy, zz = core[..., 2, 0], core[..., 2, 1], core[..., 2, 2]
    out[..., 0, 0] = c * c * xx - c * s * (xz + zx) + s * s * zz
    out[..., 0, 1] = c * xy - s * zy
    out[..., 1, 0] = c * yx - s * yz
    out[..., 1, 1] = yy
    hx, hy, hz = h_row[..., 0], h_row[..., 1], h_row[..., 2]
    out[..., 2, 0] = c * hx - s * hz  # row: (k·core)·e₁/ω
    out[..., 2, 1] = hy
    out[..., 0, 2] = c * hx - s * hz  # column: e₁·(core·k)/ω, (core·k)_y = −(k·core)_y
    out[..., 1, 2] = -hy
    return out


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
    r"""χ_s in the wave frame, scaled so that it is entire in ω and finite at ω = 0.

    Parameters
    ----------
    omega : array_like of complex
        Angular frequency ω [rad/s], any shape; ω = 0 is allowed.
    species, k_par, k_perp, B, tol
        As for :func:`susceptibility`.
    omega_ref : float
        Reference frequency [rad/s] of w = ω/ω_ref.

    Returns
    -------
    Susceptibility
        ``value`` = S_s = diag(w, w, 1) χ'_s diag(w, w, 1), ``derivative`` = dS_s/dω,
        each ``shape + (3, 3)`` (``shape`` as for :func:`susceptibility`: scalar or array
        k), χ'_s = χ_s in the frame e₁ = (k∥, 0, −k⊥)/k, e₂ = ŷ, e₃ = k̂ = (k⊥, 0, k∥)/k;
        ``harmonics`` as for :func:`susceptibility`.

    Notes
    -----
    χ = P·T with P = ω_p²/ω² and T the sums of :func:`susceptibility` (same symbols).
    Three rewritings remove every cancellation that grows as ω → 0 (this module's own
    algebra from the formulas there, using Σ_n g_n = Σ_n Γ_n' = Σ_n nΓ_n = 0):

    1. Φ_n = −[u Z_n + (τ − 1) F_n], u = (ω − k∥V)/a, instead of 1 − (nΩ/a)Z_n − τF_n
       (equal because F_n − 1 = ζ_n Z_n): it is O(ω) for an isotropic, non-drifting
       species and is now a sum of products, not a difference of O(1) terms.
    2. Contraction with k (charge continuity) gives one factor ω exactly::

           (k·T)_x = −ω (k⊥/Ω) Σ g_n Φ_n,     (k·T)_y = −iω (k⊥/Ω) Σ Γ_n' Φ_n,
           (k·T)_z = (2ω/(k∥w∥²)) [ω Σ Γ_n F_n + (Ω/τ) Σ nΓ_n((1 − τ)F_n + (V/w∥)Z_n)],
           (T·k)_x,z = (k·T)_x,z,   (T·k)_y = −(k·T)_y,

       (from Y_n/Ω − nΦ_n = (ω/Ω)(1 − Φ_n) and nΩY_n/τ + M_n = ω c_n F_n +
       (nΩ/τ)[ω(F_n + (V/w∥)Z_n) + k∥V]), so that S_3a = (ω_p²/(ω_ref k²)) (k·T)·e_a/ω·k
       and S_a3 likewise carry no 1/ω.
    3. A second contraction gives the longitudinal element as the electrostatic form::

           S_33 = χ_LL = (2ω_p²/(k²w∥²)) Σ Γ_n [F_n + (nΩ/(τa)) Z_n]

       (isotropic: (2ω_p²/(k²w²))[1 + (ω/a) Σ Γ_n Z_n], Stix 1992, ch. 11, from memory).

    The transverse block is S_ab = (ω_p²/ω_ref²) e_a·T·e_b.  Exact k∥ = 0 uses the
    rational limits of :func:`susceptibility` with the harmonics ±n paired analytically,
    1/(ω − nΩ) ± 1/(ω + nΩ) = {2ω, 2nΩ}/(ω² − n²Ω²), so that ω = 0 is finite there too.

    What is not rewritten: the sums over ±n of the remaining terms are added harmonic
    by harmonic, so a transverse entry whose genuine value is O(ω²/Ω²) of its terms
    (the cold-limit χ_xx of a species at ω ≪ |Ω|) carries an absolute error of about
    ε·(ω/Ω) times those terms; that error does not grow as ω → 0.

    References
    ----------
    T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 10–11, from memory.
    """
    def rest(om: np.ndarray, kpar: Any, kperp: Any) -> Susceptibility:
        return evaluate(
            om, species, k_par=kpar, k_perp=kperp, B=B, tol=tol, model="em_magnetized",
            tail=(3, 3),
            parts=lambda o, setup, perp: _scaled_parts(o, setup, perp, species, omega_ref),
        )

    def series(om: np.ndarray, kperp: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        parts = _series_parts(om, kperp, species, B)
        return _scale(parts, np.zeros_like(kperp), kperp, species, omega_ref)

    out = with_series(omega, species, k_par=k_par, k_perp=k_perp, B=B, tail=(3, 3),
                      series=series, rest=rest)
    return rest(omega, k_par, k_perp) if out is None else out


def _scaled_parts(
    om: np.ndarray, setup: SpeciesSetup, perpendicular: bool, species: Species,
    omega_ref: float,
) -> tuple[np.ndarray, np.ndarray]:
    """S_s and dS_s/dω from the formulas of :func:`scaled_susceptibility`.

    ``om`` has the result shape: any shape with scalar k, an (E, 1) column with array k
    (``setup`` then holds (E, 1) columns and per-element weights); ``perpendicular``
    selects the exact k∥ = 0 limit.  Returns arrays shaped ``om.shape + (3, 3)``.
    """
    kpar, kperp, wpar, wperp = setup.k_par, setup.k_perp, setup.w_par, setup.w_perp
    V, omega_c, lam, w = setup.drift, setup.omega_c, setup.lam, setup.weights
    tau = species.temperature_perp / species.temperature_par
    if perpendicular:
        parts = _perpendicular_parts(om, w, lam, kperp, omega_c, V, wpar, wperp, species)
    else:
        parts = _oblique_parts(om, w, lam, kpar, kperp, omega_c, V, wpar, tau)
    return _scale(parts, kpar, kperp, species, omega_ref)


def _scale(parts: _FrameParts, kpar: complex | np.ndarray, kperp: complex | np.ndarray,
           species: Species, omega_ref: float) -> tuple[np.ndarray, np.ndarray]:
    """S_s and dS_s/dω from the xyz parts (projected on the wave frame and scaled)."""
    core, dcore, h, dh, s33, ds33 = parts
    k, cth, sth = _frame(kpar, kperp)
    wp2 = species.plasma_frequency**2
    value = _project(core, h, cth, sth)
    deriv = _project(dcore, dh, cth, sth)
    s_t = wp2 / omega_ref**2
    s_l = wp2 / (omega_ref * k)
    if isinstance(s_l, np.ndarray):
        s_l = s_l[..., None]  # against the (…, 2) row and column slices
    value[..., :2, :2] *= s_t
    deriv[..., :2, :2] *= s_t
    value[..., 2, :2] *= s_l
    value[..., :2, 2] *= s_l
    deriv[..., 2, :2] *= s_l
    deriv[..., :2, 2] *= s_l
    value[..., 2, 2] = (wp2 / (k * k)) * s33
    deriv[..., 2, 2] = (wp2 / (k * k)) * ds33
    return value, deriv


def _tensor(sp: np.ndarray, sy: np.ndarray, sz: np.ndarray, kappa: complex | np.ndarray,
            zfac: float | complex | np.ndarray) -> np.ndarray:
    """T from the Φ sums (xx, xy, yy), the Y sums (xz, yz) and the M sum (zz).

    ``kappa`` and ``zfac`` are scalars or arrays broadcast against ``sz`` (array k).
    """
    t = np.empty(sz.shape + (3, 3), dtype=complex)
    t[..., 0, 0] = -sp[..., 0]
    t[..., 0, 1] = -1j * sp[..., 1]
    t[..., 1, 0] = 1j * sp[..., 1]
    t[..., 1, 1] = -sp[..., 2]
    t[..., 0, 2] = kappa * sy[..., 0]
    t[..., 2, 0] = t[..., 0, 2]
    t[..., 1, 2] = -1j * kappa * sy[..., 1]
    t[..., 2, 1] = -t[..., 1, 2]
    t[..., 2, 2] = zfac * sz
    return t


_FrameParts = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def _oblique_parts(
    om: np.ndarray, w: BesselWeights, lam: complex | np.ndarray, kpar: complex | np.ndarray,
    kperp: complex | np.ndarray, omega_c: float, V: float, wpar: float, tau: float,
) -> _FrameParts:
    """k∥ ≠ 0: T, dT/dω, h = k·T/ω, dh/dω, Σ-form of S_33·k²/ω_p² and its derivative.

    Scalar k with weights shared by every ω, or (E, 1) columns ``om``, ``lam``, ``kpar``,
    ``kperp`` with per-element weights (array k); results shaped ``om.shape + …``.
    """
    sums = harmonic_sums(om, w)
    dot = sums.dot
    s = landau_sign(kpar)
    a = kpar * wpar
    om1 = sums.omega
    nw = w.n * omega_c
    cn = om1 - nw
    zt = (cn - kpar * V) * (1.0 / (s * a))
    zf, zp = plasma_z_and_prime(zt)
    f = -0.5 * zp  # F = 1 + ζZ_eff = −Z'(sζ)/2
    zf, fp = landau_z(zt, zf, zp, s)
    u = (om1 - kpar * V) / a
    vw = V / wpar
    # per-harmonic factors and their ω-derivatives (d/dω = (1/a) d/dζ)
    phi = -(u * zf + (tau - 1.0) * f)
    dphi = -(zf + u * zp + (tau - 1.0) * fp) / a
    y = (tau * cn + nw) * f + nw * vw * zf
    dy = tau * f + ((tau * cn + nw) * fp + nw * vw * zp) / a
    cm = cn * (cn + nw / tau)
    mm = cm * f + (nw * kpar * V / tau) * (f + vw * zf)
    dmm = (2.0 * cn + nw / tau) * f + (cm * fp + (nw * kpar * V / tau) * (fp + vw * zp)) / a
    w_phi = np.stack([w.n * w.g, w.n * w.dgamma, w.n * w.g - 2.0 * lam * w.dgamma], axis=-1)
    w_y = np.stack([w.g, w.dgamma], axis=-1)
    kappa = kperp / (kpar * omega_c)
    zfac = 2.0 / (a * a)
    core = _tensor(dot(phi, w_phi), dot(y, w_y), dot(mm, w.gamma), kappa, zfac)
    dcore = _tensor(dot(dphi, w_phi), dot(dy, w_y), dot(dmm, w.gamma), kappa, zfac)
    gx, dgx = dot(phi, w.g), dot(dphi, w.g)
    gy, dgy = dot(phi, w.dgamma), dot(dphi, w.dgamma)
    rest = dot((1.0 - tau) * f + vw * zf, w.n * w.gamma)
    drest = dot((1.0 - tau) * fp + vw * zp, w.n * w.gamma) / a
    fg, fpg = dot(f, w.gamma), dot(fp, w.gamma)
    dfg = fpg / a
    gz = om * fg + (omega_c / tau) * rest
    dgz = fg + om * dfg + (omega_c / tau) * drest
    pre = kperp / omega_c
    zpre = 2.0 / (kpar * wpar * wpar)
    h = np.stack([-pre * gx, -1j * pre * gy, zpre * gz], axis=-1)
    dh = np.stack([-pre * dgx, -1j * pre * dgy, zpre * dgz], axis=-1)
    nz = (w.n * w.gamma) * (omega_c / (tau * a))
    s33 = (2.0 / (wpar * wpar)) * (fg + dot(zf, nz))
    ds33 = (2.0 / (wpar * wpar)) * (fpg + dot(zp, nz)) / a
    return core, dcore, h, dh, s33, ds33


def _residue_bound(w: BesselWeights, lam: complex | np.ndarray, kperp: complex | np.ndarray,
                   omega_c: float, V: float, wpar: float, wperp: float, species: Species
                   ) -> np.ndarray:
    """A bound on the residue of every entry of χ_s at each harmonic nΩ (k∥ = 0) [rad/s].

    From the k∥ = 0 limits of :func:`susceptibility` the residues are (ω_p²/Ω) times g_n,
    Γ_n', g_n − 2λΓ_n'/n, βΓ_n/n and (k⊥V/Ω) g_n/n, (k⊥V/Ω)Γ_n'/n; their sum of moduli
    bounds each (harmonics on the last axis, like the weights).
    """
    beta = (wpar * wpar + 2.0 * V * V) / (wperp * wperp)
    c = 1.0 + beta + np.abs(kperp * V / omega_c)
    weight = np.abs(w.g) + (1.0 + 2.0 * np.abs(lam)) * np.abs(w.dgamma) + np.abs(w.gamma)
    out: np.ndarray = (species.plasma_frequency**2 / abs(omega_c)) * c * weight
    return out


def _perpendicular_parts(
    om: np.ndarray, w: BesselWeights, lam: complex | np.ndarray, kperp: complex | np.ndarray,
    omega_c: float, V: float, wpar: float, wperp: float, species: Species,
) -> _FrameParts:
    """k∥ = 0: the same parts from the rational limits, harmonics ±n paired.

    Shapes as for :func:`_oblique_parts` (scalar k, or (E, 1) columns for array k).
    """
    sums = harmonic_sums(om, w)
    dot = sums.dot
    pos = w.n > 0
    n = w.n[pos]
    g, dg, gam = w.g[..., pos], w.dgamma[..., pos], w.gamma[..., pos]
    dg0 = w.dgamma[..., w.n == 0]  # Γ_0': (1,) for shared weights, (E, 1) per element
    if dg0.ndim == 1:
        dg0 = dg0[0]
    om1 = sums.omega
    res = _residue_bound(w, lam, kperp, omega_c, V, wpar, wperp, species)[..., pos]
    dn = reciprocal_off_poles(om1 * om1 - (n * omega_c) ** 2, res, n * abs(omega_c))
    ddn = -2.0 * om1 * dn * dn
    beta = (wpar * wpar + 2.0 * V * V) / (wperp * wperp)
    ng = n * g
    n2dg = n * n * dg
    n2gam = n * n * gam
    e_ng, de_ng = dot(dn, ng), dot(ddn, ng)
    e_n2dg, de_n2dg = dot(dn, n2dg), dot(ddn, n2dg)
    e_yy, de_yy = dot(dn, ng - 2.0 * lam * dg), dot(ddn, ng - 2.0 * lam * dg)
    e_zz, de_zz = dot(dn, n2gam), dot(ddn, n2gam)
    return _perpendicular_assemble(
        om, (e_ng, de_ng, e_n2dg, de_n2dg, e_yy, de_yy, e_zz, de_zz), sums.total(w.gamma),
        dg0, lam, kperp, omega_c, V, beta)


def _series_parts(om: np.ndarray, kperp: np.ndarray, species: Species, B: float
                  ) -> _FrameParts:
    r"""The k∥ = 0 parts of :func:`_perpendicular_parts` from the moments of Γ_n.

    For 1-D arrays ω, k⊥ with |ω| ≥ ``SERIES_MIN_ZETA``·|k⊥|w⊥ (NaN where an input is not
    finite).  Each sum E[w] = Σ_{n≥1} w_n/(ω² − n²Ω²) is expanded as
    (1/ω²) Σ_j y^j Σ_{n≥1} n^{2j} w_n, y = Ω²/ω², and the inner sums are moments of Γ_n
    and of Γ_n' = ∂Γ_n/∂λ (:func:`~kinroots.physics.models._harmonics.scaled_moments`,
    ν_{2m} = μ_{2m}y^m, ν'_{2m} = ∂ν_{2m}/∂λ, symmetric in n, so Σ_{n≥1} = half of Σ_n)::

        w = n g_n = n²Γ_n/λ:    y^j S_j = ν_{2j+2}/(2λy)
        w = n²Γ_n':             y^j S_j = ν'_{2j+2}/(2y)
        w = n g_n − 2λΓ_n':     y^j S_j = ν_{2j+2}/(2λy) − λν'_{2j}   (j ≥ 1),
                                S_0 = 1/2 + λΓ_0'   (Σ_n Γ_n' = 0)
        w = n²Γ_n:              y^j S_j = ν_{2j+2}/(2y)

    and dE/dω = −(1/ω³) Σ_j (2j + 2) y^j S_j; Σ_n Γ_n = 1 (A&S 9.6.33 at t = 1).  Accuracy
    as for :func:`kinroots.physics.models.es_magnetized.perpendicular_series`.
    """
    omega_c = species.cyclotron_frequency(B)
    wpar, wperp, V = species.thermal_speed_par, species.thermal_speed_perp, species.drift
    with np.errstate(all="ignore"):
        lam = kperp * kperp * wperp * wperp / (2.0 * omega_c * omega_c)
        y = (omega_c * omega_c) / (om * om)
        nu, dnu = scaled_moments(lam, y)
        dg0 = gamma0_slope(lam)
        ly = lam * y
        sums = []
        for j_terms in (
            [nu[j + 1] / (2.0 * ly) for j in range(SERIES_TERMS)],
            [dnu[j + 1] / (2.0 * y) for j in range(SERIES_TERMS)],
            [0.5 + lam * dg0] + [nu[j + 1] / (2.0 * ly) - lam * dnu[j]
                                 for j in range(1, SERIES_TERMS)],
            [nu[j + 1] / (2.0 * y) for j in range(SERIES_TERMS)],
        ):
            sums.append(np.sum(j_terms, axis=0) / (om * om))
            sums.append(-np.sum([(2 * j + 2) * a for j, a in enumerate(j_terms)], axis=0)
                        / (om * om * om))
        beta = (wpar * wpar + 2.0 * V * V) / (wperp * wperp)
        e_sums: _PerpendicularSums = (sums[0], sums[1], sums[2], sums[3], sums[4], sums[5],
                                      sums[6], sums[7])
        return _perpendicular_assemble(om, e_sums, 1.0, dg0, lam, kperp, omega_c, V, beta)


#: The sums Σ_{n≥1} w_n/(ω² − n²Ω²) and their ω-derivatives of :func:`_perpendicular_parts`
#: for the weights w_n = n g_n, n²Γ_n', n g_n − 2λΓ_n', n²Γ_n (value, derivative pairs).
_PerpendicularSums = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray,
                           np.ndarray, np.ndarray, np.ndarray]


def _perpendicular_assemble(
    om: np.ndarray, e_sums: _PerpendicularSums, gamma_total: Any, dg0: Any,
    lam: complex | np.ndarray, kperp: complex | np.ndarray, omega_c: float, V: float,
    beta: float,
) -> _FrameParts:
    """The k∥ = 0 parts from the sums ``e_sums``, Σ_n Γ_n (``gamma_total``) and Γ_0'."""
    e_ng, de_ng, e_n2dg, de_n2dg, e_yy, de_yy, e_zz, de_zz = e_sums
    o2 = om * om
    t = np.empty(om.shape + (3, 3), dtype=complex)
    dt = np.empty_like(t)
    t[..., 0, 0] = -2.0 * o2 * e_ng
    dt[..., 0, 0] = -4.0 * om * e_ng - 2.0 * o2 * de_ng
    t[..., 0, 1] = -2j * omega_c * om * e_n2dg
    dt[..., 0, 1] = -2j * omega_c * (e_n2dg + om * de_n2dg)
    t[..., 1, 0] = -t[..., 0, 1]
    dt[..., 1, 0] = -dt[..., 0, 1]
    t[..., 1, 1] = -2.0 * o2 * e_yy + 2.0 * lam * dg0
    dt[..., 1, 1] = -4.0 * om * e_yy - 2.0 * o2 * de_yy
    t[..., 0, 2] = t[..., 2, 0] = -2.0 * kperp * V * om * e_ng
    dt[..., 0, 2] = dt[..., 2, 0] = -2.0 * kperp * V * (e_ng + om * de_ng)
    t[..., 1, 2] = 2j * kperp * V * omega_c * e_n2dg
    dt[..., 1, 2] = 2j * kperp * V * omega_c * de_n2dg
    t[..., 2, 1] = -t[..., 1, 2]
    dt[..., 2, 1] = -dt[..., 1, 2]
    t[..., 2, 2] = -gamma_total - 2.0 * beta * omega_c**2 * e_zz
    dt[..., 2, 2] = -2.0 * beta * omega_c**2 * de_zz
    h = np.stack([-2.0 * kperp * om * e_ng, -2j * kperp * omega_c * e_n2dg,
                  -2.0 * kperp * kperp * V * e_ng], axis=-1)
    dh = np.stack([-2.0 * kperp * (e_ng + om * de_ng), -2j * kperp * omega_c * de_n2dg,
                   -2.0 * kperp * kperp * V * de_ng], axis=-1)
    s33 = -2.0 * kperp * kperp * e_ng
    ds33 = -2.0 * kperp * kperp * de_ng
    return t, dt, h, dh, s33, ds33


#: :meth:`ScaledSum.resonant_columns`: a species-harmonic's Landau exponential is kept
#: apart from the sum where Re(−ζ_n²) exceeds this (|exp(−ζ_n²)| > e² ≈ 7.4).
RESONANT_MIN = 2.0

#: ln 2 in two parts (Cody–Waite; as in :mod:`kinroots.physics.zfunc`): p·_LN2_HI is
#: exact for integer |p| < 2^20.
_LN2_HI = 0.693145751953125
_LN2_LO = 1.4286068203094173e-06


@dataclass(frozen=True)
class ResonantTerm:
    """S_E = c·L g Rᵀ, one species-harmonic's exponential part of S, per ω
    (:meth:`ScaledSum.resonant_term`); c = ``coef``·2^``exponent``.

    Attributes
    ----------
    coef, dcoef : ndarray of complex, shape (m,)
        Mantissas of c and dc/dω (the same power 2^``exponent``).
    exponent : ndarray of int, shape (m,)
        Binary exponent p of c.
    L, dL, R, dR : ndarray of complex, shape (m, 3, 2)
        The factors and their ω-derivatives.
    g : ndarray of complex, shape (m, 2, 2)
        The symmetric 2×2 Gram matrix (constant in ω).
    det_g : ndarray of complex, shape (m,)
        det g, formed without cancellation.
    """

    coef: np.ndarray
    dcoef: np.ndarray
    exponent: np.ndarray
    L: np.ndarray
    dL: np.ndarray
    R: np.ndarray
    dR: np.ndarray
    g: np.ndarray
    det_g: np.ndarray


def _resonant_constants(setup: SpeciesSetup, tau: float, wp2: float) -> np.ndarray:
    """Per harmonic of one species, the constants of :meth:`ScaledSum.resonant_term`:
    rows n, nΩ, k∥V, k∥w∥, τ, ω_p², e_x, e_z, g₁₁, g₁₂, g₂₂, det g."""
    w = setup.weights
    n = w.n
    lam = setup.lam
    kpar, kperp, wperp, om_c = setup.k_par, setup.k_perp, setup.w_perp, setup.omega_c
    gam = gamma_table(lam, w.harmonics + 2)  # Γ_0 … Γ_{N+2}
    m = np.abs(n).astype(int)
    g_m, g_m1, g_m2 = gam[m], gam[m + 1], gam[m + 2]
    zero = n == 0
    mm = np.maximum(m, 1)
    detg = np.where(zero, lam * (g_m - g_m1) * (g_m + g_m1),
                    (g_m - g_m1) * (g_m + g_m1) - (m / (mm + 1.0)) * g_m * (g_m - g_m2))
    ez = np.where(zero, math.sqrt(2.0) / (kpar * wperp), kperp / (kpar * om_c))
    g11 = np.where(zero, w.gamma, w.g / np.where(zero, 1.0, n))
    g12 = np.where(zero, -(kperp * wperp / (math.sqrt(2.0) * om_c)) * w.dgamma, -w.dgamma)
    g22 = n * w.g - 2.0 * lam * w.dgamma
    size = n.size
    return np.array([n, n * om_c, np.full(size, kpar * setup.drift),
                     np.full(size, kpar * setup.w_par), np.full(size, tau), np.full(size, wp2),
                     n, ez, g11, g12, g22, detg], dtype=complex)


#: Values per species of the contracted rows of :class:`ScaledSum`: Z_eff, Z', F' against
#: the 7 weight columns (21), c Z', c F' against (g, Γ', Γ) (6), c̃ Z', c̃ F' against Γ (2).
_PER_SPECIES = 29


class ScaledSum:
    r"""Σ_s S_s and Σ_s dS_s/dω of :func:`scaled_susceptibility` at one fixed k, all species
    at once (plain collisionless drifting bi-Maxwellians, k∥ ≠ 0).

    Parameters
    ----------
    species : tuple of Species
        The species (see :meth:`for_species` for when this class applies).
    k_par, k_perp : complex
        Wave-vector components [1/m] (scalars, k∥ ≠ 0).
    B, tol, omega_ref : float
        As for :func:`scaled_susceptibility`.

    Notes
    -----
    The formulas of :func:`scaled_susceptibility` (k∥ ≠ 0), organized for fixed k. Every
    per-harmonic factor there is a combination of Z_eff, Z', F' = dF/dζ, c_n Z', c_n F',
    c̃_n Z' and c̃_n F' (c_n = ω − nΩ, c̃_n = c_n (c_n + nΩ/τ), F = −Z'/2) with
    coefficients that depend on ω (not on n) or on n only through the weights. A call
    forms ζ_n of every species in one array, evaluates Z and Z' there in one call, builds
    these seven rows harmonic by harmonic (so the products with c_n introduce no
    cancellation where c_n is small) and contracts them with seven weight columns
    (n g_n, nΓ_n', n g_n − 2λΓ_n', g_n, Γ_n', Γ_n, nΓ_n) built once here.

    What follows is linear in those 29 sums per species, with coefficients of the form
    α + ωβ (u = (ω − k∥V)/a, and ω itself in the longitudinal row): the species sum,
    the tensor assembly, the projection on the wave frame and the scale factors of
    :func:`scaled_susceptibility` are therefore one fixed complex matrix for α and one
    for β, computed here once per k by running the assembly (:meth:`_assemble`) on unit
    vectors. A call costs one Z evaluation, the contractions and two small products.
    """

    def __init__(self, species: tuple[Species, ...], *, k_par: complex, k_perp: complex,
                 B: float, tol: float, omega_ref: float) -> None:
        kpar, kperp = complex(k_par), complex(k_perp)
        consts = []
        cols = []
        slices = []
        start = 0
        nw_all = []
        nwt_all = []
        shift_all = []
        inv_sa_all = []
        self.harmonics: dict[str, int] = {}
        resonant: list[np.ndarray] = []
        sign = landau_sign(kpar)
        for s in species:
            setup = species_setup(s, k_par=kpar, k_perp=kperp, B=B, tol=tol,
                                  model="em_magnetized")
            w = setup.weights
            self.harmonics[s.name] = w.harmonics
            lam = setup.lam
            tau = s.temperature_perp / s.temperature_par
            omega_c = setup.omega_c
            n = w.n
            cols.append(np.array([n * w.g, n * w.dgamma, n * w.g - 2.0 * lam * w.dgamma,
                                  w.g, w.dgamma, w.gamma, n * w.gamma]).conj())
            size = n.size
            slices.append(slice(start, start + size))
            start += size
            a = kpar * setup.w_par
            nw_all.append(n * omega_c)
            nwt_all.append(n * omega_c / tau)
            shift_all.append(np.full(size, kpar * setup.drift))
            inv_sa_all.append(np.full(size, 1.0 / (sign * a)))
            consts.append((tau, a, setup.drift / setup.w_par, omega_c, kpar * setup.drift,
                           setup.w_par**2, s.plasma_frequency**2))
            resonant.append(_resonant_constants(setup, tau, s.plasma_frequency**2))
        self._cols = cols
        self._slices = slices
        self._nw = np.concatenate(nw_all)
        self._nwt = np.concatenate(nwt_all)
        self._shift = np.concatenate(shift_all)
        self._inv_sa = np.concatenate(inv_sa_all)
        self._sign = sign
        #: per column (species and harmonic): the constants of :meth:`resonant_term`
        self._res = np.concatenate(resonant, axis=1)
        # real k: no column can be picked unless s·Im ω < −√RESONANT_MIN·min|k∥w∥| (then
        # (Im sζ)² > RESONANT_MIN), a test that spares the tracer's single-ω calls the
        # (ω, column) array; complex k: 0, always the full test
        real_k = not (np.any(self._res[3].imag) or np.any(self._res[2].imag))
        self._gate = (math.sqrt(RESONANT_MIN) * float(np.min(np.abs(self._res[3].real)))
                      if real_k else 0.0)
        self._c = tuple(np.array(c, dtype=complex) for c in zip(*consts, strict=True))
        k, cth, sth = _frame(kpar, kperp)
        self._frame = (k, cth, sth)
        self._kperp = kperp
        self._kpar = kpar
        self._scale = (1.0 / omega_ref**2, 1.0 / (omega_ref * k), 1.0 / (k * k))
        self._omega_ref = float(omega_ref)
        # the linear maps: outputs (value, derivative: 18) from the 29 sums per species
        n_in = _PER_SPECIES * len(species)
        basis = np.eye(n_in, dtype=complex)
        zero = np.zeros((n_in, 1), dtype=complex)
        fixed = np.concatenate(self._assemble(zero, basis, linear=False), axis=1)
        slope = np.concatenate(self._assemble(zero, basis, linear=True), axis=1)
        # rows: outputs; conjugated for np.vecdot (which conjugates its first argument)
        self._fixed = np.ascontiguousarray(fixed.reshape(n_in, 18).T.conj())
        self._slope = np.ascontiguousarray(slope.reshape(n_in, 18).T.conj())

    @classmethod
    def for_species(cls, species: tuple[Species, ...], *, k_par: complex, k_perp: complex,
                    B: float, tol: float, omega_ref: float) -> ScaledSum | None:
        """The sum, or None where the builders' general path must serve
        (:func:`kinroots.physics.models._harmonics.fixed_k_sum`)."""
        out: ScaledSum | None = fixed_k_sum(cls, species, k_par=k_par, k_perp=k_perp, B=B,
                                            tol=tol, omega_ref=omega_ref)
        return out

    def constant_arrays(self) -> tuple[np.ndarray, ...]:
        """The per-k arrays (checked finite by ``fixed_k_sum``)."""
        return (self._nw, self._nwt, self._inv_sa, self._fixed, self._slope, self._res)

    def __call__(self, omega: np.ndarray, remove: np.ndarray | None = None
                 ) -> tuple[np.ndarray, np.ndarray]:
        """Σ_s S_s and Σ_s dS_s/dω, shaped ``omega.shape + (3, 3)`` (call under
        ``np.errstate(all="ignore")``; non-finite ω give non-finite entries).

        With ``remove`` (one column index per ω, flattened; −1 for none, see
        :meth:`resonant_columns`), the Landau exponential of that species-harmonic is
        left out: its Z(sζ) and Z'(sζ) are replaced by the regular parts −Z(−sζ) and
        Z'(−sζ) of the reflection Z(ζ) = 2i√π exp(−ζ²) − Z(−ζ) (NIST DLMF 7.4.3), which
        satisfy the same equation Z' = −2(1 + ζZ), so every rewriting of the sum holds
        for them. The sum is then S − S_E, S_E the part given by :meth:`resonant_term`.
        """
        om = np.asarray(omega, dtype=complex)
        w = om.reshape(-1, 1)
        cn = w - self._nw
        zt = (cn - self._shift) * self._inv_sa
        zf, zp = plasma_z_and_prime(zt)
        if remove is not None:
            rows_r = np.flatnonzero(remove >= 0)
            cols_r = remove[rows_r]
            zr, zpr = plasma_z_and_prime(-zt[rows_r, cols_r])
            zf[rows_r, cols_r] = -zr
            zp[rows_r, cols_r] = zpr
        m = w.shape[0]
        rows = np.empty((m, 7, zt.shape[1]), dtype=complex)
        if self._sign < 0:
            np.negative(zf, out=rows[:, 0])
            np.subtract(rows[:, 0], zt * zp, out=rows[:, 2])
        else:
            rows[:, 0] = zf
            np.add(zf, zt * zp, out=rows[:, 2])
        rows[:, 1] = zp
        np.multiply(cn, zp, out=rows[:, 3])
        np.multiply(cn, rows[:, 2], out=rows[:, 4])
        cm = cn * (cn + self._nwt)
        np.multiply(cm, zp, out=rows[:, 5])
        np.multiply(cm, rows[:, 2], out=rows[:, 6])
        sums = np.empty((m, len(self._cols), _PER_SPECIES), dtype=complex)
        for i, (cols, sl) in enumerate(zip(self._cols, self._slices, strict=True)):
            np.vecdot(cols, rows[:, 0:3, None, sl], out=sums[:, i, 0:21].reshape(m, 3, 7))
            np.vecdot(cols[3:6], rows[:, 3:5, None, sl], out=sums[:, i, 21:27].reshape(m, 2, 3))
            np.vecdot(cols[5], rows[:, 5:7, sl], out=sums[:, i, 27:29])
        x = sums.reshape(m, 1, len(self._cols) * _PER_SPECIES)
        out = np.vecdot(self._fixed, x) + w * np.vecdot(self._slope, x)
        shape = om.shape + (3, 3)
        return out[:, :9].reshape(shape), out[:, 9:].reshape(shape)

    def resonant_columns(self, omega: np.ndarray) -> np.ndarray:
        """Per ω (flattened), the column (species and harmonic) whose Landau exponential
        |exp(−ζ_n²)| is the largest, where it exceeds exp(:data:`RESONANT_MIN`); −1
        elsewhere (and at ω = 0 or non-finite ω).

        Only exponentials that the reflection of :meth:`__call__` carries count: those
        with Im(sζ_n) < 0 (below the real axis for Re k∥ > 0). Call under
        ``np.errstate(all="ignore")``.
        """
        w = np.asarray(omega, dtype=complex).reshape(-1, 1)
        if self._gate > 0 and not np.any(self._sign * w.imag < -self._gate):
            return np.full(w.shape[0], -1)
        zt = (w - self._nw - self._shift) * self._inv_sa
        x = np.where(zt.imag < 0.0, (zt.imag - zt.real) * (zt.imag + zt.real), -np.inf)
        col = np.argmax(x, axis=1)
        best = x[np.arange(w.shape[0]), col]
        ok = (best > RESONANT_MIN) & np.isfinite(w[:, 0]) & (w[:, 0] != 0)
        return np.where(ok, col, -1)

    def resonant_parts(self, omega: np.ndarray, cols: np.ndarray
                       ) -> tuple[np.ndarray, np.ndarray, ResonantTerm]:
        """S − S_E, its ω-derivative (vacuum not added) and S_E (:meth:`resonant_term`)
        at the flattened ``omega``, one column ≥ 0 per ω (:meth:`resonant_columns`)."""
        a, da = self(omega, remove=cols)
        return a.reshape(-1, 3, 3), da.reshape(-1, 3, 3), self.resonant_term(omega, cols)

    def resonant_term(self, omega: np.ndarray, cols: np.ndarray) -> ResonantTerm:
        r"""The part S_E of Σ_s S_s carried by the Landau exponential of column ``cols``
        (one column ≥ 0 per ω of the flattened ``omega``), in factored form.

        Notes
        -----
        With E = s·2i√π exp(−ζ²) the exponential part of Z_eff(ζ_n) (s the Landau sign),
        the formulas of :func:`susceptibility` give for one harmonic n, since F = 1 + ζZ
        carries ζE, Φ_n → −φE, φ = nΩ/a + τζ_n, and (this module's algebra)
        Y_n → c_n φE and M_n → c_n² φE/τ::

            χ_E = (ω_p²/ω²) φ E · H G Hᴴ,   H = diag(1, i, 1),
            G = g₁₁ e eᵀ + g₁₂ (e fᵀ + f eᵀ) + g₂₂ f fᵀ,   f = ŷ,

        with, for n ≠ 0, e = (n, 0, κc_n), κ = k⊥/(k∥Ω), g₁₁ = Γ_n/λ, g₁₂ = −Γ_n',
        g₂₂ = n²Γ_n/λ − 2λΓ_n', and for n = 0, e = (0, 0, √2 c_n/(k∥w⊥)), g₁₁ = Γ₀,
        g₁₂ = −(k⊥w⊥/(√2Ω))Γ₀', g₂₂ = −2λΓ₀'. This is the v⊥-average of the rank-one
        matrices of the resonant particles (Stix 1992, eq. 10-57, from memory): G is a
        Gram matrix of J_n and v⊥J_n', so the three-by-three χ_E has rank two
        (det χ_E = 0) and, at small λ, nearly rank one. Its one small invariant is
        det g, formed without cancellation from I_n' = I_{n+1} + (n/λ)I_n and
        2nI_n/λ = I_{n−1} − I_{n+1} (Abramowitz & Stegun 1964, eq. 9.6.26)::

            det g = (Γ_m − Γ_{m+1})(Γ_m + Γ_{m+1}) − (m/(m+1)) Γ_m (Γ_m − Γ_{m+2}),
                    m = |n| ≥ 1,
            det g = λ (Γ₀ − Γ₁)(Γ₀ + Γ₁),   n = 0.

        In the wave frame S_E = Q χ_E Qᵀ, Q = diag(w, w, 1)·(rows e₁, e₂, k̂), so
        S_E = c · L g Rᵀ with c = (ω_p²/ω²)φE and the 3×2 matrices L = Q[e, iŷ],
        R = Q[e, −iŷ]. E is returned as a mantissa times 2^p (never overflowing).
        """
        om = np.asarray(omega, dtype=complex).ravel()
        n, nw, kv, a, tau, wp2, ex, ez, g11, g12, g22, detg = self._res[:, cols]
        cn = om - nw
        zeta = (cn - kv) / a
        x = ((zeta.imag - zeta.real) * (zeta.imag + zeta.real)).real  # Re(−ζ²)
        p = np.floor(x / math.log(2.0))
        # Cody–Waite: p·ln 2 in two parts, so that x − p ln 2 keeps its digits
        mant = np.exp((x - p * _LN2_HI - p * _LN2_LO) - 2j * (zeta.real * zeta.imag).real)
        ee = (self._sign * 2j * math.sqrt(math.pi)) * mant
        pw = wp2 / (om * om)
        phi = nw / a + tau * zeta
        coef = ee * pw * phi
        dcoef = coef * (-2.0 * zeta / a) + ee * pw * (tau / a - 2.0 * phi / om)
        _, cth, sth = self._frame
        ref = self._omega_ref
        wr = om / ref
        u = cth * ex - sth * ez * cn
        m = om.size
        L = np.zeros((m, 3, 2), dtype=complex)
        dL = np.zeros((m, 3, 2), dtype=complex)
        L[:, 0, 0] = wr * u
        L[:, 2, 0] = sth * ex + cth * ez * cn
        L[:, 1, 1] = 1j * wr
        dL[:, 0, 0] = u / ref - wr * sth * ez
        dL[:, 2, 0] = cth * ez
        dL[:, 1, 1] = 1j / ref
        R = L.copy()
        dR = dL.copy()
        R[:, 1, 1] = -L[:, 1, 1]
        dR[:, 1, 1] = -dL[:, 1, 1]
        g = np.stack([np.stack([g11, g12], axis=-1), np.stack([g12, g22], axis=-1)], axis=-2)
        return ResonantTerm(coef, dcoef, p.astype(np.int64), L, dL, R, dR, g, detg)

    def _assemble(self, w: np.ndarray, x: np.ndarray,
                  linear: bool) -> tuple[np.ndarray, np.ndarray]:
        """S and dS/dω (m, 3, 3) from the 29 sums per species ``x`` (m, species · 29) at
        ω = ``w`` (m, 1); with ``linear`` the coefficient of ω instead (formulas of
        :func:`_oblique_parts`, summed over species with the weights ω_p²)."""
        m = x.shape[0]
        x = x.reshape(m, -1, _PER_SPECIES)
        A = x[..., 0:21].reshape(m, -1, 3, 7)  # (point, species, row, column)
        Bs = x[..., 21:27].reshape(m, -1, 2, 3)
        C = x[..., 27:29]
        tau, a, vw, om_c, kv, wpar2, wp2 = self._c
        zf, zp, fp = A[:, :, 0], A[:, :, 1], A[:, :, 2]  # (point, species, column)
        one = 0.0 if linear else 1.0  # drops every term without a factor ω
        u = (1.0 / a) + 0.0 * w if linear else (w - kv) / a  # (point, species)
        # columns 0-4: Φ sums (n g, nΓ', n g − 2λΓ') and their g, Γ' analogues
        ph = -u[..., None] * zf[..., 0:5] + (one * 0.5 * (tau - 1.0))[:, None] * zp[..., 0:5]
        dph = -(one * zf[..., 0:5] + u[..., None] * zp[..., 0:5]
                + (one * (tau - 1.0))[:, None] * fp[..., 0:5]) / a[:, None]
        ov = om_c * vw
        y = one * (-(0.5 * tau)[:, None] * Bs[:, :, 0, 0:2]
                   - (0.5 * om_c)[:, None] * zp[..., 0:2] + ov[:, None] * zf[..., 0:2])
        dy = one * (-(0.5 * tau)[:, None] * zp[..., 3:5] + (
            tau[:, None] * Bs[:, :, 1, 0:2] + om_c[:, None] * fp[..., 0:2]
            + ov[:, None] * zp[..., 0:2]) / a[:, None])
        okt = om_c * kv / tau
        mm = one * (-0.5 * C[..., 0] + okt * (-0.5 * zp[..., 6] + vw * zf[..., 6]))
        dmm = one * (-Bs[:, :, 0, 2] - (0.5 * om_c / tau) * zp[..., 6]
                     + (C[..., 1] + okt * (fp[..., 6] + vw * zp[..., 6])) / a)
        rest = (-0.5 * (1.0 - tau)) * zp[..., 6] + vw * zf[..., 6]
        drest = ((1.0 - tau) * fp[..., 6] + vw * zp[..., 6]) / a
        fg = -0.5 * zp[..., 5]
        fpg = fp[..., 5]
        ot = om_c / tau
        if linear:  # coefficients of ω in ω fg + (Ω/τ) rest and fg + ω dfg + (Ω/τ) drest
            gz, dgz = fg, fpg / a
        else:
            gz = w * fg + ot * rest
            dgz = fg + w * (fpg / a) + ot * drest
        s33 = one * (fg + (ot / a) * zf[..., 6])
        ds33 = one * (fpg + (ot / a) * zp[..., 6]) / a
        # species sums, weighted by ω_p² (and κ, 2/a² for the Y and M sums)
        kperp, kpar = self._kperp, self._kpar
        kap = wp2 * kperp / (kpar * om_c)
        zfac = wp2 * 2.0 / (a * a)
        pre = wp2 * kperp / om_c
        zpre = wp2 * 2.0 / (kpar * wpar2)
        c33 = wp2 * 2.0 / wpar2
        sp = np.einsum("s,msc->mc", wp2, ph[..., 0:3])
        dsp = np.einsum("s,msc->mc", wp2, dph[..., 0:3])
        sy = np.einsum("s,msc->mc", kap, y)
        dsy = np.einsum("s,msc->mc", kap, dy)
        sz = mm @ zfac
        dsz = dmm @ zfac
        h = np.stack([-(ph[..., 3] @ pre), -1j * (ph[..., 4] @ pre), gz @ zpre], axis=-1)
        dh = np.stack([-(dph[..., 3] @ pre), -1j * (dph[..., 4] @ pre), dgz @ zpre], axis=-1)
        k, cth, sth = self._frame
        s_t, s_l, s_33 = self._scale
        value = _project(_tensor(sp, sy, sz, 1.0, 1.0), h, cth, sth)
        deriv = _project(_tensor(dsp, dsy, dsz, 1.0, 1.0), dh, cth, sth)
        for out in (value, deriv):
            out[:, :2, :2] *= s_t
            out[:, 2, :2] *= s_l
            out[:, :2, 2] *= s_l
        value[:, 2, 2] = s_33 * (s33 @ c33)
        deriv[:, 2, 2] = s_33 * (ds33 @ c33)
        return value, deriv
