"""The ``[[species]]`` tables of a case file: validation into `Species`."""

from __future__ import annotations

import difflib
from collections.abc import Mapping
from typing import Any

from kinroots.io.checker import Checker
from kinroots.io.limits import LIMITS, name_problem
from kinroots.io.species_kinds import check_kind, check_positive, moments
from kinroots.physics.plasma import (
    AMU,
    C_LIGHT,
    M_ELECTRON,
    M_PROTON,
    Species,
)

_MASS_NAMES = {"electron": M_ELECTRON, "proton": M_PROTON}


_SPECIES_KEYS = (
    "name",
    "charge",
    "mass",
    "density",
    "temperature",
    "temperature_par",
    "temperature_perp",
    "drift",
    "collision_frequency",
    "distribution",
    "kappa",
    "components",
)


def _check_species(chk: Checker, data: Any) -> list[Species | None]:
    if "species" not in data:
        chk.missing("species", "one or more [[species]] tables")
        return []
    entries = data["species"]
    if not isinstance(entries, list) or not entries:
        chk.bad("species", entries, "one or more [[species]] tables")
        return []
    out: list[Species | None] = []
    seen: dict[str, int] = {}
    for i, entry in enumerate(entries, start=1):
        p = f"species[{i}]"
        if not isinstance(entry, dict):
            chk.bad(p, entry, "a [[species]] table")
            out.append(None)
            continue
        n_errors = len(chk.errors)
        chk.unknown_keys(entry, _SPECIES_KEYS, p)
        name = entry.get("name")
        if "name" not in entry:
            chk.missing(f"{p}.name", "a non-empty string")
        elif not isinstance(name, str) or not name.strip() or name_problem(name):
            why = name_problem(name) if isinstance(name, str) and name.strip() else None
            chk.bad(f"{p}.name", name, "a non-empty printable name without ':' or '.', "
                    "not starting with = + - @" + (f"; this one: {why}" if why else ""))
        elif name in seen:
            chk.error(
                f"{p}.name",
                f"duplicate species name {name!r} (also species[{seen[name]}]); "
                "expected unique names",
            )
        else:
            seen[name] = i
        charge = chk.ranged(entry, "charge", f"{p}.charge", LIMITS["species.charge"])
        mass = _check_mass(chk, entry, f"{p}.mass")
        density = chk.ranged(entry, "density", f"{p}.density", LIMITS["species.density"])
        kind = check_kind(chk, entry, p)
        with_components = "components" in entry
        t_par, t_perp = (None, None) if with_components else _check_temperatures(chk, entry, p)
        drift = None if with_components else chk.number(
            entry,
            "drift",
            f"{p}.drift",
            "a number (m/s) with |drift| < c",
            default=0.0,
            required=False,
            check=lambda x: abs(x) < C_LIGHT,
        )
        nu = chk.ranged(entry, "collision_frequency", f"{p}.collision_frequency",
                        LIMITS["species.collision_frequency"], default=0.0, required=False)
        if kind is not None and nu and (kind.components or kind.distribution == "kappa"):
            what = "components" if kind.components else 'distribution = "kappa"'
            chk.error(f"{p}.collision_frequency",
                      f"got {nu!r}, but the Krook model relaxes to one Maxwellian and is not "
                      f"available for a species with {what}; expected 0 here")
        if kind is not None and kind.components and mass is not None:
            check_positive(chk, kind.components, mass, p)
        if len(chk.errors) > n_errors:
            out.append(None)
            continue
        assert charge is not None and mass is not None and density is not None
        assert kind is not None and nu is not None
        if kind.components:
            t_par, t_perp, drift = moments(kind.components, mass)
        assert t_par is not None and t_perp is not None and drift is not None
        out.append(Species(str(name), charge, mass, density, t_par, t_perp, drift, nu,
                           kind.distribution, kind.kappa, kind.components))
    return out


def _check_mass(chk: Checker, entry: Mapping[str, Any], path: str) -> float | None:
    mass_range = LIMITS["species.mass"]
    expected = f'"electron", "proton", or {mass_range.expected()} (atomic mass units)'
    if "mass" not in entry:
        chk.missing(path, expected)
        return None
    value = entry["mass"]
    if isinstance(value, str):
        if value in _MASS_NAMES:
            return _MASS_NAMES[value]
        close = difflib.get_close_matches(value, list(_MASS_NAMES), n=1, cutoff=0.5)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        chk.bad(path, value, expected + hint)
        return None
    amu = chk.number(entry, "mass", path, expected, check=mass_range)
    return None if amu is None else amu * AMU


def _check_temperatures(
    chk: Checker, entry: Mapping[str, Any], p: str
) -> tuple[float | None, float | None]:
    t_range = LIMITS["species.temperature"]
    expected = t_range.expected()
    has_iso = "temperature" in entry
    has_par, has_perp = "temperature_par" in entry, "temperature_perp" in entry
    if has_iso and (has_par or has_perp):
        other = "temperature_par" if has_par else "temperature_perp"
        chk.error(
            p,
            f"both 'temperature' and {other!r} given; expected either 'temperature' "
            "or both 'temperature_par' and 'temperature_perp'",
        )
        return None, None
    if has_iso:
        t = chk.number(entry, "temperature", f"{p}.temperature", expected, check=t_range)
        return t, t
    if has_par or has_perp:
        t_par = chk.number(
            entry,
            "temperature_par",
            f"{p}.temperature_par",
            expected + " (given with temperature_perp)",
            check=t_range,
        )
        t_perp = chk.number(
            entry,
            "temperature_perp",
            f"{p}.temperature_perp",
            expected + " (given with temperature_par)",
            check=t_range,
        )
        return t_par, t_perp
    chk.missing(f"{p}.temperature", "'temperature', or 'temperature_par' and 'temperature_perp'")
    return None, None

