"""Species and plasma description, derived quantities and normalization.

Conventions (see DEVELOPERS.md and every output's metadata):

* thermal speed ``w_s = sqrt(2 T_s / m_s)`` (most probable speed), T in energy units;
* ``omega_ps = sqrt(n_s q_s**2 / (eps0 m_s))``;
* ``Omega_s = q_s B / m_s``, signed (negative for electrons);
* B along z; drifts along z.

Inputs are SI with temperatures in eV.  Constants come from ``scipy.constants``
(CODATA).

References
----------
NRL Plasma Formulary (J. D. Huba, Naval Research Laboratory), "Fundamental plasma
parameters".
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import constants as const

#: Elementary charge [C].
E_CHARGE: float = const.e
#: Vacuum permittivity [F/m].
EPS0: float = const.epsilon_0
#: Vacuum permeability [H/m].
MU0: float = const.mu_0
#: Speed of light [m/s].
C_LIGHT: float = const.c
#: Electron mass [kg].
M_ELECTRON: float = const.m_e
#: Proton mass [kg].
M_PROTON: float = const.m_p
#: Atomic mass unit [kg].
AMU: float = const.atomic_mass
#: One electronvolt in joules.
EV: float = const.electron_volt


@dataclass(frozen=True)
class Species:
    """One species of a (drifting, bi-)Maxwellian plasma.

    Parameters
    ----------
    name : str
        Label used in tables and in unit specifications such as ``plasma:e``.
    charge_number : float
        Charge in elementary charges (``-1`` for electrons). Non-zero.
    mass : float
        Mass [kg].
    density : float
        Number density [m^-3].
    temperature_par, temperature_perp : float
        Temperatures along and across B [eV]. Equal for an isotropic species.
    drift : float
        Drift speed along z [m/s].
    """

    name: str
    charge_number: float
    mass: float
    density: float
    temperature_par: float
    temperature_perp: float
    drift: float = 0.0

    @property
    def charge(self) -> float:
        """Charge q_s [C]."""
        return self.charge_number * E_CHARGE

    @property
    def is_isotropic(self) -> bool:
        """True when T∥ = T⊥."""
        return self.temperature_par == self.temperature_perp

    @property
    def thermal_speed_par(self) -> float:
        """w∥ = sqrt(2 T∥ / m) [m/s] (most probable speed)."""
        return float(np.sqrt(2.0 * self.temperature_par * EV / self.mass))

    @property
    def thermal_speed_perp(self) -> float:
        """w⊥ = sqrt(2 T⊥ / m) [m/s] (most probable speed)."""
        return float(np.sqrt(2.0 * self.temperature_perp * EV / self.mass))

    @property
    def plasma_frequency(self) -> float:
        """ω_ps = sqrt(n q² / (ε0 m)) [rad/s]."""
        return float(np.sqrt(self.density * self.charge**2 / (EPS0 * self.mass)))

    def cyclotron_frequency(self, B: float) -> float:
        """Signed Ω_s = q B / m [rad/s] (negative for electrons)."""
        return self.charge * B / self.mass


@dataclass(frozen=True)
class Plasma:
    """A plasma: its species and the magnetic field B [T] along z."""

    species: tuple[Species, ...]
    B: float = 0.0
    meta: dict[str, object] = field(default_factory=dict, compare=False, hash=False)

    @property
    def magnetized(self) -> bool:
        """True when B ≠ 0."""
        return self.B != 0.0
