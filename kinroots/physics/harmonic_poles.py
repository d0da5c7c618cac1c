r"""Which cyclotron harmonics are poles that matter at k∥ = 0 (magnetized, angle 90°).

At k∥ = 0 exactly the magnetized susceptibilities are rational in ω, with a pole at every
harmonic ω = nΩ_s (n ≠ 0) of every species.  The residue of the electrostatic χ_s there
follows from the perpendicular form (Bernstein 1958; Stix 1992, ch. 11, from memory; the
form coded in :mod:`kinroots.physics.models.es_magnetized`)::

    χ_s = −(ω_ps²/Ω_s) Σ_n g_n(λ_s)/(ω − nΩ_s),   g_n = nΓ_n/λ,  Γ_n = e^{−λ}I_n(λ),
    Res_{ω=nΩ_s} χ_s = −(ω_ps²/Ω_s) g_n(λ_s),     λ_s = k⊥²w⊥s²/(2Ω_s²),

and the entries of the electromagnetic tensor (:mod:`kinroots.physics.models.em_magnetized`,
Stix 1992 ch. 10–11) have the residues (ω_ps²/Ω_s) times g_n, Γ_n', g_n − 2λΓ_n'/n,
βΓ_n/n (β = (w∥² + 2V²)/w⊥²) and (k⊥V/Ω_s) g_n/n.  Every one is bounded by

    R_n = (ω_ps²/|Ω_s|) · c_s · m_n,    c_s = 1 + β + |k⊥V/Ω_s|,
    m_n = max(|Γ_n|, |g_n|, |n g_n|, |nΓ_n'|, |2λΓ_n'|) ≤ (|n| + 2λ + 2) Γ̄_{|n|−1}(λ),

(m_n the bound of the truncation rule, :func:`~kinroots.physics.models._harmonics.bessel_weights`;
|g_n| ≤ Γ_{|n|−1}/2 and |Γ_n'| ≤ Γ_{|n|−1} from A&S 9.6.26, Γ_n decreasing in |n|) with the
closed-form upper bound Γ̄_m(λ) ≥ Γ_m(λ) obtained from the generating function
Σ_n I_n(λ) tⁿ = exp(λ(t + 1/t)/2) (Abramowitz & Stegun 1964, eq. 9.6.33): every term is
positive for t = eˢ > 0, so I_m(λ) eˢᵐ ≤ e^{λ cosh s}, and the best s = asinh(m/λ) gives

    Γ̄_m(λ) = exp(√(m² + λ²) − λ − m·asinh(m/λ))   (m ≥ 0; Γ̄_m(0) = 0 for m > 0),

the Chernoff bound of the Skellam distribution Γ_n (H. Chernoff, Ann. Math. Stat. 23,
493, 1952).  Γ̄_m decreases with m and increases with λ, so R_n/|n| decreases with |n|
and grows with k⊥ (checked against scipy's ``ive`` in tests/test_harmonic_poles.py).

Rule (the survey's resolution).  A harmonic is a pole to exclude when

    R_n > rtol · |nΩ_s|,

rtol the survey's relative root tolerance (``solver.tolerance``).  Otherwise the pole's
term changes D by less than rtol·|nΩ_s|/|ω − nΩ_s| times the unit (vacuum) term of D, a
lower bound on the scale of D: it is below the survey's resolution everywhere except
within rtol·|nΩ_s| of the harmonic, where its zero-pole pair (D₀ + R/(ω − nΩ) vanishes
R/|D₀| from the pole) cannot be told from the harmonic itself to the root tolerance.
Such a harmonic is treated as a regular point; its pair cancels in every count.

Cost.  Only the largest relevant |n| is computed (bisection on the decreasing bound,
about 60 evaluations of a closed form), never the harmonics themselves: listing them
then costs one entry per relevant harmonic inside the window, and
:func:`relevant_harmonic_count` counts them without listing, so memory and time do not
depend on the ion mass or on the number of harmonics in the window.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

from kinroots.physics.plasma import EV, Species

__all__ = [
    "MAX_LISTED_HARMONICS",
    "harmonic_residue_bound",
    "largest_relevant_harmonic",
    "log_weight_bound",
    "relevant_harmonic_count",
    "relevant_harmonics",
]

#: Most relevant harmonic poles :func:`relevant_harmonics` lists for one species and
#: range (a memory guard: 16 bytes each).  The case file refuses windows beyond
#: ``kinroots.io.limits.MAX_WINDOW_HARMONICS`` relevant poles long before this.
MAX_LISTED_HARMONICS = 1_000_000


def log_weight_bound(m: float, lam: float) -> float:
    """ln Γ̄_m(λ), the closed-form upper bound on ln Γ_m(λ) = ln(e^{−λ}I_m(λ)) (module doc).

    Parameters
    ----------
    m : float
        Harmonic number, m ≥ 0 (m < 0 is treated as 0: Γ_m ≤ 1).
    lam : float
        λ ≥ 0.

    Returns
    -------
    float
        ≤ 0; −inf for λ = 0 and m > 0.
    """
    m = max(float(m), 0.0)
    lam = float(lam)
    if m == 0.0:
        return 0.0
    if lam <= 0.0:
        return -math.inf
    # √(m² + λ²) − λ written without cancellation for m ≪ λ
    root = m * m / (math.hypot(m, lam) + lam)
    return root - m * math.asinh(m / lam)


def _parts(species: Species) -> Iterable[Species]:
    return (part for _, part in species.component_species())


def harmonic_residue_bound(species: Species, n: float, *, k_perp: float, B: float) -> float:
    """ln of R_n/|nΩ_s| (module doc), summed over the species' Maxwellian parts.

    Parameters
    ----------
    species : Species
        The species (its parts, if it has components, each bounded and added).
    n : float
        Harmonic number, |n| ≥ 1.
    k_perp : float
        |k⊥| [1/m].
    B : float
        Magnetic field [T], non-zero.

    Returns
    -------
    float
        ln(R_n/|nΩ_s|); −inf when every part's bound vanishes.
    """
    a = abs(float(n))
    total = 0.0
    for part in _parts(species):
        om_c = abs(part.cyclotron_frequency(B))
        if not (om_c > 0 and part.temperature_perp > 0 and part.temperature_par > 0):
            continue
        wperp2 = 2.0 * part.temperature_perp * EV / part.mass
        wpar2 = 2.0 * part.temperature_par * EV / part.mass
        lam = (k_perp * k_perp * wperp2) / (2.0 * om_c * om_c)
        beta = (wpar2 + 2.0 * part.drift * part.drift) / wperp2
        c = 1.0 + beta + abs(k_perp * part.drift) / om_c
        log_r = (math.log(part.plasma_frequency**2 / om_c) + math.log(c)
                 + math.log(a + 2.0 * lam + 2.0) + log_weight_bound(a - 1.0, lam)
                 - math.log(a * om_c))
        total += math.exp(log_r) if log_r > -700.0 else 0.0
    return math.log(total) if total > 0.0 else -math.inf


def largest_relevant_harmonic(species: Species, *, k_perp: float, B: float,
                              rtol: float) -> int:
    """The largest n ≥ 0 whose residue bound exceeds ``rtol`` · |nΩ_s| (0: none does).

    R_n/|nΩ_s| decreases with n (module doc), so the relevant harmonics are 1 … this
    number (and their negatives); found by bisection without listing any harmonic.
    """
    log_tol = math.log(rtol)

    def relevant(n: float) -> bool:
        return harmonic_residue_bound(species, n, k_perp=k_perp, B=B) > log_tol

    if not relevant(1.0):
        return 0
    lo, hi = 1.0, 2.0
    while relevant(hi):
        lo, hi = hi, 2.0 * hi
        if hi > 1e300:
            return int(1e300)
    while hi - lo > 1.0:
        mid = math.floor(0.5 * (lo + hi))
        if mid <= lo:
            break
        if relevant(float(mid)):
            lo = float(mid)
        else:
            hi = float(mid)
    return int(lo)


def _harmonic_range(species: Species, re_min: float, re_max: float, *, k_perp: float,
                    B: float, rtol: float) -> tuple[float, int, int]:
    """|Ω_s| and the first and last relevant n with re_min ≤ nΩ ≤ re_max (n ≠ 0 may still
    lie in the range; empty when first > last)."""
    om_c = abs(species.cyclotron_frequency(B))
    if not (om_c > 0 and math.isfinite(om_c)):
        return om_c, 1, 0
    n_top = largest_relevant_harmonic(species, k_perp=k_perp, B=B, rtol=rtol)
    lo = max(-n_top, math.ceil(max(re_min / om_c, -1e300)))
    hi = min(n_top, math.floor(min(re_max / om_c, 1e300)))
    return om_c, int(lo), int(hi)


def relevant_harmonic_count(species: Species, re_min: float, re_max: float, *,
                            k_perp: float, B: float, rtol: float) -> int:
    """How many harmonics nΩ_s (n ≠ 0) in [re_min, re_max] [rad/s] are poles that matter.

    Counted from the range of relevant n (:func:`largest_relevant_harmonic`), without
    listing them.
    """
    _, lo, hi = _harmonic_range(species, re_min, re_max, k_perp=k_perp, B=B, rtol=rtol)
    if lo > hi:
        return 0
    return hi - lo + 1 - (1 if lo <= 0 <= hi else 0)


def relevant_harmonics(species: Species, re_min: float, re_max: float, *, k_perp: float,
                       B: float, rtol: float) -> list[float]:
    """The harmonics nΩ_s [rad/s] (n ≠ 0) in [re_min, re_max] whose pole matters.

    Raises
    ------
    ValueError
        When there are more than :data:`MAX_LISTED_HARMONICS` of them (memory guard).
    """
    om_c, lo, hi = _harmonic_range(species, re_min, re_max, k_perp=k_perp, B=B, rtol=rtol)
    if hi - lo + 1 > MAX_LISTED_HARMONICS:
        raise ValueError(
            f"{hi - lo + 1} cyclotron harmonics of species {species.name!r} are poles of D "
            f"that matter in the range; at most {MAX_LISTED_HARMONICS} can be excluded")
    return [n * om_c for n in range(lo, hi + 1) if n != 0]
