"""Validation primitives shared by the case-file readers.

`Checker` walks a parsed TOML document and collects one message per problem, each naming
the source, the key path, the value found and what was expected.
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping
from typing import Any

from kinroots.io.limits import Range, finite_float


def _show(value: Any) -> str:
    """Short representation of a value for messages."""
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _type_name(value: Any) -> str:
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, int):
        return "integer"
    if isinstance(value, float):
        return "float"
    if isinstance(value, str):
        return "string"
    if isinstance(value, list):
        return "array"
    if isinstance(value, dict):
        return "table"
    return type(value).__name__


class Checker:
    """Collects messages while walking a parsed case."""

    def __init__(self, source: str) -> None:
        self.source = source
        self.errors: list[str] = []

    def error(self, path: str, message: str) -> None:
        self.errors.append(f"{self.source}: {path}: {message}")

    def bad(self, path: str, value: Any, expected: str) -> None:
        self.error(path, f"got {_show(value)} ({_type_name(value)}), expected {expected}")

    def missing(self, path: str, expected: str) -> None:
        self.error(path, f"missing; expected {expected}")

    def unknown_keys(self, table: Mapping[str, Any], allowed: tuple[str, ...], prefix: str) -> None:
        for key in table:
            if key in allowed:
                continue
            shown = key if key.isidentifier() or key.replace("-", "_").isidentifier() else repr(key)
            path = f"{prefix}.{shown}" if prefix else shown
            close = difflib.get_close_matches(str(key), allowed, n=1, cutoff=0.6)
            hint = f"did you mean {close[0]!r}?" if close else "allowed: " + ", ".join(allowed)
            self.error(path, f"unknown key ({hint})")

    def table(self, data: Mapping[str, Any], key: str, path: str, required: bool) -> dict | None:
        if key not in data:
            if required:
                self.missing(path, "a table")
            return None
        value = data[key]
        if not isinstance(value, dict):
            self.bad(path, value, "a table")
            return None
        return value

    def number(
        self,
        data: Mapping[str, Any],
        key: str,
        path: str,
        expected: str,
        *,
        default: float | None = None,
        required: bool = True,
        check: Any = None,
    ) -> float | None:
        """A finite real number (bool rejected); ``check(x)`` must hold if given."""
        if key not in data:
            if required:
                self.missing(path, expected)
                return None
            return default
        value = data[key]
        if isinstance(value, bool) or not isinstance(value, int | float):
            self.bad(path, value, expected)
            return None
        x = finite_float(value)
        if x is None or (check is not None and not check(x)):
            self.bad(path, value, expected)
            return None
        return x

    def ranged(
        self,
        data: Mapping[str, Any],
        key: str,
        path: str,
        limit: Range,
        *,
        default: float | None = None,
        required: bool = True,
        note: str = "",
    ) -> float | None:
        """A number inside a documented `Range` (message names the limit)."""
        expected = limit.expected() + (f" ({note})" if note else "")
        return self.number(data, key, path, expected, default=default, required=required,
                           check=limit)

    def integer(
        self,
        data: Mapping[str, Any],
        key: str,
        path: str,
        expected: str,
        *,
        minimum: int,
        maximum: int | None = None,
        default: int | None = None,
        required: bool = True,
    ) -> int | None:
        if key not in data:
            if required:
                self.missing(path, expected)
            return default
        value = data[key]
        if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
            self.bad(path, value, expected)
            return None
        if maximum is not None and value > maximum:
            self.bad(path, value, f"{expected}, at most {maximum} (size limit)")
            return None
        return value

    def choice(
        self,
        data: Mapping[str, Any],
        key: str,
        path: str,
        choices: tuple[str, ...],
        *,
        default: str | None = None,
        required: bool = True,
    ) -> str | None:
        expected = "one of " + ", ".join(f'"{c}"' for c in choices)
        if key not in data:
            if required:
                self.missing(path, expected)
            return default
        value = data[key]
        if not isinstance(value, str):
            self.bad(path, value, expected)
            return None
        if value not in choices:
            close = difflib.get_close_matches(value, choices, n=1, cutoff=0.5)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            self.bad(path, value, expected + hint)
            return None
        return value

    def window(self, data: Mapping[str, Any], key: str, path: str,
               limit: Range | None = None) -> tuple[float, float] | None:
        expected = "[min, max], two finite numbers with min < max"
        if limit is not None:
            expected += f", each with |x| <= {limit.hi:g}"
        if key not in data:
            self.missing(path, expected)
            return None
        value = data[key]
        if (
            not isinstance(value, list)
            or len(value) != 2
            or any(isinstance(v, bool) or not isinstance(v, int | float) for v in value)
            or any(finite_float(v) is None for v in value)
        ):
            self.bad(path, value, expected)
            return None
        lo, hi = float(value[0]), float(value[1])
        if limit is not None and not (limit(lo) and limit(hi)):
            self.bad(path, value, expected)
            return None
        if not lo < hi:
            self.error(path, f"got {_show(value)}, expected min < max")
            return None
        return lo, hi

