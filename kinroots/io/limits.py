"""Documented limits of case-file input: plausibility ranges, sizes, text.

One place for every limit the case validation enforces (echoed in the README), so that
whatever passes ``kinroots check`` can be computed.  Two kinds:

* **Ranges** of physical inputs (errors outside).  They lie far outside any laboratory,
  space or astrophysical plasma the non-relativistic Vlasov model describes ("common
  practice" orders of magnitude), and keep every derived scale (frequencies, lengths,
  speeds, betas) a finite, normal double.
* **Sizes** (points of a scan, grid points of a sweep, file size, nesting depth, text
  length), checked before anything is allocated.

`PLAUSIBLE` lists narrower ranges whose violation earns a warning, not an error.
"""

from __future__ import annotations

import math
import unicodedata
from dataclasses import dataclass

__all__ = [
    "LIMITS",
    "MAX_CASE_BYTES",
    "MAX_DEPTH",
    "MAX_LAUNCH_POINTS",
    "MAX_NAME_LENGTH",
    "MAX_SCAN_POINTS",
    "MAX_SWEEP_AXIS_POINTS",
    "MAX_SWEEP_POINTS",
    "MAX_TITLE_LENGTH",
    "MAX_WINDOW_HARMONICS",
    "PLAUSIBLE",
    "Range",
    "name_problem",
    "title_problem",
]


@dataclass(frozen=True)
class Range:
    """A closed interval [lo, hi] of |x| (or of x when ``signed``) with its unit.

    ``zero_ok`` admits an exact 0 below ``lo`` (e.g. B = 0, no collisions).
    """

    lo: float
    hi: float
    unit: str
    zero_ok: bool = False
    signed: bool = False

    def __call__(self, x: float) -> bool:
        if self.zero_ok and x == 0.0:
            return True
        if not self.signed and x < 0:
            return False
        return self.lo <= abs(x) <= self.hi

    def expected(self) -> str:
        """Phrase for messages, e.g. ``"a number in [1e-06, 1e+07] eV"``."""
        unit = f" {self.unit}" if self.unit else ""
        span = f"[{self.lo:g}, {self.hi:g}]{unit}"
        what = f"a number with |x| in {span}" if self.signed else f"a number in {span}"
        return what + (" or 0" if self.zero_ok else "")


#: Hard limits (input errors outside), by case key.
LIMITS: dict[str, Range] = {
    "magnetic_field.B": Range(1e-12, 1e9, "T", zero_ok=True),
    "species.charge": Range(1e-6, 1e6, "elementary charges", signed=True),
    "species.mass": Range(1e-4, 1e12, "u"),
    "species.density": Range(1e-3, 1e35, "m^-3"),
    "species.temperature": Range(1e-6, 1e7, "eV"),
    "species.collision_frequency": Range(1e-6, 1e20, "1/s", zero_ok=True),
    "scan.k": Range(1e-8, 1e8, "(normalized k)"),
    "search": Range(0.0, 1e8, "(normalized frequency)", signed=True),
    "launch.frequency": Range(1e-3, 1e20, "Hz"),
    "launch.k": Range(0.0, 1e8, "(normalized k)", signed=True),
    "solver.tolerance": Range(1e-15, 1e-4, ""),
    "solver.harmonic_tolerance": Range(1e-16, 1e-3, ""),
    "growth": Range(0.0, 1e8, "(normalized frequency)", signed=True),
}

#: Narrower ranges: values outside are accepted with a warning (physically unusual).
PLAUSIBLE: dict[str, Range] = {
    "magnetic_field.B": Range(1e-10, 1e3, "T", zero_ok=True),
    "species.mass": Range(5e-4, 1e3, "u"),
    "species.density": Range(1.0, 1e32, "m^-3"),
    "species.temperature": Range(1e-4, 1e6, "eV"),
}

#: Largest case file read [bytes].
MAX_CASE_BYTES: int = 1_000_000
#: Deepest nesting of tables and arrays in a case file.
MAX_DEPTH: int = 16
#: Most wavenumbers of ``[scan]``.
MAX_SCAN_POINTS: int = 100_000
#: Most driving frequencies of ``[launch]``.
MAX_LAUNCH_POINTS: int = 100_000
#: Most values along one sweep axis, and grid points of a whole ``[sweep]``.
MAX_SWEEP_AXIS_POINTS: int = 100_000
MAX_SWEEP_POINTS: int = 1_000_000
#: Most angles of ``sweep.angles`` / ``threshold.angles``.
MAX_ANGLES: int = 1_000
#: Most cyclotron harmonics n Ω_s inside the search window at k∥ = 0 (each a pole of D
#: that the survey must exclude).
MAX_WINDOW_HARMONICS: int = 2_000
#: Longest title and species name [characters].
MAX_TITLE_LENGTH: int = 200
MAX_NAME_LENGTH: int = 32

_FORMULA_START = ("=", "+", "-", "@")


def _control(text: str) -> str | None:
    for ch in text:
        if unicodedata.category(ch) in ("Cc", "Cf", "Cs", "Co", "Cn") or ch in "\u2028\u2029":
            return f"control or unassigned character U+{ord(ch):04X}"
    return None


def title_problem(text: str) -> str | None:
    """Why ``text`` cannot be a title (None if it can)."""
    if len(text) > MAX_TITLE_LENGTH:
        return f"{len(text)} characters, more than {MAX_TITLE_LENGTH}"
    return _control(text)


def name_problem(text: str) -> str | None:
    """Why ``text`` cannot be a species name (None if it can).

    Names become CSV column names, netCDF attributes and parameter paths: printable,
    without ':' or '.', not starting with a spreadsheet formula character, bounded.
    """
    if len(text) > MAX_NAME_LENGTH:
        return f"{len(text)} characters, more than {MAX_NAME_LENGTH}"
    bad = _control(text)
    if bad:
        return bad
    if text != text.strip():
        return "leading or trailing white space"
    if text.startswith(_FORMULA_START):
        return "starts with " + repr(text[0]) + " (read as a formula by spreadsheets)"
    for ch in ":.":
        if ch in text:
            return f"contains {ch!r}"
    return None


def finite_float(value: int | float) -> float | None:
    """``float(value)`` when finite (huge integers give None instead of OverflowError)."""
    try:
        x = float(value)
    except OverflowError:
        return None
    return x if math.isfinite(x) else None
