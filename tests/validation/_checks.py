"""Shared record of validation checks: the tests assert on them, and
``docs/make_validation.py`` (``make validation``) tabulates the very same records.

Every validation module defines functions decorated with :func:`validation`; each returns
a list of :class:`Check`.  Its test calls the function and asserts ``check.passed`` for
every record, so the table in docs/validation.md is produced by the code CI runs.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

#: family name -> list of check functions
REGISTRY: dict[str, list[Callable[[], list[Check]]]] = {}


@dataclass(frozen=True)
class Check:
    """One compared quantity.

    Attributes
    ----------
    family : str
        Physics family, e.g. "Langmuir waves".
    quantity : str
        What is compared, e.g. "γ/ω_pe at kλ_De = 0.5".
    case : str
        Plasma conditions in a few words.
    source : str
        Published source (author, title, year, equation), "from memory" where so.
    reference, value : float
        Reference and kinroots values (real numbers; compare real and imaginary parts
        as separate checks).
    tolerance : float
        Allowed |value − reference| (absolute) or relative, see ``relative``.
    tolerance_reason : str
        Why this tolerance (printed digits of the source, validity of an asymptotic
        formula, ...).
    relative : bool
        Whether ``tolerance`` is relative to |reference|.
    """

    family: str
    quantity: str
    case: str
    source: str
    reference: float
    value: float
    tolerance: float
    tolerance_reason: str
    relative: bool = True
    extra: dict = field(default_factory=dict, compare=False)

    @property
    def difference(self) -> float:
        d = abs(self.value - self.reference)
        return d / abs(self.reference) if self.relative and self.reference != 0 else d

    @property
    def passed(self) -> bool:
        return self.difference <= self.tolerance


def validation(family: str) -> Callable[[Callable[[], list[Check]]], Callable[[], list[Check]]]:
    """Register a check function under ``family``."""

    def deco(fn: Callable[[], list[Check]]) -> Callable[[], list[Check]]:
        REGISTRY.setdefault(family, []).append(fn)
        return fn

    return deco


def assert_all(checks: list[Check]) -> None:
    """Assert every check passed, with a readable message for the failures."""
    bad = [c for c in checks if not c.passed]
    assert not bad, "\n".join(
        f"{c.family}: {c.quantity} ({c.case}): kinroots {c.value!r} vs {c.reference!r} "
        f"[{c.source}], difference {c.difference:.3g} > tolerance {c.tolerance:.3g}"
        for c in bad
    )
