"""Names of the case parameters a sweep, a threshold or a parameter trace can vary.

This module knows only the names (no case, no physics): the case-file reader and the
study layer both use it.  See :mod:`kinroots.io.parameters` for the meaning of each path
and for reading and changing a parameter of a case.
"""


from __future__ import annotations

import difflib
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

__all__ = [
    "PLASMA_PATHS",
    "SPECIES_QUANTITIES",
    "ParameterError",
    "ParameterPath",
    "parse_path",
]


#: Paths that do not name a species, with their units.
PLASMA_PATHS: dict[str, str] = {"magnetic_field.B": "T", "wave.angle": "deg"}
#: Per-species quantities (``species.<name>.<quantity>``), with their units.
SPECIES_QUANTITIES: dict[str, str] = {
    "density": "m^-3",
    "temperature": "eV",
    "temperature_par": "eV",
    "temperature_perp": "eV",
    "anisotropy": "1",
    "drift": "m/s",
    "beta_par": "1",
}


class ParameterError(ValueError):
    """A parameter path or value that cannot be used (message says why)."""


@dataclass(frozen=True)
class ParameterPath:
    """A validated parameter path.

    Attributes
    ----------
    text : str
        The path as written, e.g. ``"species.p.anisotropy"``.
    species : str or None
        Species name for per-species paths.
    quantity : str
        ``"B"``, ``"angle"`` or one of :data:`SPECIES_QUANTITIES`.
    unit : str
        Unit of the value (``"1"`` for ratios).
    """

    text: str
    species: str | None
    quantity: str
    unit: str

    @property
    def label(self) -> str:
        """Axis label, e.g. ``"species.p.beta_par"`` or ``"magnetic_field.B [T]"``."""
        return self.text if self.unit == "1" else f"{self.text} [{self.unit}]"

    @property
    def safe_name(self) -> str:
        """The path with dots replaced, usable as a netCDF / column name."""
        return self.text.replace(".", "_").replace("-", "_").replace("+", "plus")


def _all_paths(names: Sequence[str]) -> list[str]:
    return list(PLASMA_PATHS) + [f"species.{n}.{q}" for n in names for q in SPECIES_QUANTITIES]


def parse_path(path: Any, species_names: Sequence[str]) -> ParameterPath:
    """Validate a parameter path against the species of a case.

    Raises
    ------
    ParameterError
        Unknown path or species, with a "did you mean" hint.
    """
    if not isinstance(path, str) or not path.strip():
        raise ParameterError(f"got {path!r}, expected a parameter path such as "
                             "'species.<name>.density' or 'magnetic_field.B'")
    if path in PLASMA_PATHS:
        return ParameterPath(path, None, path.split(".")[1], PLASMA_PATHS[path])
    if path.startswith("species."):
        name, sep, quantity = path[len("species."):].rpartition(".")
        if sep and name in species_names and quantity in SPECIES_QUANTITIES:
            return ParameterPath(path, name, quantity, SPECIES_QUANTITIES[quantity])
        if sep and name not in species_names:
            close = difflib.get_close_matches(name, list(species_names), n=1, cutoff=0.5)
            hint = (f"did you mean {close[0]!r}?" if close
                    else "species: " + ", ".join(repr(n) for n in species_names))
            raise ParameterError(f"got {path!r}: unknown species {name!r} ({hint})")
        if sep:
            close = difflib.get_close_matches(quantity, list(SPECIES_QUANTITIES), n=1,
                                              cutoff=0.5)
            hint = (f"did you mean 'species.{name}.{close[0]}'?" if close
                    else "quantities: " + ", ".join(SPECIES_QUANTITIES))
            raise ParameterError(f"got {path!r}: unknown species quantity {quantity!r} ({hint})")
    close = difflib.get_close_matches(path, _all_paths(species_names), n=1, cutoff=0.6)
    hint = (f"did you mean {close[0]!r}?" if close
            else "expected 'magnetic_field.B', 'wave.angle' or 'species.<name>.<quantity>' "
            "with quantity one of " + ", ".join(SPECIES_QUANTITIES))
    raise ParameterError(f"got {path!r}: unknown parameter path ({hint})")


