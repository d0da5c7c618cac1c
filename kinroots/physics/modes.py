"""Mode identity of a root: field polarization, handedness, δB/δE and density responses.

Given a root (ω, k) of the dispersion relation, the wave's electric field δE is the null
vector of the wave operator Λ(ω, k) = ε − n²(I − k̂k̂) (electromagnetic models) or lies
along k (electrostatic models).  From δE follow the magnetic fluctuation (Faraday's law)
and each species' density fluctuation (charge continuity).  Everything is in the frame
of :mod:`kinroots.physics.dispersion`: B (or the drift axis) along z, k = k (sin θ, 0, cos θ).

Columns produced by :func:`mode_columns` (all dimensionless; see README "Output"):

``e_x_re, e_x_im, e_y_re, e_y_im, e_z_re, e_z_im``
    Complex polarization vector δE/|δE| (|δE|² = Σ|E_j|² = 1).  Phase convention: the
    first component in the order x, y, z whose modulus exceeds ``PHASE_THRESHOLD`` = 1e-3
    is real and positive.
``handedness``
    2 Im(E_x* E_y)/(|E_x|² + |E_y|²) ∈ [−1, 1]: the normalized circular part of the field
    in the plane ⊥ z.  +1 is right-handed about B (rotation in the electron gyration
    sense, R wave, whistler), −1 left-handed (ion sense, L wave), 0 linear.  Empty when
    |E_x|² + |E_y|² < 1e-12 (no transverse field to rotate).
``db_c_over_de``
    c|δB|/|δE| with δB = k × δE/ω (Faraday's law for exp(i k·x − i ω t)); 0 for the
    electrostatic models (δB = 0 by construction).
``magnetic_compressibility``
    |δB_z|/|δB| (δB_z is the component along B); empty when δB = 0.
``electrostatic_fraction``
    |k̂·δE|/|δE| ∈ [0, 1]; 1 for the electrostatic models.
``density_abs_<species>``, ``density_phase_deg_<species>``
    δn_s/n_s in units of e|δE|/(|k| T_ref), T_ref the parallel temperature of the first
    electron species (else of the first species); modulus and phase [degrees, (−180,
    180]] relative to the field with the phase convention above.  In these units a
    Boltzmann electron response to a low-frequency electrostatic wave along k
    (E = k̂) has modulus T_ref/T_e = 1 and phase 90°.

Density from continuity: ∂ρ_s/∂t + ∇·J_s = 0 gives ω δρ_s = k·δJ_s, and
δJ_s = −iωε0 χ_s·δE (definition of χ_s), so

    q_s δn_s = −i ε0 k·χ_s·δE,      δn_s/n_s = −i ε0 (k·χ_s·δE)/(q_s n_s).

For the electrostatic models χ_s is the scalar k̂·χ_s·k̂ and δE = δE k̂, so
δn_s/n_s = −i ε0 k χ_s δE/(q_s n_s); with E = −ikφ and χ_s → 1/(k²λ_Ds²) (static) this
is the Boltzmann response −q_sφ/T_s.

References
----------
T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 1 (wave equation, polarization
iE_x/E_y = (n² − S)/D, R and L waves) and ch. 10 (χ_s and the current), from memory.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from kinroots.physics.dispersion import Dispersion
from kinroots.physics.plasma import C_LIGHT, E_CHARGE, EPS0, EV, Plasma, default_unit_species

__all__ = [
    "MODE_COLUMNS",
    "PHASE_THRESHOLD",
    "ModeIdentity",
    "density_columns",
    "mode_columns",
    "mode_identity",
]

#: Modulus (relative to |δE| = 1) above which a component can carry the phase reference.
PHASE_THRESHOLD = 1e-3
#: Transverse power below which the handedness is undefined (empty cell).
_TRANSVERSE_FLOOR = 1e-12

#: Fixed mode-identity columns (the per-species density columns follow them).
MODE_COLUMNS: tuple[str, ...] = (
    "e_x_re",
    "e_x_im",
    "e_y_re",
    "e_y_im",
    "e_z_re",
    "e_z_im",
    "handedness",
    "db_c_over_de",
    "magnetic_compressibility",
    "electrostatic_fraction",
)


def density_columns(plasma: Plasma) -> tuple[str, ...]:
    """Per-species density columns, in species order."""
    out: list[str] = []
    for s in plasma.species:
        out += [f"density_abs_{s.name}", f"density_phase_deg_{s.name}"]
    return tuple(out)


class ModeIdentity:
    """Polarization and responses of one root (SI inputs).

    Attributes
    ----------
    e : ndarray, shape (3,)
        δE/|δE| in (x, y, z), phase convention of the module docstring.
    handedness, db_c_over_de, magnetic_compressibility, electrostatic_fraction : float
        See the module docstring (``nan`` where undefined).
    density : dict[str, complex]
        Species name → δn_s/n_s in units of e|δE|/(|k| T_ref).
    """

    def __init__(self, e: np.ndarray, handedness: float, db_c_over_de: float,
                 magnetic_compressibility: float, electrostatic_fraction: float,
                 density: dict[str, complex]) -> None:
        self.e = e
        self.handedness = handedness
        self.db_c_over_de = db_c_over_de
        self.magnetic_compressibility = magnetic_compressibility
        self.electrostatic_fraction = electrostatic_fraction
        self.density = density


def _fix_phase(e: np.ndarray) -> np.ndarray:
    e = e / np.linalg.norm(e)
    for comp in e:
        if abs(comp) > PHASE_THRESHOLD:
            return e * (abs(comp) / comp)
    return e


def _null_vector(lam: np.ndarray) -> np.ndarray:
    """Right singular vector of the smallest singular value of a 3×3 matrix."""
    scale = np.max(np.abs(lam))
    _, _, vh = np.linalg.svd(lam / scale)
    return vh[-1].conj()


def mode_identity(
    plasma: Plasma, *, omega: complex, k: complex, angle_deg: float, model: str,
    omega_ref: float, harmonic_tol: float = 1e-14,
) -> ModeIdentity:
    """Mode identity of the wave (ω, k) of ``plasma`` (SI: ω in rad/s, k in 1/m).

    Parameters
    ----------
    plasma : Plasma
    omega : complex
        Root frequency [rad/s] (complex for the temporal problem, real for launched waves).
    k : complex
        Wavenumber |k| [1/m] (complex for launched waves).
    angle_deg : float
        Angle between k and z [degrees].
    model : str
        ``"electrostatic"`` or ``"electromagnetic"``.
    omega_ref : float
        Reference frequency for :class:`~kinroots.physics.dispersion.Dispersion` [rad/s].

    Returns
    -------
    ModeIdentity

    Notes
    -----
    Electromagnetic: δE is the right singular vector of Λ for its smallest singular
    value (at an exact root Λ·δE = 0).  The susceptibility of each species is
    re-evaluated at (ω, k) to get δn_s (formula in the module docstring).
    """
    disp = Dispersion(plasma, k=k, angle_deg=angle_deg, model=model, omega_ref=omega_ref,
                      harmonic_tol=harmonic_tol)
    khat = np.array([disp._sin, 0.0, disp._cos])
    kvec = complex(k) * khat
    om = np.array([complex(omega)])
    if disp.electromagnetic:
        lam = np.asarray(disp.tensor(om))[0]
        e = _fix_phase(_null_vector(lam))
    else:
        e = _fix_phase(khat.astype(complex))
    ex, ey, ez = e
    transverse = abs(ex) ** 2 + abs(ey) ** 2
    hand = (2.0 * (np.conj(ex) * ey).imag / transverse) if transverse > _TRANSVERSE_FLOOR \
        else math.nan
    es_frac = float(abs(khat @ e))
    if disp.electromagnetic:
        db = np.cross(kvec, e) / complex(omega)
        db_norm = float(np.linalg.norm(db))
        db_ratio = C_LIGHT * db_norm
        compress = float(abs(db[2]) / db_norm) if db_norm > 0 else math.nan
    else:
        db_ratio, compress = 0.0, math.nan
    ref = default_unit_species(plasma)
    unit = E_CHARGE / (abs(complex(k)) * ref.temperature_par * EV)  # e|δE|/(|k| T_ref)
    density: dict[str, complex] = {}
    for s in plasma.species:
        res = disp._builder(om, s, k_par=disp.k_par, k_perp=disp.k_perp, B=plasma.B,
                            tol=harmonic_tol)
        chi = np.asarray(res.value)[0]
        k_chi_e = complex(kvec @ chi @ e) if disp.electromagnetic else complex(k) * chi * (
            khat @ e)
        dn = -1j * EPS0 * k_chi_e / (s.charge * s.density)
        density[s.name] = dn / unit
    return ModeIdentity(e, float(hand), float(db_ratio), compress, es_frac, density)


def _finite(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def mode_columns(plasma: Plasma, *, omega: complex, k: complex, angle_deg: float, model: str,
                 omega_ref: float, harmonic_tol: float = 1e-14) -> dict[str, Any]:
    """The mode-identity cells of one table row (see the module docstring).

    Non-finite values become ``None`` (empty cells).  Any failure to evaluate returns
    every cell ``None`` rather than a number that looks valid.
    """
    names = MODE_COLUMNS + density_columns(plasma)
    try:
        with np.errstate(all="ignore"):
            m = mode_identity(plasma, omega=omega, k=k, angle_deg=angle_deg, model=model,
                              omega_ref=omega_ref, harmonic_tol=harmonic_tol)
    except (ValueError, np.linalg.LinAlgError, ZeroDivisionError, FloatingPointError):
        return dict.fromkeys(names)
    if not np.all(np.isfinite(m.e)):
        return dict.fromkeys(names)
    row: dict[str, Any] = {}
    for axis, comp in zip("xyz", m.e, strict=True):
        row[f"e_{axis}_re"] = float(comp.real)
        row[f"e_{axis}_im"] = float(comp.imag)
    row["handedness"] = _finite(m.handedness)
    row["db_c_over_de"] = _finite(m.db_c_over_de)
    row["magnetic_compressibility"] = _finite(m.magnetic_compressibility)
    row["electrostatic_fraction"] = _finite(m.electrostatic_fraction)
    for name, dn in m.density.items():
        ok = math.isfinite(dn.real) and math.isfinite(dn.imag)
        row[f"density_abs_{name}"] = float(abs(dn)) if ok else None
        row[f"density_phase_deg_{name}"] = math.degrees(math.atan2(dn.imag, dn.real)) \
            if ok else None
    return row
