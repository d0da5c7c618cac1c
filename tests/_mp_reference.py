"""mpmath references shared by the overflow tests: the plasma dispersion function and
the unmagnetized Λ_yy, Λ_zz of bi-Maxwellians with k along z."""

from __future__ import annotations

import mpmath as mp

from kinroots.physics.plasma import C_LIGHT, EV


def plasma_z(zeta: mp.mpc) -> mp.mpc:
    """Plasma dispersion function Z(ζ) = i√π exp(−ζ²) erfc(−iζ), valid in the whole plane
    (B. D. Fried and S. D. Conte, *The Plasma Dispersion Function*, 1961; NIST DLMF
    7.2.3 for erfc)."""
    return 1j * mp.sqrt(mp.pi) * mp.exp(-zeta * zeta) * mp.erfc(-1j * zeta)


def weibel_lambdas(plasma, k, om) -> tuple[mp.mpc, mp.mpc]:
    """Λ_yy (= Λ_xx) and Λ_zz at SI k [1/m] and ω [rad/s] (mpmath numbers), k ∥ z, B = 0:
    Λ_yy = 1 − k²c²/ω² + Σ_s (ω_ps²/ω²)[−1 + (T⊥/T∥)(1 + ζ_s Z(ζ_s))] and
    Λ_zz = 1 + Σ_s (2ω_ps²/(k²w∥s²))(1 + ζ_s Z(ζ_s)), ζ_s = ω/(k w∥s) (E. S. Weibel,
    Phys. Rev. Lett. 2, 83 (1959); R. C. Davidson, Handbook of Plasma Physics vol. 1
    (1983), ch. 3.3; from memory)."""
    lyy = 1 - (k * C_LIGHT / om) ** 2
    lzz = mp.mpf(1)
    for s in plasma.species:
        w = mp.sqrt(2 * mp.mpf(s.temperature_par) * EV / s.mass)
        zeta = om / (k * w)
        g = 1 + zeta * plasma_z(zeta)
        wp2 = mp.mpf(s.plasma_frequency) ** 2
        lyy += wp2 / om**2 * (-1 + mp.mpf(s.temperature_perp) / s.temperature_par * g)
        lzz += 2 * wp2 / (k * w) ** 2 * g
    return lyy, lzz
