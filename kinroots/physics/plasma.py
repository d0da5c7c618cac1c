"""Species and plasma description, derived quantities and normalization.

Conventions (see DEVELOPERS.md and every output's metadata):

* thermal speed ``w_s = sqrt(2 T_s / m_s)`` (most probable speed), T in energy units;
* ``omega_ps = sqrt(n_s q_s**2 / (eps0 m_s))``;
* ``Omega_s = q_s B / m_s``, signed (negative for electrons);
* B along z; drifts along z.

Inputs are SI with temperatures in eV.  Constants are the CODATA 2022 recommended
values (Mohr et al., CODATA 2022, NIST SP 961), written out here rather than imported
from ``scipy.constants`` so that loading this module (and hence ``kinroots check`` or
``--help``) does not import scipy; tests/test_plasma.py checks them against
``scipy.constants``.

References
----------
NRL Plasma Formulary (J. D. Huba, Naval Research Laboratory), "Fundamental plasma
parameters".
T. H. Stix, *Waves in Plasmas* (AIP, 1992), ch. 1 (cold-plasma S; lower hybrid resonance).

Quantities that need a magnetic field (cyclotron frequency, gyroradius, β, Alfvén speed,
lower-hybrid frequency) are ``None`` when B = 0: never ``inf`` or ``nan``.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

#: Elementary charge [C] (exact in the SI since 2019).
E_CHARGE: float = 1.602176634e-19
#: Vacuum permittivity [F/m] (CODATA 2022).
EPS0: float = 8.8541878188e-12
#: Vacuum permeability [H/m] (CODATA 2022).
MU0: float = 1.25663706127e-06
#: Speed of light [m/s] (exact).
C_LIGHT: float = 299792458.0
#: Electron mass [kg] (CODATA 2022).
M_ELECTRON: float = 9.1093837139e-31
#: Proton mass [kg] (CODATA 2022).
M_PROTON: float = 1.67262192595e-27
#: Atomic mass unit [kg] (CODATA 2022).
AMU: float = 1.66053906892e-27
#: One electronvolt in joules (exact).
EV: float = 1.602176634e-19


#: Distributions a species may have (case key ``distribution``).
DISTRIBUTIONS: tuple[str, ...] = ("maxwellian", "kappa")


@dataclass(frozen=True)
class Component:
    """One drifting bi-Maxwellian part of a species made of components.

    Parameters
    ----------
    weight : float
        Share of the species density (the weights of a species sum to 1; a negative
        weight subtracts a Maxwellian, e.g. a loss cone).
    temperature_par, temperature_perp : float
        Temperatures along and across B [eV], > 0.
    drift : float
        Drift speed along z [m/s].
    """

    weight: float
    temperature_par: float
    temperature_perp: float
    drift: float = 0.0


@dataclass(frozen=True)
class Species:
    """One species: a (drifting, bi-)Maxwellian, a (bi-)kappa, or a sum of components.

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
    collision_frequency : float
        Number-conserving Krook (BGK) collision frequency ν_s [1/s], ≥ 0 (default 0:
        collisionless).  Used by the unmagnetized electrostatic model only; see
        :mod:`kinroots.physics.models.krook`.
    distribution : str
        ``"maxwellian"`` (default) or ``"kappa"``: f ∝ (1 + v∥²/(κθ∥²) + v⊥²/(κθ⊥²))^−(κ+1)
        about the drift, θ² = (2κ − 3)/κ · T/m per direction, so that T∥ and T⊥ are the
        kinetic temperatures (m⟨v_i²⟩ = T).
    kappa : float or None
        The index κ > 3/2 of a kappa species (None otherwise).
    components : tuple of Component
        Non-empty for a species made of drifting bi-Maxwellians sharing its charge and
        mass (density n·weight each).  Then ``temperature_par``, ``temperature_perp``
        and ``drift`` hold the moments of the whole species (mean drift Σ w_j V_j,
        T∥ = Σ w_j (T∥j + m (V_j − V)²), T⊥ = Σ w_j T⊥j), used by derived units only.
    """

    name: str
    charge_number: float
    mass: float
    density: float
    temperature_par: float
    temperature_perp: float
    drift: float = 0.0
    collision_frequency: float = 0.0
    distribution: str = "maxwellian"
    kappa: float | None = None
    components: tuple[Component, ...] = ()

    @property
    def is_plain_maxwellian(self) -> bool:
        """True for one drifting bi-Maxwellian (neither kappa nor components)."""
        return self.distribution == "maxwellian" and not self.components

    @property
    def kappa_debye_length(self) -> float | None:
        """λ_D √((κ − 3/2)/(κ − 1/2)) [m] for a kappa species (``None`` otherwise).

        The static shielding length of a kappa species (Summers & Thorne 1991, from
        memory; the static limit of the kappa susceptibility).
        """
        if self.distribution != "kappa" or self.kappa is None:
            return None
        return self.debye_length * math.sqrt((self.kappa - 1.5) / (self.kappa - 0.5))

    def component_species(self) -> tuple[tuple[float, Species], ...]:
        """(sign, sub-species) per component: a Maxwellian of density |w| n.

        The susceptibility of the species is Σ sign · χ(sub-species) (χ is linear in
        the density).  A species without components is its own single part.
        """
        if not self.components:
            return ((1.0, self),)
        return tuple(
            (
                math.copysign(1.0, c.weight),
                Species(self.name, self.charge_number, self.mass, abs(c.weight) * self.density,
                        c.temperature_par, c.temperature_perp, c.drift),
            )
            for c in self.components
        )

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

    @property
    def is_electron(self) -> bool:
        """True for charge −1 e and the electron mass (to 0.1 %)."""
        return self.charge_number == -1 and abs(self.mass / M_ELECTRON - 1.0) < 1e-3

    @property
    def debye_length(self) -> float:
        """λ_Ds = sqrt(ε0 T∥ / (n q²)) [m], with the parallel temperature T∥.

        T∥ is the temperature that screens a static charge along B (and the only one
        that matters for the unmagnetized electrostatic response along the drift axis).
        """
        return float(np.sqrt(EPS0 * self.temperature_par * EV / (self.density * self.charge**2)))

    @property
    def inertial_length(self) -> float:
        """d_s = c / ω_ps [m]."""
        return C_LIGHT / self.plasma_frequency

    def gyroradius(self, B: float) -> float | None:
        """Thermal gyroradius ρ_s = w⊥ / |Ω_s| [m]; ``None`` when B = 0."""
        if B == 0.0:
            return None
        return self.thermal_speed_perp / abs(self.cyclotron_frequency(B))

    def beta_par(self, B: float) -> float | None:
        """β∥s = 2 μ0 n T∥ / B²; ``None`` when B = 0."""
        if B == 0.0:
            return None
        return 2.0 * MU0 * self.density * self.temperature_par * EV / B**2

    def beta_perp(self, B: float) -> float | None:
        """β⊥s = 2 μ0 n T⊥ / B²; ``None`` when B = 0."""
        if B == 0.0:
            return None
        return 2.0 * MU0 * self.density * self.temperature_perp * EV / B**2


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

    def species_named(self, name: str) -> Species:
        """The species called ``name``; ``KeyError`` if there is none."""
        for s in self.species:
            if s.name == name:
                return s
        raise KeyError(name)

    @property
    def mass_density(self) -> float:
        """Σ n_s m_s [kg/m³]."""
        return float(sum(s.density * s.mass for s in self.species))

    @property
    def beta_par(self) -> float | None:
        """Total β∥ = Σ_s β∥s; ``None`` when B = 0."""
        if not self.magnetized:
            return None
        return float(sum(s.beta_par(self.B) or 0.0 for s in self.species))

    @property
    def beta_perp(self) -> float | None:
        """Total β⊥ = Σ_s β⊥s; ``None`` when B = 0."""
        if not self.magnetized:
            return None
        return float(sum(s.beta_perp(self.B) or 0.0 for s in self.species))

    @property
    def alfven_speed(self) -> float | None:
        """v_A = B / sqrt(μ0 Σ n_s m_s) [m/s] (all species); ``None`` when B = 0."""
        if not self.magnetized:
            return None
        return float(self.B / np.sqrt(MU0 * self.mass_density))

    @property
    def debye_length(self) -> float:
        """Total Debye length [m]: 1/λ_D² = Σ_s 1/λ_Ds² (T∥ of each species)."""
        return float(1.0 / np.sqrt(sum(1.0 / s.debye_length**2 for s in self.species)))

    @property
    def electron_debye_length(self) -> float | None:
        """Electron Debye length [m]: 1/λ_De² = Σ over electron species of 1/λ_Ds².

        Several electron populations (e.g. a beam and a background) screen together.
        ``None`` when the plasma has no electron species (see `Species.is_electron`).
        """
        electrons = [s for s in self.species if s.is_electron]
        if not electrons:
            return None
        return float(1.0 / np.sqrt(sum(1.0 / s.debye_length**2 for s in electrons)))

    @property
    def lower_hybrid_frequency(self) -> float | None:
        """Lower-hybrid frequency ω_LH [rad/s]; ``None`` when undefined.

        Notes
        -----
        Defined as the cold-plasma perpendicular resonance S(ω) = 0 with
        ``S = 1 − Σ_s ω_ps² / (ω² − Ω_s²)`` (Stix 1992, §1-2, the "S" of S, D, P)
        that lies between the two largest distinct cyclotron frequencies |Ω_s| (for an
        electron–ion plasma: between the largest ion cyclotron frequency and |Ω_e|).
        As a function of x = ω², S increases strictly between consecutive poles
        Ω_s² from −∞ to +∞, so that root exists and is unique; it is found by bracketed
        root finding (Brent) on ``S(x)·(x − Ω_lo²)(Ω_hi² − x)``, which is continuous on the
        closed interval.

        For one ion species this is the exact root of the quadratic, which for
        ω_LH ≪ |Ω_e| reduces to the handbook form
        ``1/ω_LH² ≈ 1/(ω_pi² + Ω_i²) + 1/(|Ω_e| Ω_i)`` (NRL Plasma Formulary,
        from memory).  With several ion species the same definition is the usual
        generalization: the resonance just below |Ω_e|, whose ion term is
        Σ_i ω_pi² (Stix 1992, ch. 1–2, from memory).  ``None`` when B = 0 or fewer
        than two distinct cyclotron frequencies exist.
        """
        if not self.magnetized:
            return None
        groups: dict[float, float] = {}
        for s in self.species:
            pole = s.cyclotron_frequency(self.B) ** 2
            groups[pole] = groups.get(pole, 0.0) + s.plasma_frequency**2
        poles = sorted(groups)
        if len(poles) < 2:
            return None
        p_lo, p_hi = poles[-2], poles[-1]
        scale = p_hi
        terms = [(p / scale, groups[p] / scale) for p in poles]
        lo, hi = p_lo / scale, p_hi / scale

        def g(x: float) -> float:
            total = (x - lo) * (hi - x)
            for pole, wp2 in terms:
                if pole == lo:
                    total -= wp2 * (hi - x)
                elif pole == hi:
                    total += wp2 * (x - lo)
                else:
                    total -= wp2 * (x - lo) * (hi - x) / (x - pole)
            return total

        from scipy.optimize import brentq  # here: importing it costs ~0.4 s of start-up

        x = brentq(g, lo, hi, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=200)
        return float(np.sqrt(x * scale))


# --------------------------------------------------------------------------------------
# Normalization
# --------------------------------------------------------------------------------------

#: Frequency unit kinds: "<kind>:<species>".
FREQUENCY_KINDS: tuple[str, ...] = ("plasma", "cyclotron")
#: Length unit kinds: "<kind>:<species>".
LENGTH_KINDS: tuple[str, ...] = ("debye", "inertial", "gyroradius")


class NormalizationError(ValueError):
    """A unit specification that cannot be used with this plasma."""


def _split_unit(spec: str, kinds: tuple[str, ...], what: str) -> tuple[str, str]:
    kind, sep, name = spec.partition(":")
    if not sep or not name or kind not in kinds:
        choices = ", ".join(f'"{k}:<species>"' for k in kinds)
        raise NormalizationError(f"{what} unit {spec!r} is not one of {choices}")
    return kind, name


def _symbol(base: str, name: str) -> str:
    """``ω_p`` + ``e`` → ``ω_pe``; names that are not one short word go in parentheses."""
    return f"{base}{name}" if name.isalnum() and len(name) <= 3 else f"{base}({name})"


class Normalization:
    """Units in which a case states ω, k, lengths and speeds.

    Parameters
    ----------
    frequency : str
        ``"plasma:<species>"`` (ω_ps) or ``"cyclotron:<species>"`` (|Ω_s|).
    length : str
        ``"debye:<species>"`` (λ_Ds, with T∥), ``"inertial:<species>"`` (c/ω_ps) or
        ``"gyroradius:<species>"`` (w⊥s/|Ω_s|).
    plasma : Plasma
        The plasma that fixes the numbers.

    Attributes
    ----------
    omega_unit : float
        Frequency unit [rad/s].
    length_unit : float
        Length unit [m]; k is normalized by 1/length_unit.
    speed_unit : float
        omega_unit · length_unit [m/s].
    frequency_label, length_label : str
        Symbols such as ``"ω_pe"`` and ``"λ_De"``.
    frequency_label_ascii, length_label_ascii : str
        Plain-text alternatives (``"omega_pe"``, ``"lambda_De"``) for CSV headers.

    Raises
    ------
    NormalizationError
        Malformed specification, unknown species, a cyclotron or gyroradius unit with
        B = 0, or a unit that is not a positive finite number.
    """

    def __init__(self, frequency: str, length: str, plasma: Plasma) -> None:
        self.frequency_spec = frequency
        self.length_spec = length
        fkind, fname = _split_unit(frequency, FREQUENCY_KINDS, "frequency")
        lkind, lname = _split_unit(length, LENGTH_KINDS, "length")
        fs = self._species(plasma, fname, "frequency", frequency)
        ls = self._species(plasma, lname, "length", length)
        for kind, spec in ((fkind, frequency), (lkind, length)):
            if kind in ("cyclotron", "gyroradius") and not plasma.magnetized:
                raise NormalizationError(
                    f"unit {spec!r} needs a magnetic field, but B = 0; "
                    'use "plasma:<species>" and "debye:<species>" or "inertial:<species>"'
                )
        if fkind == "plasma":
            self.omega_unit = fs.plasma_frequency
            self.frequency_label = _symbol("ω_p", fname)
            self.frequency_label_ascii = _symbol("omega_p", fname)
        else:
            self.omega_unit = abs(fs.cyclotron_frequency(plasma.B))
            self.frequency_label = "|" + _symbol("Ω_c", fname) + "|"
            self.frequency_label_ascii = _symbol("Omega_c", fname)
        if lkind == "debye":
            self.length_unit = ls.debye_length
            self.length_label = _symbol("λ_D", lname)
            self.length_label_ascii = _symbol("lambda_D", lname)
        elif lkind == "inertial":
            self.length_unit = ls.inertial_length
            self.length_label = f"d_{lname}" if lname.isalnum() else f"d_({lname})"
            self.length_label_ascii = self.length_label
        else:
            self.length_unit = float(ls.gyroradius(plasma.B) or 0.0)
            self.length_label = f"ρ_{lname}" if lname.isalnum() else f"ρ_({lname})"
            self.length_label_ascii = self.length_label.replace("ρ", "rho")
        for value, spec in ((self.omega_unit, frequency), (self.length_unit, length)):
            if not (math.isfinite(value) and value > 0.0):
                raise NormalizationError(
                    f"unit {spec!r} evaluates to {value!r}; expected a positive finite value"
                    " (is the temperature zero?)"
                )
        self.speed_unit = self.omega_unit * self.length_unit
        self.speed_label = f"{self.frequency_label}·{self.length_label}"
        self.speed_label_ascii = f"{self.frequency_label_ascii}*{self.length_label_ascii}"

    @staticmethod
    def _species(plasma: Plasma, name: str, what: str, spec: str) -> Species:
        try:
            return plasma.species_named(name)
        except KeyError:
            names = ", ".join(repr(s.name) for s in plasma.species)
            raise NormalizationError(
                f"{what} unit {spec!r} names species {name!r}; the species are {names}"
            ) from None

    def __repr__(self) -> str:
        return (
            f"Normalization(frequency={self.frequency_spec!r}, length={self.length_spec!r}, "
            f"omega_unit={self.omega_unit!r}, length_unit={self.length_unit!r})"
        )

    # ω (complex allowed) ------------------------------------------------------------
    def omega_to_si(self, omega: Any) -> Any:
        """Normalized ω → rad/s (scalars or arrays, complex allowed)."""
        return np.multiply(omega, self.omega_unit)

    def omega_from_si(self, omega: Any) -> Any:
        """ω [rad/s] → normalized."""
        return np.divide(omega, self.omega_unit)

    # k -------------------------------------------------------------------------------
    def k_to_si(self, k: Any) -> Any:
        """Normalized k (in 1/length_unit) → 1/m (complex allowed)."""
        return np.divide(k, self.length_unit)

    def k_from_si(self, k: Any) -> Any:
        """k [1/m] → normalized."""
        return np.multiply(k, self.length_unit)

    # lengths and speeds --------------------------------------------------------------
    def length_to_si(self, length: Any) -> Any:
        """Normalized length → m."""
        return np.multiply(length, self.length_unit)

    def length_from_si(self, length: Any) -> Any:
        """Length [m] → normalized."""
        return np.divide(length, self.length_unit)

    def speed_to_si(self, speed: Any) -> Any:
        """Normalized speed (in omega_unit·length_unit) → m/s."""
        return np.multiply(speed, self.speed_unit)

    def speed_from_si(self, speed: Any) -> Any:
        """Speed [m/s] → normalized."""
        return np.divide(speed, self.speed_unit)

    def as_dict(self) -> dict[str, Any]:
        """Plain description for JSON metadata (stable keys)."""
        return {
            "frequency": self.frequency_spec,
            "frequency_label": self.frequency_label,
            "frequency_label_ascii": self.frequency_label_ascii,
            "omega_unit_rad_per_s": self.omega_unit,
            "length": self.length_spec,
            "length_label": self.length_label,
            "length_label_ascii": self.length_label_ascii,
            "length_unit_m": self.length_unit,
            "speed_unit_m_per_s": self.speed_unit,
        }


def default_unit_species(plasma: Plasma) -> Species:
    """Species used for default units: the first electron species, else the first."""
    for s in plasma.species:
        if s.is_electron:
            return s
    return plasma.species[0]


# --------------------------------------------------------------------------------------
# Derived quantities as plain data
# --------------------------------------------------------------------------------------

#: Per-species quantities: key → (kind, symbol, SI unit).  kind ∈ frequency, length,
#: speed, none (dimensionless).  The keys are stable (JSON, summary files).
SPECIES_QUANTITIES: dict[str, tuple[str, str, str]] = {
    "plasma_frequency": ("frequency", "ω_p", "rad/s"),
    "cyclotron_frequency": ("frequency", "Ω (signed)", "rad/s"),
    "thermal_speed_par": ("speed", "w∥ = √(2T∥/m)", "m/s"),
    "thermal_speed_perp": ("speed", "w⊥ = √(2T⊥/m)", "m/s"),
    "debye_length": ("length", "λ_D (T∥)", "m"),
    "inertial_length": ("length", "c/ω_p", "m"),
    "gyroradius": ("length", "ρ = w⊥/|Ω|", "m"),
    "beta_par": ("none", "β∥", ""),
    "beta_perp": ("none", "β⊥", ""),
    "kappa_debye_length": ("length", "λ_D √((κ−3/2)/(κ−1/2)) (kappa species)", "m"),
}

#: Whole-plasma quantities, same layout as `SPECIES_QUANTITIES`.
PLASMA_QUANTITIES: dict[str, tuple[str, str, str]] = {
    "beta_par": ("none", "Σβ∥", ""),
    "beta_perp": ("none", "Σβ⊥", ""),
    "alfven_speed": ("speed", "v_A = B/√(μ0 Σ n m)", "m/s"),
    "electron_debye_length": ("length", "λ_De (electrons, T∥)", "m"),
    "debye_length": ("length", "λ_D (all species, T∥)", "m"),
    "lower_hybrid_frequency": ("frequency", "ω_LH (S = 0)", "rad/s"),
}

#: Conventions echoed into every output's metadata.
CONVENTIONS: dict[str, str] = {
    "perturbation": "exp(i k·x − i ω t); Im ω > 0 grows",
    "thermal_speed": "w = sqrt(2 T / m)",
    "plasma_frequency": "ω_p = sqrt(n q² / (ε0 m))",
    "cyclotron_frequency": "Ω = q B / m, signed",
    "debye_length": "λ_D = sqrt(ε0 T∥ / (n q²))",
    "gyroradius": "ρ = w⊥ / |Ω|",
    "beta": "β = 2 μ0 n T / B²",
    "alfven_speed": "v_A = B / sqrt(μ0 Σ n m)",
    "lower_hybrid_frequency": "root of cold-plasma S(ω) = 0 just below the largest |Ω|",
    "geometry": "B along z; k = (k⊥, 0, k∥)",
    "constants": "CODATA 2022 (the values of scipy.constants)",
}


def _species_si(s: Species, B: float) -> dict[str, float | None]:
    return {
        "plasma_frequency": s.plasma_frequency,
        "cyclotron_frequency": s.cyclotron_frequency(B) if B != 0.0 else None,
        "thermal_speed_par": s.thermal_speed_par,
        "thermal_speed_perp": s.thermal_speed_perp,
        "debye_length": s.debye_length,
        "inertial_length": s.inertial_length,
        "gyroradius": s.gyroradius(B),
        "beta_par": s.beta_par(B),
        "beta_perp": s.beta_perp(B),
        "kappa_debye_length": s.kappa_debye_length,
    }


def _plasma_si(p: Plasma) -> dict[str, float | None]:
    return {
        "beta_par": p.beta_par,
        "beta_perp": p.beta_perp,
        "alfven_speed": p.alfven_speed,
        "electron_debye_length": p.electron_debye_length,
        "debye_length": p.debye_length,
        "lower_hybrid_frequency": p.lower_hybrid_frequency,
    }


def _normalize(
    values: dict[str, float | None],
    table: dict[str, tuple[str, str, str]],
    units: Normalization,
) -> dict[str, float | None]:
    convert: dict[str, Callable[[Any], Any]] = {
        "frequency": units.omega_from_si,
        "length": units.length_from_si,
        "speed": units.speed_from_si,
        "none": lambda x: x,
    }
    return {
        key: None if value is None else float(convert[table[key][0]](value))
        for key, value in values.items()
    }


def derived_quantities(plasma: Plasma, units: Normalization | None = None) -> dict[str, Any]:
    """All derived quantities as a plain nested dict with stable keys.

    Parameters
    ----------
    plasma : Plasma
    units : Normalization, optional
        When given, every quantity is also reported in these units.

    Returns
    -------
    dict
        ``{"conventions", "magnetic_field_T", "si_units", "species": [...], "plasma",
        "units"}``.  Each species entry holds its inputs (``name``, ``charge_number``,
        ``mass_kg``, ``density_per_m3``, ``temperature_par_eV``, ``temperature_perp_eV``,
        ``drift_m_per_s``) and ``"si"`` (keys of `SPECIES_QUANTITIES`), plus
        ``"normalized"`` when ``units`` is given; ``"plasma"`` likewise with
        `PLASMA_QUANTITIES`.  Undefined quantities are ``None``.  ``"units"`` is
        ``units.as_dict()`` or ``None``.
    """
    species_out: list[dict[str, Any]] = []
    for s in plasma.species:
        si = _species_si(s, plasma.B)
        entry: dict[str, Any] = {
            "name": s.name,
            "charge_number": float(s.charge_number),
            "mass_kg": float(s.mass),
            "density_per_m3": float(s.density),
            "temperature_par_eV": float(s.temperature_par),
            "temperature_perp_eV": float(s.temperature_perp),
            "drift_m_per_s": float(s.drift),
            "distribution": s.distribution,
            "kappa": s.kappa,
            "components": [
                {"weight": c.weight, "temperature_par_eV": c.temperature_par,
                 "temperature_perp_eV": c.temperature_perp, "drift_m_per_s": c.drift}
                for c in s.components
            ],
            "si": si,
        }
        if units is not None:
            entry["normalized"] = _normalize(si, SPECIES_QUANTITIES, units)
        species_out.append(entry)
    psi = _plasma_si(plasma)
    plasma_out: dict[str, Any] = {"si": psi}
    if units is not None:
        plasma_out["normalized"] = _normalize(psi, PLASMA_QUANTITIES, units)
    si_units = {k: v[2] for k, v in SPECIES_QUANTITIES.items()}
    si_units.update({k: v[2] for k, v in PLASMA_QUANTITIES.items()})
    return {
        "conventions": dict(CONVENTIONS),
        "magnetic_field_T": float(plasma.B),
        "si_units": si_units,
        "species": species_out,
        "plasma": plasma_out,
        "units": None if units is None else units.as_dict(),
    }
